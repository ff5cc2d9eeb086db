//! `stagna run SCRIPT [--set NAME=VALUE ...] [FILES ...]`: the batch runner.
//!
//! Each input file gets its own session (in parallel, with a progress bar on a
//! terminal) with `input`, `input_name` and `output_dir` set; relative output paths go
//! to the output folder (a subfolder per input file when there are several); input
//! files and the script are never overwritten; every write goes through a temporary
//! file and a rename. The first failing file's message ends the run with status 1
//! after the others finish.

use std::io::IsTerminal;
use std::path::{Path, PathBuf};
use std::sync::{Arc, Mutex};

use rayon::prelude::*;
use rhai::Dynamic;

use crate::api::Q;
use crate::session::{Limits, Session};

/// Arguments of `stagna run`.
#[derive(clap::Args, Debug)]
pub struct RunArgs {
    /// The script (.rhai).
    pub script: PathBuf,
    /// Input files; the script runs once per file with `input` set to its path.
    pub files: Vec<PathBuf>,
    /// Set a script variable: a number, a quantity ("600 mm"), true/false, or text.
    #[arg(long = "set", value_name = "NAME=VALUE")]
    pub set: Vec<String>,
    /// Output folder for relative output paths.
    #[arg(long, short = 'o', value_name = "DIR", default_value = "stagna-out")]
    pub out: PathBuf,
    /// Operation limit per run (stops runaway loops).
    #[arg(long, value_name = "N", default_value_t = Limits::default().operations)]
    pub max_operations: u64,
    /// Parallel jobs (default: one per core).
    #[arg(long, short = 'j', value_name = "N")]
    pub jobs: Option<usize>,
}

/// A `--set` value as a script value.
pub fn parse_value(v: &str) -> Dynamic {
    let t = v.trim();
    if let Ok(i) = t.parse::<i64>() {
        return Dynamic::from(i);
    }
    if let Ok(f) = t.parse::<f64>() {
        return Dynamic::from(f);
    }
    match t {
        "true" => return Dynamic::from(true),
        "false" => return Dynamic::from(false),
        _ => {}
    }
    if t.starts_with(|c: char| c.is_ascii_digit() || c == '-' || c == '.')
        && let Ok(q) = stagna::Quantity::parse(t)
    {
        let unit = t.trim_start_matches(|c: char| c.is_ascii_digit() || "+-.eE".contains(c)).trim();
        return Dynamic::from(Q { q, unit: Some(unit.into()) });
    }
    Dynamic::from(t.to_string())
}

struct RunResult {
    printed: Vec<String>,
    error: Option<String>,
}

fn run_one(args: &RunArgs, script: &str, file: Option<&Path>, out_dir: &Path, protected: &[PathBuf]) -> RunResult {
    let limits = Limits { operations: args.max_operations, ..Limits::default() };
    let mut session = Session::with_limits(limits);
    let printed = Arc::new(Mutex::new(Vec::new()));
    let sink = printed.clone();
    session.set_output(move |s| {
        if let Ok(mut v) = sink.lock() {
            v.push(s.to_string());
        }
    });
    {
        let prefs = session.prefs();
        let mut p = match prefs.write() {
            Ok(g) => g,
            Err(e) => e.into_inner(),
        };
        p.output_dir = Some(out_dir.to_path_buf());
        p.protected = protected.to_vec();
    }
    session.set_var("output_dir", Dynamic::from(out_dir.display().to_string()));
    if let Some(f) = file {
        session.set_var("input", Dynamic::from(f.display().to_string()));
        let stem = f.file_stem().map(|s| s.to_string_lossy().to_string()).unwrap_or_default();
        session.set_var("input_name", Dynamic::from(stem));
    }
    for kv in &args.set {
        if let Some((k, v)) = kv.split_once('=') {
            session.set_var(k.trim(), parse_value(v));
        }
    }
    let name = args.script.display().to_string();
    let result = session.eval(script);
    let mut lines = match printed.lock() {
        Ok(v) => v.clone(),
        Err(e) => e.into_inner().clone(),
    };
    match result {
        Ok(out) => {
            if let Some(v) = out.value {
                lines.push(v.text);
            }
            RunResult { printed: lines, error: None }
        }
        Err(e) => RunResult { printed: lines, error: Some(e.render(&name, script, false)) },
    }
}

/// Runs the batch; returns the exit status.
pub fn run(args: &RunArgs) -> Result<i32, Box<dyn std::error::Error>> {
    let script = std::fs::read_to_string(&args.script)
        .map_err(|e| format!("{}: cannot read the script: {e}", args.script.display()))?;
    for kv in &args.set {
        if !kv.contains('=') {
            return Err(format!("--set {kv}: write NAME=VALUE").into());
        }
    }
    for f in &args.files {
        if !f.is_file() {
            return Err(format!("{}: no such input file", f.display()).into());
        }
    }
    let mut protected: Vec<PathBuf> = args.files.clone();
    protected.push(args.script.clone());
    std::fs::create_dir_all(&args.out)
        .map_err(|e| format!("{}: cannot create the output folder: {e}", args.out.display()))?;

    if args.files.is_empty() {
        let r = run_one(args, &script, None, &args.out, &protected);
        for l in &r.printed {
            println!("{l}");
        }
        if let Some(e) = r.error {
            eprintln!("{e}");
            return Ok(1);
        }
        return Ok(0);
    }

    let several = args.files.len() > 1;
    let bar = if several && std::io::stderr().is_terminal() {
        let b = indicatif::ProgressBar::new(args.files.len() as u64);
        if let Ok(style) = indicatif::ProgressStyle::with_template("{bar:40} {pos}/{len} files  {elapsed}  {msg}") {
            b.set_style(style);
        }
        Some(b)
    } else {
        None
    };
    let pool = rayon::ThreadPoolBuilder::new().num_threads(args.jobs.unwrap_or(0)).build()?;
    let results: Vec<RunResult> = pool.install(|| {
        args.files
            .par_iter()
            .map(|f| {
                let dir = if several {
                    args.out
                        .join(f.file_stem().map(|s| s.to_string_lossy().to_string()).unwrap_or_else(|| "input".into()))
                } else {
                    args.out.clone()
                };
                let r = match std::fs::create_dir_all(&dir) {
                    Ok(()) => run_one(args, &script, Some(f), &dir, &protected),
                    Err(e) => RunResult {
                        printed: vec![],
                        error: Some(format!("{}: cannot create folder: {e}", dir.display())),
                    },
                };
                if let Some(b) = &bar {
                    b.set_message(f.file_name().map(|s| s.to_string_lossy().to_string()).unwrap_or_default());
                    b.inc(1);
                }
                r
            })
            .collect()
    });
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    let mut failed = 0;
    for (f, r) in args.files.iter().zip(&results) {
        if several {
            println!("== {} ==", f.display());
        }
        for l in &r.printed {
            println!("{l}");
        }
        if let Some(e) = &r.error {
            failed += 1;
            eprintln!("{}: {e}", f.display());
        }
    }
    if failed > 0 {
        eprintln!("{failed} of {} file(s) failed", args.files.len());
        return Ok(1);
    }
    Ok(0)
}
