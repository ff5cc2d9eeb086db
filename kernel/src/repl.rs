//! The terminal REPL (reedline) and its piped-input mode, over one [`Session`].
//!
//! On a terminal: completion from the catalog (functions, methods after `.`, unit
//! suffixes after a number, variables), a signature hint for the call being typed,
//! highlighting, multi-line input while a bracket or string is open, a history file in
//! the user's data folder, `help NAME`. With piped input: each complete input is
//! evaluated in order, values printed, and the first error ends the run with status 1.

use std::io::{BufRead, IsTerminal, Write};
use std::sync::{Arc, Mutex};

use nu_ansi_term::{Color, Style};
use reedline::{
    ColumnarMenu, Completer, CompletionResult, DefaultPrompt, DefaultPromptSegment, Emacs, FileBackedHistory,
    Highlighter, Hinter, History, KeyCode, KeyModifiers, MenuBuilder, Reedline, ReedlineEvent, ReedlineMenu, Signal,
    Span, StyledText, Suggestion, ValidationResult, Validator, default_emacs_keybindings,
};

use crate::session::{KEYWORDS, Session, bracket_depth};

type Shared = Arc<Mutex<Session>>;

fn lock(s: &Shared) -> std::sync::MutexGuard<'_, Session> {
    match s.lock() {
        Ok(g) => g,
        Err(e) => e.into_inner(),
    }
}

/// A `help NAME` / `?NAME` line, outside the script language.
fn help_request(line: &str) -> Option<&str> {
    let t = line.trim();
    if t == "help" || t == "?" {
        return Some("");
    }
    t.strip_prefix("help ").or_else(|| t.strip_prefix('?')).map(str::trim).filter(|n| !n.contains(['(', ';', '"']))
}

/// Evaluates one input and prints the result; returns false on error.
pub fn eval_and_print(session: &mut Session, src: &str, source_name: &str, color: bool) -> bool {
    if let Some(name) = help_request(src) {
        println!("{}", session.help(name));
        return true;
    }
    match session.eval(src) {
        Ok(out) => {
            if let Some(v) = out.value {
                println!("{}", v.text);
            }
            true
        }
        Err(e) => {
            eprintln!("{}", e.render(source_name, src, color));
            false
        }
    }
}

/// Runs the REPL (or the piped mode); returns the process status.
pub fn run(mut session: Session) -> i32 {
    let stdin = std::io::stdin();
    if !stdin.is_terminal() {
        return piped(&mut session, stdin.lock());
    }
    interactive(session)
}

/// Evaluates piped input in order; stops at the first error with status 1.
pub fn piped(session: &mut Session, input: impl BufRead) -> i32 {
    let mut buf = String::new();
    let mut first_line = 1;
    let mut line_no = 0;
    for line in input.lines() {
        let Ok(line) = line else { return 1 };
        line_no += 1;
        if buf.is_empty() && line.trim().is_empty() {
            first_line = line_no + 1;
            continue;
        }
        buf.push_str(&line);
        buf.push('\n');
        match session.is_complete(&buf) {
            Ok(false) => continue,
            Ok(true) | Err(_) => {
                let name = format!("input line {first_line}");
                let ok = eval_and_print(session, buf.trim_end(), &name, false);
                buf.clear();
                first_line = line_no + 1;
                if !ok {
                    return 1;
                }
            }
        }
    }
    if !buf.trim().is_empty() {
        let name = format!("input line {first_line}");
        if !eval_and_print(session, buf.trim_end(), &name, false) {
            return 1;
        }
    }
    0
}

struct ScriptCompleter(Shared);

impl Completer for ScriptCompleter {
    fn complete(&mut self, line: &str, pos: usize) -> CompletionResult {
        let s = lock(&self.0);
        let (start, words) = s.complete(line, pos);
        let v: Vec<Suggestion> = words
            .into_iter()
            .map(|w| {
                let description = s.catalog().lookup(&w).first().map(|e| e.summary.clone());
                Suggestion {
                    value: w,
                    description,
                    span: Span { start, end: pos },
                    append_whitespace: false,
                    ..Default::default()
                }
            })
            .collect();
        CompletionResult::fresh(v)
    }
}

struct BracketValidator;

impl Validator for BracketValidator {
    fn validate(&self, line: &str) -> ValidationResult {
        let (depth, open_string) = bracket_depth(line);
        if depth > 0 || open_string { ValidationResult::Incomplete } else { ValidationResult::Complete }
    }
}

struct SignatureHinter {
    session: Shared,
    hint: String,
}

