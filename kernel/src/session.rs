//! The one script session: rhai engine, scope, function catalog, limits and output.
//!
//! The REPL, the batch runner and the Jupyter kernel are front ends over [`Session`]:
//! they hand it source text and show what comes back (printed text, a value as a MIME
//! bundle, or an error with position, caret and hint).

use std::panic::{AssertUnwindSafe, catch_unwind};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, RwLock};

use rhai::{AST, Dynamic, Engine, EvalAltResult, ParseError, Position, Scope};

use crate::api::{self, Prefs, SharedPrefs};
use crate::catalog::{Catalog, Kind, Registrar};

/// Limits that stop a runaway script, each checked in constant time per operation.
///
/// The script engine's own size limits walk a whole array or map after every change
/// (pushing 400 000 values took minutes), so they are off: the session limits the
/// memory the whole process holds (checked at every operation against the allocator's
/// running count), the length of script arrays where they grow, and the operations per
/// input. Host functions check their own inputs before they allocate.
#[derive(Debug, Clone, Copy)]
pub struct Limits {
    /// Most operations per input (0 = none).
    pub operations: u64,
    /// Most bytes the process may hold while a script runs (0 = none).
    pub memory: usize,
    /// Longest script array (push, append, insert, pad, and host functions that return
    /// arrays; `+` and `+=` are bounded by the memory limit).
    pub array_size: usize,
    /// Deepest call nesting.
    pub call_levels: usize,
}

impl Default for Limits {
    fn default() -> Self {
        Self { operations: 2_000_000_000, memory: default_memory_limit(), array_size: 500_000_000, call_levels: 64 }
    }
}

/// Three quarters of the machine's memory (from `/proc/meminfo`), else 8 GiB.
pub fn default_memory_limit() -> usize {
    let total = std::fs::read_to_string("/proc/meminfo").ok().and_then(|m| {
        m.lines()
            .find(|l| l.starts_with("MemTotal:"))
            .and_then(|l| l.split_whitespace().nth(1))
            .and_then(|kb| kb.parse::<usize>().ok())
            .map(|kb| kb * 1024)
    });
    total.map_or(8 << 30, |t| t / 4 * 3)
}

/// Bytes the process holds now (the allocator's running count).
pub fn memory_in_use() -> usize {
    crate::ALLOCATOR.allocated()
}

/// Reads a size such as `4GiB`, `500MB`, `2G` or a plain number of bytes.
pub fn parse_size(s: &str) -> Result<usize, String> {
    let t = s.trim();
    let split = t.find(|c: char| !(c.is_ascii_digit() || c == '.')).unwrap_or(t.len());
    let (num, unit) = t.split_at(split);
    let v: f64 = num.parse().map_err(|_| format!("'{s}': expected a size such as 4GiB, 500MB or 2G"))?;
    let k = match unit.trim().to_ascii_lowercase().as_str() {
        "" | "b" => 1.0,
        "k" | "kb" => 1e3,
        "kib" => 1024.0,
        "m" | "mb" => 1e6,
        "mib" => 1024.0 * 1024.0,
        "g" | "gb" => 1e9,
        "gib" => 1024.0 * 1024.0 * 1024.0,
        "t" | "tb" => 1e12,
        "tib" => 1024f64.powi(4),
        u => return Err(format!("'{s}': unknown size unit '{u}' (use B, kB, MB, GB, KiB, MiB, GiB)")),
    };
    Ok((v * k) as usize)
}

/// The limits a front end can set: command-line options, else the environment
/// (`STAGNA_MAX_OPERATIONS`, `STAGNA_MAX_MEMORY`, `STAGNA_MAX_ARRAY`, for the kernel
/// whose command line Jupyter writes), else the defaults.
#[derive(clap::Args, Debug, Clone, Default)]
pub struct LimitArgs {
    /// Operation limit per input, stops runaway loops (0: none) [env: STAGNA_MAX_OPERATIONS]
    #[arg(long, value_name = "N")]
    pub max_operations: Option<u64>,
    /// Memory the session may hold, e.g. 4GiB (default: three quarters of the machine's memory; 0: none) [env: STAGNA_MAX_MEMORY]
    #[arg(long, value_name = "SIZE")]
    pub max_memory: Option<String>,
    /// Longest array a script may build (default 500000000) [env: STAGNA_MAX_ARRAY]
    #[arg(long, value_name = "N")]
    pub max_array: Option<usize>,
}

impl LimitArgs {
    /// The limits, with the options' and the environment's values checked.
    pub fn limits(&self) -> Result<Limits, String> {
        let env = |k: &str| std::env::var(k).ok().filter(|v| !v.trim().is_empty());
        let mut l = Limits::default();
        if let Some(n) = self.max_operations {
            l.operations = n;
        } else if let Some(v) = env("STAGNA_MAX_OPERATIONS") {
            l.operations =
                v.trim().parse().map_err(|_| format!("STAGNA_MAX_OPERATIONS='{v}': expected a whole number"))?;
        }
        if let Some(m) = self.max_memory.clone().or_else(|| env("STAGNA_MAX_MEMORY")) {
            l.memory = parse_size(&m).map_err(|e| format!("memory limit {e}"))?;
        }
        if let Some(n) = self.max_array {
            l.array_size = n;
        } else if let Some(v) = env("STAGNA_MAX_ARRAY") {
            l.array_size = v.trim().parse().map_err(|_| format!("STAGNA_MAX_ARRAY='{v}': expected a whole number"))?;
        }
        Ok(l)
    }
}

/// A value rendered for display: always text, plus richer forms where the value has them.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Bundle {
    /// text/plain.
    pub text: String,
    /// text/html.
    pub html: Option<String>,
    /// image/svg+xml.
    pub svg: Option<String>,
    /// image/png.
    pub png: Option<Vec<u8>>,
    /// text/latex.
    pub latex: Option<String>,
}

/// A script error ready to show.
#[derive(Debug, Clone, PartialEq)]
pub struct ScriptError {
    /// Short kind (for Jupyter's ename).
    pub kind: String,
    /// The message.
    pub message: String,
    /// Line and column (1-based) in the input, when known.
    pub position: Option<(usize, usize)>,
    /// What to try.
    pub hint: Option<String>,
}

impl ScriptError {
    fn new(kind: &str, message: impl Into<String>) -> Self {
        ScriptError { kind: kind.into(), message: message.into(), position: None, hint: None }
    }

    /// Renders the error with the source line, a caret and the hint (ariadne).
    pub fn render(&self, source_name: &str, src: &str, color: bool) -> String {
        use ariadne::{Config, Label, Report, ReportKind, Source};
        let Some((line, col)) = self.position else {
            let mut s = format!("error: {}", self.message);
            if let Some(h) = &self.hint {
                s.push_str(&format!("\n  hint: {h}"));
            }
            return s;
        };
        let offset = src.split_inclusive('\n').take(line.saturating_sub(1)).map(|l| l.chars().count()).sum::<usize>()
            + col.saturating_sub(1);
        let end = (offset + 1).min(src.chars().count().max(offset + 1));
        let mut report = Report::build(ReportKind::Error, (source_name, offset..end))
            .with_config(Config::default().with_color(color))
            .with_message(&self.message)
            .with_label(Label::new((source_name, offset..end)).with_message(format!("line {line}, column {col}")));
        if let Some(h) = &self.hint {
            report = report.with_help(h);
        }
        let mut out = Vec::new();
        let padded = format!("{src}\n ");
        match report.finish().write((source_name, Source::from(padded.as_str())), &mut out) {
            Ok(()) => String::from_utf8_lossy(&out).trim_end().to_string(),
            Err(_) => format!("error at line {line}, column {col}: {}", self.message),
        }
    }
}

/// What an evaluation produced.
#[derive(Debug, Clone, Default)]
pub struct Outcome {
    /// The value of the last expression, rendered (None for unit / statements).
    pub value: Option<Bundle>,
}

/// What a running input sends to its front end besides its value.
#[derive(Debug, Clone, PartialEq)]
pub enum Event {
    /// Text from `print`.
    Stdout(String),
    /// Text from `eprint` and `debug`.
    Stderr(String),
    /// A value shown with `display(x)`.
    Display(Bundle),
    /// `clear_output()`.
    ClearOutput,
    /// How far a long computation has come (shown in place: a terminal bar, a notebook
    /// display updated under one display id).
    Progress(ProgressEvent),
}

/// One progress report of a long computation.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ProgressEvent {
    /// Which computation (one per call of a long function in this session).
    pub id: u64,
    /// What is running, e.g. "reduce_campaign".
    pub label: String,
    /// Items done.
    pub done: u64,
    /// Items in all.
    pub total: u64,
    /// The first report of this computation.
    pub first: bool,
}

impl ProgressEvent {
    /// "label: 42 % (420 of 1000)".
    pub fn text(&self) -> String {
        let pct = (self.done * 100).checked_div(self.total).unwrap_or(100);
        format!("{}: {pct} % ({} of {})", self.label, self.done, self.total)
    }
    /// An HTML progress bar with the text beside it.
    pub fn html(&self) -> String {
        format!(
            "<div><progress value=\"{}\" max=\"{}\" style=\"width:20em\"></progress> <span>{}</span></div>",
            self.done,
            self.total.max(1),
            self.text().replace('&', "&amp;").replace('<', "&lt;")
        )
    }
}

/// A terminal progress bar on standard error (drawn only when it is a terminal).
pub fn terminal_progress(p: &ProgressEvent) {
    static BAR: std::sync::Mutex<Option<(u64, indicatif::ProgressBar)>> = std::sync::Mutex::new(None);
    let mut g = match BAR.lock() {
        Ok(g) => g,
        Err(e) => e.into_inner(),
    };
    if g.as_ref().is_none_or(|(id, _)| *id != p.id) {
        let bar = indicatif::ProgressBar::with_draw_target(Some(p.total), indicatif::ProgressDrawTarget::stderr());
        if let Ok(style) = indicatif::ProgressStyle::with_template("{msg} {bar:40} {pos}/{len}  {elapsed}") {
            bar.set_style(style);
        }
        bar.set_message(p.label.clone());
        *g = Some((p.id, bar));
    }
    if let Some((_, bar)) = g.as_ref() {
        bar.set_position(p.done);
        if p.done >= p.total {
            bar.finish_and_clear();
        }
    }
}

type Sink = Arc<dyn Fn(Event) + Send + Sync>;

/// Answers `input(prompt)`: the line typed, or why there is none.
pub type InputHook = Arc<dyn Fn(&str, bool) -> Result<String, String> + Send + Sync>;

/// The session.
pub struct Session {
    engine: Engine,
    scope: Scope<'static>,
    functions: AST,
    catalog: Arc<Catalog>,
    prefs: SharedPrefs,
    interrupt: Arc<AtomicBool>,
    sink: Arc<RwLock<Sink>>,
    input: Arc<RwLock<Option<InputHook>>>,
    limits: Limits,
    /// The last script compiled by [`Session::eval_same_script`].
    compiled: Option<(String, AST)>,
}

fn stdout_sink() -> Sink {
    Arc::new(|e: Event| match e {
        Event::Stdout(s) => println!("{s}"),
        Event::Stderr(s) => eprintln!("{s}"),
        Event::Display(b) => println!("{}", b.text),
        Event::ClearOutput => {}
        Event::Progress(p) => terminal_progress(&p),
    })
}

/// A sink that keeps each event in the session's record before passing it on.
fn recording(prefs: &SharedPrefs, f: Sink) -> Sink {
    let rec = api::prefs(prefs).record;
    Arc::new(move |e: Event| {
        match rec.lock() {
            Ok(mut g) => g.push(&e),
            Err(p) => p.into_inner().push(&e),
        }
        f(e)
    })
}

fn send(sink: &Arc<RwLock<Sink>>, e: Event) {
    let f = match sink.read() {
        Ok(f) => f.clone(),
        Err(p) => p.into_inner().clone(),
    };
    f(e);
}

/// The richer forms of a value whose text is already known.
pub fn bundle_for(v: &Dynamic, text: String, prefs: &SharedPrefs) -> Bundle {
    let mut b = Bundle { text, ..Default::default() };
    if let Some(p) = v.clone().try_cast::<api::charts::Plot>() {
        b.svg = p.svg().ok();
        b.png = p.png().ok();
    } else if let Some(s) = v.clone().try_cast::<stagna::Steps>() {
        b.latex = Some(format!("$$\n{}\n$$", s.to_latex()));
        b.html = Some(api::steps::html(&s));
    } else if let Some(t) = v.clone().try_cast::<api::tables::Tbl>() {
        b.html = Some(api::table_view::html(&t, &api::prefs(prefs).table));
    } else if let Some(bud) = v.clone().try_cast::<api::uncertainty::Budget>() {
        b.html = Some(budget_html(&bud));
    } else if let Some(s) = v.clone().try_cast::<api::stack::Sheets>() {
        b.html = Some(stagna::methods::us_epa::run_sheet::to_html(&s.0));
    } else if let Some(q) = v.clone().try_cast::<api::Q>() {
        b.latex = Some(quantity_latex(&b.text, &q));
    }
    b
}

