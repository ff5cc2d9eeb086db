//! `scan_table` through `stagna run`: a folder of files reduced a batch at a time gives the
//! same traverse rows as the whole table read at once; a traverse met twice is refused.

use std::path::PathBuf;
use std::process::Command;

fn tempdir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("stagna-scans-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).expect("temp dir");
    d
}

/// Readings of `n` traverses of 6 points (500 mm duct, equal-area-like positions).
fn rows(n: usize) -> Vec<String> {
    let mut out = Vec::new();
    for k in 0..n {
        for i in 0..6 {
            let h = 12.0 + (k % 7) as f64 + [0.0, 2.5, 3.5, 3.0, 2.0, 0.5][i];
            let y = [22.0, 73.0, 150.0, 350.0, 427.0, 478.0][i];
            out.push(format!("{k},{h},{},500,{y}", 14 + k % 4));
        }
    }
    out
}

/// `stagna run SCRIPT -o OUT`.
fn run(script: &std::path::Path, out: &std::path::Path) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_stagna"))
        .args(["run", script.to_str().unwrap_or_default(), "-o", out.to_str().unwrap_or_default()])
        .output()
        .expect("runs")
}

const HEADER: &str = "traverse,deflection_mm,fluid_temp_c,diameter_mm,position_mm";

const SCRIPT: &str = r#"
let spec = #{fluid: humid_air(0.4), static_pressure: 100.5.kPa, manometer: inclined_gauge(gauge_water(), 20, 0.003),
    probe: pitot_static(0.997),
    columns: #{traverse: "traverse", deflection: "deflection_mm", fluid_temperature: "fluid_temp_c",
               size: "diameter_mm", position: "position_mm"}};
let units = #{deflection_mm: "mm", fluid_temp_c: "degC", diameter_mm: "mm", position_mm: "mm"};
let whole = reduce_campaign(read_table(WHOLE).units(units), spec).traverses;
whole.write("whole.csv");
let scan = scan_table(PARTS).units(units);
reduce_campaign(scan, spec).traverses.write("scan.csv");
let r = reduce_campaign_to(scan, spec, "scan.parquet");
read_table(r.file).write("sink.csv");
print(`files ${scan.files.len()} traverses ${r.traverses} readings ${r.readings}`);
"#;

#[test]
fn a_folder_scan_reduces_as_the_whole_table() {
    let dir = tempdir("whole");
    let all = rows(40);
    std::fs::write(dir.join("whole.csv"), format!("{HEADER}\n{}\n", all.join("\n"))).expect("write");
    // Three files; the cuts fall inside traverses 13 and 26 (their rows run on into the next file).
    let parts = dir.join("parts");
    std::fs::create_dir_all(&parts).expect("dir");
    for (i, (lo, hi)) in [(0, 81), (81, 159), (159, all.len())].iter().enumerate() {
        std::fs::write(parts.join(format!("day-{i}.csv")), format!("{HEADER}\n{}\n", all[*lo..*hi].join("\n")))
            .expect("write");
    }
    let script = dir.join("scan.rhai");
    let text = SCRIPT
        .replace("WHOLE", &format!("{:?}", dir.join("whole.csv").display().to_string()))
        .replace("PARTS", &format!("{:?}", parts.display().to_string()));
    std::fs::write(&script, text).expect("script");
    let out = dir.join("out");
    let o = run(&script, &out);
    let stdout = String::from_utf8_lossy(&o.stdout);
    assert!(o.status.success(), "{stdout}\n{}", String::from_utf8_lossy(&o.stderr));
    assert!(stdout.contains("files 3 traverses 40 readings 240"), "{stdout}");
    let read = |f: &str| std::fs::read_to_string(out.join(f)).unwrap_or_else(|e| panic!("{f}: {e}"));
    let whole = read("whole.csv");
    assert_eq!(whole.lines().count(), 41);
    assert_eq!(read("scan.csv"), whole);
    assert_eq!(read("sink.csv"), whole);
}

