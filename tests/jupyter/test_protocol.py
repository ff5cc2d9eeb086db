"""Protocol behaviour beyond jupyter_kernel_test: forged and malformed messages, interrupts,
reconnecting clients, rich output, the parent-process watch."""

import os
import queue
import signal
import subprocess
import sys
import tempfile
import time

import pytest
from jupyter_client import KernelManager
from jupyter_client.session import Session

TIMEOUT = 30


@pytest.fixture()
def kernel():
    km = KernelManager(kernel_name="stagna")
    km.start_kernel()
    kc = km.client()
    kc.start_channels()
    kc.wait_for_ready(timeout=TIMEOUT)
    yield km, kc
    kc.stop_channels()
    km.shutdown_kernel(now=True)


def run(kc, code, timeout=TIMEOUT):
    """Executes code; returns (reply content, iopub messages of that request)."""
    msg_id = kc.execute(code)
    reply = kc.get_shell_msg(timeout=timeout)
    while reply["parent_header"].get("msg_id") != msg_id:
        reply = kc.get_shell_msg(timeout=timeout)
    outputs = []
    while True:
        m = kc.get_iopub_msg(timeout=timeout)
        if m["parent_header"].get("msg_id") != msg_id:
            continue
        outputs.append(m)
        if m["msg_type"] == "status" and m["content"]["execution_state"] == "idle":
            break
    return reply["content"], outputs


def text_of(outputs):
    parts = []
    for m in outputs:
        c = m["content"]
        if m["msg_type"] == "stream":
            parts.append(c["text"])
        elif m["msg_type"] in ("execute_result", "display_data"):
            parts.append(c["data"].get("text/plain", ""))
    return "".join(parts)


def test_forged_message_is_ignored(kernel):
    km, kc = kernel
    marker = os.path.join(tempfile.mkdtemp(), "forged.csv")
    forged = Session(key=b"not-the-kernel-key", username="intruder")
    msg = forged.msg("execute_request", {"code": f'table_from(#{{a: [1.0]}}).write("{marker}")', "silent": False,
                                         "store_history": True, "user_expressions": {}, "allow_stdin": False, "stop_on_error": True})
    forged.send(kc.shell_channel.socket, msg)
    time.sleep(1.0)
    assert not os.path.exists(marker), "a forged message was executed"
    content, outputs = run(kc, "1 + 1")
    assert content["status"] == "ok" and "2" in text_of(outputs)


def test_malformed_signed_request_gets_an_error_reply(kernel):
    km, kc = kernel
    s = kc.session
    header = s.msg_header("execute_request")
    parts = [s.pack(header), s.pack({}), s.pack({}), b"this is not json"]
    frames = [b"<IDS|MSG>", s.sign(parts)] + parts
    kc.shell_channel.socket.send_multipart(frames)
    reply = kc.get_shell_msg(timeout=TIMEOUT)
    assert reply["content"]["status"] == "error"
    content, _ = run(kc, "1 + 1")
    assert content["status"] == "ok", "the receive loop survives"


def test_interrupt_stops_a_long_cell_and_keeps_variables(kernel):
    km, kc = kernel
    run(kc, "let kept = 600.mm;")
    msg_id = kc.execute("let i = 0; loop { i += 1; }")
    time.sleep(1.0)
    t0 = time.time()
    km.interrupt_kernel()
    reply = kc.get_shell_msg(timeout=TIMEOUT)
    while reply["parent_header"].get("msg_id") != msg_id:
        reply = kc.get_shell_msg(timeout=TIMEOUT)
    assert reply["content"]["status"] == "error"
    assert reply["content"]["ename"] == "KeyboardInterrupt"
    assert time.time() - t0 < 5, "interrupt was prompt"
    content, outputs = run(kc, "kept")
    assert "600 mm" in text_of(outputs)


def test_heartbeat_and_control_answer_during_a_long_cell(kernel):
    km, kc = kernel
    kc.execute("let i = 0; loop { i += 1; }")
    time.sleep(0.5)
    assert kc.is_alive()
    kc.control_channel.send(kc.session.msg("kernel_info_request"))
    # The shared bound: on a loaded 2-core machine (a clean CI rehearsal ran these tests at
    # 2.4 times their usual time) 5 s once passed without a reply. What the test claims is
    # that the reply comes while the cell still runs: the cell never ends by itself, and its
    # execute_reply must not have come before the interrupt.
    reply = kc.control_channel.get_msg(timeout=TIMEOUT)
    assert reply["msg_type"] == "kernel_info_reply"
    with pytest.raises(queue.Empty):
        kc.get_shell_msg(timeout=0.2)
    km.interrupt_kernel()