fn quantity_latex(text: &str, _q: &api::Q) -> String {
    let (num, unit) = text.split_once(' ').unwrap_or((text, ""));
    let unit = unit.replace('·', r"\cdot ").replace('%', r"\%");
    format!("$${num}\\ \\mathrm{{{unit}}}$$")
}

impl Session {
    /// A session with default limits.
    pub fn new() -> Self {
        Self::with_limits(Limits::default())
    }

    /// A session with the given limits.
    pub fn with_limits(limits: Limits) -> Self {
        let mut engine = Engine::new();
        engine.set_max_operations(limits.operations);
        // The engine's own size limits re-measure a whole array or map after every change
        // (quadratic growth): off, see `Limits`.
        engine.set_max_array_size(0);
        engine.set_max_string_size(0);
        engine.set_max_map_size(0);
        engine.set_max_call_levels(limits.call_levels);
        register_array_limits(&mut engine, limits.array_size);
        engine.set_max_expr_depths(128, 64);
        let interrupt = Arc::new(AtomicBool::new(false));
        let prefs: SharedPrefs = Arc::new(RwLock::new(Prefs {
            interrupt: interrupt.clone(),
            max_array: limits.array_size,
            ..Prefs::default()
        }));
        let mut catalog = Catalog::default();
        {
            let mut r = Registrar::new(&mut engine, &mut catalog);
            api::register_all(&mut r, &prefs);
            register_help(&mut r);
        }
        let catalog = Arc::new(catalog);
        let flag = interrupt.clone();
        let memory = limits.memory;
        engine.on_progress(move |_| {
            if flag.load(Ordering::Relaxed) {
                Some(Dynamic::from("interrupted"))
            } else if memory > 0 && memory_in_use() > memory {
                Some(Dynamic::from(MEMORY_TOKEN))
            } else {
                None
            }
        });
        let sink: Arc<RwLock<Sink>> = Arc::new(RwLock::new(recording(&prefs, stdout_sink())));
        let s1 = sink.clone();
        engine.on_print(move |s| send(&s1, Event::Stdout(s.to_string())));
        let s2 = sink.clone();
        engine.on_debug(move |s, _, pos| send(&s2, Event::Stderr(format!("[debug {pos}] {s}"))));
        let s3 = sink.clone();
        engine.register_fn("eprint", move |s: &str| send(&s3, Event::Stderr(s.to_string())));
        let s4 = sink.clone();
        engine.register_fn("clear_output", move || send(&s4, Event::ClearOutput));
        let s7 = sink.clone();
        let warn = api::WarnHook(Arc::new(move |s: &str| send(&s7, Event::Stderr(s.to_string()))));
        match prefs.write() {
            Ok(mut g) => g.warn = Some(warn),
            Err(e) => e.into_inner().warn = Some(warn),
        }
        let s6 = sink.clone();
        let ids = Arc::new(std::sync::atomic::AtomicU64::new(0));
        let start: api::ProgressStart = Arc::new(move |label: &str| {
            let id = ids.fetch_add(1, Ordering::Relaxed) + 1;
            let sink = s6.clone();
            let label = label.to_string();
            // (last report, whether one was sent); reports at most every 200 ms, and the last.
            let state = std::sync::Mutex::new((std::time::Instant::now(), false));
            stagna::progress::Progress::new(move |done, total| {
                let mut st = match state.lock() {
                    Ok(g) => g,
                    Err(e) => e.into_inner(),
                };
                let first = !st.1;
                if !first && done < total && st.0.elapsed() < std::time::Duration::from_millis(200) {
                    return;
                }
                *st = (std::time::Instant::now(), true);
                send(&sink, Event::Progress(ProgressEvent { id, label: label.clone(), done, total, first }));
            })
        });
        match prefs.write() {
            Ok(mut g) => g.progress = Some(api::ProgressHook(start)),
            Err(e) => e.into_inner().progress = Some(api::ProgressHook(start)),
        }
        let s5 = sink.clone();
        let p5 = prefs.clone();
        engine.register_fn(
            "display",
            move |ctx: rhai::NativeCallContext, v: Dynamic| -> Result<(), Box<EvalAltResult>> {
                let text = if v.is_string() || v.is_int() || v.is_float() || v.is_bool() {
                    v.to_string()
                } else {
                    ctx.call_fn::<String>("to_string", (v.clone(),)).unwrap_or_else(|_| format!("{v:?}"))
                };
                send(&s5, Event::Display(bundle_for(&v, text, &p5)));
                Ok(())
            },
        );
        let input: Arc<RwLock<Option<InputHook>>> = Arc::new(RwLock::new(None));
        let i1 = input.clone();
        engine.register_fn("input", move |prompt: &str| -> Result<String, Box<EvalAltResult>> {
            let hook = match i1.read() {
                Ok(h) => h.clone(),
                Err(p) => p.into_inner().clone(),
            };
            match hook {
                Some(h) => h(prompt, false).map_err(api::rt),
                None => Err(api::rt("input(): this front end cannot ask for input (use --set in batch runs)")),
            }
        });
        let help_catalog = catalog.clone();
        engine.register_fn("help", move |name: &str| -> String { help_text(&help_catalog, name) });
        Session {
            engine,
            scope: Scope::new(),
            functions: AST::empty(),
            catalog,
            prefs,
            interrupt,
            sink,
            input,
            limits,
            compiled: None,
        }
    }

    /// Where `print` and `display` go (as text); `eprint` still goes to standard error.
    pub fn set_output(&self, f: impl Fn(&str) + Send + Sync + 'static) {
        self.set_events(move |e| match e {
            Event::Stdout(s) => f(&s),
            Event::Display(b) => f(&b.text),
            Event::Stderr(s) => eprintln!("{s}"),
            // Captured output (the batch runner, which runs files on parallel sessions
            // and shows its own bar per file): no bar per computation.
            Event::ClearOutput | Event::Progress(_) => {}
        });
    }

    /// Where every output event goes (the Jupyter kernel). The session's record (its
    /// report) sees every event first.
    pub fn set_events(&self, f: impl Fn(Event) + Send + Sync + 'static) {
        let f = recording(&self.prefs, Arc::new(f));
        match self.sink.write() {
            Ok(mut s) => *s = f,
            Err(p) => *p.into_inner() = f,
        }
    }

    /// Writes the session's report (everything shown so far) as one HTML page.
    pub fn report_html(&self, title: &str, script: Option<&str>) -> String {
        // Rendered under the lock: the record (up to 64 MB) is not copied.
        let rec = api::prefs(&self.prefs).record;
        let guard = match rec.lock() {
            Ok(g) => g,
            Err(e) => e.into_inner(),
        };
        crate::report::html(&guard, title, script)
    }

    /// How `input(prompt)` is answered; none by default (an error in scripts).
    #[cfg_attr(not(test), allow(dead_code))]
    pub fn set_input(&self, f: Option<InputHook>) {
        match self.input.write() {
            Ok(mut s) => *s = f,
            Err(p) => *p.into_inner() = f,
        }
    }

    /// The catalog.
    pub fn catalog(&self) -> &Catalog {
        &self.catalog
    }

    /// Session settings (display units, output folder, protected files, data folder).
    pub fn prefs(&self) -> SharedPrefs {
        self.prefs.clone()
    }

    /// A flag that stops the running input when set (cleared at the start of each input).
    #[cfg_attr(not(test), allow(dead_code))] // for front ends that interrupt from another thread
    pub fn interrupt_flag(&self) -> Arc<AtomicBool> {
        self.interrupt.clone()
    }

    /// Starts over as a new session would, keeping the engine and its catalog (built once,
    /// about 4 ms): no variables or script functions, default display settings, an empty
    /// record, the interrupt flag clear. The batch runner reuses one session per worker
    /// thread this way; the output sink and limits stay as set.
    pub fn start_over(&mut self) {
        self.scope = Scope::new();
        self.functions = AST::empty();
        self.interrupt.store(false, Ordering::Relaxed);
        let mut p = match self.prefs.write() {
            Ok(g) => g,
            Err(e) => e.into_inner(),
        };
        match p.record.lock() {
            Ok(mut r) => *r = Default::default(),
            Err(e) => *e.into_inner() = Default::default(),
        }
        let fresh = Prefs {
            interrupt: p.interrupt.clone(),
            max_array: p.max_array,
            progress: p.progress.clone(),
            warn: p.warn.clone(),
            record: p.record.clone(),
            ..Prefs::default()
        };
        *p = fresh;
    }

    /// Sets a variable in the scope (batch runner `--set`, `input`).
    pub fn set_var(&mut self, name: &str, value: Dynamic) {
        self.scope.set_or_push(name.to_string(), value);
    }

    /// Evaluates one input; variables and functions persist into the next.
    pub fn eval(&mut self, src: &str) -> Result<Outcome, ScriptError> {
        self.interrupt.store(false, Ordering::Relaxed);
        let ast = self.engine.compile_with_scope(&self.scope, src).map_err(|e| self.parse_error(&e))?;
        self.run_ast(ast)
    }

    /// As [`Session::eval`], compiling `src` once for every call with the same text: the
    /// batch runner runs one script over many inputs, each after [`Session::start_over`],
    /// whose scope holds the same variables (none constant, so the compiled form does not
    /// depend on their values).
    pub fn eval_same_script(&mut self, src: &str) -> Result<Outcome, ScriptError> {
        self.interrupt.store(false, Ordering::Relaxed);
        let ast = match &self.compiled {
            Some((text, ast)) if text == src => ast.clone(),
            _ => {
                let ast = self.engine.compile_with_scope(&self.scope, src).map_err(|e| self.parse_error(&e))?;
                self.compiled = Some((src.to_string(), ast.clone()));
                ast
            }
        };
        self.run_ast(ast)
    }

    fn run_ast(&mut self, ast: AST) -> Result<Outcome, ScriptError> {
        let fns = ast.clone_functions_only();
        let runnable = self.functions.merge(&ast);
        let engine = &self.engine;
        let scope = &mut self.scope;
        let result = catch_unwind(AssertUnwindSafe(|| engine.eval_ast_with_scope::<Dynamic>(scope, &runnable)));
        forget_shadowed(&mut self.scope);
        let value = match result {
            Ok(Ok(v)) => v,
            Ok(Err(e)) => return Err(self.runtime_error(&e)),
            Err(panic) => {
                let msg = panic
                    .downcast_ref::<String>()
                    .cloned()
                    .or_else(|| panic.downcast_ref::<&str>().map(|s| s.to_string()))
                    .unwrap_or_else(|| "unknown".into());
                return Err(ScriptError {
                    kind: "InternalError".into(),
                    message: format!("internal error in a host function: {msg}"),
                    position: None,
                    hint: Some("this is a bug in stagna; the session carries on with its variables intact".into()),
                });
            }
        };
        self.functions = self.functions.merge(&fns);
        let value = self.render(&value);
        if let Some(b) = &value {
            let rec = api::prefs(&self.prefs).record;
            match rec.lock() {
                Ok(mut g) => g.push_value(b),
                Err(e) => e.into_inner().push_value(b),
            }
        }
        Ok(Outcome { value })
    }

    /// Renders a value as a MIME bundle; `None` for unit.
    pub fn render(&self, v: &Dynamic) -> Option<Bundle> {
        if v.is_unit() {
            return None;
        }
        Some(bundle_for(v, self.display(v), &self.prefs))
    }

    /// A value as text, through its registered `to_string`.
    pub fn display(&self, v: &Dynamic) -> String {
        if let Some(x) = v.clone().try_cast::<f64>() {
            return api::float_text(x);
        }
        if v.is_string() || v.is_int() || v.is_bool() || v.is_char() {
            return v.to_string();
        }
        let mut scope = Scope::new();
        scope.push("__v", v.clone());
        match self.engine.eval_with_scope::<String>(&mut scope, "to_string(__v)") {
            Ok(s) if !s.is_empty() => s,
            _ => format!("{v:?}"),
        }
    }

    fn parse_error(&self, e: &ParseError) -> ScriptError {
        let mut err = ScriptError::new("SyntaxError", e.err_type().to_string());
        err.position = pos(e.position());
        err.hint = Some(match e.err_type() {
            rhai::ParseErrorType::MissingToken(t, _) => format!("add the missing '{t}'"),
            rhai::ParseErrorType::UnknownOperator(op) if op == "°" => "write temperatures as 20.degC".into(),
            _ => "check brackets, commas and semicolons near the caret".into(),
        });
        err
    }

