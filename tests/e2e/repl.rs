//! The REPL: piped standard input, and a pseudo-terminal (through Python's pty module,
//! answering reedline's cursor-position query).

use std::io::Write;
use std::process::{Command, Stdio};

fn piped(input: &str) -> (bool, String, String) {
    let mut child = Command::new(env!("CARGO_BIN_EXE_stagna"))
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("stagna starts");
    child.stdin.take().expect("stdin").write_all(input.as_bytes()).expect("write");
    let o = child.wait_with_output().expect("wait");
    (
        o.status.success(),
        String::from_utf8_lossy(&o.stdout).into_owned(),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

#[test]
fn piped_input_is_evaluated_in_order_with_state_kept() {
    let (ok, out, err) =
        piped("let d = round_section(\n    600.mm\n);\nd.area\nfn twice(x) { x * 2 }\ntwice(d.area)\nhelp water\n");
    assert!(ok, "{err}");
    // A = π·0.3² = 0.282743 m², shown to the default four significant figures.
    assert!(out.contains("0.2827 m²") && out.contains("0.5655 m²"), "{out}");
    assert!(out.contains("IAPWS"), "help output: {out}");
}

#[test]
fn piped_errors_show_line_caret_and_hint_and_exit_non_zero() {
    let (ok, out, err) = piped("let a = 1.m;\nlet b = a + 2.Pa;\nprint(\"not reached\");\n");
    assert!(!ok);
    assert!(!out.contains("not reached"));
    assert!(err.contains("different dimensions") && err.contains("line 1, column") && err.contains("Help:"), "{err}");
    let (ok, _, err) = piped("wter()\n");
    assert!(!ok && err.contains("did you mean water"), "{err}");
}

#[test]
fn a_pseudo_terminal_session_completes_and_evaluates() {
    // Python 3 is on every machine this runs on (the Jupyter tests need it too).
    let py = r#"
import os, pty, sys, time, select
pid, fd = pty.fork()
if pid == 0:
    os.environ["STAGNA_HISTORY"] = sys.argv[2]
    os.execv(sys.argv[1], [sys.argv[1]])
buf = b""
def pump(t):
    global buf
    end = time.time() + t
    while time.time() < end:
        r, _, _ = select.select([fd], [], [], 0.05)
        if r:
            try:
                chunk = os.read(fd, 4096)
            except OSError:
                return
            buf += chunk
            if b"\x1b[6n" in chunk:
                os.write(fd, b"\x1b[1;1R")
pump(1.5)
os.write(fd, b"let v = pitot_static(1.0).velocity(50.Pa, 1.2.kg_m3);\r")
pump(1.0)
os.write(fd, b"v.veloc\t")
pump(1.0)
os.write(fd, b"\r")   # accept the completion
pump(0.5)
os.write(fd, b"\r")   # run the line
pump(1.0)
os.write(fd, b"\x04")
pump(1.0)
sys.stdout.write(buf.decode("utf-8", "replace"))
"#;
    let hist = std::env::temp_dir().join(format!("stagna-hist-{}.txt", std::process::id()));
    let o = Command::new("python3")
        .args(["-c", py, env!("CARGO_BIN_EXE_stagna"), hist.to_str().unwrap_or_default()])
        .output()
        .expect("python3 runs");
    let out = String::from_utf8_lossy(&o.stdout);
    // √(2·50/1.2) = 9.12871 m/s, shown to four figures; the completion turned `v.veloc`
    // into `v.velocity`.
    assert!(out.contains("9.129 m/s"), "terminal output:\n{out}");
    assert!(std::fs::read_to_string(&hist).unwrap_or_default().contains("pitot_static"), "history file written");
}
