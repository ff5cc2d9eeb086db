//! The Jupyter kernel: the same [`Session`] behind the Jupyter messaging protocol (5.3).
//!
//! Five ZeroMQ sockets on tokio: shell and control (ROUTER), stdin (ROUTER) and
//! heartbeat (REP) from the pure-Rust `zeromq` crate, and iopub (PUB) of our own in
//! `publisher`, which delivers large messages whole. Every message is signed
//! with HMAC-SHA256 (`hmac` + `sha2`); a message whose signature is missing or wrong is
//! logged and dropped, never executed; a signed but malformed request gets an error reply.
//! Evaluation runs on its own thread, so heartbeat and control (interrupt, shutdown)
//! answer during a long cell. Message types are our own small serde-free JSON builders:
//! the maintained protocol crates we looked at serialise absent optional fields as
//! `null`, which clients reject (`transient`, `user_expressions` must be objects).

pub mod install;
mod publisher;
mod wire;

use std::collections::VecDeque;
use std::panic::{AssertUnwindSafe, catch_unwind};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::{Arc, mpsc};
use std::time::Duration;

use base64::Engine as _;
use bytes::Bytes;
use serde_json::{Value, json};
use zeromq::{RepSocket, RouterSocket, Socket, SocketRecv, SocketSend, ZmqMessage};

use crate::session::{Bundle, Event, Session};
use wire::{Connection, Message, Parsed};

/// The protocol version we speak.
pub const PROTOCOL_VERSION: &str = "5.3";

fn log(msg: &str) {
    eprintln!("[stagna kernel] {msg}");
}

/// A message to publish on iopub.
struct Out {
    parent: Value,
    msg_type: &'static str,
    content: Value,
}

/// Work for the evaluation thread.
enum Job {
    Execute {
        code: String,
        silent: bool,
        store_history: bool,
        allow_stdin: bool,
        parent: Value,
        ids: Vec<Bytes>,
        reply: tokio::sync::oneshot::Sender<Value>,
    },
    Complete {
        code: String,
        cursor: usize,
        reply: tokio::sync::oneshot::Sender<Value>,
    },
    Inspect {
        code: String,
        cursor: usize,
        reply: tokio::sync::oneshot::Sender<Value>,
    },
    IsComplete {
        code: String,
        reply: tokio::sync::oneshot::Sender<Value>,
    },
}

/// A request for a line of input, answered through the stdin channel.
struct InputAsk {
    prompt: String,
    password: bool,
    parent: Value,
    ids: Vec<Bytes>,
    answer: mpsc::Sender<Result<String, String>>,
}

/// MIME bundle as Jupyter `data`.
pub fn mime(b: &Bundle) -> Value {
    let mut d = serde_json::Map::new();
    d.insert("text/plain".into(), json!(b.text));
    if let Some(h) = &b.html {
        d.insert("text/html".into(), json!(h));
    }
    if let Some(s) = &b.svg {
        d.insert("image/svg+xml".into(), json!(s));
    }
    if let Some(p) = &b.png {
        d.insert("image/png".into(), json!(base64::engine::general_purpose::STANDARD.encode(p)));
    }
    if let Some(l) = &b.latex {
        d.insert("text/latex".into(), json!(l));
    }
    Value::Object(d)
}

/// Code-point offset → byte offset.
fn byte_at(s: &str, cp: usize) -> usize {
    s.char_indices().nth(cp).map_or(s.len(), |(i, _)| i)
}

/// Byte offset → code-point offset.
fn cp_at(s: &str, byte: usize) -> usize {
    s[..byte.min(s.len())].chars().count()
}

fn help_request(code: &str) -> Option<&str> {
    let t = code.trim();
    if t.contains('\n') {
        return None;
    }
    t.strip_prefix("help ")
        .or_else(|| t.strip_prefix('?'))
        .map(str::trim)
        .filter(|n| !n.is_empty() && !n.contains(['(', ';', '"']))
}