impl Hinter for SignatureHinter {
    fn handle(
        &mut self,
        line: &str,
        pos: usize,
        _history: &dyn History,
        use_ansi_coloring: bool,
        _cwd: &str,
    ) -> String {
        self.hint.clear();
        let before = &line[..pos.min(line.len())];
        // The innermost open call: name directly before the last unmatched '('.
        let mut depth = 0i32;
        let mut open = None;
        for (i, c) in before.char_indices().rev() {
            match c {
                ')' => depth += 1,
                '(' if depth == 0 => {
                    open = Some(i);
                    break;
                }
                '(' => depth -= 1,
                _ => {}
            }
        }
        let Some(i) = open else { return String::new() };
        let name_start = before[..i].rfind(|c: char| !(c.is_alphanumeric() || c == '_')).map_or(0, |k| k + 1);
        let name = &before[name_start..i];
        if name.is_empty() || pos < line.len() {
            return String::new();
        }
        let s = lock(&self.session);
        let Some(e) = s.catalog().lookup(name).into_iter().next() else { return String::new() };
        let sig = e.signature.lines().next().unwrap_or("").to_string();
        let text = format!("   {sig}");
        if use_ansi_coloring { Style::new().fg(Color::DarkGray).paint(text).to_string() } else { text }
    }
    fn complete_hint(&self) -> String {
        self.hint.clone()
    }
    fn next_hint_token(&self) -> String {
        String::new()
    }
}

struct ScriptHighlighter {
    functions: Vec<String>,
}

impl Highlighter for ScriptHighlighter {
    fn highlight(&self, line: &str, _cursor: usize) -> StyledText {
        let mut out = StyledText::new();
        let chars: Vec<(usize, char)> = line.char_indices().collect();
        let mut k = 0;
        while k < chars.len() {
            let (i, c) = chars[k];
            let mut j = k + 1;
            let style = if c == '"' {
                while j < chars.len() && chars[j].1 != '"' {
                    j += if chars[j].1 == '\\' { 2 } else { 1 };
                }
                j = (j + 1).min(chars.len());
                Style::new().fg(Color::Green)
            } else if c == '/' && chars.get(k + 1).map(|x| x.1) == Some('/') {
                j = chars.len();
                Style::new().fg(Color::DarkGray)
            } else if c.is_ascii_digit() {
                while j < chars.len()
                    && (chars[j].1.is_ascii_digit()
                        || chars[j].1 == '_'
                        || (chars[j].1 == '.' && chars.get(j + 1).is_some_and(|x| x.1.is_ascii_digit())))
                {
                    j += 1;
                }
                Style::new().fg(Color::Cyan)
            } else if c.is_alphabetic() || c == '_' {
                while j < chars.len() && (chars[j].1.is_alphanumeric() || chars[j].1 == '_') {
                    j += 1;
                }
                let end = chars.get(j).map_or(line.len(), |x| x.0);
                let word = &line[i..end];
                let after_dot = i > 0 && line[..i].ends_with('.');
                if KEYWORDS.contains(&word) {
                    Style::new().fg(Color::Magenta).bold()
                } else if after_dot {
                    Style::new().fg(Color::Yellow)
                } else if self.functions.binary_search(&word.to_string()).is_ok() {
                    Style::new().fg(Color::Blue)
                } else {
                    Style::new()
                }
            } else {
                Style::new()
            };
            let end = chars.get(j).map_or(line.len(), |x| x.0);
            out.push((style, line[i..end].to_string()));
            k = j;
        }
        out
    }
}

fn history_path() -> Option<std::path::PathBuf> {
    if let Ok(p) = std::env::var("STAGNA_HISTORY") {
        return Some(p.into());
    }
    directories::ProjectDirs::from("", "", "stagna").map(|d| d.data_dir().join("history.txt"))
}

fn interactive(session: Session) -> i32 {
    let mut functions: Vec<String> = session.catalog().entries().map(|e| e.name.clone()).collect();
    functions.sort();
    functions.dedup();
    let shared: Shared = Arc::new(Mutex::new(session));
    let menu = ColumnarMenu::default().with_name("completion_menu");
    let mut keys = default_emacs_keybindings();
    keys.add_binding(
        KeyModifiers::NONE,
        KeyCode::Tab,
        ReedlineEvent::UntilFound(vec![ReedlineEvent::Menu("completion_menu".into()), ReedlineEvent::MenuNext]),
    );
    let mut editor = Reedline::create()
        .with_completer(Box::new(ScriptCompleter(shared.clone())))
        .with_menu(ReedlineMenu::EngineCompleter(Box::new(menu)))
        .with_edit_mode(Box::new(Emacs::new(keys)))
        .with_validator(Box::new(BracketValidator))
        .with_highlighter(Box::new(ScriptHighlighter { functions }))
        .with_hinter(Box::new(SignatureHinter { session: shared.clone(), hint: String::new() }));
    if let Some(path) = history_path()
        && let Ok(h) = FileBackedHistory::with_file(5000, path)
    {
        editor = editor.with_history(Box::new(h));
    }
    let prompt = DefaultPrompt::new(DefaultPromptSegment::Basic("stagna".into()), DefaultPromptSegment::Empty);
    println!(
        "stagna {}: differential-pressure flow reduction. `help` lists functions, `help NAME` explains one, Ctrl-D quits.",
        env!("CARGO_PKG_VERSION")
    );
    loop {
        match editor.read_line(&prompt) {
            Ok(Signal::Success(line)) => {
                if line.trim().is_empty() {
                    continue;
                }
                let mut s = lock(&shared);
                eval_and_print(&mut s, &line, "input", true);
                let _ = std::io::stdout().flush();
            }
            Ok(Signal::CtrlC) => continue,
            Ok(Signal::CtrlD) => return 0,
            Ok(_) => continue,
            Err(e) => {
                eprintln!("error: terminal: {e}");
                return 1;
            }
        }
    }
}