def test_client_disconnects_and_reconnects(kernel):
    km, kc = kernel
    run(kc, "let q = 3.5.m3_s;")
    kc.stop_channels()
    kc2 = km.client()
    kc2.start_channels()
    kc2.wait_for_ready(timeout=TIMEOUT)
    content, outputs = run(kc2, "q.to(\"m3/h\")")
    assert content["status"] == "ok" and "12600 m³/h" in text_of(outputs)
    kc2.stop_channels()


def test_rich_output_bundles(kernel):
    km, kc = kernel
    _, outputs = run(kc, "traverse_layout(round_section(1.2.m), #{points: 8}).chart()")
    data = [m["content"]["data"] for m in outputs if m["msg_type"] == "execute_result"][0]
    assert data["image/svg+xml"].startswith("<svg") and data["image/png"] and data["text/plain"]
    _, outputs = run(kc, 'table_from(#{h: [1.0, 2.0]}).unit("h", "mm")')
    data = [m["content"]["data"] for m in outputs if m["msg_type"] == "execute_result"][0]
    # Units under the names, numbers right-aligned, the same cells as the text form.
    assert '<th style="text-align:right">h<br><span class="unit">[mm]</span></th>' in data["text/html"]
    assert "[mm]" in data["text/plain"] and "f64" not in data["text/plain"]
    _, outputs = run(kc, "pitot_static(1.0).velocity(50.Pa, 1.2.kg_m3).steps()")
    data = [m["content"]["data"] for m in outputs if m["msg_type"] == "execute_result"][0]
    assert "\\sqrt" in data["text/latex"]
    _, outputs = run(kc, 'let t = table_from(#{x: [' + ", ".join(["1.0"] * 200) + ']}); t')
    data = [m["content"]["data"] for m in outputs if m["msg_type"] == "execute_result"][0]
    assert "180 of 200 rows not shown" in data["text/html"] and "180 of 200 rows not shown" in data["text/plain"]


def test_execution_count_only_with_store_history(kernel):
    km, kc = kernel
    c1, _ = run(kc, "1")
    kc.execute("2", store_history=False)
    kc.get_shell_msg(timeout=TIMEOUT)
    c3, _ = run(kc, "3")
    assert c3["execution_count"] == c1["execution_count"] + 1


def test_kernel_exits_when_its_parent_dies():
    # jupyter_client sets JPY_PARENT_PID to its own process, so start the kernel by hand.
    from jupyter_client.connect import write_connection_file

    parent = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(60)"])
    cf, _ = write_connection_file(fname=os.path.join(tempfile.mkdtemp(), "kernel.json"))
    env = {**os.environ, "JPY_PARENT_PID": str(parent.pid)}
    proc = subprocess.Popen([os.environ["STAGNA_BIN"], "kernel", "--connection-file", cf], env=env)
    try:
        time.sleep(0.5)
        assert proc.poll() is None
        parent.send_signal(signal.SIGKILL)
        parent.wait()
        for _ in range(50):
            if proc.poll() is not None:
                break
            time.sleep(0.1)
        assert proc.poll() is not None, "kernel outlived its parent"
    finally:
        if proc.poll() is None:
            proc.kill()


def test_input_request_when_the_client_allows_it(kernel):
    km, kc = kernel
    msg_id = kc.execute('let who = input("operator initials: "); who', allow_stdin=True)
    req = kc.get_stdin_msg(timeout=TIMEOUT)
    assert req["msg_type"] == "input_request" and req["content"]["prompt"] == "operator initials: "
    kc.input("JRW")
    reply = kc.get_shell_msg(timeout=TIMEOUT)
    assert reply["content"]["status"] == "ok"
    content, outputs = run(kc, "who")
    assert "JRW" in text_of(outputs)
    msg_id = kc.execute('input("x")', allow_stdin=False)
    reply = kc.get_shell_msg(timeout=TIMEOUT)
    assert reply["content"]["status"] == "error", "no stdin allowed: a clear error, not a hang"
    assert "does not allow input" in reply["content"]["evalue"]


def test_stop_on_error_aborts_the_queued_cells(kernel):
    km, kc = kernel
    first = kc.execute("wter()")
    second = kc.execute("print(\"should not run\")")
    replies = {}
    while len(replies) < 2:
        r = kc.get_shell_msg(timeout=TIMEOUT)
        replies[r["parent_header"]["msg_id"]] = r["content"]["status"]
    assert replies[first] == "error"
    assert replies[second] == "aborted"