fn evaluation_thread(
    mut session: Session,
    jobs: mpsc::Receiver<Job>,
    iopub: tokio::sync::mpsc::UnboundedSender<Out>,
    asks: tokio::sync::mpsc::UnboundedSender<InputAsk>,
) {
    let mut count = 0usize;
    let current_parent = Arc::new(std::sync::Mutex::new(Value::Null));
    let p = current_parent.clone();
    let tx = iopub.clone();
    session.set_events(move |e| {
        let parent = p.lock().map(|g| g.clone()).unwrap_or(Value::Null);
        let (msg_type, content) = match e {
            Event::Stdout(s) => ("stream", json!({"name": "stdout", "text": format!("{s}\n")})),
            Event::Stderr(s) => ("stream", json!({"name": "stderr", "text": format!("{s}\n")})),
            Event::Display(b) => ("display_data", json!({"data": mime(&b), "metadata": {}, "transient": {}})),
            Event::ClearOutput => ("clear_output", json!({"wait": false})),
            // One display per computation, updated in place under its display id (no
            // widget library needed).
            Event::Progress(pr) => (
                if pr.first { "display_data" } else { "update_display_data" },
                json!({
                    "data": {"text/plain": pr.text(), "text/html": pr.html()},
                    "metadata": {},
                    "transient": {"display_id": format!("stagna-progress-{}", pr.id)},
                }),
            ),
        };
        let _ = tx.send(Out { parent, msg_type, content });
    });
    let allow = Arc::new(AtomicBool::new(false));
    let ids_for_input = Arc::new(std::sync::Mutex::new(Vec::<Bytes>::new()));
    {
        let (allow, p, ids) = (allow.clone(), current_parent.clone(), ids_for_input.clone());
        session.set_input(Some(Arc::new(move |prompt: &str, password: bool| {
            if !allow.load(Ordering::Relaxed) {
                return Err("input(): this notebook client does not allow input requests".into());
            }
            let (answer, wait) = mpsc::channel();
            let parent = p.lock().map(|g| g.clone()).unwrap_or(Value::Null);
            let ids = ids.lock().map(|g| g.clone()).unwrap_or_default();
            asks.send(InputAsk { prompt: prompt.to_string(), password, parent, ids, answer })
                .map_err(|_| "the kernel is shutting down".to_string())?;
            wait.recv().unwrap_or_else(|_| Err("no answer to the input request".into()))
        })));
    }
    // Each request runs under `catch_unwind`: a bug that panics while answering one
    // request drops that request's reply (the shell answers it with an error) and the
    // thread goes on with the next one.
    let mut handle = |job: Job| match job {
        Job::Execute { code, silent, store_history, allow_stdin, parent, ids, reply } => {
            if let Ok(mut g) = current_parent.lock() {
                *g = parent.clone();
            }
            if let Ok(mut g) = ids_for_input.lock() {
                *g = ids;
            }
            allow.store(allow_stdin, Ordering::Relaxed);
            if store_history && !silent {
                count += 1;
            }
            if !silent {
                let _ = iopub.send(Out {
                    parent: parent.clone(),
                    msg_type: "execute_input",
                    content: json!({"code": code, "execution_count": count}),
                });
            }
            if let Some(name) = help_request(&code) {
                let text = session.help(name);
                let _ = reply.send(json!({"status": "ok", "execution_count": count, "user_expressions": {}, "payload": [{"source": "page", "data": {"text/plain": text}, "start": 0}]}));
                return;
            }
            let content = match session.eval(&code) {
                Ok(out) => {
                    if let (Some(v), false) = (out.value, silent) {
                        let _ = iopub.send(Out {
                            parent: parent.clone(),
                            msg_type: "execute_result",
                            content: json!({"execution_count": count, "data": mime(&v), "metadata": {}}),
                        });
                    }
                    json!({"status": "ok", "execution_count": count, "user_expressions": {}, "payload": []})
                }
                Err(e) => {
                    let ename = if e.kind == "Interrupted" { "KeyboardInterrupt".to_string() } else { e.kind.clone() };
                    let rendered = e.render("cell", &code, true);
                    let traceback: Vec<String> = rendered.lines().map(str::to_string).collect();
                    let err = json!({"ename": ename, "evalue": e.message, "traceback": traceback});
                    let _ = iopub.send(Out { parent: parent.clone(), msg_type: "error", content: err.clone() });
                    let mut c = err;
                    c["status"] = json!("error");
                    c["execution_count"] = json!(count);
                    c
                }
            };
            let _ = reply.send(content);
        }
        Job::Complete { code, cursor, reply } => {
            let b = byte_at(&code, cursor);
            let (start, matches) = session.complete(&code, b);
            let _ = reply.send(json!({"status": "ok", "matches": matches, "cursor_start": cp_at(&code, start), "cursor_end": cursor, "metadata": {}}));
        }
        Job::Inspect { code, cursor, reply } => {
            let b = byte_at(&code, cursor);
            let (found, data) = match session.inspect(&code, b) {
                Some(text) => (true, json!({"text/plain": text})),
                None => (false, json!({})),
            };
            let _ = reply.send(json!({"status": "ok", "found": found, "data": data, "metadata": {}}));
        }
        Job::IsComplete { code, reply } => {
            let c = match session.is_complete(&code) {
                Ok(true) => json!({"status": "complete"}),
                Ok(false) => json!({"status": "incomplete", "indent": "    "}),
                Err(_) => json!({"status": "invalid"}),
            };
            let _ = reply.send(c);
        }
    };
    while let Ok(job) = jobs.recv() {
        if catch_unwind(AssertUnwindSafe(|| handle(job))).is_err() {
            log("a request panicked in the evaluation thread; it was answered with an error and the kernel goes on");
        }
    }
}