    fn runtime_error(&self, e: &EvalAltResult) -> ScriptError {
        // Errors inside script functions: report the innermost cause at its position.
        let mut inner = e;
        while let EvalAltResult::ErrorInFunctionCall(_, _, cause, _) = inner {
            inner = cause;
        }
        let position = pos(inner.position()).or_else(|| pos(e.position()));
        let (kind, message, hint) = match inner {
            EvalAltResult::ErrorRuntime(v, _) => {
                let msg = v.to_string();
                if msg == "interrupted" {
                    (
                        "Interrupted".to_string(),
                        "interrupted".to_string(),
                        Some("variables defined before the interrupt are kept".to_string()),
                    )
                } else {
                    let hint = hint_for(&msg);
                    // A message quoting a huge value (a 50 MB field) is cut in the middle.
                    ("StagnaError".to_string(), stagna::error::shorten(&msg, 2000), hint)
                }
            }
            EvalAltResult::ErrorTerminated(t, _) if t.to_string() == MEMORY_TOKEN => (
                "LimitExceeded".into(),
                format!(
                    "the session holds {} of memory, past its limit of {}",
                    show_bytes(memory_in_use()),
                    show_bytes(self.limits.memory)
                ),
                Some(
                    "free large variables (a re-run `let` replaces the old value), build big data as table columns, or raise --max-memory / STAGNA_MAX_MEMORY".into(),
                ),
            ),
            EvalAltResult::ErrorTerminated(_, _) => (
                "Interrupted".into(),
                "interrupted".into(),
                Some("variables defined before the interrupt are kept".into()),
            ),
            EvalAltResult::ErrorFunctionNotFound(sig, _) => {
                let name = sig.split(['(', ' ']).next().unwrap_or(sig).to_string();
                let similar = self.catalog.similar(&name);
                let hint = if self.catalog.lookup(&name).is_empty() {
                    if similar.is_empty() {
                        format!("no function '{name}'; `help(\"\")` lists them all")
                    } else {
                        format!("did you mean {}?", similar.join(", "))
                    }
                } else {
                    format!("'{name}' exists but not for these argument types; see help(\"{name}\")")
                };
                ("FunctionNotFound".into(), format!("no function {sig}"), Some(hint))
            }
            EvalAltResult::ErrorVariableNotFound(v, _) => {
                let names: Vec<String> = self.scope.iter().map(|(n, _, _)| n.to_string()).collect();
                let close: Vec<&String> = names.iter().filter(|n| crate::catalog::edit_distance(n, v) <= 2).collect();
                let hint = if close.is_empty() {
                    "define it with `let` first".to_string()
                } else {
                    format!("did you mean {}?", close.iter().map(|s| s.as_str()).collect::<Vec<_>>().join(", "))
                };
                ("NameError".into(), format!("unknown variable '{v}'"), Some(hint))
            }
            EvalAltResult::ErrorTooManyOperations(_) => (
                "LimitExceeded".into(),
                "the input ran past the operation limit (an endless loop?)".into(),
                Some("the limit is set with --max-operations; reductions over columns need no script loops".into()),
            ),
            EvalAltResult::ErrorDataTooLarge(what, _) => (
                "LimitExceeded".into(),
                format!("{what} grew past the session's limit"),
                Some("build big data as table columns, not script arrays or strings".into()),
            ),
            EvalAltResult::ErrorStackOverflow(_) => {
                ("LimitExceeded".into(), "calls nested too deeply (endless recursion?)".into(), None)
            }
            EvalAltResult::ErrorPropertyNotFound(p, _) => (
                "PropertyNotFound".into(),
                format!("no property '{p}' for this value"),
                Some("`help(\"Type\")` lists a type's properties and methods".into()),
            ),
            EvalAltResult::ErrorMismatchDataType(want, got, _)
            | EvalAltResult::ErrorMismatchOutputType(want, got, _) => {
                ("TypeError".into(), format!("expected {want}, got {got}"), None)
            }
            other => ("ScriptError".into(), other.to_string().split(" (line").next().unwrap_or("").to_string(), None),
        };
        // A number with an unknown unit suffix (`5.foo`): the engine reports a missing getter.
        if let Some(name) = unknown_suffix(&message) {
            let units: Vec<String> =
                self.catalog.entries().filter(|e| e.kind == Kind::Unit).map(|e| e.name.clone()).collect();
            let mut close: Vec<(usize, &String)> = units
                .iter()
                .map(|u| (crate::catalog::edit_distance(&u.to_lowercase(), &name.to_lowercase()), u))
                .filter(|(d, _)| *d <= 2)
                .collect();
            close.sort();
            let hint = match close.first() {
                Some(_) => format!(
                    "did you mean {}? `stagna units` lists every unit with its spelling on a number",
                    close.iter().take(3).map(|(_, u)| u.as_str()).collect::<Vec<_>>().join(", ")
                ),
                None => "`stagna units` lists every unit with its spelling on a number (e.g. 12.5.mm, 20.degC, 3.2.m3_s); `in` is a keyword: write 5.inch".into(),
            };
            return ScriptError {
                kind: "UnitError".into(),
                message: format!("unknown unit '{name}' on a number"),
                position,
                hint: Some(hint),
            };
        }
        ScriptError { kind, message, position, hint }
    }

    /// Whether `src` is a complete input: `Ok(true)` complete, `Ok(false)` needs more
    /// lines (an unclosed bracket or string), `Err` is invalid however it continues.
    pub fn is_complete(&self, src: &str) -> Result<bool, String> {
        let (depth, in_string) = bracket_depth(src);
        if depth < 0 {
            return Err("a closing bracket without an opening one".into());
        }
        if depth > 0 || in_string {
            return Ok(false);
        }
        Ok(true)
    }

    /// Completions at a byte position: (start of the replaced word, candidates).
    pub fn complete(&self, line: &str, pos: usize) -> (usize, Vec<String>) {
        let pos = char_boundary(line, pos);
        let before = &line[..pos];
        let start = after_last(before, |c| !(c.is_alphanumeric() || c == '_'));
        let word = &before[start..];
        let mut out: Vec<String> = Vec::new();
        if start > 0 && before[..start].ends_with('.') {
            let recv_end = start - 1;
            let recv_text = &before[..recv_end];
            let recv_start = after_last(recv_text, |c| !(c.is_alphanumeric() || c == '_' || c == '.'));
            let recv = &recv_text[recv_start..];
            let is_number = !recv.is_empty() && recv.chars().all(|c| c.is_ascii_digit() || c == '.' || c == '_');
            if is_number {
                out.extend(self.catalog.entries().filter(|e| e.kind == Kind::Unit).map(|e| e.name.clone()));
            } else if let Some(v) = self.scope.get(recv) {
                let t = self.engine.map_type_name(v.type_name()).to_string();
                out.extend(self.catalog.members_of(&t).map(|e| e.name.clone()));
                if t == "Quantity" || t == "i64" || t == "f64" {
                    out.extend(self.catalog.entries().filter(|e| e.kind == Kind::Unit).map(|e| e.name.clone()));
                }
            }
            if out.is_empty() {
                out.extend(
                    self.catalog
                        .entries()
                        .filter(|e| matches!(e.kind, Kind::Method | Kind::Property))
                        .map(|e| e.name.clone()),
                );
            }
        } else {
            out.extend(self.catalog.entries().filter(|e| e.kind == Kind::Function).map(|e| e.name.clone()));
            out.extend(self.scope.iter().map(|(n, _, _)| n.to_string()));
            out.extend(KEYWORDS.iter().map(|s| s.to_string()));
        }
        out.retain(|c| c.starts_with(word));
        out.sort();
        out.dedup();
        (start, out)
    }

    /// Help for the name under a byte position (for the kernel's inspection): the word
    /// around the cursor, `Type.method` paths included; `None` when there is no word or
    /// no help for it. Any position is accepted (clamped to the text, moved back to a
    /// character boundary).
    pub fn inspect(&self, code: &str, pos: usize) -> Option<String> {
        let is_word = |c: char| c.is_alphanumeric() || c == '_' || c == '.';
        let b = char_boundary(code, pos);
        let start = after_last(&code[..b], |c| !is_word(c));
        let end = code[b..].find(|c: char| !is_word(c)).map_or(code.len(), |i| b + i);
        let word = code[start..end].trim_matches('.');
        if word.is_empty() {
            return None;
        }
        let text = self.help(word);
        (!text.starts_with("no help for")).then_some(text)
    }

    /// Help for a name (function, Type.method, type name, variable) from the catalog.
    pub fn help(&self, name: &str) -> String {
        if let Some(v) = self.scope.get(name.trim()) {
            let t = self.engine.map_type_name(v.type_name()).to_string();
            return help_text(&self.catalog, &t);
        }
        help_text(&self.catalog, name)
    }
}

impl Default for Session {
    fn default() -> Self {
        Self::new()
    }
}

/// `pos` clamped to the text and moved back to the start of the character it falls in.
fn char_boundary(s: &str, pos: usize) -> usize {
    let mut p = pos.min(s.len());
    while !s.is_char_boundary(p) {
        p -= 1;
    }
    p
}

/// The byte just after the last character of `s` that matches `sep` (0 when none does):
/// where the word that ends `s` starts, whatever the width of the separator.
fn after_last(s: &str, sep: impl Fn(char) -> bool) -> usize {
    s.char_indices().rev().find(|(_, c)| sep(*c)).map_or(0, |(i, c)| i + c.len_utf8())
}

/// Drops the variables that a later `let` of the same name has shadowed: the engine
/// keeps every `let` as a new slot, so re-running a cell with `let t = read_csv(...)`
/// kept every earlier table alive. Only the newest value of each name stays; nothing
/// a script can still reach is lost (inputs are evaluated one at a time).
fn forget_shadowed(scope: &mut Scope<'static>) {
    let n = scope.len();
    let shadowed = {
        let mut seen = std::collections::HashSet::with_capacity(n);
        scope.iter_raw().filter(|(name, _, _)| !seen.insert(*name)).count()
    };
    if shadowed == 0 {
        return;
    }
    let old = std::mem::take(scope);
    let mut entries: Vec<(String, bool, Dynamic)> = Vec::with_capacity(n);
    let mut last: std::collections::HashMap<String, usize> = std::collections::HashMap::new();
    for (name, value, _) in old {
        let constant = value.is_read_only();
        match last.get(&name) {
            Some(&i) => entries[i] = (name, constant, value),
            None => {
                last.insert(name.clone(), entries.len());
                entries.push((name, constant, value));
            }
        }
    }
    for (name, constant, value) in entries {
        if constant {
            scope.push_constant_dynamic(name, value);
        } else {
            scope.push_dynamic(name, value);
        }
    }
}

/// The progress hook's token for a memory-limit stop.
const MEMORY_TOKEN: &str = "stagna: memory limit";

/// Bytes as MiB or GiB with three significant figures.
pub fn show_bytes(b: usize) -> String {
    let b = b as f64;
    if b >= (1u64 << 30) as f64 {
        format!("{:.3} GiB", b / (1u64 << 30) as f64)
    } else {
        format!("{:.1} MiB", b / (1u64 << 20) as f64)
    }
}

/// Array growth with a length check in constant time. These shadow the engine's own
/// array functions of the same names (functions registered on the engine are found
/// before its packages), so that the length limit holds without re-measuring. The
/// `+` and `+=` operators on arrays are the engine's built-ins (fast operators) and are
/// bounded by the memory limit only.
fn register_array_limits(engine: &mut Engine, max: usize) {
    use rhai::Array;
    fn over(max: usize, n: usize, what: &str) -> Result<(), Box<EvalAltResult>> {
        if n > max {
            return Err(api::rt(format!(
                "{what}: an array of {n} elements is past the session's limit of {max} (--max-array); build big data as table columns"
            )));
        }
        Ok(())
    }
    engine.register_fn("push", move |a: &mut Array, v: Dynamic| -> Result<(), Box<EvalAltResult>> {
        over(max, a.len() + 1, "push")?;
        a.push(v);
        Ok(())
    });
    engine.register_fn("append", move |a: &mut Array, b: Array| -> Result<(), Box<EvalAltResult>> {
        over(max, a.len() + b.len(), "append")?;
        a.extend(b);
        Ok(())
    });
    engine.register_fn("insert", move |a: &mut Array, i: i64, v: Dynamic| -> Result<(), Box<EvalAltResult>> {
        over(max, a.len() + 1, "insert")?;
        let n = a.len() as i64;
        let at = if i < 0 { (n + i).max(0) } else { i.min(n) } as usize;
        a.insert(at, v);
        Ok(())
    });
    engine.register_fn("pad", move |a: &mut Array, n: i64, v: Dynamic| -> Result<(), Box<EvalAltResult>> {
        let n = usize::try_from(n).unwrap_or(0);
        over(max, n, "pad")?;
        if n > a.len() {
            a.resize(n, v);
        }
        Ok(())
    });
}

/// The script language's keywords (for completion and highlighting).
pub const KEYWORDS: &[&str] = &[
    "let", "const", "fn", "if", "else", "for", "in", "while", "loop", "do", "until", "break", "continue", "return",
    "throw", "try", "catch", "true", "false", "switch", "import", "export", "as", "private", "this", "print",
];

fn pos(p: Position) -> Option<(usize, usize)> {
    p.line().map(|l| (l, p.position().unwrap_or(1)))
}

/// The suffix in the engine's message for `5.foo` (a getter missing on a number).
fn unknown_suffix(msg: &str) -> Option<String> {
    let rest = msg.strip_prefix("Unknown property '")?;
    let (name, tail) = rest.split_once('\'')?;
    (tail.contains("getter is not registered for type 'i64'")
        || tail.contains("getter is not registered for type 'f64'"))
    .then(|| name.to_string())
}

