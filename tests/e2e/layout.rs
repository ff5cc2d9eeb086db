//! `stagna layout`: traverse planning from the command line.

use std::process::Command;

fn stagna(args: &[&str]) -> (bool, String, String) {
    let o = Command::new(env!("CARGO_BIN_EXE_stagna")).args(args).output().expect("the stagna binary runs");
    (
        o.status.success(),
        String::from_utf8_lossy(&o.stdout).into_owned(),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

// US EPA Method 1 Table 1-1, 12 points: 2.1, 6.7, 11.8, 17.7, 25.0, 35.6 % of D
// (check-values.md §5.1); port length added to the insertion depth.
#[test]
fn field_sheet_for_a_round_stack() {
    let (ok, out, err) = stagna(&["layout", "--diameter", "2 m", "--points", "12", "--port", "150 mm"]);
    assert!(ok, "{err}");
    let row = |label: &str| -> Vec<String> {
        out.lines()
            .find(|l| l.starts_with(label))
            .unwrap_or_else(|| panic!("no {label} in {out}"))
            .split_whitespace()
            .map(String::from)
            .collect()
    };
    assert_eq!(row("A1 ")[2], "2.1");
    assert_eq!(row("A6 ")[2], "35.6");
    assert_eq!(row("B12")[2], "97.9");
    assert_eq!(row("A1 ")[3], "192.6"); // 42.6 mm + 150 mm
    assert!(out.contains("Caution"));
}

#[test]
fn method1_minimum_and_drawing() {
    let dir = std::env::temp_dir().join(format!("stagna-layout-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temp dir");
    let svg = dir.join("plan.svg");
    let (ok, out, err) = stagna(&[
        "layout",
        "--diameter",
        "1.5m",
        "--straight-upstream",
        "5.5",
        "--straight-downstream",
        "3",
        "--svg",
        svg.to_str().unwrap_or_default(),
    ]);
    assert!(ok, "{err}");
    assert!(out.contains("US EPA Method 1 minimum: 20 points"), "{out}");
    assert!(out.contains("B10"));
    let text = std::fs::read_to_string(&svg).expect("svg written");
    assert!(text.starts_with("<svg") && text.contains("A10"));
    assert!(!dir.join("plan.tmp-stagna").exists(), "temporary file renamed away");
}

#[test]
fn rectangular_and_bad_requests() {
    let (ok, out, _) = stagna(&["layout", "--width", "1200 mm", "--height", "800 mm", "--rule", "log-chebyshev"]);
    assert!(ok && out.contains("7 line(s) × 6 points"), "{out}");
    let (ok, _, err) = stagna(&["layout", "--diameter", "1 m", "--points", "7"]);
    assert!(!ok && err.contains("points per diameter must be even"), "{err}");
    let (ok, _, err) = stagna(&["layout", "--diameter", "1 kPa", "--points", "8"]);
    assert!(!ok && err.contains("--diameter: dimension mismatch"), "{err}");
    let (ok, _, err) =
        stagna(&["layout", "--diameter", "0.25 m", "--straight-upstream", "9", "--straight-downstream", "3"]);
    assert!(!ok && err.contains("Method 1A"), "{err}");
    // The earlier flags still work for one release, with a warning naming the new ones.
    let (ok, out, err) = stagna(&["layout", "--diameter", "1.5m", "--downstream", "5.5", "--upstream", "3"]);
    assert!(ok && out.contains("US EPA Method 1 minimum: 20 points"), "{out}");
    assert!(err.contains("deprecated") && err.contains("--straight-upstream"), "{err}");
    let (ok, _, err) = stagna(&["layout", "--diameter", "1 m"]);
    assert!(!ok && err.contains("give --points"), "{err}");
}