/// The reply to a request whose handler failed inside the kernel.
fn internal_error_reply() -> Value {
    json!({"status": "error", "ename": "KernelError", "evalue": "the kernel failed on this request (an internal error, logged on the kernel's standard error); later requests still run", "traceback": []})
}

/// The evaluation thread has ended while the kernel runs: no request can be answered
/// any more, so the process ends and the client shows the kernel as dead (and offers
/// to restart it) instead of answering every later cell with an error.
fn evaluation_thread_gone() -> ! {
    log("the evaluation thread has stopped; the kernel exits so that the client can restart it");
    std::process::exit(70)
}

fn kernel_info() -> Value {
    json!({
        "status": "ok",
        "protocol_version": PROTOCOL_VERSION,
        "implementation": "stagna",
        "implementation_version": env!("CARGO_PKG_VERSION"),
        "language_info": {
            "name": "rhai",
            "version": "1.27",
            "mimetype": "text/x-rhai",
            "file_extension": ".rhai",
            "pygments_lexer": "rust",
            "codemirror_mode": "rust",
        },
        "banner": format!("stagna {}: differential-pressure flow reduction in rhai scripts. help(\"\") lists the functions.", env!("CARGO_PKG_VERSION")),
        "help_links": [{"text": "Stagna function reference", "url": "https://example.invalid/stagna/docs/reference.md"}],
    })
}

/// One history entry: (session, line number, input).
type History = Vec<(i64, i64, String)>;

fn history_reply(h: &History, c: &Value) -> Value {
    let access = c["hist_access_type"].as_str().unwrap_or("tail");
    let n = c["n"].as_u64().unwrap_or(10) as usize;
    let pick: Vec<&(i64, i64, String)> = match access {
        "range" => {
            let start = c["start"].as_i64().unwrap_or(0);
            let stop = c["stop"].as_i64().unwrap_or(i64::MAX);
            h.iter().filter(|(_, l, _)| *l >= start && *l < stop).collect()
        }
        "search" => {
            let pat = c["pattern"].as_str().unwrap_or("*");
            let unique = c["unique"].as_bool().unwrap_or(false);
            let mut found: Vec<&(i64, i64, String)> = h.iter().filter(|(_, _, s)| glob(pat, s)).collect();
            if unique {
                let mut seen = std::collections::HashSet::new();
                found.retain(|(_, _, s)| seen.insert(s.clone()));
            }
            let k = found.len().saturating_sub(n);
            found.split_off(k)
        }
        _ => h.iter().skip(h.len().saturating_sub(n)).collect(),
    };
    let output = c["output"].as_bool().unwrap_or(false);
    let items: Vec<Value> =
        pick.iter().map(|(s, l, i)| if output { json!([s, l, [i, null]]) } else { json!([s, l, i]) }).collect();
    json!({"status": "ok", "history": items})
}