fn hint_for(msg: &str) -> Option<String> {
    let m = msg.to_lowercase();
    let h = if m.contains("with a unit, got the plain number") {
        return None; // the message already says what to write
    } else if m.starts_with("row ") {
        "fix or filter the row (t.filter(...)) and run again; nothing was written"
    } else if m.contains("dimension mismatch") || m.contains("different dimensions") || m.contains(" must be a ") {
        "check the argument's unit: e.g. 42.mm for a deflection, 20.degC for a temperature, 101.kPa for a pressure"
    } else if m.contains("has no unit; declare") {
        "declare units once after reading: t = t.units(#{column: \"mm\", ...})"
    } else if m.contains("no such column") || m.contains("is not in the table") {
        "t.columns lists the table's columns"
    } else if m.contains("unit '") {
        "`stagna units` lists every unit name; compounds like kg/m^3 or m3/h work in qty(\"...\")"
    } else {
        return None;
    };
    Some(h.to_string())
}

/// Net bracket depth and whether a string is left open (comments and strings skipped).
pub fn bracket_depth(src: &str) -> (i64, bool) {
    let mut depth = 0i64;
    let mut chars = src.chars().peekable();
    let mut in_str: Option<char> = None;
    while let Some(c) = chars.next() {
        if let Some(q) = in_str {
            if c == '\\' {
                chars.next();
            } else if c == q {
                in_str = None;
            }
            continue;
        }
        match c {
            '"' | '`' => in_str = Some(c),
            '/' if chars.peek() == Some(&'/') => {
                for d in chars.by_ref() {
                    if d == '\n' {
                        break;
                    }
                }
            }
            '/' if chars.peek() == Some(&'*') => {
                chars.next();
                let mut prev = ' ';
                for d in chars.by_ref() {
                    if prev == '*' && d == '/' {
                        break;
                    }
                    prev = d;
                }
            }
            '(' | '[' | '{' => depth += 1,
            ')' | ']' | '}' => depth -= 1,
            _ => {}
        }
    }
    (depth, in_str.is_some())
}

fn help_text(catalog: &Catalog, name: &str) -> String {
    let name = name.trim();
    if name.is_empty() {
        let mut groups: std::collections::BTreeMap<&str, Vec<String>> = Default::default();
        for e in catalog.entries().filter(|e| e.kind != Kind::Unit) {
            groups.entry(e.group.as_str()).or_default().push(e.qualified());
        }
        let mut s = String::from("Functions and methods (help(\"name\") for one; units: `stagna units`):\n");
        for (g, names) in groups {
            s.push_str(&format!("\n{g}:\n  {}\n", names.join(", ")));
        }
        return s;
    }
    let members: Vec<_> = catalog.members_of(name).collect();
    if !members.is_empty() {
        let mut s = format!("{name}: methods and properties\n");
        for e in members {
            s.push_str(&format!("  .{:<22} {}\n", e.name, e.summary));
        }
        return s;
    }
    let found = catalog.lookup(name);
    if found.is_empty() {
        let similar = catalog.similar(name);
        return if similar.is_empty() {
            format!("no help for '{name}'; help(\"\") lists every function")
        } else {
            format!("no help for '{name}'; did you mean {}?", similar.join(", "))
        };
    }
    found.iter().map(|e| format!("{}:\n{}", e.qualified(), e.help())).collect::<Vec<_>>().join("\n")
}

fn register_help(r: &mut Registrar<'_>) {
    use crate::catalog::Doc;
    r.group("Session");
    r.document(
        "display",
        &Doc::new(
            "display(value)",
            "Shows a value now (in a notebook: as a table, chart, formula or text) without ending the cell.",
        )
        .example("display(traverse_layout(round_section(1.m), #{points: 4}).chart());")
        .source("Jupyter messaging protocol 5.3, display_data"),
    );
    r.document(
        "eprint",
        &Doc::new("eprint(text)", "Writes a line to standard error (a notebook shows it as stderr).")
            .example("eprint(\"check the gauge zero\");")
            .source("common practice, no source"),
    );
    r.document(
        "clear_output",
        &Doc::new("clear_output()", "Clears the cell's output so far (notebooks; no effect in the terminal).")
            .example("clear_output();")
            .source("Jupyter messaging protocol 5.3, clear_output"),
    );
    r.document(
        "input",
        &Doc::new("input(prompt) -> string", "Asks the user for a line of text where the front end allows it (a notebook's input box); an error in batch runs.")
            .example("// let operator = input(\"operator initials: \");\nprint(\"input() asks the notebook user\");")
            .source("Jupyter messaging protocol 5.3, input_request"),
    );
    r.document(
        "help",
        &Doc::new("help(name) -> string", "Help on a function, a method (Type.method), a type (lists its methods and properties) or, with \"\", the list of everything.")
            .example("print(help(\"water\"));")
            .source("this catalog"),
    );
}