#[test]
fn a_traverse_met_twice_in_a_scan_is_refused_and_nothing_is_written() {
    let dir = tempdir("twice");
    let mut all = rows(10);
    all.extend(rows(3)); // traverses 0, 1, 2 again after 9
    std::fs::write(dir.join("r.csv"), format!("{HEADER}\n{}\n", all.join("\n"))).expect("write");
    let script = dir.join("twice.rhai");
    let text = SCRIPT
        .replace("let whole = reduce_campaign(read_table(WHOLE).units(units), spec).traverses;\nwhole.write(\"whole.csv\");\n", "")
        .replace("reduce_campaign(scan, spec).traverses.write(\"scan.csv\");\n", "")
        .replace("PARTS", &format!("{:?}", dir.join("r.csv").display().to_string()));
    std::fs::write(&script, text).expect("script");
    let out = dir.join("out");
    let o = run(&script, &out);
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert!(!o.status.success());
    assert!(
        stderr.contains("traverse 0 ") && stderr.contains("two places") && stderr.contains("sort the readings"),
        "{stderr}"
    );
    assert!(!out.join("scan.parquet").exists(), "no result file from a refused scan");
    let leftovers: Vec<_> =
        std::fs::read_dir(&out).map(|r| r.flatten().map(|e| e.file_name()).collect()).unwrap_or_default();
    assert!(leftovers.iter().all(|n| !n.to_string_lossy().contains("stagna-tmp")), "{leftovers:?}");
}

/// The batch runner reuses one session per worker: nothing a script sets reaches the next input.
#[test]
fn each_input_starts_from_a_fresh_session() {
    let dir = tempdir("fresh");
    let mut files = Vec::new();
    for name in ["a", "b", "c"] {
        let f = dir.join(format!("{name}.csv"));
        std::fs::write(&f, "x\n1\n").expect("write");
        files.push(f.display().to_string());
    }
    let script = dir.join("s.rhai");
    std::fs::write(
        &script,
        "print(`${input_name}: figures ${display_figures()} x ${is_def_var(\"x\")} length ${1.m}`);\n\
         display_figures(9); display_units(\"US\"); let x = 1;\n",
    )
    .expect("script");
    let out = dir.join("out");
    let mut args = vec!["run", script.to_str().unwrap_or_default(), "-o", out.to_str().unwrap_or_default(), "-j", "1"];
    args.extend(files.iter().map(String::as_str));
    let o = Command::new(env!("CARGO_BIN_EXE_stagna")).args(&args).output().expect("runs");
    let stdout = String::from_utf8_lossy(&o.stdout);
    assert!(o.status.success(), "{stdout}\n{}", String::from_utf8_lossy(&o.stderr));
    for name in ["a", "b", "c"] {
        assert!(stdout.contains(&format!("{name}: figures 4 x false length 1 m")), "{stdout}");
    }
}