/// Shell-style glob: `*` any run, `?` one character.
fn glob(pat: &str, s: &str) -> bool {
    let (p, t): (Vec<char>, Vec<char>) = (pat.chars().collect(), s.chars().collect());
    let (mut i, mut j, mut star, mut mark) = (0, 0, None, 0);
    while j < t.len() {
        // `*` is always the wildcard, also where the text holds a literal `*` (issue 15:
        // the pattern `6 *` must find `6 * 7`, as SQLite's GLOB does in IPython's history).
        if i < p.len() && p[i] == '*' {
            star = Some(i);
            mark = j;
            i += 1;
        } else if i < p.len() && (p[i] == '?' || p[i] == t[j]) {
            i += 1;
            j += 1;
        } else if let Some(st) = star {
            i = st + 1;
            mark += 1;
            j = mark;
        } else {
            return false;
        }
    }
    while i < p.len() && p[i] == '*' {
        i += 1;
    }
    i == p.len()
}

/// Verifies and parses a request: a forged one is logged and dropped, a signed but
/// malformed one is logged and answered with an error reply.
async fn accept(
    sock: &mut RouterSocket,
    conn: &Connection,
    ks: &str,
    raw: ZmqMessage,
    channel: &str,
) -> Option<Message> {
    match wire::parse(conn, raw) {
        Parsed::Ok(m) => Some(m),
        Parsed::BadSignature => {
            log(&format!("dropped a {channel} message with a bad or missing signature"));
            None
        }
        Parsed::Replayed => {
            log(&format!("dropped a replayed {channel} message (its signature was already used)"));
            None
        }
        Parsed::Malformed { ids, header, reason } => {
            log(&format!("malformed {channel} message: {reason}"));
            if let Some(h) = header {
                let r = Message::reply(
                    ks,
                    &h,
                    json!({"status": "error", "ename": "BadRequest", "evalue": reason, "traceback": []}),
                );
                let _ = sock.send(r.encode(conn, ids)).await;
            }
            None
        }
    }
}

/// Runs the kernel until shutdown; returns the exit status.
pub fn run(
    connection_file: &std::path::Path,
    limits: crate::session::Limits,
    allow_write: Vec<std::path::PathBuf>,
) -> Result<i32, Box<dyn std::error::Error>> {
    let text = std::fs::read_to_string(connection_file).map_err(|e| format!("{}: {e}", connection_file.display()))?;
    let conn = Arc::new(Connection::parse(&text)?);
    let rt = tokio::runtime::Builder::new_multi_thread().worker_threads(2).enable_all().build()?;
    rt.block_on(serve(conn, limits, allow_write))
}

async fn bind<S: Socket>(s: &mut S, conn: &Connection, port: u16) -> Result<(), Box<dyn std::error::Error>> {
    s.bind(&format!("{}://{}:{}", conn.transport, conn.ip, port)).await?;
    Ok(())
}

