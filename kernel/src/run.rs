//! `stagna run SCRIPT [--set NAME=VALUE ...] [FILES ...]`: the batch runner.
//!
//! Each input file gets its own session (in parallel, with a progress bar on a
//! terminal) with `input`, `input_name`, `output_dir` and `run_dir` (the top output
//! folder, for results shared by all inputs) set; relative output paths go
//! to the output folder (a subfolder per input file when there are several, unique per
//! input: its path relative to the inputs' common folder); temporaries that an
//! interrupted earlier run left in the output folder are removed first; input
//! files and the script are never overwritten; scripts write only inside the output
//! folder (and folders given with `--allow-write`); every write goes through a temporary
//! file and a rename. The first failing file's message ends the run with status 1
//! after the others finish.

use std::io::IsTerminal;
use std::path::{Path, PathBuf};
use std::sync::{Arc, Mutex};

use rayon::prelude::*;
use rhai::Dynamic;

use crate::api::Q;
use crate::session::{LimitArgs, Session};

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
    /// Limits of each file's session.
    #[command(flatten)]
    pub limits: LimitArgs,
    /// Also allow the scripts to write into this folder (repeatable); by default they
    /// write only inside the output folder. Reading is not restricted.
    #[arg(long, value_name = "DIR")]
    pub allow_write: Vec<PathBuf>,
    /// Parallel jobs (default: one per core).
    #[arg(long, short = 'j', value_name = "N")]
    pub jobs: Option<usize>,
    /// Also write a self-contained HTML report of each run (everything the script showed,
    /// with the cautions) under this name in the output folder (one per input file).
    #[arg(long, value_name = "FILE.html")]
    pub report: Option<String>,
    /// Run only shard K of N of the inputs (K from 0; `auto/N` reads the index from
    /// SLURM_ARRAY_TASK_ID or JOB_COMPLETION_INDEX). Every input belongs to exactly one
    /// shard, chosen from a hash of its path relative to the inputs' common folder.
    #[arg(long, value_name = "K/N")]
    pub shard: Option<String>,
    /// Skip inputs that this shard's manifest in the output folder records as done with
    /// the same contents and the same script; redo failed, interrupted and changed ones.
    #[arg(long)]
    pub resume: bool,
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

fn run_one(
    session: &mut Session,
    args: &RunArgs,
    script: &str,
    file: Option<&Path>,
    out_dir: &Path,
    protected: &[PathBuf],
) -> RunResult {
    session.start_over();
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
        p.write_roots = Some(std::iter::once(args.out.clone()).chain(args.allow_write.iter().cloned()).collect());
    }
    session.set_var("output_dir", Dynamic::from(out_dir.display().to_string()));
    // The run's top output folder, absolute: where results shared by all inputs go (a
    // partitioned dataset that every input, and every shard, adds its files to).
    let run_dir = std::fs::canonicalize(&args.out).unwrap_or_else(|_| args.out.clone());
    session.set_var("run_dir", Dynamic::from(run_dir.display().to_string()));
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
    let result = session.eval_same_script(script);
    let report_error = args.report.as_ref().and_then(|r| {
        let title = match file {
            Some(f) => format!("{} on {}", args.script.file_stem().unwrap_or_default().to_string_lossy(), f.display()),
            None => args.script.file_stem().unwrap_or_default().to_string_lossy().to_string(),
        };
        let html = session.report_html(&title, Some(&name));
        let target = out_dir.join(r);
        stagna::io::table::write_atomically(&target, |f| std::io::Write::write_all(f, html.as_bytes()))
            .err()
            .map(|e| format!("{}: the report could not be written: {e}", target.display()))
    });
    let mut lines = match printed.lock() {
        Ok(v) => v.clone(),
        Err(e) => e.into_inner().clone(),
    };
    match result {
        Ok(out) => {
            if let Some(v) = out.value {
                lines.push(v.text);
            }
            RunResult { printed: lines, error: report_error }
        }
        Err(e) => RunResult { printed: lines, error: Some(e.render(&name, script, false)) },
    }
}

/// The size of a CSV input large enough to be hashed from its scans' reads (over 8 MiB).
fn large_csv(f: &Path) -> Option<u64> {
    let csv = f
        .extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| e.eq_ignore_ascii_case("csv") || e.eq_ignore_ascii_case("txt"));
    std::fs::metadata(f).ok().map(|m| m.len()).filter(|&n| csv && n > 8 << 20)
}

