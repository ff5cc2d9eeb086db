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
    let o = Command::new(env!("CARGO_BIN_EXE_stagna"))
        .args(["run", script.to_str().unwrap_or_default(), "-o", out.to_str().unwrap_or_default()])
        .output()
        .expect("runs");
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
    let o = Command::new(env!("CARGO_BIN_EXE_stagna"))
        .args(["run", script.to_str().unwrap_or_default(), "-o", out.to_str().unwrap_or_default()])
        .output()
        .expect("runs");
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