def test_sigint_interrupts_a_long_cell(kernel):
    km, kc = kernel
    msg_id = kc.execute("let i = 0; loop { i += 1; }")
    time.sleep(0.8)
    km.provisioner.process.send_signal(signal.SIGINT)
    reply = kc.get_shell_msg(timeout=TIMEOUT)
    assert reply["content"]["ename"] == "KeyboardInterrupt"
    content, _ = run(kc, "1 + 1")
    assert content["status"] == "ok"


def test_comm_info_and_restart(kernel):
    km, kc = kernel
    kc.comm_info()
    reply = kc.get_shell_msg(timeout=TIMEOUT)
    assert reply["msg_type"] == "comm_info_reply" and reply["content"]["comms"] == {}
    run(kc, "let before = 1;")
    km.restart_kernel(now=False)
    kc.wait_for_ready(timeout=TIMEOUT)
    content, outputs = run(kc, "let after = 2; after")
    assert content["status"] == "ok" and "2" in text_of(outputs)


def test_completion_cursor_counts_code_points(kernel):
    km, kc = kernel
    code = 'let ρ = 1.2.kg_m3; // ρ\npitot_sta'
    kc.complete(code, len(code))
    reply = kc.get_shell_msg(timeout=TIMEOUT)["content"]
    assert "pitot_static" in reply["matches"]
    assert reply["cursor_end"] == len(code) and reply["cursor_start"] == len(code) - len("pitot_sta")


def test_large_requests_and_results_arrive_whole_and_later_cells_are_prompt(kernel):
    """Regression (issue 16): a 50 MB request or a ~16 MB result got its shell reply but
    its iopub messages (execute_input, result, idle) never arrived, and later cells'
    messages came a minute late."""
    km, kc = kernel
    big = "x" * (50 * 1024 * 1024)
    content, outputs = run(kc, f'let s = "{big}"; s.len()', timeout=120)
    types = [m["msg_type"] for m in outputs]
    assert content["status"] == "ok"
    assert types[0] == "status" and "execute_input" in types and types[-1] == "status", types
    echo = next(m for m in outputs if m["msg_type"] == "execute_input")
    assert len(echo["content"]["code"]) > 50 * 1024 * 1024
    assert str(50 * 1024 * 1024) in text_of(outputs)
    content, outputs = run(kc, 'let a = "y"; while a.len() < 16000000 { a += a; } a', timeout=120)
    assert content["status"] == "ok" and len(text_of(outputs)) >= 16_000_000
    t0 = time.time()
    content, outputs = run(kc, "1 + 1", timeout=10)
    assert "2" in text_of(outputs) and time.time() - t0 < 5


def test_a_replayed_signed_request_does_not_run_again(kernel):
    """Regression (issue 16): the same signed execute request sent twice ran twice."""
    km, kc = kernel
    s = kc.session
    msg = s.msg("execute_request", {"code": "let runs = if is_def_var(\"runs\") { runs + 1 } else { 1 }; runs",
                                    "silent": False, "store_history": True, "user_expressions": {},
                                    "allow_stdin": False, "stop_on_error": True})
    header, parent, metadata, content = (s.pack(msg[k]) for k in ("header", "parent_header", "metadata", "content"))
    parts = [header, parent, metadata, content]
    frames = [b"<IDS|MSG>", s.sign(parts)] + parts
    kc.shell_channel.socket.send_multipart(frames)
    reply = kc.get_shell_msg(timeout=TIMEOUT)
    assert reply["content"]["status"] == "ok"
    kc.shell_channel.socket.send_multipart(frames)
    time.sleep(1.0)
    _, outputs = run(kc, "runs")
    assert text_of(outputs).strip() == "1", "the replay ran again"


def test_execute_request_whose_code_is_not_text_is_an_error(kernel):
    """Regression (issue 16): such a request replied ok and ran nothing."""
    km, kc = kernel
    msg = kc.session.msg("execute_request", {"code": 42, "silent": False, "store_history": True,
                                             "user_expressions": {}, "allow_stdin": False, "stop_on_error": False})
    kc.shell_channel.send(msg)
    reply = kc.get_shell_msg(timeout=TIMEOUT)
    assert reply["content"]["status"] == "error" and "'code' must be a string" in reply["content"]["evalue"]
    content, outputs = run(kc, "1 + 1")
    assert content["status"] == "ok" and "2" in text_of(outputs)