/// One output subfolder per input file, unique across the batch: the input's path
/// relative to the folder all inputs share, without its extension (`siteX/run.csv` and
/// `siteY/run.csv` go to `OUT/siteX/run` and `OUT/siteY/run`). Inputs that differ only
/// in their extension keep it (`run-csv`, `run-parquet`); a file given twice is refused.
pub fn output_dirs(files: &[PathBuf], out: &Path) -> Result<Vec<PathBuf>, String> {
    let abs: Vec<PathBuf> = files
        .iter()
        .map(|f| std::fs::canonicalize(f).map_err(|e| format!("{}: cannot read the input file: {e}", f.display())))
        .collect::<Result<_, _>>()?;
    for (i, a) in abs.iter().enumerate() {
        if let Some(j) = abs[..i].iter().position(|b| b == a) {
            return Err(format!(
                "{}: the same input file is given twice (also as {}); give each file once",
                files[i].display(),
                files[j].display()
            ));
        }
    }
    let common = common_folder(&abs);
    let rel = |a: &Path, keep_ext: bool| -> PathBuf {
        let r = a.strip_prefix(&common).unwrap_or(a);
        let name = match (keep_ext, r.extension()) {
            (true, Some(ext)) => {
                format!("{}-{}", r.file_stem().unwrap_or_default().to_string_lossy(), ext.to_string_lossy())
            }
            _ => r.file_stem().map(|s| s.to_string_lossy().to_string()).unwrap_or_else(|| "input".into()),
        };
        r.with_file_name(name)
    };
    let plain: Vec<PathBuf> = abs.iter().map(|a| rel(a, false)).collect();
    Ok(abs
        .iter()
        .zip(&plain)
        .map(|(a, p)| {
            let clash = plain.iter().filter(|q| *q == p).count() > 1;
            out.join(if clash { rel(a, true) } else { p.clone() })
        })
        .collect())
}

/// The folder all the (canonical) paths share.
fn common_folder(abs: &[PathBuf]) -> PathBuf {
    let mut common: PathBuf = abs[0].parent().map(Path::to_path_buf).unwrap_or_default();
    for a in &abs[1..] {
        while !a.starts_with(&common) {
            if !common.pop() {
                break;
            }
        }
    }
    common
}

/// Each input's key for shards and manifests: its path relative to the inputs' common
/// folder, with '/' between parts.
pub fn input_keys(files: &[PathBuf]) -> Result<Vec<String>, String> {
    let abs: Vec<PathBuf> = files
        .iter()
        .map(|f| std::fs::canonicalize(f).map_err(|e| format!("{}: cannot read the input file: {e}", f.display())))
        .collect::<Result<_, _>>()?;
    let common =
        if abs.len() == 1 { abs[0].parent().map(Path::to_path_buf).unwrap_or_default() } else { common_folder(&abs) };
    Ok(abs
        .iter()
        .map(|a| {
            a.strip_prefix(&common)
                .unwrap_or(a)
                .components()
                .map(|c| c.as_os_str().to_string_lossy().to_string())
                .collect::<Vec<_>>()
                .join("/")
        })
        .collect())
}

