//! `stagna run --shard K/N` and `--resume`: a deterministic partition of the inputs for the
//! array tasks of an existing scheduler, and a manifest per shard that a rerun continues.

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn stagna(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_stagna")).args(args).output().expect("the stagna binary runs")
}

fn tempdir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("stagna-shards-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).expect("temp dir");
    d
}

/// Six inputs in two site folders and a script that copies each into its output folder.
fn fixture(dir: &Path) -> (PathBuf, Vec<String>) {
    let mut files = Vec::new();
    for (i, site) in ["north", "north", "north", "south", "south", "south"].iter().enumerate() {
        let f = dir.join("in").join(site).join(format!("run-{i}.csv"));
        std::fs::create_dir_all(f.parent().unwrap_or(dir)).expect("dir");
        std::fs::write(&f, format!("point,dp\nP1,{}\nP2,{}\n", 100 + i, 120 + i)).expect("write");
        files.push(f.display().to_string());
    }
    let script = dir.join("copy.rhai");
    std::fs::write(&script, "let t = read_table(input); t.write(\"copy.csv\"); print(`ran ${input_name}`);\n")
        .expect("script");
    (script, files)
}

fn ran(o: &Output) -> BTreeSet<String> {
    String::from_utf8_lossy(&o.stdout).lines().filter_map(|l| l.strip_prefix("ran ").map(str::to_string)).collect()
}

fn outputs(out: &Path) -> BTreeSet<String> {
    let mut found = BTreeSet::new();
    for site in ["north", "south"] {
        if let Ok(rd) = std::fs::read_dir(out.join(site)) {
            for e in rd.flatten() {
                if e.path().join("copy.csv").is_file() {
                    found.insert(format!("{site}/{}", e.file_name().to_string_lossy()));
                }
            }
        }
    }
    found
}