def test_inspect_and_complete_beside_multi_byte_characters(kernel):
    """Regression (issue 16): a cursor after ° panicked the evaluation thread and every
    later cell answered that the evaluation thread had stopped."""
    km, kc = kernel
    for code in ["let t = 20°", "a·b", "2×water", "x ≥ 3"]:
        for cursor in range(len(code) + 1):
            kc.inspect(code, cursor)
            assert kc.get_shell_msg(timeout=TIMEOUT)["content"]["status"] == "ok"
            kc.complete(code, cursor)
            assert kc.get_shell_msg(timeout=TIMEOUT)["content"]["status"] == "ok"
    kc.inspect("2×water", len("2×water"))
    assert "IAPWS" in kc.get_shell_msg(timeout=TIMEOUT)["content"]["data"]["text/plain"]
    content, outputs = run(kc, "1 + 1")
    assert content["status"] == "ok" and "2" in text_of(outputs)


def test_limits_reach_the_kernel_and_deep_values_display():
    """Regressions (issue 16): --max-operations and the other limits had no effect on
    the kernel; displaying an array nested 2 000 deep killed the kernel."""
    env = dict(os.environ, STAGNA_MAX_OPERATIONS="200000", STAGNA_MAX_ARRAY="1000")
    km = KernelManager(kernel_name="stagna")
    km.start_kernel(env=env)
    kc = km.client()
    kc.start_channels()
    try:
        kc.wait_for_ready(timeout=TIMEOUT)
        content, outputs = run(kc, "let x = 0; loop { x += 1; }")
        assert content["status"] == "error" and "operation limit" in content["evalue"], content
        content, _ = run(kc, "let a = []; a.pad(5000, 0);")
        assert content["status"] == "error" and "limit of 1000" in content["evalue"], content
        content, outputs = run(kc, "let d = []; for i in 0..2000 { d = [d]; } d")
        assert content["status"] == "ok" and text_of(outputs).startswith("[[[[")
        content, outputs = run(kc, "1 + 1")
        assert "2" in text_of(outputs)
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=True)


def test_notebooks_write_inside_their_folder_unless_allowed(tmp_path):
    """Issue 16 (sandbox): the kernel confines writes to the folder it starts in."""
    work = tmp_path / "work"
    work.mkdir()
    outside = tmp_path / "outside.csv"
    km = KernelManager(kernel_name="stagna")
    km.start_kernel(cwd=str(work))
    kc = km.client()
    kc.start_channels()
    try:
        kc.wait_for_ready(timeout=TIMEOUT)
        content, _ = run(kc, f'table_from(#{{a: [1.0]}}).write("{outside}")')
        assert content["status"] == "error" and "--allow-write" in content["evalue"], content
        assert not outside.exists()
        content, _ = run(kc, 'table_from(#{a: [1.0]}).write("inside.csv")')
        assert content["status"] == "ok" and (work / "inside.csv").is_file()
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=True)


def test_history_search_follows_glob_semantics(kernel):
    """Regression (issue 15): the pattern `6 *` did not find the input `6 * 7`."""
    km, kc = kernel
    run(kc, "6 * 7")
    msg_id = kc.history(hist_access_type="search", pattern="6 *", output=False, raw=True)
    reply = kc.get_shell_msg(timeout=TIMEOUT)
    while reply["parent_header"].get("msg_id") != msg_id:
        reply = kc.get_shell_msg(timeout=TIMEOUT)
    inputs = [h[2] for h in reply["content"]["history"]]
    assert "6 * 7" in inputs, inputs


def test_long_cells_show_progress_in_one_display_updated_in_place(kernel):
    """Issue 15: a long cell (Monte Carlo, campaign reduction) shows its progress as a
    display_data with a display id, then update_display_data on that same id, ending at
    100 %; no widget library is needed."""
    code = (
        'let b = traverse_budget([100.Pa, 110.Pa, 105.Pa, 98.Pa], #{coefficient: 1.0, u_coefficient: 0.005, '
        'density: 1.2.kg_m3, u_density: 0.002.kg_m3, diameter: 500.mm, u_diameter: 1.mm});\n'
        'b.monte_carlo(2000000).trials'
    )
    _, kc = kernel
    reply, msgs = run(kc, code)
    assert reply["status"] == "ok", reply
    shown = [m for m in msgs if m["msg_type"] == "display_data" and "display_id" in m["content"].get("transient", {})]
    updates = [m for m in msgs if m["msg_type"] == "update_display_data"]
    assert len(shown) == 1, [m["msg_type"] for m in msgs]
    display_id = shown[0]["content"]["transient"]["display_id"]
    assert updates, "no update_display_data"
    assert all(u["content"]["transient"]["display_id"] == display_id for u in updates)
    last = updates[-1]["content"]["data"]
    assert "Monte Carlo trials: 100 % (2000000 of 2000000)" in last["text/plain"], last
    assert "<progress" in last["text/html"]
    # The result still arrives after the progress.
    results = [m for m in msgs if m["msg_type"] == "execute_result"]
    assert results and "2000000" in results[0]["content"]["data"]["text/plain"]
