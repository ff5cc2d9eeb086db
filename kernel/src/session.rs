//! The one script session: rhai engine, scope, function catalog, limits and output.
//!
//! The REPL, the batch runner and the Jupyter kernel are front ends over [`Session`]:
//! they hand it source text and show what comes back (printed text, a value as a MIME
//! bundle, or an error with position, caret and hint).

use std::panic::{AssertUnwindSafe, catch_unwind};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Mutex, RwLock};

use rhai::{AST, Dynamic, Engine, EvalAltResult, ParseError, Position, Scope};

use crate::api::{self, Prefs, SharedPrefs};
use crate::catalog::{Catalog, Kind, Registrar};

/// Limits that stop a runaway script.
#[derive(Debug, Clone, Copy)]
pub struct Limits {
    /// Most operations per input (0 = none).
    pub operations: u64,
    /// Longest array.
    pub array_size: usize,
    /// Longest string, bytes.
    pub string_size: usize,
    /// Largest map.
    pub map_size: usize,
    /// Deepest call nesting.
    pub call_levels: usize,
}

impl Default for Limits {
    fn default() -> Self {
        Self {
            operations: 2_000_000_000,
            array_size: 10_000_000,
            string_size: 64 << 20,
            map_size: 1_000_000,
            call_levels: 64,
        }
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

type Sink = Arc<dyn Fn(&str) + Send + Sync>;

/// The session.
pub struct Session {
    engine: Engine,
    scope: Scope<'static>,
    functions: AST,
    catalog: Arc<Catalog>,
    prefs: SharedPrefs,
    interrupt: Arc<AtomicBool>,
    sink: Arc<RwLock<Sink>>,
    /// Inputs evaluated so far (for history and the kernel's execution count).
    pub count: usize,
}

fn stdout_sink() -> Sink {
    Arc::new(|s: &str| println!("{s}"))
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
        engine.set_max_array_size(limits.array_size);
        engine.set_max_string_size(limits.string_size);
        engine.set_max_map_size(limits.map_size);
        engine.set_max_call_levels(limits.call_levels);
        engine.set_max_expr_depths(128, 64);
        let prefs: SharedPrefs = Arc::new(RwLock::new(Prefs::default()));
        let mut catalog = Catalog::default();
        {
            let mut r = Registrar::new(&mut engine, &mut catalog);
            api::register_all(&mut r, &prefs);
            register_help(&mut r);
        }
        let catalog = Arc::new(catalog);
        let interrupt = Arc::new(AtomicBool::new(false));
        let flag = interrupt.clone();
        engine
            .on_progress(move |_| if flag.load(Ordering::Relaxed) { Some(Dynamic::from("interrupted")) } else { None });
        let sink: Arc<RwLock<Sink>> = Arc::new(RwLock::new(stdout_sink()));
        let s1 = sink.clone();
        engine.on_print(move |s| {
            if let Ok(f) = s1.read() {
                f(s);
            }
        });
        let s2 = sink.clone();
        engine.on_debug(move |s, _, pos| {
            if let Ok(f) = s2.read() {
                f(&format!("[debug {pos}] {s}"));
            }
        });
        let help_catalog = catalog.clone();
        engine.register_fn("help", move |name: &str| -> String { help_text(&help_catalog, name) });
        Session { engine, scope: Scope::new(), functions: AST::empty(), catalog, prefs, interrupt, sink, count: 0 }
    }

    /// Where `print` goes (stdout by default).
    pub fn set_output(&self, f: impl Fn(&str) + Send + Sync + 'static) {
        if let Ok(mut s) = self.sink.write() {
            *s = Arc::new(f);
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
    pub fn interrupt_flag(&self) -> Arc<AtomicBool> {
        self.interrupt.clone()
    }

    /// Sets a variable in the scope (batch runner `--set`, `input`).
    pub fn set_var(&mut self, name: &str, value: Dynamic) {
        self.scope.set_or_push(name.to_string(), value);
    }

    /// Names and type names of the variables in scope.
    pub fn variables(&self) -> Vec<(String, String)> {
        self.scope
            .iter()
            .map(|(n, _, v)| (n.to_string(), self.engine.map_type_name(v.type_name()).to_string()))
            .collect()
    }

    /// Evaluates one input; variables and functions persist into the next.
    pub fn eval(&mut self, src: &str) -> Result<Outcome, ScriptError> {
        self.count += 1;
        self.interrupt.store(false, Ordering::Relaxed);
        let ast = self.engine.compile_with_scope(&self.scope, src).map_err(|e| self.parse_error(&e))?;
        let fns = ast.clone_functions_only();
        let runnable = self.functions.merge(&ast);
        let engine = &self.engine;
        let scope = &mut self.scope;
        let result = catch_unwind(AssertUnwindSafe(|| engine.eval_ast_with_scope::<Dynamic>(scope, &runnable)));
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
        Ok(Outcome { value: self.render(&value) })
    }

    /// Renders a value as a MIME bundle; `None` for unit.
    pub fn render(&self, v: &Dynamic) -> Option<Bundle> {
        if v.is_unit() {
            return None;
        }
        let text = self.display(v);
        let mut b = Bundle { text, ..Default::default() };
        if let Some(p) = v.clone().try_cast::<api::charts::Plot>() {
            b.svg = p.svg().ok();
        } else if let Some(s) = v.clone().try_cast::<stagna::Steps>() {
            b.latex = Some(s.to_latex());
        } else if let Some(t) = v.clone().try_cast::<api::tables::Tbl>() {
            b.html = Some(table_html(&t));
        }
        Some(b)
    }

    /// A value as text, through its registered `to_string`.
    pub fn display(&self, v: &Dynamic) -> String {
        if v.is_string() || v.is_int() || v.is_float() || v.is_bool() || v.is_char() {
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
                    ("StagnaError".to_string(), msg, hint)
                }
            }
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
        let pos = pos.min(line.len());
        let before = &line[..pos];
        let start = before
            .rfind(|c: char| !(c.is_alphanumeric() || c == '_'))
            .map_or(0, |i| i + before[i..].chars().next().map_or(1, char::len_utf8));
        let word = &before[start..];
        let mut out: Vec<String> = Vec::new();
        if start > 0 && before[..start].ends_with('.') {
            let recv_end = start - 1;
            let recv_text = &before[..recv_end];
            let recv_start =
                recv_text.rfind(|c: char| !(c.is_alphanumeric() || c == '_' || c == '.')).map_or(0, |i| i + 1);
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

/// The script language's keywords (for completion and highlighting).
pub const KEYWORDS: &[&str] = &[
    "let", "const", "fn", "if", "else", "for", "in", "while", "loop", "do", "until", "break", "continue", "return",
    "throw", "try", "catch", "true", "false", "switch", "import", "export", "as", "private", "this", "print",
];

fn pos(p: Position) -> Option<(usize, usize)> {
    p.line().map(|l| (l, p.position().unwrap_or(1)))
}

fn hint_for(msg: &str) -> Option<String> {
    let m = msg.to_lowercase();
    let h = if m.contains("with a unit, got the plain number") {
        return None; // the message already says what to write
    } else if m.contains("dimension mismatch") || m.contains("different dimensions") || m.contains(" must be a ") {
        "check the argument's unit: e.g. 42.mm for a deflection, 20.degC for a temperature, 101.kPa for a pressure"
    } else if m.contains("has no unit; declare") {
        "declare units once after reading: t = t.units(#{column: \"mm\", ...})"
    } else if m.contains("no such column") || m.contains("is not in the table") {
        "t.columns lists the table's columns"
    } else if m.contains("unit '") {
        "`stagna units` lists every unit name; compounds like kg/m^3 or m3/h work in qty(\"...\")"
    } else if m.contains("row ") && (m.contains("finite") || m.contains("must be")) {
        "fix or filter the row (t.filter(...)) and run again; nothing was written"
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
        "help",
        &Doc::new("help(name) -> string", "Help on a function, a method (Type.method), a type (lists its methods and properties) or, with \"\", the list of everything.")
            .example("print(help(\"water\"));")
            .source("this catalog"),
    );
}

fn esc(s: &str) -> String {
    s.replace('&', "&amp;").replace('<', "&lt;").replace('>', "&gt;")
}

/// A table as HTML with units in the headers (first 50 rows, then a note of the size).
pub fn table_html(t: &api::tables::Tbl) -> String {
    let df = &t.df;
    let limit = 50.min(df.height());
    let mut s = String::from("<table class=\"stagna-table\">\n<thead><tr>");
    for c in df.get_column_names() {
        let unit = t
            .unit_of(c)
            .map(|u| format!(" <span class=\"unit\">[{}]</span>", esc(&api::pretty_unit(u))))
            .unwrap_or_default();
        s.push_str(&format!("<th>{}{unit}</th>", esc(c)));
    }
    s.push_str("</tr></thead>\n<tbody>\n");
    for i in 0..limit {
        s.push_str("<tr>");
        for c in df.columns() {
            let v = c.get(i).map(|v| v.to_string()).unwrap_or_default();
            s.push_str(&format!("<td>{}</td>", esc(v.trim_matches('"'))));
        }
        s.push_str("</tr>\n");
    }
    s.push_str("</tbody></table>\n");
    if df.height() > limit {
        s.push_str(&format!("<p>first {limit} of {} rows × {} columns</p>\n", df.height(), df.width()));
    }
    s
}

/// Shared mutex type used by the front ends for sinks that collect output.
pub type Collected = Arc<Mutex<Vec<String>>>;