async fn serve(
    conn: Arc<Connection>,
    limits: crate::session::Limits,
    allow_write: Vec<std::path::PathBuf>,
) -> Result<i32, Box<dyn std::error::Error>> {
    let mut shell = RouterSocket::new();
    let mut control = RouterSocket::new();
    let mut stdin = RouterSocket::new();
    let mut hb = RepSocket::new();
    bind(&mut shell, &conn, conn.shell_port).await?;
    bind(&mut control, &conn, conn.control_port).await?;
    bind(&mut stdin, &conn, conn.stdin_port).await?;
    if conn.transport != "tcp" {
        return Err(
            format!("transport '{}' is not supported; the connection file must say \"tcp\"", conn.transport).into()
        );
    }
    let iopub = publisher::Publisher::bind(&conn.ip, conn.iopub_port).await?;
    bind(&mut hb, &conn, conn.hb_port).await?;

    let session = Session::with_limits(limits);
    {
        // Notebooks write inside the folder the kernel starts in (Jupyter starts it in the
        // notebook's folder) and the folders allowed on its command line.
        let cwd = std::env::current_dir()?;
        let prefs = session.prefs();
        let mut p = match prefs.write() {
            Ok(g) => g,
            Err(e) => e.into_inner(),
        };
        p.write_roots = Some(std::iter::once(cwd).chain(allow_write).collect());
    }
    let interrupt = session.interrupt_flag();
    let (iopub_tx, mut iopub_rx) = tokio::sync::mpsc::unbounded_channel::<Out>();
    let (ask_tx, mut ask_rx) = tokio::sync::mpsc::unbounded_channel::<InputAsk>();
    let (job_tx, job_rx) = mpsc::channel::<Job>();
    let kernel_session = wire::new_id();
    {
        let tx = iopub_tx.clone();
        std::thread::Builder::new()
            .name("stagna-eval".into())
            // Deep script data (arrays nested thousands deep) is displayed and dropped
            // recursively: a big stack, reserved rather than committed.
            .stack_size(512 << 20)
            .spawn(move || {
                if catch_unwind(AssertUnwindSafe(|| evaluation_thread(session, job_rx, tx, ask_tx))).is_err() {
                    evaluation_thread_gone();
                }
            })?;
    }

    // iopub: one publisher task keeps the order of busy, outputs and idle.
    let c = conn.clone();
    let ks = kernel_session.clone();
    tokio::spawn(async move {
        while let Some(o) = iopub_rx.recv().await {
            let topic = Bytes::from(format!("kernel.{ks}.{}", o.msg_type));
            let m = Message::new(&ks, o.msg_type, o.parent, o.content);
            iopub.send(&m.encode(&c, vec![topic]).into_vec());
        }
    });
    let status = |tx: &tokio::sync::mpsc::UnboundedSender<Out>, parent: &Value, state: &str| {
        let _ = tx.send(Out { parent: parent.clone(), msg_type: "status", content: json!({"execution_state": state}) });
    };
    status(&iopub_tx, &Value::Object(Default::default()), "starting");

    // Heartbeat: echo.
    tokio::spawn(async move {
        while let Ok(m) = hb.recv().await {
            if hb.send(m).await.is_err() {
                break;
            }
        }
    });

    // stdin: input requests from the evaluation thread, answered by the client.
    let c = conn.clone();
    let ks = kernel_session.clone();
    tokio::spawn(async move {
        while let Some(ask) = ask_rx.recv().await {
            let m = Message::new(
                &ks,
                "input_request",
                ask.parent.clone(),
                json!({"prompt": ask.prompt, "password": ask.password}),
            );
            if let Err(e) = stdin.send(m.encode(&c, ask.ids.clone())).await {
                log(&format!("input request not delivered: {e}"));
                let _ = ask.answer.send(Err("cannot reach the client".into()));
                continue;
            }
            let answer = loop {
                match stdin.recv().await {
                    Ok(raw) => match wire::parse(&c, raw) {
                        Parsed::Ok(m) if m.msg_type() == "input_reply" => {
                            break Ok(m.content["value"].as_str().unwrap_or("").to_string());
                        }
                        Parsed::Ok(_) => continue,
                        Parsed::BadSignature => {
                            log("dropped a stdin message with a bad or missing signature");
                            continue;
                        }
                        Parsed::Replayed => {
                            log("dropped a replayed stdin message");
                            continue;
                        }
                        Parsed::Malformed { reason, .. } => break Err(reason),
                    },
                    Err(e) => break Err(e.to_string()),
                }
            };
            let _ = ask.answer.send(answer);
        }
    });

    // Parent watch: exit when the process in JPY_PARENT_PID is gone.
    if let Some(pid) = std::env::var("JPY_PARENT_PID").ok().and_then(|p| p.parse::<u32>().ok()).filter(|p| *p > 1) {
        tokio::spawn(async move {
            loop {
                tokio::time::sleep(Duration::from_millis(500)).await;
                if !std::path::Path::new(&format!("/proc/{pid}")).exists() {
                    log(&format!("parent process {pid} is gone; exiting"));
                    std::process::exit(0);
                }
            }
        });
    }

    // SIGINT interrupts the running cell (interrupt_mode "signal" clients).
    {
        let flag = interrupt.clone();
        tokio::spawn(async move {
            if let Ok(mut s) = tokio::signal::unix::signal(tokio::signal::unix::SignalKind::interrupt()) {
                while s.recv().await.is_some() {
                    flag.store(true, Ordering::Relaxed);
                }
            }
        });
    }

    // Control: kernel_info, interrupt, shutdown — answered while a cell runs.
    let c = conn.clone();
    let ks = kernel_session.clone();
    let tx = iopub_tx.clone();
    let flag = interrupt.clone();
    let control_task = tokio::spawn(async move {
        loop {
            let raw = match control.recv().await {
                Ok(r) => r,
                Err(e) => {
                    log(&format!("control receive failed: {e}"));
                    continue;
                }
            };
            let Some(m) = accept(&mut control, &c, &ks, raw, "control").await else { continue };
            status(&tx, &m.header, "busy");
            let (content, exit) = match m.msg_type() {
                "kernel_info_request" => (kernel_info(), false),
                "interrupt_request" => {
                    flag.store(true, Ordering::Relaxed);
                    (json!({"status": "ok"}), false)
                }
                "shutdown_request" => {
                    (json!({"status": "ok", "restart": m.content["restart"].as_bool().unwrap_or(false)}), true)
                }
                other => (
                    json!({"status": "error", "ename": "UnknownRequest", "evalue": format!("unknown control request {other}"), "traceback": []}),
                    false,
                ),
            };
            let r = Message::reply(&ks, &m.header, content);
            let _ = control.send(r.encode(&c, m.ids.clone())).await;
            status(&tx, &m.header, "idle");
            if exit {
                tokio::time::sleep(Duration::from_millis(100)).await;
                std::process::exit(0);
            }
        }
    });

    // Shell: requests in order; execute and friends go to the evaluation thread.
    let mut history: History = Vec::new();
    let line = AtomicUsize::new(0);
    let mut backlog: VecDeque<ZmqMessage> = VecDeque::new();
    status(&iopub_tx, &Value::Object(Default::default()), "idle");
    loop {
        let raw = match backlog.pop_front() {
            Some(r) => r,
            None => match shell.recv().await {
                Ok(r) => r,
                Err(e) => {
                    log(&format!("shell receive failed: {e}"));
                    continue;
                }
            },
        };
        let Some(m) = accept(&mut shell, &conn, &kernel_session, raw, "shell").await else { continue };
        status(&iopub_tx, &m.header, "busy");
        let ty = m.msg_type().to_string();
        let content = match ty.as_str() {
            "kernel_info_request" => kernel_info(),
            "execute_request" if !m.content["code"].is_string() => {
                json!({"status": "error", "ename": "BadRequest", "evalue": "execute_request: 'code' must be a string (the cell's text)", "traceback": [], "execution_count": line.load(Ordering::Relaxed)})
            }
            "execute_request" => {
                let code = m.content["code"].as_str().unwrap_or("").to_string();
                let silent = m.content["silent"].as_bool().unwrap_or(false);
                let store_history = m.content["store_history"].as_bool().unwrap_or(!silent);
                let stop_on_error = m.content["stop_on_error"].as_bool().unwrap_or(true);
                let allow_stdin = m.content["allow_stdin"].as_bool().unwrap_or(false);
                if store_history && !silent {
                    let n = line.fetch_add(1, Ordering::Relaxed) as i64 + 1;
                    history.push((1, n, code.clone()));
                }
                interrupt.store(false, Ordering::Relaxed);
                let (reply, wait) = tokio::sync::oneshot::channel();
                let job = Job::Execute {
                    code,
                    silent,
                    store_history,
                    allow_stdin,
                    parent: m.header.clone(),
                    ids: m.ids.clone(),
                    reply,
                };
                if job_tx.send(job).is_err() {
                    evaluation_thread_gone();
                }
                let content = wait.await.unwrap_or_else(|_| internal_error_reply());
                if content["status"] == "error" && stop_on_error {
                    // Abort execute requests already waiting behind the failed one.
                    while let Ok(Ok(next)) = tokio::time::timeout(Duration::from_millis(5), shell.recv()).await {
                        backlog.push_back(next);
                    }
                    let mut keep = VecDeque::new();
                    for raw in backlog.drain(..) {
                        // Only the execute requests are taken (and their signatures
                        // recorded) here; the others are parsed when their turn comes.
                        let execute = matches!(wire::peek(&conn, raw.clone()), Parsed::Ok(q) if q.msg_type() == "execute_request");
                        if !execute {
                            keep.push_back(raw);
                            continue;
                        }
                        if let Parsed::Ok(q) = wire::parse(&conn, raw) {
                            status(&iopub_tx, &q.header, "busy");
                            let r = Message::reply(
                                &kernel_session,
                                &q.header,
                                json!({"status": "aborted", "execution_count": content["execution_count"].clone()}),
                            );
                            let _ = shell.send(r.encode(&conn, q.ids.clone())).await;
                            status(&iopub_tx, &q.header, "idle");
                        }
                    }
                    backlog = keep;
                }
                content
            }
            "complete_request" | "inspect_request" | "is_complete_request" => {
                let code = m.content["code"].as_str().unwrap_or("").to_string();
                let cursor = m.content["cursor_pos"].as_u64().unwrap_or(code.chars().count() as u64) as usize;
                let (reply, wait) = tokio::sync::oneshot::channel();
                let job = match ty.as_str() {
                    "complete_request" => Job::Complete { code, cursor, reply },
                    "inspect_request" => Job::Inspect { code, cursor, reply },
                    _ => Job::IsComplete { code, reply },
                };
                if job_tx.send(job).is_err() {
                    evaluation_thread_gone();
                }
                wait.await.unwrap_or_else(|_| internal_error_reply())
            }
            "history_request" => history_reply(&history, &m.content),
            "comm_info_request" => json!({"status": "ok", "comms": {}}),
            "comm_open" | "comm_msg" | "comm_close" => {
                status(&iopub_tx, &m.header, "idle");
                continue;
            }
            "shutdown_request" => {
                let r = Message::reply(
                    &kernel_session,
                    &m.header,
                    json!({"status": "ok", "restart": m.content["restart"].as_bool().unwrap_or(false)}),
                );
                let _ = shell.send(r.encode(&conn, m.ids.clone())).await;
                status(&iopub_tx, &m.header, "idle");
                tokio::time::sleep(Duration::from_millis(100)).await;
                control_task.abort();
                return Ok(0);
            }
            other => {
                json!({"status": "error", "ename": "UnknownRequest", "evalue": format!("unknown request {other}"), "traceback": []})
            }
        };
        let r = Message::reply(&kernel_session, &m.header, content);
        if let Err(e) = shell.send(r.encode(&conn, m.ids.clone())).await {
            log(&format!("shell send failed: {e}"));
        }
        status(&iopub_tx, &m.header, "idle");
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn globs_and_offsets() {
        assert!(glob("*section*", "let d = round_section(600.mm)"));
        assert!(glob("le?", "let"));
        assert!(!glob("x*", "let"));
        // Regression (issue 15): a `*` in the pattern beside a `*` in the input.
        assert!(glob("6 *", "6 * 7"));
        assert!(glob("* * 7", "6 * 7") && !glob("6 * 8", "6 * 7"));
        let s = "ρ = 1.2; ρ.";
        assert_eq!(cp_at(s, byte_at(s, 10)), 10);
    }

    #[test]
    fn history_tail_range_search() {
        let h: History = vec![(1, 1, "let a = 1".into()), (1, 2, "a + 1".into()), (1, 3, "let a = 1".into())];
        assert_eq!(
            history_reply(&h, &json!({"hist_access_type": "tail", "n": 2}))["history"].as_array().map(Vec::len),
            Some(2)
        );
        assert_eq!(
            history_reply(&h, &json!({"hist_access_type": "range", "start": 2, "stop": 3}))["history"][0][2],
            "a + 1"
        );
        let r = history_reply(&h, &json!({"hist_access_type": "search", "pattern": "let*", "unique": true}));
        assert_eq!(r["history"].as_array().map(Vec::len), Some(1));
        // Optional fields omitted: defaults apply (jupyter_kernel_test sends search without n).
        assert_eq!(
            history_reply(&h, &json!({"hist_access_type": "search", "pattern": "*"}))["history"]
                .as_array()
                .map(Vec::len),
            Some(3)
        );
    }
}
