//! `stagna demo` and `stagna units` from the command line.

use std::path::Path;
use std::process::{Command, Output};

fn stagna(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_stagna")).args(args).output().expect("the stagna binary runs")
}

fn text(o: &Output) -> (String, String) {
    (String::from_utf8_lossy(&o.stdout).into_owned(), String::from_utf8_lossy(&o.stderr).into_owned())
}

fn copy_demo_data(dir: &Path) {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("../demo-data");
    for f in ["pretendbury-ahu2-supply.csv", "neverbrook-main.csv"] {
        std::fs::copy(src.join(f), dir.join(f)).expect("copy demo data");
    }
}

/// Pulls the number after a label on the line that contains it.
fn number_after(out: &str, label: &str) -> f64 {
    let line = out.lines().find(|l| l.contains(label)).unwrap_or_else(|| panic!("no line with '{label}' in:\n{out}"));
    let rest = &line[line.find(label).map(|i| i + label.len()).unwrap_or(0)..];
    rest.split_whitespace()
        .find_map(|w| w.trim_end_matches([',', ')', ':', ';']).parse::<f64>().ok())
        .unwrap_or_else(|| panic!("no number after '{label}': {line}"))
}

#[test]
fn demo_prints_results_with_units_and_cautions() {
    let o = stagna(&["demo"]);
    let (out, err) = text(&o);
    assert!(o.status.success(), "stderr: {err}");
    for needle in ["[Pa]", "[m/s]", "[kg/m³]", "m³/s", "kg/s", "Caution:", "mercury", "source:", "0 °C, 101.325 kPa"]
    {
        assert!(out.contains(needle), "missing '{needle}' in:\n{out}");
    }
    // Tables: units under the names, no data-type rows, 4 significant figures by default.
    assert!(!out.contains("f64") && !out.contains("shape:"), "{out}");
    let p5 = row_cells(&out, "5");
    assert_eq!(p5[3..].join(" "), "122.9 1.207 14.24", "{p5:?}");
    // Duct point 5 by an independent chain: CoolProp 8.0.0 HAPropsSI humid air at 17.9 °C,
    // 51 %, 101 172 Pa → ρ = 1.20676 kg/m³; oil 826/(1 + 7.5e-4·1.5); WGS84 g(52.2°, 35 m);
    // Δp = 122.939 Pa, v = 14.2456 m/s incompressible; isentropic lowers it by M²/8 → 14.2425.
    // Checked on the demo script at 7 significant figures (`--set digits=7`).
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("../scripts/demo.rhai");
    let precise = stagna(&[
        "run",
        script.to_str().unwrap_or_default(),
        "--set",
        "digits=7",
        "-o",
        &tempdir().display().to_string(),
    ]);
    let (out7, err7) = text(&precise);
    assert!(precise.status.success(), "{err7}");
    let p5 = row_cells(&out7, "5");
    let cell = |cells: &[String], i: usize| cells[i].parse::<f64>().unwrap_or(f64::NAN);
    assert!((cell(&p5, 3) - 122.939).abs() < 5e-3, "{p5:?}");
    assert!((p5[4].parse::<f64>().unwrap_or(0.0) - 1.20676).abs() < 1.5e-4, "CIPM vs CoolProp: {p5:?}");
    assert!((p5[5].parse::<f64>().unwrap_or(0.0) - 14.2425).abs() < 2e-3, "{p5:?}");
    let mean = number_after(&out, "mean velocity, arithmetic mean of 10 equal-area points (one diameter)");
    let q = number_after(&out, "volume flow at duct conditions");
    // Printed to 4 significant figures each.
    assert!((q - mean * std::f64::consts::PI * 0.09).abs() < 2e-3, "Q = v̄·πD²/4: {q} vs {mean}");
    // Water main 09:00 by an independent chain: `iapws` 1.5.5 IAPWS97 water at 9.6 °C,
    // 513.2 kPa → 999.9328 kg/m³; mercury 13595.1/(1 + 1.818e-4·12) = 13565.51; g(53.4°, 112 m);
    // Δp = 5117.38 Pa, v = 3.19929 m/s.
    let r1 = row_cells(&out7, "09:00");
    assert!((cell(&r1, 2) - 5.11738).abs() < 1e-5, "Δp in kPa: {r1:?}");
    assert!((cell(&r1, 3) - 999.9328).abs() < 1e-4, "{r1:?}");
    assert!((cell(&r1, 4) - 3.19929).abs() < 1e-5, "{r1:?}");
    assert!(out.contains("= 5117.38 Pa") && out.contains("= 3.19929 m/s"), "worked steps");
    // Single-point lines: U/U_c = 2n²/((n+1)(2n+1)) for the printed n, and 1/(1 + 3/(2κ)·√(f/8))
    // for the printed κ and f (check-values.md §6), flow = mean·π·0.2² m².
    let vc = number_after(&out, "mean centreline velocity over 6 readings");
    let pl = out.lines().find(|l| l.contains("power law, n = ")).expect("power-law line");
    let n = number_after(pl, "n =");
    let ratio = number_after(pl, "U/U_c =");
    assert!((ratio - 2.0 * n * n / ((n + 1.0) * (2.0 * n + 1.0))).abs() < 1e-4, "{pl}");
    let mean_pl = number_after(pl, "mean velocity");
    assert!((mean_pl - ratio * vc).abs() < 2e-3, "{pl}");
    assert!((number_after(pl, "flow") - mean_pl * std::f64::consts::PI * 0.04 * 1e3).abs() < 0.2, "{pl}");
    // Uncertainty budget: shares add to 100 % (no correlations; JCGM 100 5.1.2) and the
    // Monte Carlo line reports its trials and the validation verdict.
    let shares: f64 = out
        .lines()
        .skip_while(|l| !l.starts_with("Uncertainty of the volume flow"))
        .take_while(|l| !l.starts_with("y = "))
        .filter_map(|l| {
            let w: Vec<&str> = l.split_whitespace().collect();
            w.iter().position(|x| *x == "%").and_then(|i| w[i - 1].parse::<f64>().ok())
        })
        .sum();
    assert!((shares - 100.0).abs() < 0.6, "shares add to {shares}");
    // GUM 7.2.6: u_c and U to two significant figures, y to the same last digit. For a
    // product model the relative uncertainties add in quadrature (JCGM 100 §5.1.6): from the
    // script's stated inputs, C 0.0025/0.998, ρ ½·0.0018/1.2064, D 2·(1.5/√3)/600, the
    // terms 0.005 (layout), 0.002 (positioning), 0.004 (unsteadiness), and each Δp's
    // √((0.005 Δp)² + (0.7/√3)²) weighted by ½/√Δp_i over Σ√Δp, worked in Python:
    // 0.782 % of y, u_c = 0.0293 m³/s, U = 1.96 u_c = 0.0574 m³/s.
    let y = out.lines().find(|l| l.starts_with("y = ")).expect("result line");
    assert!(
        y.starts_with("y = 3.742 m³/s, u_c = 0.029 m³/s (standard, k = 1; 0.78 % of y)")
            && y.contains("U = 0.057 m³/s (expanded, k = 1.96, 95 % coverage)"),
        "{y}"
    );
    // Terms without a source stay out unless a script adds them.
    assert!(!out.contains("turbulence   ") && !out.contains("common practice, no source (typical magnitude)"), "{out}");
    // The adaptive Monte Carlo (JCGM 101 §7.9) stabilised, and its verdict agrees with its
    // own numbers: the ends' differences against δ = 0.0005 m³/s (2 digits of u = 0.029).
    let mc = out.lines().find(|l| l.starts_with("Monte Carlo (JCGM 101:2008)")).expect("Monte Carlo line");
    assert!(mc.contains("adaptive procedure (§7.9), stable at 2 significant digits of u"), "{mc}");
    let verdict = out.lines().find(|l| l.trim_start().starts_with("Verdict:")).expect("verdict");
    assert!(verdict.contains("δ = 0.0005 m³/s"), "{verdict}");
    let validated = verdict.contains("report y ± U");
    assert!(validated || verdict.contains("report the Monte Carlo interval"), "{verdict}");
    // The decimals in the verdict are δ and the two ends' differences.
    let decimals: Vec<f64> = verdict
        .split(|c: char| !(c.is_ascii_digit() || c == '.'))
        .filter(|x| x.contains('.'))
        .filter_map(|x| x.trim_end_matches('.').parse().ok())
        .collect();
    let diffs: Vec<f64> = decimals.iter().copied().filter(|&d| d != 0.0005).collect();
    assert_eq!(diffs.len(), 2, "{verdict}");
    assert_eq!(validated, diffs.iter().all(|&d| d <= 0.0005), "{verdict}");
    let ll = out.lines().find(|l| l.contains("log law, κ = 0.41")).expect("log-law line");
    let f = number_after(ll, "f =");
    assert!((number_after(ll, "U/U_c =") - 1.0 / (1.0 + 1.5 / 0.41 * (f / 8.0).sqrt())).abs() < 1e-4, "{ll}");
}