/// The cautions of the work, once per run, after results people may act on (unless the
/// script printed its own, as a stack run sheet does).
fn print_caution(results: &[RunResult]) {
    let printed = results.iter().any(|r| !r.printed.is_empty());
    let own = results.iter().flat_map(|r| &r.printed).any(|l| l.contains("Caution:"));
    if printed && !own {
        println!("\n{}", crate::demo::CAUTION);
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
    if let Some(r) = &args.report {
        let ok = std::path::Path::new(r).components().count() == 1
            && (r.to_ascii_lowercase().ends_with(".html") || r.to_ascii_lowercase().ends_with(".htm"));
        if !ok {
            return Err(
                format!("--report {r}: give a file name ending in .html (it is written in the output folder)").into()
            );
        }
    }
    let limits = args.limits.limits()?;
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
        let r = run_one(&mut Session::with_limits(limits), args, &script, None, &args.out, &protected);
        for l in &r.printed {
            println!("{l}");
        }
        print_caution(std::slice::from_ref(&r));
        if let Some(e) = r.error {
            eprintln!("{e}");
            return Ok(1);
        }
        return Ok(0);
    }

    let removed = stagna::io::table::remove_stale_temporaries(&args.out);
    if removed > 0 {
        eprintln!("{}: removed {removed} temporary file(s) left by an interrupted earlier run", args.out.display());
    }
    let several = args.files.len() > 1;
    let all_dirs = if several { output_dirs(&args.files, &args.out)? } else { vec![args.out.clone()] };
    let shard = match &args.shard {
        Some(spec) => crate::shard::Shard::parse(spec, |v| std::env::var(v).ok())?,
        None => crate::shard::Shard { index: 0, count: 1 },
    };
    let keys = input_keys(&args.files)?;
    let manifest_path = crate::shard::Manifest::path(&args.out, shard);
    let mut manifest = crate::shard::Manifest::new(&script, shard);
    let earlier = if args.resume { crate::shard::Manifest::read(&manifest_path)? } else { None };
    if let Some(m) = &earlier
        && m.script_sha256 != manifest.script_sha256
    {
        return Err(format!(
            "{}: this manifest was written for another version of the script (SHA-256 {}…, now {}…); --resume only continues the same script: rerun without --resume, or use a new output folder",
            manifest_path.display(),
            &m.script_sha256[..12],
            &manifest.script_sha256[..12]
        )
        .into());
    }
    // This shard's inputs, less those an earlier run finished with the same contents. When
    // resuming, the inputs are hashed first (in parallel) to compare with the manifest;
    // otherwise each input is hashed while its own script runs (a large input's hash then
    // costs no time of its own), and the manifest holds its size until then.
    let owned: Vec<usize> = (0..args.files.len()).filter(|&i| shard.owns(&keys[i])).collect();
    let hashes: Vec<(u64, String)> = if earlier.is_some() {
        owned
            .par_iter()
            .map(|&i| {
                let f = &args.files[i];
                crate::shard::file_hash(f).map_err(|e| format!("{}: cannot read the input file: {e}", f.display()))
            })
            .collect::<Result<_, String>>()?
    } else {
        owned
            .iter()
            .map(|&i| {
                let f = &args.files[i];
                std::fs::metadata(f)
                    .map(|m| (m.len(), String::new()))
                    .map_err(|e| format!("{}: cannot read the input file: {e}", f.display()))
            })
            .collect::<Result<_, String>>()?
    };
    let mut chosen: Vec<usize> = Vec::new();
    let mut skipped = 0usize;
    for (&i, (size, sha)) in owned.iter().zip(hashes) {
        let (f, key) = (&args.files[i], &keys[i]);
        let entry = crate::shard::Entry {
            size,
            xxh3_128: sha,
            output: all_dirs[i].display().to_string(),
            status: "pending".into(),
            error: None,
        };
        match earlier.as_ref().and_then(|m| m.inputs.get(key)) {
            Some(e)
                if e.status == "done"
                    && !e.xxh3_128.is_empty()
                    && e.xxh3_128 == entry.xxh3_128
                    && e.size == entry.size =>
            {
                skipped += 1;
                manifest.inputs.insert(key.clone(), e.clone());
                continue;
            }
            Some(e) if e.status == "done" => {
                eprintln!("{}: changed since the manifest recorded it done; running it again", f.display());
            }
            Some(e) => eprintln!("{}: {} in the earlier run; running it again", f.display(), e.status),
            None => {}
        }
        manifest.inputs.insert(key.clone(), entry);
        chosen.push(i);
    }
    if skipped > 0 {
        eprintln!("--resume: {skipped} input(s) already done with the same contents and script, skipped");
    }
    if args.shard.is_some() {
        eprintln!("shard {}/{}: {} of {} input(s) to run", shard.index, shard.count, chosen.len(), args.files.len());
    }
    manifest.write(&manifest_path)?;
    // Statuses are written at most once a second and once at the end: rewriting the whole
    // manifest after every input would cost O(inputs²) bytes on a large shard. An
    // interruption loses at most the last second's statuses, and `--resume` reruns those
    // inputs (pending or running), rewriting their outputs atomically.
    let manifest = std::sync::Mutex::new((manifest, std::time::Instant::now()));
    let record = |key: &str, status: &str, error: Option<String>, hash: Option<(u64, String)>| -> Result<(), String> {
        let mut g = match manifest.lock() {
            Ok(g) => g,
            Err(e) => e.into_inner(),
        };
        if let Some(e) = g.0.inputs.get_mut(key) {
            e.status = status.into();
            e.error = error;
            if let Some((size, sha)) = hash {
                e.size = size;
                e.xxh3_128 = sha;
            }
        }
        if g.1.elapsed() < std::time::Duration::from_secs(1) {
            return Ok(());
        }
        g.1 = std::time::Instant::now();
        g.0.write(&manifest_path)
    };
    let files: Vec<PathBuf> = chosen.iter().map(|&i| args.files[i].clone()).collect();
    let dirs: Vec<PathBuf> = chosen.iter().map(|&i| all_dirs[i].clone()).collect();
    let chosen_keys: Vec<String> = chosen.iter().map(|&i| keys[i].clone()).collect();
    let bar = if several && std::io::stderr().is_terminal() {
        let b = indicatif::ProgressBar::new(files.len() as u64);
        if let Ok(style) = indicatif::ProgressStyle::with_template("{bar:40} {pos}/{len} files  {elapsed}  {msg}") {
            b.set_style(style);
        }
        Some(b)
    } else {
        None
    };
    // One plain thread per job, each with its own session started over for each input
    // (building one costs more than a small input's whole reduction), taking the next input
    // from a shared counter. Not a rayon pool: a rayon worker that calls into polars' or the
    // library's thread pool spins while it waits, which on 2 cores took the time of the
    // work it waited for (0.5–1 ms an input); a plain thread sleeps. Big stacks as for the
    // main thread (deep script data is dropped recursively).
    let jobs =
        args.jobs.filter(|&j| j > 0).unwrap_or_else(|| std::thread::available_parallelism().map_or(1, |n| n.get()));
    let next = std::sync::atomic::AtomicUsize::new(0);
    let slots: Vec<Mutex<Option<RunResult>>> = files.iter().map(|_| Mutex::new(None)).collect();
    let work = |session: &mut Session, k: usize| -> RunResult {
        let (f, dir, key) = (&files[k], &dirs[k], &chosen_keys[k]);
        let mut hash = None;
        let started = record(key, "running", None, None).and_then(|()| {
            std::fs::create_dir_all(dir).map_err(|e| format!("{}: cannot create folder: {e}", dir.display()))
        });
        let mut r = match (started, large_csv(f)) {
            // A large CSV input is hashed for the manifest from the bytes the script's scans
            // read (see stagna::io::tap), and read again after the run only when they did
            // not cover it; another large input is hashed on its own thread while its
            // script runs; a small one after (a thread per small input cost more than its
            // hash: a fresh allocator heap for each).
            (Ok(()), Some(size)) => {
                let tap = std::sync::Arc::new(crate::shard::ContentTap::new(size));
                let guard = stagna::io::tap::tap_reads(f, tap.clone()).ok();
                let r = run_one(session, args, &script, Some(f), dir, &protected);
                drop(guard);
                hash = tap.digest(f).or_else(|| crate::shard::file_hash(f).ok());
                r
            }
            (Ok(()), None) if std::fs::metadata(f).is_ok_and(|m| m.len() > 8 << 20) => std::thread::scope(|sc| {
                let hashing = sc.spawn(|| crate::shard::file_hash(f).ok());
                let r = run_one(session, args, &script, Some(f), dir, &protected);
                hash = hashing.join().ok().flatten();
                r
            }),
            (Ok(()), None) => {
                let r = run_one(session, args, &script, Some(f), dir, &protected);
                hash = crate::shard::file_hash(f).ok();
                r
            }
            (Err(e), _) => RunResult { printed: vec![], error: Some(e) },
        };
        let status = if r.error.is_some() { "failed" } else { "done" };
        if let Err(e) = record(key, status, r.error.clone(), hash) {
            r.error.get_or_insert(e);
        }
        if let Some(b) = &bar {
            b.set_message(f.file_name().map(|s| s.to_string_lossy().to_string()).unwrap_or_default());
            b.inc(1);
        }
        r
    };
    std::thread::scope(|sc| -> Result<(), std::io::Error> {
        for _ in 0..jobs.min(files.len()) {
            std::thread::Builder::new().stack_size(256 << 20).spawn_scoped(sc, || {
                let mut session = Session::with_limits(limits);
                loop {
                    let k = next.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
                    if k >= files.len() {
                        break;
                    }
                    // A panic (a defect, never bad input) fails this input alone; the worker
                    // goes on with a fresh session.
                    let r = match std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| work(&mut session, k))) {
                        Ok(r) => r,
                        Err(p) => {
                            session = Session::with_limits(limits);
                            let why = p
                                .downcast_ref::<&str>()
                                .map(|s| s.to_string())
                                .or_else(|| p.downcast_ref::<String>().cloned())
                                .unwrap_or_default();
                            RunResult {
                                printed: vec![],
                                error: Some(format!("internal error (please report it): {why}")),
                            }
                        }
                    };
                    match slots[k].lock() {
                        Ok(mut g) => *g = Some(r),
                        Err(e) => *e.into_inner() = Some(r),
                    }
                }
            })?;
        }
        Ok(())
    })?;
    let results: Vec<RunResult> = slots
        .into_iter()
        .map(|m| {
            let r = match m.into_inner() {
                Ok(r) => r,
                Err(e) => e.into_inner(),
            };
            // Every input was taken by a worker that stores its result, panic or not.
            r.unwrap_or_else(|| RunResult { printed: vec![], error: Some("this input was not run".into()) })
        })
        .collect();
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    let final_write = match manifest.into_inner() {
        Ok(g) => g.0.write(&manifest_path),
        Err(e) => e.into_inner().0.write(&manifest_path),
    };
    let mut failed = 0;
    for (f, r) in files.iter().zip(&results) {
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
    print_caution(&results);
    if let Err(e) = final_write {
        eprintln!("{e}");
        return Ok(1);
    }
    if failed > 0 {
        eprintln!("{failed} of {} file(s) failed", files.len());
        return Ok(1);
    }
    Ok(0)
}