/// A full disk, simulated by a file-size limit (`ulimit -f`, with SIGXFSZ ignored so that a
/// write fails instead of killing the process): a result that does not fit is refused with a
/// clear message, the earlier file of that name stays whole, and no temporary is left.
#[test]
fn a_full_disk_leaves_earlier_results_whole() {
    let dir = tempdir("full");
    std::fs::write(dir.join("r.csv"), format!("{HEADER}\n{}\n", rows(4000).join("\n"))).expect("write");
    let out = dir.join("out");
    std::fs::create_dir_all(&out).expect("out");
    std::fs::write(out.join("big.csv"), "earlier,result\n").expect("earlier");
    std::fs::write(out.join("traverses.parquet"), b"earlier parquet").expect("earlier");
    for (name, body) in [
        ("table", "let a = []; for i in 0..200000 { a.push(i * 1.0) }\ntable_from(#{x: a}).write(\"big.csv\");\n"),
        ("sink", &SCRIPT
            .replace("let whole = reduce_campaign(read_table(WHOLE).units(units), spec).traverses;\nwhole.write(\"whole.csv\");\n", "")
            .replace("reduce_campaign(scan, spec).traverses.write(\"scan.csv\");\n", "")
            .replace("\"scan.parquet\"", "\"traverses.parquet\"")
            .replace("PARTS", &format!("{:?}", dir.join("r.csv").display().to_string()))),
    ] {
        let script = dir.join(format!("{name}.rhai"));
        std::fs::write(&script, body).expect("script");
        // 20 blocks of 512 bytes: the earlier files fit, the new results do not.
        let cmd = format!(
            "ulimit -f 20; trap '' XFSZ; exec {:?} run {:?} -o {:?}",
            env!("CARGO_BIN_EXE_stagna"),
            script.display().to_string(),
            out.display().to_string()
        );
        let o = Command::new("sh").args(["-c", &cmd]).output().expect("sh runs");
        let stderr = String::from_utf8_lossy(&o.stderr);
        assert!(!o.status.success(), "{name}: {stderr}");
        assert!(stderr.contains("is full") && stderr.contains("earlier file stays as it was"), "{name}: {stderr}");
    }
    assert_eq!(std::fs::read_to_string(out.join("big.csv")).unwrap_or_default(), "earlier,result\n");
    assert!(std::fs::read(out.join("traverses.parquet")).unwrap_or_default() == b"earlier parquet");
    let names: Vec<String> = std::fs::read_dir(&out)
        .map(|r| r.flatten().map(|e| e.file_name().to_string_lossy().to_string()).collect())
        .unwrap_or_default();
    assert!(names.iter().all(|n| !n.contains("stagna-tmp")), "{names:?}");
}

/// `sample_stats` over a folder scan of the logged demo (3000 samples cut into three CSV
/// files inside two blocks, which run on from one file into the next) writes the same per-point table as
/// over the whole table read at once.
#[test]
fn logged_samples_scan_as_the_whole_table() {
    let dir = tempdir("samples");
    let script = dir.join("s.rhai");
    std::fs::write(
        &script,
        r#"
let smp = demo_table("gloomwater-cw-logged");
// Cut inside the blocks of P04 (300–360 s) and P08 (700–760 s).
let cuts = [[-1.0, 333.3], [333.3, 727.7], [727.7, 1e9]];
let i = 0;
for c in cuts {
    i += 1;
    smp.filter(col("time_s") >= c[0]).filter(col("time_s") < c[1]).select(["point", "time_s", "dp_pa"]).write(`parts/part-${i}.csv`);
}
let opts = #{dp: "dp_pa", settle: 8.s};
sample_stats(smp.unit("dp_pa", "Pa"), opts).write("whole-stats.csv");
sample_stats(scan_table(PARTS).unit("dp_pa", "Pa"), opts).write("scan-stats.csv");
let e = "";
try { sample_stats(scan_table(PARTS).unit("dp_pa", "Pa"), #{dp: "dp_pa", windows: ()}); } catch (x) { e = `${x}`; }
print(`windows on a scan: ${e}`);
"#
        .replace("PARTS", &format!("{:?}", dir.join("out").join("parts").to_string_lossy())),
    )
    .expect("script");
    let out = dir.join("out");
    std::fs::create_dir_all(out.join("parts")).expect("dir");
    let o = run(&script, &out);
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(o.status.success(), "{text}\n{}", String::from_utf8_lossy(&o.stderr));
    let whole = std::fs::read_to_string(out.join("whole-stats.csv")).expect("whole");
    let scan = std::fs::read_to_string(out.join("scan-stats.csv")).expect("scan");
    assert_eq!(whole.lines().count(), 11, "{whole}");
    assert_eq!(whole, scan);
    assert!(text.contains("windows on a scan:") && text.contains("windows"), "{text}");
}