#[test]
fn demo_reads_the_same_layout_from_a_folder() {
    let dir = tempdir();
    copy_demo_data(&dir);
    let a = text(&stagna(&["demo"])).0;
    let b = text(&stagna(&["demo", "--data-dir", dir.to_str().unwrap_or_default()])).0;
    assert_eq!(a, b.replace(&format!("{}", dir.display()), "bundled"));
}

#[test]
fn bad_files_give_clear_errors_and_exit_non_zero() {
    let cases: [(&str, &str, &str); 4] = [
        ("point,insertion_mm\n1,2\n", "no such column; the table has: point, insertion_mm", "missing column"),
        (
            "point,insertion_mm,gauge_reading_mm,gauge_zero_mm,gauge_temp_c,air_temp_c,rel_humidity_pct,barometer_hpa,duct_static_pa\n1,15.6,NaN,1,21,18,50,1008,300\n",
            "row 1: manometer: deflection must be a finite number, got NaN",
            "NaN reading",
        ),
        (
            "point,insertion_mm,gauge_reading_mm,gauge_zero_mm,gauge_temp_c,air_temp_c,rel_humidity_pct,barometer_hpa,duct_static_pa\n1,15.6,30,1,21,18,150,1008,300\n",
            "row 1: humid air: relative humidity must be in [0, 1], got 1.5 (fraction)",
            "humidity over 100 %",
        ),
        ("", "the file is empty", "empty file"),
    ];
    for (content, expected, what) in cases {
        let dir = tempdir();
        copy_demo_data(&dir);
        std::fs::write(dir.join("pretendbury-ahu2-supply.csv"), content).expect("write");
        let o = stagna(&["demo", "--data-dir", dir.to_str().unwrap_or_default()]);
        let (out, err) = text(&o);
        assert!(!o.status.success(), "{what}: should fail");
        assert!(err.contains(expected), "{what}: stderr was: {err}");
        assert!(out.is_empty(), "{what}: nothing half-printed, got: {out}");
    }
}