#[test]
fn concurrent_shards_cover_every_input_once_as_one_run_does() {
    let dir = tempdir("cover");
    let (script, files) = fixture(&dir);
    let whole = dir.join("whole");
    let mut args = vec!["run", script.to_str().unwrap_or_default(), "-o", whole.to_str().unwrap_or_default()];
    args.extend(files.iter().map(String::as_str));
    let o = stagna(&args);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let all = ran(&o);
    assert_eq!(all.len(), 6);
    // Three shards at once into one output folder, as three array tasks would.
    let sharded = dir.join("sharded");
    let children: Vec<_> = (0..3)
        .map(|k| {
            let spec = format!("{k}/3");
            let mut a = vec![
                "run".to_string(),
                script.display().to_string(),
                "-o".into(),
                sharded.display().to_string(),
                "--shard".into(),
                spec,
            ];
            a.extend(files.iter().cloned());
            Command::new(env!("CARGO_BIN_EXE_stagna")).args(&a).output().expect("runs")
        })
        .collect();
    let mut union = BTreeSet::new();
    let mut total = 0;
    for (k, o) in children.iter().enumerate() {
        assert!(o.status.success(), "shard {k}: {}", String::from_utf8_lossy(&o.stderr));
        let r = ran(o);
        total += r.len();
        union.extend(r);
        assert!(sharded.join(".stagna").join(format!("manifest-shard-{k}-of-3.json")).is_file());
    }
    assert_eq!((union.clone(), total), (all, 6), "every input once");
    assert_eq!(outputs(&sharded), outputs(&whole), "the same output folders as one run");
    for (a, b) in outputs(&whole).iter().map(|p| (whole.join(p).join("copy.csv"), sharded.join(p).join("copy.csv"))) {
        assert_eq!(std::fs::read(a).ok(), std::fs::read(b).ok());
    }
    // A shard out of range, or an auto index without a scheduler, is a clear error.
    let mut a = vec!["run", script.to_str().unwrap_or_default(), "--shard", "3/3"];
    a.extend(files.iter().map(String::as_str));
    let o = stagna(&a);
    assert!(!o.status.success() && String::from_utf8_lossy(&o.stderr).contains("out of range"));
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn resume_skips_done_inputs_and_redoes_changed_and_interrupted_ones() {
    let dir = tempdir("resume");
    let (script, files) = fixture(&dir);
    let out = dir.join("out");
    let base = |extra: &[&str]| {
        let mut a = vec!["run", script.to_str().unwrap_or_default(), "-o", out.to_str().unwrap_or_default()];
        a.extend_from_slice(extra);
        a.extend(files.iter().map(String::as_str));
        stagna(&a)
    };
    assert_eq!(ran(&base(&[])).len(), 6);
    // Nothing to do on a resume.
    let o = base(&["--resume"]);
    assert!(o.status.success() && ran(&o).is_empty(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(String::from_utf8_lossy(&o.stderr).contains("6 input(s) already done"));
    // A changed input and an interrupted one are run again, and only they.
    std::fs::write(&files[1], "point,dp\nP1,999\n").expect("change");
    let mpath = out.join(".stagna").join("manifest-shard-0-of-1.json");
    let m = std::fs::read_to_string(&mpath).expect("manifest");
    let m = m.replacen("\"status\": \"done\"", "\"status\": \"running\"", 1); // the first key in order: north/run-0.csv
    std::fs::write(&mpath, m).expect("manifest");
    let o = base(&["--resume"]);
    assert_eq!(
        ran(&o),
        ["run-0", "run-1"].iter().map(|s| s.to_string()).collect(),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("changed since the manifest") && err.contains("running in the earlier run"), "{err}");
    // Another script: refused, nothing run.
    std::fs::write(&script, "print(`ran ${input_name} twice`);\n").expect("script");
    let o = base(&["--resume"]);
    assert!(!o.status.success() && String::from_utf8_lossy(&o.stderr).contains("another version of the script"));
    // A damaged manifest is named.
    std::fs::write(&mpath, "{not json").expect("manifest");
    let o = base(&["--resume"]);
    assert!(!o.status.success() && String::from_utf8_lossy(&o.stderr).contains("not a run manifest"));
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn a_large_csv_input_is_hashed_from_the_scripts_reads_or_read_again() {
    let dir = tempdir("tap");
    // Over 8 MiB: hashed from the bytes the script's scans read (stagna::io::tap).
    let f = dir.join("in").join("long-run.csv");
    std::fs::create_dir_all(f.parent().unwrap_or(&dir)).expect("dir");
    let mut text = String::from("# Fernleigh weir, logger 3\npoint,dp_pa,t_c\n");
    for i in 0..700_000 {
        text.push_str(&format!("P{},{}.{:02},{}\n", i % 24, 100 + i % 37, i % 100, 15 + i % 3));
    }
    assert!(text.len() > 8 << 20);
    std::fs::write(&f, &text).expect("write");
    // The oracle: XXH3-128 of the file's bytes in one call.
    let want = format!("{:032x}", xxhash_rust::xxh3::xxh3_128(text.as_bytes()));
    let scripts = [
        ("whole", "let t = read_table(input); print(`ran ${t.len}`);"),
        ("twice", "let t = read_table(input); let u = read_table(input); print(`ran ${t.len + u.len}`);"),
        // Never reads the input: the runner reads it for the hash.
        ("unread", "print(`ran ${input_name}`);"),
    ];
    for (tag, body) in scripts {
        let script = dir.join(format!("{tag}.rhai"));
        std::fs::write(&script, body).expect("script");
        let out = dir.join(format!("out-{tag}"));
        let o = stagna(&[
            "run",
            script.to_str().unwrap_or_default(),
            "-o",
            out.to_str().unwrap_or_default(),
            f.to_str().unwrap_or_default(),
        ]);
        assert!(o.status.success(), "{tag}: {}", String::from_utf8_lossy(&o.stderr));
        let m = std::fs::read_to_string(out.join(".stagna").join("manifest-shard-0-of-1.json")).expect("manifest");
        let m: serde_json::Value = serde_json::from_str(&m).expect("json");
        let entry = &m["inputs"]["long-run.csv"];
        assert_eq!(entry["status"], "done", "{tag}");
        assert_eq!(entry["size"], text.len() as u64, "{tag}");
        assert_eq!(entry["xxh3_128"], want.as_str(), "{tag}");
    }
    // A resume knows the input unchanged by that hash.
    let o = stagna(&[
        "run",
        dir.join("whole.rhai").to_str().unwrap_or_default(),
        "-o",
        dir.join("out-whole").to_str().unwrap_or_default(),
        "--resume",
        f.to_str().unwrap_or_default(),
    ]);
    assert!(o.status.success() && ran(&o).is_empty(), "{}", String::from_utf8_lossy(&o.stderr));
    let _ = std::fs::remove_dir_all(&dir);
}