fn budget_html(b: &api::uncertainty::Budget) -> String {
    use api::table_view::esc;
    let html = b.g.to_html();
    let plain = format!("<p>{}</p>", esc(&b.g.result_line()));
    let with_unit = format!("<p>{}</p>", esc(&b.g.result_line_in(&b.unit)));
    format!("<p>output in {}</p>\n{}", esc(&b.unit), html.replace(&plain, &with_unit))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn eval(s: &mut Session, src: &str) -> String {
        match s.eval(src) {
            Ok(o) => o.value.map(|b| b.text).unwrap_or_default(),
            Err(e) => panic!("{src}\n{}", e.render("test", src, false)),
        }
    }

    fn err(s: &mut Session, src: &str) -> ScriptError {
        s.eval(src).expect_err(src)
    }

    /// Every function, method and property registered with the engine is in the catalog
    /// with a summary, an example and a source.
    #[test]
    fn every_script_function_is_documented() {
        let s = Session::new();
        let mut missing = Vec::new();
        for sig in s.engine.gen_fn_signatures(false) {
            let name = sig.split('(').next().unwrap_or("").trim();
            let name = name.strip_prefix("get$").unwrap_or(name);
            if name.is_empty() || !name.chars().next().is_some_and(|c| c.is_alphabetic() || c == '_') {
                continue; // operators
            }
            if matches!(name, "to_string" | "to_debug" | "print" | "debug") || name.starts_with("index$") {
                continue; // display hooks (numbers to ten figures) and the table indexer
            }
            if matches!(name, "push" | "append" | "insert" | "pad") {
                continue; // the language's own array functions, shadowed only for the length limit
            }
            match s.catalog().lookup(name).first() {
                Some(e) if !e.summary.is_empty() && !e.example.is_empty() && !e.source.is_empty() => {}
                _ => missing.push(sig),
            }
        }
        assert!(missing.is_empty(), "undocumented: {missing:#?}");
        for e in s.catalog().entries() {
            assert!(
                !e.summary.is_empty() && !e.example.is_empty() && !e.source.is_empty(),
                "incomplete doc: {}",
                e.qualified()
            );
        }
    }

    /// Every documented example runs (in a scratch folder holding the example workbook).
    #[test]
    fn every_catalog_example_runs() {
        let dir = std::env::temp_dir().join(format!("stagna-examples-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        std::fs::copy(
            concat!(env!("CARGO_MANIFEST_DIR"), "/../tests/data/site-readings.xlsx"),
            dir.join("site-readings.xlsx"),
        )
        .unwrap();
        let s = Session::new();
        let examples: Vec<(String, String)> =
            s.catalog().entries().map(|e| (e.qualified(), e.example.clone())).collect();
        let mut failed = Vec::new();
        for (name, ex) in examples {
            let mut one = Session::new();
            one.set_output(|_| {});
            one.prefs().write().unwrap().output_dir = Some(dir.clone());
            // Reads are relative to the working directory: point them at the scratch folder.
            let src = ex
                .replace("(\"readings.", &format!("(\"{}/readings.", dir.display()))
                .replace("(\"site.parquet\")", &format!("(\"{}/site.parquet\")", dir.display()))
                .replace("(\"site-readings.xlsx\"", &format!("(\"{}/site-readings.xlsx\"", dir.display()));
            if let Err(e) = one.eval(&src) {
                failed.push(format!("{name}: {}", e.render(&name, &src, false)));
            }
        }
        assert!(failed.is_empty(), "{} examples failed:\n{}", failed.len(), failed.join("\n\n"));
    }

    #[test]
    fn quantities_have_units_dimensions_and_conversions() {
        let mut s = Session::new();
        assert_eq!(eval(&mut s, "64.mm"), "64 mm");
        // Four significant figures by default, settable; the value keeps every digit.
        assert_eq!(eval(&mut s, "91.7.mm + 1.m"), "1092 mm");
        assert_eq!(eval(&mut s, "display_figures(6); 91.7.mm + 1.m"), "1091.7 mm");
        assert_eq!(eval(&mut s, "display_figures()"), "6");
        assert!(err(&mut s, "display_figures(0)").message.contains("1 to 15"));
        assert_eq!(eval(&mut s, "display_figures(4); (91.7.mm + 1.m).value_in(\"mm\")"), "1091.7");
        // 3 inH2O@60F = 3 × 248.84 Pa (NIST SP 811 B.8)
        assert_eq!(eval(&mut s, "qty(\"3 inH2O@60F\").to(\"Pa\")"), "746.5 Pa");
        assert_eq!(eval(&mut s, "20.degC.to(\"degF\")"), "68 °F"); // by definition of the scales
        assert_eq!(eval(&mut s, "1.2.kPa > 1000.Pa"), "true");
        let e = err(&mut s, "1.m + 2.Pa");
        assert!(e.message.contains("different dimensions"), "{e:?}");
        assert!(e.position.is_some());
        let e = err(&mut s, "water().density(101, 20.degC)");
        assert!(e.message.contains("write e.g. 101.Pa"), "{e:?}");
        eval(&mut s, "display_units(\"US\")");
        // √(2·50/1.2) = 9.12871 m/s = 29.9498 ft/s, shown as 29.95 (1 ft = 0.3048 m exactly, NIST SP 811 B.8)
        let v = eval(&mut s, "pitot_static(1.0).velocity(50.Pa, 1.2.kg_m3).velocity");
        assert_eq!(v, "29.95 ft/s");
        assert_eq!(eval(&mut s, "100.Pa"), "100 Pa", "an explicit unit is kept");
        // Per-dimension choices over the system, as test-and-balance practice reports air:
        // 2 m³/s = 4237.76 ft³/min and 5 m/s = 984.252 ft/min (1 ft = 0.3048 m exactly,
        // NIST SP 811 B.8); 2 m³/s = 7200 m³/h.
        eval(&mut s, "display_units(\"US\", [\"ft/min\", \"ft3/min\"])");
        assert_eq!(eval(&mut s, "2.m3_s * 1.m / 1.m"), "4238 ft³/min");
        assert_eq!(eval(&mut s, "10.m / 2.s"), "984.3 ft/min");
        // 1000 Pa / 248.84 Pa per inH₂O (60 °F) (NIST SP 811 B.8) = 4.01865, shown to four figures
        assert_eq!(
            eval(&mut s, "1000.Pa * 1.m / 1.m"),
            "4.019 inH₂O (60 °F)",
            "the system serves the other dimensions"
        );
        eval(&mut s, "display_units(\"SI\", [\"m3/h\"])");
        assert_eq!(eval(&mut s, "2.m3_s * 1.m / 1.m"), "7200 m³/h");
        assert_eq!(eval(&mut s, "10.m / 2.s"), "5 m/s", "a new system drops the earlier choices");
        let e = err(&mut s, "display_units([\"m3/h\", \"furlong\"])");
        assert!(e.message.contains("furlong"), "{e:?}");
        assert_eq!(eval(&mut s, "2.m3_s * 1.m / 1.m"), "7200 m³/h", "a refused list changes nothing");
        assert_eq!(eval(&mut s, "display_units().volume_flow_rate"), "m³/h");
    }

    #[test]
    fn variables_and_functions_persist_between_inputs() {
        let mut s = Session::new();
        eval(&mut s, "let d = 600.mm; fn area(x) { x * x * 0.25 * 3.14159265 }");
        // π·0.3² = 0.282743 m² (geometry)
        assert!((eval(&mut s, "area(d.si)").parse::<f64>().unwrap_or(0.0) - 0.282743).abs() < 1e-6);
        assert_eq!(eval(&mut s, "d"), "600 mm");
    }

    #[test]
    fn runaway_scripts_stop_and_the_session_carries_on() {
        let mut s = Session::with_limits(Limits { operations: 100_000, ..Limits::default() });
        eval(&mut s, "let kept = 1;");
        let e = err(&mut s, "loop { kept += 0; }");
        assert_eq!(e.kind, "LimitExceeded");
        let e = err(&mut s, "let a = []; for i in 0..20000000 { a.push(i); }");
        assert_eq!(e.kind, "LimitExceeded", "{e:?}");
        assert_eq!(eval(&mut s, "kept"), "1");
        // An interrupt from another thread stops a long input promptly.
        let mut s = Session::new();
        let flag = s.interrupt_flag();
        let t = std::thread::spawn(move || {
            std::thread::sleep(std::time::Duration::from_millis(200));
            flag.store(true, Ordering::Relaxed);
        });
        let e = err(&mut s, "let x = 0; loop { x += 1; }");
        t.join().unwrap();
        assert_eq!(e.kind, "Interrupted");
    }

    #[test]
    fn limits_hold_in_constant_time_per_operation() {
        // Regressions (issue 16): push was quadratic (400 k pushes took 143 s), a map grew
        // past its limit, .values() over 10 M rows failed in a way try/catch could not
        // catch, a layout of 10⁸ points allocated gigabytes.
        let mut s = Session::new();
        let t = std::time::Instant::now();
        assert_eq!(eval(&mut s, "let a = []; for i in 0..400000 { a.push(i); } a.len()"), "400000");
        // Generous for a debug build on a busy 2-core machine; the old cost was minutes.
        assert!(t.elapsed().as_secs_f64() < 20.0, "400 k pushes took {:?}", t.elapsed());
        let mut small = Session::with_limits(Limits { array_size: 1000, ..Limits::default() });
        let e = err(&mut small, "let a = []; for i in 0..2000 { a.push(i); }");
        assert!(e.message.contains("limit of 1000") && e.message.contains("--max-array"), "{e:?}");
        assert!(err(&mut small, "let a = []; a.pad(5000, 0);").message.contains("limit of 1000"));
        // Over the limit, .values() is an ordinary error that try/catch catches.
        let csv = std::env::temp_dir().join(format!("stagna-values-{}.csv", std::process::id()));
        std::fs::write(&csv, format!("v\n{}", "1.5\n".repeat(1500))).unwrap();
        let src = format!(
            "let t = read_csv(\"{}\"); let r = \"not caught\"; try {{ t[\"v\"].values(); }} catch (e) {{ r = e; }} r",
            csv.display()
        );
        let caught = eval(&mut small, &src);
        assert!(caught.contains("1500 rows") && caught.contains("--max-array"), "{caught}");
        std::fs::remove_file(&csv).unwrap();
        // A memory limit stops a map (or anything else) grown in a loop, whatever its kind.
        let mut tight = Session::with_limits(Limits { memory: memory_in_use() + (64 << 20), ..Limits::default() });
        let e = err(&mut tight, "let m = #{}; let i = 0; loop { m[`k${i}`] = \"a value of some length\"; i += 1; }");
        assert!(e.kind == "LimitExceeded" && e.message.contains("past its limit"), "{e:?}");
        assert!(e.hint.as_deref().is_some_and(|h| h.contains("--max-memory")), "{e:?}");
        // Bounded domain inputs are checked before allocating.
        let e = err(&mut s, "traverse_layout(round_section(1.m), #{points: 100000000})");
        assert!(e.message.contains("points per diameter") && e.message.contains("at most 200"), "{e:?}");
        let e = err(&mut s, "traverse_layout(rect_section(1.m, 0.5.m), #{columns: 0})");
        assert!(e.message.contains("columns") && e.message.contains("got 0"), "{e:?}");
    }

    #[test]
    fn text_constants_and_csv_layouts() {
        // Regressions (issue 16): lit("T1") was taken as a column name; decimal-comma
        // files had no way in; a long quoted value is cut in error messages.
        let mut s = Session::new();
        let v = eval(&mut s, "table_from(#{a: [1.0]}).with_column(\"site\", lit(\"T1\")).distinct(\"site\")");
        assert_eq!(v, "[\"T1\"]");
        let p = std::env::temp_dir().join(format!("stagna-eu-{}.csv", std::process::id()));
        std::fs::write(&p, "point;h\nA1;12,5\nA2;14,0\n").unwrap();
        let v = eval(
            &mut s,
            &format!(
                "read_csv(\"{}\", #{{separator: \";\", decimal_comma: true}}).unit(\"h\", \"mm\")[\"h\"].mean()",
                p.display()
            ),
        );
        assert!(v.starts_with("0.01325 m") || v.starts_with("13.25 mm"), "{v}");
        let e = err(&mut s, &format!("read_csv(\"{}\", #{{separator: \",\", decimal_comma: true}})", p.display()));
        assert!(e.message.contains("separator: \";\""), "{e:?}");
        let e = err(&mut s, &format!("read_csv(\"{}\")", p.display()));
        assert!(e.message.contains("line 1") && e.message.contains("semicolons"), "{e:?}");
        std::fs::remove_file(&p).unwrap();
        let e = err(&mut s, &format!("throw \"{}\"", "z".repeat(100_000)));
        assert!(e.message.len() < 3_000, "{}", e.message.len());
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig {
            cases: std::env::var("STAGNA_FUZZ_CASES").ok().and_then(|v| v.parse().ok()).unwrap_or(2_000),
            failure_persistence: None,
            ..Default::default()
        })]

        /// Fuzz target: every documented function and method called with arguments
        /// drawn from quantities, numbers, text, arrays, maps and domain objects. Each
        /// call returns a value or a script error; none may panic in a host function
        /// (which the session would report as an InternalError).
        #[test]
        fn fuzz_script_calls(f in 0usize..10_000, m in 0usize..10_000, args in proptest::collection::vec(0usize..ARGS.len(), 0..4), recv in 0usize..ARGS.len()) {
            FUZZ.with(|cell| {
                let mut guard = cell.borrow_mut();
                let (s, funcs, methods) = guard.get_or_insert_with(|| {
                    let s = Session::with_limits(Limits { operations: 200_000, array_size: 100_000, ..Limits::default() });
                    let skip = |n: &str| matches!(n, "write" | "save" | "input" | "monte_carlo" | "help");
                    let funcs: Vec<String> = s.catalog().entries().filter(|e| e.kind == Kind::Function && !skip(&e.name)).map(|e| e.name.clone()).collect();
                    let methods: Vec<String> = s.catalog().entries().filter(|e| matches!(e.kind, Kind::Method | Kind::Property) && !skip(&e.name)).map(|e| e.name.clone()).collect();
                    (s, funcs, methods)
                });
                let list: Vec<&str> = args.iter().map(|&i| ARGS[i]).collect();
                let call = format!("{}({})", funcs[f % funcs.len()], list.join(", "));
                let method = format!("({}).{}({})", ARGS[recv], methods[m % methods.len()], list.join(", "));
                let prop = format!("({}).{}", ARGS[recv], methods[m % methods.len()]);
                for src in [call, method, prop] {
                    if let Err(e) = s.eval(&src) {
                        assert_ne!(e.kind, "InternalError", "{src}: {}", e.message);
                    }
                }
            });
        }
    }

    /// The fuzz target's session with the function and method names it calls.
    type FuzzState = Option<(Session, Vec<String>, Vec<String>)>;

    thread_local! {
        static FUZZ: std::cell::RefCell<FuzzState> = const { std::cell::RefCell::new(None) };
    }

    /// Arguments for the script-call fuzz target.
    const ARGS: &[&str] = &[
        "0",
        "-1",
        "2.5",
        "1e308",
        "-1e-308",
        "\"\"",
        "\"x\"",
        "\"equal-area\"",
        "true",
        "()",
        "[]",
        "[1.0, 2.0]",
        "[100.Pa, -5.Pa]",
        "#{}",
        "#{points: 4}",
        "#{columns: 3, rows: 3}",
        "20.degC",
        "-300.degC",
        "5.delta_K",
        "5.mm",
        "-5.mm",
        "0.m",
        "1.m",
        "100.Pa",
        "0.Pa",
        "1.2.kg_m3",
        "2.m_s",
        "28.g_mol",
        "45.percent",
        "water()",
        "dry_air()",
        "humid_air(0.5)",
        "gauge_mercury()",
        "gauge_water()",
        "u_tube(gauge_mercury())",
        "pitot_static(0.99)",
        "s_type(0.84)",
        "round_section(1.m)",
        "rect_section(1.m, 0.5.m)",
        "power_law(7)",
        "water().state(101.kPa, 20.degC)",
        "table_from(#{a: [1.0, 2.0]})",
        "table_from(#{a: [1.0, 2.0]}).unit(\"a\", \"mm\")[\"a\"]",
        "col(\"a\")",
        "traverse_layout(round_section(1.m), #{points: 4})",
    ];

    #[test]
    fn a_ten_thousand_cell_soak_holds_flat_memory() {
        // Regression (issue 16): 2 000 ordinary cells grew the kernel by ~1.4 MiB per
        // 1 000; re-running `let` kept every earlier value.
        let mut s = Session::new();
        let cells = [
            "let t = table_from(#{h: [12.5, 14.0, 13.2]}).unit(\"h\", \"mm\");",
            "let v = pitot_static(0.99).velocity(120.Pa, 1.2.kg_m3);",
            "let m = t[\"h\"].mean();",
            "let x = 6 * 7;",
            "fn twice(a) { a * 2 }",
            "let y = twice(x);",
            "let w = water().state(350.kPa, 11.degC);",
            "v.velocity",
        ];
        let mut run = |n: usize| {
            for i in 0..n {
                let _ = s.eval(cells[i % cells.len()]);
            }
        };
        run(1_000);
        let before = memory_in_use();
        run(9_000);
        let grown = memory_in_use() as i64 - before as i64;
        assert!(grown < (512 << 10), "9 000 cells after a warm-up grew memory by {grown} bytes");
    }

    #[test]
    fn units_travel_with_csv_and_parquet_files() {
        // Issue 15: units written with a table come back when it is read (Parquet
        // key-value metadata, CSV sidecar); a different declaration wins with a warning.
        let mut s = Session::new();
        let dir = std::env::temp_dir().join(format!("stagna-units-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        for ext in ["csv", "parquet", "xlsx"] {
            let p = dir.join(format!("readings.{ext}"));
            eval(
                &mut s,
                &format!(
                    "table_from(#{{h: [12.5, 14.0], t: [20.0, 21.0]}}).units(#{{h: \"mm\", t: \"degC\"}}).write(\"{}\");",
                    p.display()
                ),
            );
            let v = eval(&mut s, &format!("let back = read_table(\"{}\"); back[\"h\"].to(\"mm\").mean()", p.display()));
            assert!(v.starts_with("13.25 mm"), "{ext}: {v}");
            assert!(eval(&mut s, "back[\"t\"].mean()").starts_with("20.5 °C"), "{ext}");
            // An explicit declaration still wins.
            let v = eval(&mut s, "back.unit(\"h\", \"in\")[\"h\"].to(\"in\").mean()");
            assert!(v.starts_with("13.25 in"), "{ext}: {v}");
        }
        assert!(dir.join("readings.csv.units.csv").is_file());
        assert!(!dir.join("readings.parquet.units.csv").exists(), "Parquet keeps its units inside");
        std::fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn set_up_files_load_save_and_name_their_records() {
        // Issue 15: instruments, sites and campaigns from a set-up file; saved as TOML and
        // JSON and read back the same; the record is named in worked steps and budgets.
        let mut s = Session::new();
        let dir = std::env::temp_dir().join(format!("stagna-setup-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        eval(&mut s, "let s = demo_setup(\"pretendbury-ahu2\");");
        for ext in ["setup.toml", "json"] {
            let p = dir.join(format!("ahu2.{ext}"));
            eval(&mut s, &format!("s.save(\"{}\"); let back = load_setup(\"{}\");", p.display(), p.display()));
            assert_eq!(eval(&mut s, "back.ids.transducers"), "[\"DPT-1\"]", "{ext}");
            assert!(eval(&mut s, "back.probe(\"PS-12\")").contains("C = 0.998"), "{ext}");
        }
        let steps = eval(&mut s, "s.probe(\"PS-12\").velocity(118.Pa, 1.2.kg_m3).steps()");
        assert!(steps.contains("set-up pretendbury-ahu2.setup.toml, probe 'PS-12'"), "{steps}");
        // 0.998·√(2·118/1.2) = 13.9957 m/s (ISO 3966 velocity equation, hand calculation)
        assert!(steps.contains("13.9957 m/s"), "{steps}");
        // Mean of the measured diameters 600.5 and 599.5 mm = 600 mm: A = π·0.3² = 0.282743 m².
        assert!(eval(&mut s, "s.section(\"ahu2-supply\")").contains("A = 0.2827 m²"));
        // The campaign's spec reduces a traverse with the file's probe and gauge.
        let t = "table_from(#{tr: [\"T1\",\"T1\",\"T1\",\"T1\"], h: [20.0, 30.0, 30.0, 20.0], t: [20.0, 20.0, 20.0, 20.0], d: [600.0, 600.0, 600.0, 600.0]}).units(#{h: \"mm\", t: \"degC\", d: \"mm\"})";
        let v = eval(
            &mut s,
            &format!(
                "reduce_campaign({t}, s.campaign(\"monthly-traverse\") + #{{fluid: dry_air(), static_pressure: 101.kPa, columns: #{{traverse: \"tr\", deflection: \"h\", fluid_temperature: \"t\", size: \"d\"}}}}).traverses.height"
            ),
        );
        assert_eq!(v, "1");
        // The transducer's calibration is the Δp term of a budget, named as its source.
        let src = eval(
            &mut s,
            "let tx = s.transducer(\"DPT-1\"); let b = traverse_budget(tx.dp([98.0, 112.0, 118.0, 101.0]), #{coefficient: 0.998, u_coefficient: s.probe_u(\"PS-12\"), density: 1.19.kg_m3, u_density: 0.0018.kg_m3, diameter: 600.mm, u_diameter: 0.9.mm, transducer: tx}); b.table().filter(col(\"input\") == \"Δp point 1\").texts(\"source\")[0]",
        );
        assert!(src.contains("transducer DPT-1 calibration of 2026-09-22"), "{src}");
        let u = eval(&mut s, "b.table().filter(col(\"input\") == \"Δp point 1\")[\"u\"].mean()");
        let expect = eval(&mut s, "tx.u_reading(tx.dp(98.0)).value");
        assert!(u.starts_with(&expect[..5]), "{u} vs {expect}");
        let e = err(&mut s, "s.probe(\"PS-99\")");
        assert!(e.message.contains("no probe 'PS-99'") && e.message.contains("PS-12"), "{e:?}");
        std::fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn deep_data_and_shadowed_values_are_safe() {
        // Regressions (issue 16): arrays nested 5 000 deep overflowed the stack when dropped
        // or shown (the front ends run sessions on threads with big stacks; tests get a
        // thread of the same size here), and re-running `let x = ...` kept every old value.
        let t = std::thread::Builder::new()
            .stack_size(512 << 20)
            .spawn(|| {
                let mut s = Session::new();
                let v = eval(&mut s, "let a = []; for i in 0..5000 { a = [a]; } a.len()");
                assert_eq!(v, "1");
                let shown = s.eval("a").unwrap().value.unwrap().text;
                assert!(shown.starts_with("[[[[") && shown.len() >= 10_000);
                eval(&mut s, "a = ();");
                let before = memory_in_use();
                for _ in 0..10 {
                    eval(&mut s, "let x = table_from(#{v: [0.5]}); let big = []; big.pad(200000, 1.5);");
                }
                let grown = memory_in_use().saturating_sub(before);
                let names: Vec<String> = s.scope.iter().map(|(n, _, _)| n.to_string()).collect();
                assert_eq!(names.iter().filter(|n| *n == "big").count(), 1, "{names:?}");
                // One 200 000-element array is ~3.2 MB of values; ten kept would be 32 MB.
                assert!(grown < 16 << 20, "ten re-runs grew memory by {grown} bytes");
            })
            .unwrap();
        t.join().unwrap();
    }

    #[test]
    fn an_interrupt_stops_a_long_monte_carlo_run() {
        // Regression (issue 16): an interrupt waited for a 5·10⁷-trial run (~10 s).
        let mut s = Session::new();
        eval(
            &mut s,
            "let b = traverse_budget([100.Pa, 110.Pa, 105.Pa, 98.Pa], #{coefficient: 1.0, u_coefficient: 0.005, density: 1.2.kg_m3, u_density: 0.002.kg_m3, diameter: 500.mm, u_diameter: 1.mm});",
        );
        let flag = s.interrupt_flag();
        let t = std::thread::spawn(move || {
            std::thread::sleep(std::time::Duration::from_millis(300));
            flag.store(true, Ordering::Relaxed);
        });
        let started = std::time::Instant::now();
        let e = err(&mut s, "b.monte_carlo(50000000)");
        t.join().unwrap();
        assert_eq!(e.kind, "Interrupted", "{e:?}");
        assert!(started.elapsed().as_secs_f64() < 5.0, "took {:?}", started.elapsed());
    }

    #[test]
    fn a_panic_in_a_host_function_becomes_an_error_and_the_session_carries_on() {
        let mut s = Session::new();
        s.engine.register_fn("host_bug", || -> i64 { panic!("deliberate test panic") });
        eval(&mut s, "let kept = 5;");
        let e = err(&mut s, "host_bug()");
        assert_eq!(e.kind, "InternalError");
        assert!(e.message.contains("deliberate test panic"), "{e:?}");
        assert_eq!(eval(&mut s, "kept"), "5");
    }

    #[test]
    fn errors_name_the_column_and_suggest_names() {
        let mut s = Session::new();
        eval(&mut s, "let t = table_from(#{h: [1.0, 2.0]});");
        let e = err(&mut s, "t[\"hh\"]");
        assert!(e.message.contains("'hh'") && e.message.contains("has: h"), "{e:?}");
        let e = err(&mut s, "wter()");
        assert!(e.hint.as_deref().unwrap_or("").contains("water"), "{e:?}");
        // Negative deflections give reverse (negative) velocities, not NaN.
        let v = eval(
            &mut s,
            "let t2 = table_from(#{h: [1.0, -2.0]}).unit(\"h\", \"mm\");\npitot_static(1.0).velocity(u_tube(gauge_water()).dp(t2[\"h\"], 20.degC, 1.2.kg_m3), 1.2.kg_m3).values()",
        );
        assert!(v.contains(", -5.7"), "{v}");
    }

    #[test]
    fn negative_and_nan_deflections_are_named_by_row() {
        let mut s = Session::new();
        eval(&mut s, "let t = table_from(#{h: [1.0, 2.0, 0.0]}).unit(\"h\", \"mm\");");
        let r = s.eval("let bad = t.with_column(\"h\", col(\"h\") / col(\"h\")); bad[\"h\"]");
        assert!(r.is_ok());
        // Row 3 is 0/0 (NaN): a column division by a scalar zero is refused where it
        // happens (issue 16), so the NaN comes from a polars expression here.
        let e = err(&mut s, "u_tube(gauge_water()).dp(bad[\"h\"] * 1.mm, 20.degC, 1.2.kg_m3)");
        assert!(e.message.contains("row 3"), "{e:?}");
    }

    #[test]
    fn completion_reads_the_catalog_and_the_scope() {
        let mut s = Session::new();
        eval(&mut s, "let probe = pitot_static(0.99);");
        let (start, c) = s.complete("probe.vel", 9);
        assert_eq!(start, 6);
        assert!(c.contains(&"velocity".to_string()), "{c:?}");
        let (_, c) = s.complete("let d = 64.m", 12);
        assert!(c.contains(&"mm".to_string()) && c.contains(&"m_s".to_string()), "{c:?}");
        let (_, c) = s.complete("humid_", 6);
        assert!(c.contains(&"humid_air".to_string()), "{c:?}");
        let (_, c) = s.complete("pro", 3);
        assert!(c.contains(&"probe".to_string()), "{c:?}");
        assert!(s.help("water").contains("IAPWS"));
        assert!(s.help("Probe").contains(".velocity"));
        assert!(s.help("probe").contains(".velocity"), "help on a variable shows its type");
    }

    #[test]
    fn cursors_beside_multi_byte_characters_never_panic() {
        // Regression (issue 16): a cursor after a non-word character of more than one
        // byte (`°`, `·`, `×`, `≥`) panicked the kernel's evaluation thread.
        let mut s = Session::new();
        eval(&mut s, "let probe = pitot_static(0.99);");
        for code in ["let t = 20°", "a·b", "2×probe.velocity", "x ≥ 3", "°", "×probe", "≥water"] {
            for pos in 0..=code.len() + 2 {
                let _ = s.complete(code, pos);
                let _ = s.inspect(code, pos);
            }
        }
        assert!(s.inspect("×water", "×water".len()).is_some_and(|h| h.contains("IAPWS")));
        let (start, c) = s.complete("2×probe.vel", "2×probe.vel".len());
        assert_eq!(start, "2×probe.".len());
        assert!(c.contains(&"velocity".to_string()), "{c:?}");
        assert_eq!(s.inspect("let t = 20°", "let t = 20°".len()), None);
    }

    #[test]
    fn non_finite_results_and_plain_integers_get_clear_errors() {
        // Regressions (issue 16): these printed inf, wrapped dimensions around, gave
        // NaN, or fell through to the engine's "no function +".
        let mut s = Session::new();
        for (src, want) in [
            ("qty(\"1e400 Pa\")", "too large"),
            ("1.m / 0", "not a finite number"),
            ("1.m / 0.m", "not a finite number"),
            ("1 / 0.m", "not a finite number"),
            ("qty(\"1 m^100*m^100\")", "±127"),
            ("((1.m**8)**8)**2", "±127"),
            ("1.m + 5", "cannot add a plain number (5)"),
            ("5 + 1.m", "cannot add a plain number (5)"),
            ("1.m - 5", "cannot subtract a plain number (5)"),
            ("2.5 - 1.m", "cannot subtract a plain number (2.5)"),
        ] {
            let e = err(&mut s, src);
            assert!(e.message.contains(want), "{src}: {}", e.message);
        }
        assert!(err(&mut s, "1.m + 5").message.contains("5.m"), "the hint shows the literal to write");
        eval(&mut s, "let one = table_from(#{v: [1.5]}).unit(\"v\", \"m/s\");");
        let e = err(&mut s, "one[\"v\"].std()");
        assert!(e.message.contains("at least 2 values"), "{}", e.message);
        eval(
            &mut s,
            "let gap = table_from(#{v: [1.0, 2.0, 4.0]}).with_column(\"v\", col(\"v\") / (col(\"v\") - 2.0) * 0.0).unit(\"v\", \"m/s\");",
        );
        let e = err(&mut s, "gap[\"v\"].mean()");
        assert!(e.message.contains("row 2") && e.message.contains("drop_missing"), "{}", e.message);
        let m = s.eval("gap[\"v\"].drop_missing().mean()").unwrap().value.unwrap().text;
        assert!(m.starts_with("0 m/s"), "{m}");
        let e = err(&mut s, "one[\"v\"] / 0.0");
        assert!(e.message.contains("row 1") && e.message.contains("'v' / 0"), "{}", e.message);
    }

    #[test]
    fn completeness_for_multi_line_input() {
        let s = Session::new();
        assert_eq!(s.is_complete("let a = [1,"), Ok(false));
        assert_eq!(s.is_complete("let a = \"(\";"), Ok(true));
        assert_eq!(s.is_complete("fn f() {\n  1\n}"), Ok(true));
        assert!(s.is_complete("1)").is_err());
    }

    /// Renamed options and properties keep working for one release and warn once each;
    /// renamed result columns name their new name.
    #[test]
    fn deprecated_names_keep_working_and_warn_once() {
        let mut s = Session::new();
        let lines = Arc::new(std::sync::Mutex::new(Vec::<String>::new()));
        let sink = lines.clone();
        s.set_events(move |e| {
            if let Event::Stderr(x) = e {
                sink.lock().map(|mut v| v.push(x)).unwrap_or(());
            }
        });
        let new = "traverse_budget([100.Pa, 110.Pa, 105.Pa, 98.Pa], #{coefficient: 1.0, u_coefficient: 0.005, density: 1.2.kg_m3, u_density: 0.002.kg_m3, diameter: 500.mm, u_diameter: 1.mm, u_rel_dp: 0.01, u_dp: 0.2.Pa})";
        let old = new.replace("u_rel_dp", "dp_rel").replace("u_dp", "dp_abs");
        let a = eval(&mut s, &format!("{new}.U"));
        let b = eval(&mut s, &format!("let b = {old}; b.expanded"));
        assert_eq!(a, b, "the old spellings give the same result");
        eval(&mut s, &format!("{old}.expanded"));
        let got = lines.lock().map(|v| v.clone()).unwrap_or_default();
        let warnings: Vec<&String> = got.iter().filter(|l| l.starts_with("warning:")).collect();
        assert_eq!(warnings.len(), 3, "dp_rel, dp_abs and .expanded, once each: {got:?}");
        assert!(
            warnings.iter().any(|w| w.contains("'dp_rel' is deprecated") && w.contains("write 'u_rel_dp'")),
            "{got:?}"
        );
        assert!(
            warnings.iter().any(|w| w.contains("budget.expanded is deprecated") && w.contains("budget.U")),
            "{got:?}"
        );
        // Renamed functions and methods: same results, one warning each.
        assert_eq!(eval(&mut s, "round_duct(600.mm).area"), eval(&mut s, "round_section(600.mm).area"));
        eval(&mut s, "round_duct(500.mm); rect_duct(1.m, 2.m); humid_air_dew_point(9.degC)");
        eval(&mut s, "table_from(#{dp: [100.0, 121.0]}).unit(\"dp\", \"Pa\")[\"dp\"].sqrt_mean(\"Pa\")");
        eval(
            &mut s,
            "table_from(#{a: [1.0]}).height + traverse_layout(round_section(1.m), #{points: 4}).count; mercury(); u_tube(gauge_water()).at(52.0, 10.m)",
        );
        assert_eq!(
            eval(&mut s, "table_from(#{a: [1.0, 2.0]}).len + traverse_layout(round_section(1.m), #{points: 4}).len"),
            "10"
        );
        let got = lines.lock().map(|v| v.clone()).unwrap_or_default();
        for name in
            ["round_duct", "rect_duct", "humid_air_dew_point", "column.sqrt_mean", "table.height", "layout.count"]
        {
            assert_eq!(
                got.iter().filter(|l| l.contains(&format!("{name} is deprecated"))).count(),
                1,
                "{name}: {got:?}"
            );
        }
        let e = err(&mut s, "table_from(#{u_flow_m3_s: [1.0]})[\"expanded_flow_m3_s\"]");
        assert!(e.message.contains("was renamed 'U_flow_m3_s'"), "{}", e.message);
    }

    /// Every unit `stagna units` lists is written after a number as the table says, and
    /// means that unit.
    #[test]
    fn every_listed_unit_has_a_number_spelling() {
        let mut s = Session::new();
        for u in stagna::units::unit::UNITS {
            let spellings = crate::api::quantities::number_spellings(u.names);
            if u.names == ["1"] {
                continue;
            }
            assert!(!spellings.is_empty(), "{:?} has no spelling on a number", u.names);
            for sp in spellings {
                let v = eval(&mut s, &format!("(2.{sp}).si"));
                let want = stagna::Quantity::parse(&format!("2 {}", u.names[0])).map(|q| q.si).unwrap_or(f64::NAN);
                let got: f64 = v.parse().unwrap_or(f64::NAN);
                // Printed to ten significant figures (`float_text`).
                assert!((got - want).abs() <= 1e-9 * want.abs().max(1.0), "2.{sp}: {got} vs {want}");
            }
        }
    }

    #[test]
    fn values_render_as_mime_bundles() {
        let mut s = Session::new();
        let o = s.eval("traverse_layout(round_section(1.m), #{points: 4}).chart()").unwrap();
        assert!(o.value.unwrap().svg.unwrap().starts_with("<svg"));
        let o = s.eval("table_from(#{h: [1.0]}).unit(\"h\", \"mm\")").unwrap();
        assert!(
            o.value
                .unwrap()
                .html
                .unwrap()
                .contains("<th style=\"text-align:right\">h<br><span class=\"unit\">[mm]</span></th>")
        );
        let o = s.eval("pitot_static(1.0).velocity(50.Pa, 1.2.kg_m3).steps()").unwrap();
        assert!(o.value.unwrap().latex.unwrap().contains("\\sqrt"));
    }

    /// Budget terms are the script's to set: the layout term alone by default, others
    /// added with their basis or removed; a sample_stats table brings each point's Type A.
    #[test]
    fn budget_terms_are_settable_and_samples_bring_their_type_a() {
        let mut s = Session::new();
        let base = "let o = #{coefficient: 1.0, u_coefficient: 0.005, density: 1.2.kg_m3, u_density: 0.002.kg_m3, diameter: 500.mm, u_diameter: 1.mm, u_rel_dp: 0.005, u_dp: 0.5.Pa}; let dps = [100.Pa, 110.Pa, 105.Pa, 98.Pa];";
        eval(&mut s, base);
        assert_eq!(eval(&mut s, "traverse_budget(dps, o).table().len"), "8", "3 shared + layout + 4 points");
        eval(
            &mut s,
            "o.terms = #{layout: (), unsteadiness: #{u_rel: 0.003, distribution: \"rectangular\", source: \"logged 10 min at P3\"}, probe_blockage: 0.001};",
        );
        let t = eval(&mut s, "let b = traverse_budget(dps, o); b.table().texts(\"input\")");
        assert!(t.contains("flow unsteadiness") && t.contains("probe blockage") && !t.contains("layout"), "{t}");
        assert!(eval(&mut s, "b.table().texts(\"source\")").contains("logged 10 min at P3"));
        // The typical unsourced magnitudes only when asked for, and labelled.
        eval(&mut s, "o.terms = typical_method_terms();");
        assert!(
            eval(&mut s, "traverse_budget(dps, o).table().texts(\"source\")").contains("common practice, no source")
        );
        for (bad, says) in [
            ("o.terms = 3; traverse_budget(dps, o)", "'terms' is a map"),
            ("o.terms = #{x: #{u_rel: 0.01, distribution: \"lognormal\"}}; traverse_budget(dps, o)", "not one of"),
            ("o.terms = #{x: #{distribution: \"normal\"}}; traverse_budget(dps, o)", "needs u_rel"),
            ("o.terms = #{x: 0.9}; traverse_budget(dps, o)", "relative standard uncertainty"),
        ] {
            let e = err(&mut s, bad);
            assert!(e.message.contains(says), "{bad}: {}", e.message);
        }
        // A budget from logged samples: Δp is each block's mean with its Type A u.
        eval(&mut s, "o.terms = (); o.remove(\"terms\"); o.remove(\"u_rel_dp\"); o.remove(\"u_dp\");");
        eval(
            &mut s,
            "let smp = table_from(#{point: [\"P1\",\"P1\",\"P1\",\"P1\",\"P2\",\"P2\",\"P2\",\"P2\"], time_s: [0.0,1.0,2.0,3.0,10.0,11.0,12.0,13.0], dp: [101.0,98.0,103.0,99.0,121.0,118.0,124.0,119.0]}).unit(\"dp\", \"Pa\"); let st = sample_stats(smp, #{});",
        );
        let t = eval(&mut s, "let bs = traverse_budget(st, o); bs.table().texts(\"source\")");
        assert!(t.contains("Type A from the logged samples"), "{t}");
        // P1: mean 100.25 Pa, s = 2.2174 Pa (hand-worked: Σ(x − x̄)² = 14.75, /3), n_eff = 4 here.
        let u1: f64 = eval(&mut s, "bs.table()[\"u\"].at(4).si").parse().unwrap_or(f64::NAN);
        assert!((u1 - (14.75f64 / 3.0).sqrt() / 2.0).abs() < 1e-6, "{u1}");
        let e = err(&mut s, "traverse_budget(smp, o)");
        assert!(e.message.contains("result of sample_stats"), "{}", e.message);
        let e = err(&mut s, "sample_stats(smp, #{dp: \"time_s\"})");
        assert!(e.message.contains("pressure column"), "{}", e.message);
        let e = err(&mut s, "sample_stats(smp, #{settle: 5.s})");
        assert!(e.message.contains("settling time"), "{}", e.message);
    }

    /// A script's own model against JCGM 101:2008's worked examples. §9.2.2, additive
    /// model Y = X₁ + X₂ + X₃ + X₄ with standard normal inputs: u(y) = 2 exactly, GUM and
    /// Monte Carlo intervals both ±3.92 (1.96·2), so the GUM result validates. §9.3, mass
    /// calibration δm = (m_R,c + δm_R,c)(1 + (ρ_a − ρ_a0)(1/ρ_W − 1/ρ_R)) − m_nom: to first
    /// order only m_R,c and δm_R,c count, u = √(0.050² + 0.020²) = 0.0539 mg (derived); the
    /// product term adds a variance of m²·var(ρ_a)·var(1/ρ_W) ≈ (10⁵ · 0.0577 · 9.0·10⁻⁶)² mg²
    /// = 0.052² mg², so the Monte Carlo u is √(0.0539² + 0.052²) ≈ 0.075 mg (derived here;
    /// JCGM 101 Table 10 gives 0.0754 mg and [1.0834, 1.3825] mg, from memory) and the GUM
    /// interval does not validate.
    #[test]
    fn script_models_reproduce_the_jcgm_101_examples() {
        let mut s = Session::new();
        eval(
            &mut s,
            "let add = model_budget(|x| x.x1 + x.x2 + x.x3 + x.x4, #{inputs: #{x1: #{value: 0.0, u: 1.0}, x2: #{value: 0.0, u: 1.0}, x3: #{value: 0.0, u: 1.0}, x4: #{value: 0.0, u: 1.0}}});",
        );
        let u: f64 = eval(&mut s, "add.u").parse().unwrap_or(f64::NAN);
        assert!((u - 2.0).abs() < 1e-9, "{u}");
        eval(&mut s, "let mc = add.monte_carlo();");
        assert_eq!(eval(&mut s, "mc.report"), "GUM");
        let high: f64 = eval(&mut s, "mc.high").parse().unwrap_or(f64::NAN);
        // Stable to δ = 0.05 (2 significant digits of u = 2.0, §7.9.2), not better.
        assert!((high - 3.92).abs() < 0.05, "{high}");
        eval(
            &mut s,
            r#"let mass = model_budget(|x| (x.mRc + x.dmRc) * (1.0 + (x.rho_a - 1.2) * (1.0 / x.rho_w - 1.0 / x.rho_r)) - 100000.0, #{
            inputs: [#{name: "mRc", value: 100000.0, u: 0.050, unit: "mg"},
                     #{name: "dmRc", value: 1.234, u: 0.020, unit: "mg"},
                     #{name: "rho_a", value: 1.20, distribution: "rectangular", half_width: 0.10, unit: "kg/m3"},
                     #{name: "rho_w", value: 8000.0, distribution: "rectangular", half_width: 1000.0, unit: "kg/m3"},
                     #{name: "rho_r", value: 8000.0, distribution: "rectangular", half_width: 50.0, unit: "kg/m3"}],
            unit: "mg"});"#,
        );
        let u: f64 = eval(&mut s, "mass.u").parse().unwrap_or(f64::NAN);
        assert!((u - (0.05f64.powi(2) + 0.02f64.powi(2)).sqrt()).abs() < 1e-6, "{u}");
        assert!(eval(&mut s, "mass.table().texts(\"input\")").starts_with("[\"mRc\", \"dmRc\""), "array order kept");
        eval(&mut s, "let mm = mass.monte_carlo(200000);");
        let umc: f64 = eval(&mut s, "mm.u").parse().unwrap_or(f64::NAN);
        assert!((umc - 0.075).abs() < 0.002, "{umc}");
        assert_eq!(eval(&mut s, "mm.report"), "Monte Carlo");
        assert!(eval(&mut s, "mm.reason").contains("report the Monte Carlo interval"));
        // JCGM 100:2008 H.1, the end gauge (first-order budget, values from memory, as the
        // library's own test of the same example): u_c = 32 nm, ν_eff 16, U₉₉ ≈ 93 nm.
        eval(
            &mut s,
            r#"let gauge = model_budget(|x| x.ls + x.d - x.ls * (x.da * x.th + x.alpha_s * x.dth), #{
            inputs: [#{name: "ls", value: 50000623.6, u: 25.0, dof: 18, unit: "nm"},
                     #{name: "d", value: 215.0, u: 9.7, dof: 25.6, unit: "nm"},
                     #{name: "alpha_s", value: 11.5e-6, distribution: "rectangular", half_width: 2e-6},
                     #{name: "th", value: -0.1, u: 0.41},
                     #{name: "da", value: 0.0, distribution: "rectangular", half_width: 1e-6, dof: 50},
                     #{name: "dth", value: 0.0, distribution: "rectangular", half_width: 0.05, dof: 2}],
            coverage: 0.99, unit: "nm"});"#,
        );
        let uc: f64 = eval(&mut s, "gauge.u").parse().unwrap_or(f64::NAN);
        let big_u: f64 = eval(&mut s, "gauge.U").parse().unwrap_or(f64::NAN);
        assert!((uc - 32.0).abs() < 0.5 && (big_u - 93.0).abs() < 1.5, "{uc} {big_u}");
        assert!(eval(&mut s, "gauge.to_string()").contains("ν_eff = 16;"), "{}", eval(&mut s, "gauge.to_string()"));
        // Bad models and inputs: each a clear error.
        for (bad, says) in [
            ("model_budget(|x| x.a.b, #{inputs: #{a: #{value: 1.0, u: 0.1}}})", "model function failed"),
            ("model_budget(|x| \"text\", #{inputs: #{a: #{value: 1.0, u: 0.1}}})", "must return a number"),
            ("model_budget(|x| x.a, #{inputs: #{a: #{value: 1.0, sigma: 0.1}}})", "sigma"),
            ("model_budget(|x| x.a, #{inputs: #{a: #{value: 1.0}}})", "needs u"),
            ("model_budget(|x| x.a, #{inputs: #{}})", "no inputs"),
            ("model_budget(|x| x.a, #{inputs: #{a: #{readings: [1.0]}}})", "at least 2 readings"),
            (
                "model_budget(|x| x.a, #{inputs: #{a: #{value: 1.0, u: 0.1}}, correlations: [[\"a\", \"z\", 0.5]]})",
                "not an input",
            ),
            ("model_budget(|x| 1.0 / (x.a - 1.0), #{inputs: #{a: #{value: 1.0, u: 0.1}}})", "at the best estimates"),
        ] {
            let e = err(&mut s, bad);
            assert!(e.message.contains(says), "{bad}: {}", e.message);
        }
    }

    /// A transducer's Δp column is a first-class reading of a campaign: fed the Δp that the
    /// manometer route computed, the campaign gives the same velocities and flows, and it
    /// needs no manometer.
    #[test]
    fn campaigns_take_a_transducer_dp_column() {
        let mut s = Session::new();
        eval(
            &mut s,
            r#"let t = table_from(#{tr: ["T1","T1","T1","T1"], h: [20.0, 30.0, 30.0, 20.0], t: [20.0, 20.0, 20.0, 20.0], d: [500.0, 500.0, 500.0, 500.0], y: [33.5, 125.0, 375.0, 466.5]})
            .units(#{h: "mm", t: "degC", d: "mm", y: "mm"});
            let spec = #{fluid: dry_air(), static_pressure: 101.kPa, manometer: u_tube(gauge_water()), probe: pitot_static(1.0),
                columns: #{traverse: "tr", deflection: "h", fluid_temperature: "t", size: "d", position: "y"}};
            let pv = point_velocities(t, spec);
            let by_gauge = reduce_campaign(t, spec).traverses;
            let t2 = t.with_column("dp", pv["dp_pa"]).unit("dp", "Pa");
            let spec2 = #{fluid: dry_air(), static_pressure: 101.kPa, probe: pitot_static(1.0),
                columns: #{traverse: "tr", dp: "dp", fluid_temperature: "t", size: "d", position: "y"}};
            let by_dp = reduce_campaign(t2, spec2).traverses;"#,
        );
        let a: f64 = eval(&mut s, "by_gauge[\"mean_velocity_m_s\"].at(0).si").parse().unwrap_or(f64::NAN);
        let b: f64 = eval(&mut s, "by_dp[\"mean_velocity_m_s\"].at(0).si").parse().unwrap_or(f64::NAN);
        assert!(a > 10.0 && (a - b).abs() < 1e-9 * a, "{a} vs {b}");
        let e = err(&mut s, "spec2.columns.deflection = \"h\"; reduce_campaign(t2, spec2)");
        assert!(e.message.contains("not both"), "{}", e.message);
        let e =
            err(&mut s, "spec2.columns.remove(\"deflection\"); spec2.columns.dp = \"h\"; reduce_campaign(t2, spec2)");
        assert!(e.message.contains("not a pressure"), "{}", e.message);
    }

    /// The point of mean velocity from scripts: for the log law y/R = e^(−3/2) = 0.2231
    /// (derived: the log law's mean lies 3/(2κ) friction velocities below the centreline),
    /// so 44.6 mm from the wall of a 400 mm pipe; two readings are averaged and checked.
    #[test]
    fn mean_point_places_the_probe_and_checks_symmetry() {
        let mut s = Session::new();
        eval(&mut s, "let w = water().state(350.kPa, 11.degC); let pipe = round_section(400.mm);");
        let y: f64 = eval(&mut s, "mean_point(1.5.m_s, w, pipe, #{family: \"log-law\"}).from_wall.si")
            .parse()
            .unwrap_or(f64::NAN);
        assert!((y - 0.2 * (-1.5f64).exp()).abs() < 1e-9, "{y}");
        let v: f64 =
            eval(&mut s, "mean_point([1.52.m_s, 1.48.m_s], w, pipe, #{}).mean_velocity.si").parse().unwrap_or(f64::NAN);
        assert!((v - 1.50).abs() < 1e-12);
        assert!(
            eval(&mut s, "mean_point([1.6.m_s, 1.4.m_s], w, pipe, #{tolerance_pct: 5}).warnings")
                .contains("not axisymmetric")
        );
        assert!(
            err(&mut s, "mean_point([1.5.m_s, 1.5.m_s, 1.5.m_s], w, pipe, #{})")
                .message
                .contains("two at symmetric points")
        );
        assert!(err(&mut s, "mean_point(1.5.m_s, w, rect_section(400.mm, 300.mm), #{})").message.contains("circular"));
    }

    /// m fitted from points on an exact 1/7 power law (u = 12·(y/R)^(1/7), check-values.md §6)
    /// is 7, and the wall-fit integration equals the integration with m = 7.
    #[test]
    fn wall_exponent_from_points_feeds_the_integration() {
        let mut s = Session::new();
        let ys = [15.4, 67.8, 532.2, 584.6];
        let vs: Vec<String> = ys
            .iter()
            .map(|y: &f64| format!("{:.12}", 12.0 * ((300.0 - (y - 300.0).abs()) / 300.0).powf(1.0 / 7.0)))
            .collect();
        eval(
            &mut s,
            &format!("let t = table_from(#{{y: {ys:?}, v: [{}]}}).units(#{{y: \"mm\", v: \"m/s\"}});", vs.join(", ")),
        );
        let m: f64 =
            eval(&mut s, "wall_exponent(t[\"y\"], t[\"v\"], round_section(600.mm), #{}).m").parse().unwrap_or(f64::NAN);
        assert!((m - 7.0).abs() < 1e-6, "{m}");
        let a = eval(&mut s, "section_mean(t[\"y\"], t[\"v\"], round_section(600.mm), #{averaging: \"wall-fit\"}).si");
        let b = eval(&mut s, "section_mean(t[\"y\"], t[\"v\"], round_section(600.mm), #{averaging: 7}).si");
        assert_eq!(a, b);
        assert!(
            err(&mut s, "section_mean(t[\"y\"], t[\"v\"], round_section(600.mm), #{averaging: \"fancy\"})")
                .message
                .contains("wall-fit")
        );
    }

    /// A rectangle's budget has its own sides as inputs; one side without the other, or a
    /// diameter with them, is refused.
    #[test]
    fn rectangular_budgets_take_width_and_height() {
        let mut s = Session::new();
        let base = "let o = #{coefficient: 1.0, u_coefficient: 0.005, density: 1.2.kg_m3, u_density: 0.002.kg_m3, width: 800.mm, u_width: 4.mm, height: 500.mm, u_height: 1.mm};";
        eval(&mut s, base);
        let names = eval(&mut s, "traverse_budget([100.Pa, 110.Pa], o).table().texts(\"input\")");
        assert!(names.contains("width W") && names.contains("height H") && !names.contains("diameter"), "{names}");
        // Q = W·H·mean(√(2Δp/ρ)) with C = 1 (hand-worked).
        let q: f64 = eval(&mut s, "traverse_budget([100.Pa, 110.Pa], o).value").parse().unwrap_or(f64::NAN);
        let want = 0.4 * ((200.0f64 / 1.2).sqrt() + (220.0f64 / 1.2).sqrt()) / 2.0;
        assert!((q - want).abs() < 1e-9, "{q} vs {want}");
        assert!(
            err(&mut s, "o.remove(\"height\"); traverse_budget([100.Pa], o)")
                .message
                .contains("width, u_width, height and u_height")
        );
    }

    /// The point of mean velocity's budget terms replace the layout term: the budget of its
    /// readings carries the profile-model spread (derived in the library, checked there
    /// against the log law's defect form) and the positioning term when u_position is given.
    #[test]
    fn mean_point_budget_terms_replace_the_layout_term() {
        let mut s = Session::new();
        eval(
            &mut s,
            "let w = water().state(350.kPa, 11.degC); let mp = mean_point([1.52.m_s, 1.49.m_s], w, round_section(400.mm), #{});",
        );
        let b = eval(
            &mut s,
            "traverse_budget([1150.Pa, 1105.Pa], #{coefficient: 1.0, u_coefficient: 0.004, density: w.density, u_density: 0.2.kg_m3, diameter: 400.mm, u_diameter: 0.5.mm, terms: mp.budget_terms(#{u_position: 2.mm})})",
        );
        assert!(
            b.contains("profile model") && b.contains("probe positioning") && !b.contains("layout/integration"),
            "{b}"
        );
        assert!(b.contains("(derived)"), "{b}");
        let t = eval(&mut s, "mp.budget_terms(#{})");
        assert!(t.contains("profile_model") && !t.contains("positioning"), "{t}");
        assert!(err(&mut s, "mp.budget_terms(#{u_position: 2.0})").message.contains("u_position"));
        // The two readings differ by 2 %: an opt-in asymmetry term of half-width 1 %.
        let a = eval(&mut s, "mp.budget_terms(#{asymmetry: true}).asymmetry.u_rel");
        let a: f64 = a.parse().unwrap_or(f64::NAN);
        let diff = 0.03 / 1.505;
        assert!((a - diff / 2.0 / 3f64.sqrt()).abs() < 1e-9, "{a}");
        eval(&mut s, "let one = mean_point(1.5.m_s, w, round_section(400.mm), #{});");
        assert!(err(&mut s, "one.budget_terms(#{asymmetry: true})").message.contains("two readings"));
    }

    /// Local corrections from a script: the turbulence correction of a point is
    /// 1/√(1 + Tu²) − 1 (derived), the corrected column is the read one times each point's
    /// factor, and the budget term carries the mean factor into the budget's value.
    #[test]
    fn local_corrections_from_a_script() {
        let mut s = Session::new();
        let setup = "let t = table_from(#{y: [30.0, 150.0, 450.0, 570.0], v: [9.0, 11.5, 11.5, 9.0], tu: [6.0, 4.0, 4.0, 6.0]}).units(#{y: \"mm\", v: \"m/s\", tu: \"%\"});\n\
            let c = local_corrections(t[\"y\"], t[\"v\"], round_section(600.mm), #{turbulence: t[\"tu\"]});";
        eval(&mut s, setup);
        let v0: f64 = eval(&mut s, "c.velocity.at(0).value_in(\"m/s\")").parse().unwrap_or(f64::NAN);
        // Printed to 10 significant figures.
        assert!((v0 - 9.0 / 1.0036f64.sqrt()).abs() < 1e-8, "{v0}");
        let f: f64 = eval(&mut s, "c.factor").parse().unwrap_or(f64::NAN);
        let want = (2.0 * 9.0 / 1.0036f64.sqrt() + 2.0 * 11.5 / 1.0016f64.sqrt()) / 41.0;
        assert!((f - want).abs() < 1e-9, "{f}");
        // The budget's value is the plain one times the factor.
        let plain = "traverse_budget([98.Pa, 112.Pa, 118.Pa, 115.Pa], #{coefficient: 1.0, u_coefficient: 0.003, density: 1.2.kg_m3, u_density: 0.002.kg_m3, diameter: 600.mm, u_diameter: 0.5.mm";
        let q0: f64 = eval(&mut s, &format!("{plain}}}).value")).parse().unwrap_or(f64::NAN);
        let q1: f64 = eval(&mut s, &format!("{plain}, terms: #{{local_corrections: c.budget_term()}}}}).value"))
            .parse()
            .unwrap_or(f64::NAN);
        assert!((q1 / q0 - want).abs() < 1e-8, "{q0} {q1}");
        let t = eval(&mut s, "c.table()");
        assert!(t.contains("turbulence_pct") && t.contains("velocity_corrected"), "{t}");
        // Bad input is named.
        let e = err(&mut s, "local_corrections(t[\"y\"], t[\"v\"], round_section(600.mm), #{gradient: true})");
        assert!(e.message.contains("head_diameter"), "{}", e.message);
        let e = err(&mut s, "local_corrections(t[\"y\"], t[\"v\"], rect_section(600.mm, 400.mm), #{})");
        assert!(e.message.contains("round conduit"), "{}", e.message);
        let e = err(&mut s, "local_corrections(t[\"y\"], t[\"v\"], round_section(600.mm), #{turbulence: 6.0})");
        assert!(e.message.contains("turbulence intensity"), "{}", e.message);
        let e = err(&mut s, "local_corrections(t[\"y\"], t[\"v\"], round_section(600.mm), #{wall: true})");
        assert!(e.message.contains("wall_proximity"), "{}", e.message);
    }

    /// Annulus points: r₁ = √(150² + (1/8)(400² − 150²)) = 199.2 mm on an 800/300 mm annulus
    /// (hand-worked from the equal-area rule).
    #[test]
    fn annulus_points_split_the_ring_area() {
        let mut s = Session::new();
        let r1: f64 = eval(&mut s, "annulus_points(800.mm, 300.mm, 4)[\"radius_mm\"].at(0).value_in(\"mm\")")
            .parse()
            .unwrap_or(f64::NAN);
        assert!((r1 - (150.0f64.powi(2) + (400.0f64.powi(2) - 150.0f64.powi(2)) / 8.0).sqrt()).abs() < 1e-6, "{r1}");
        assert!(err(&mut s, "annulus_points(300.mm, 400.mm, 4)").message.contains("less than the outer"));
        // Three points per radius: below ISO 5802's four (a warning, the layout still given).
        let warned = std::sync::Arc::new(std::sync::Mutex::new(Vec::<String>::new()));
        let w = warned.clone();
        s.set_events(move |e| {
            if let Event::Stderr(t) = e {
                w.lock().unwrap().push(t);
            }
        });
        eval(&mut s, "annulus_points(800.mm, 300.mm, 3)");
        let got = warned.lock().unwrap().join("\n");
        assert!(got.contains("ISO 5802:2001 asks for at least 4") && got.contains("6 radii"), "{got}");
    }

    /// Every formula the library writes into worked steps reads as MathML: no step falls
    /// back to plain text (the fallback keeps a step, but a report should not need it).
    #[test]
    fn every_step_formula_renders_as_mathml() {
        let mut s = Session::new();
        let cases = [
            "u_tube(gauge_mercury()).dp(85.mm, 18.degC, 999.kg_m3).steps()",
            "inverted_u_tube(gauge_liquid(\"air\", 1.2.kg_m3, 20.degC, 0.0034)).dp(85.mm, 18.degC, 999.kg_m3).steps()",
            "inclined_gauge(gauge_liquid(\"oil\", 826.kg_m3, 20.degC, 7.5e-4), 20, 0.0036).dp(42.mm, 21.degC, 1.19.kg_m3).steps()",
            "well_gauge(gauge_water(), 0.01).dp(100.mm, 20.degC, 1.2.kg_m3).steps()",
            "two_liquid_gauge(gauge_water(), gauge_liquid(\"kerosene\", 790.kg_m3, 20.degC, 9.9e-4), 0.01).dp(60.mm, 20.degC, 1.2.kg_m3).steps()",
            "pitot_static(1.0).velocity(50.Pa, 1.2.kg_m3).steps()",
            "pitot_static(1.0).velocity(9.kPa, humid_air(0.5).state(101.kPa, 20.degC)).steps()",
            "humid_air(0.5).state(101.kPa, 20.degC).steps()",
        ];
        for src in cases {
            let b = s.eval(src).unwrap_or_else(|e| panic!("{src}: {e:?}")).value.expect("a value");
            let html = b.html.expect("steps carry HTML");
            let steps = html.matches("<tr><td>").count();
            assert!(steps > 0, "{src}");
            assert_eq!(html.matches("<math").count(), 2 * steps, "{src}: a formula fell back to text\n{html}");
        }
    }
}