#[test]
fn units_lists_names_and_sources() {
    let o = stagna(&["units"]);
    let (out, _) = text(&o);
    assert!(o.status.success());
    for needle in ["inH2O@60F", "NIST SP 811", "mmHg", "delta_degC", "kg/m^3"] {
        assert!(out.contains(needle), "missing {needle}");
    }
}

/// The cells of the table row whose first cell is `first` (cells are separated by spaces).
fn row_cells(out: &str, first: &str) -> Vec<String> {
    out.lines()
        .map(|l| l.split_whitespace().map(str::to_string).collect::<Vec<_>>())
        .find(|cells| cells.len() > 3 && cells[0] == first)
        .unwrap_or_else(|| panic!("no table row '{first}' in:\n{out}"))
}

fn tempdir() -> std::path::PathBuf {
    use std::sync::atomic::{AtomicUsize, Ordering};
    static N: AtomicUsize = AtomicUsize::new(0);
    let d =
        std::env::temp_dir().join(format!("stagna-e2e-{}-{}", std::process::id(), N.fetch_add(1, Ordering::SeqCst)));
    std::fs::create_dir_all(&d).expect("temp dir");
    d
}

#[test]
fn the_committed_reference_matches_the_catalog() {
    let o = stagna(&["reference"]);
    assert!(o.status.success());
    let committed = std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("../docs/reference.md"))
        .expect("docs/reference.md");
    assert!(
        String::from_utf8_lossy(&o.stdout) == committed,
        "docs/reference.md is stale: regenerate with `cargo run -q --bin stagna -- reference > docs/reference.md`"
    );
}
