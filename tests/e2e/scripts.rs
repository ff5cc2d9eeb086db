//! The example scripts and the batch runner, driven as a user would: `stagna run`.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn stagna(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_stagna")).args(args).output().expect("the stagna binary runs")
}

fn root() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("..")
}

fn tempdir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("stagna-scripts-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).expect("temp dir");
    d
}

fn run_script(name: &str, extra: &[&str]) -> (String, PathBuf) {
    let out = tempdir(name);
    let script = root().join("scripts").join(format!("{name}.rhai"));
    let mut args = vec!["run", script.to_str().unwrap_or_default(), "-o", out.to_str().unwrap_or_default()];
    args.extend_from_slice(extra);
    let o = stagna(&args);
    let (so, se) = (String::from_utf8_lossy(&o.stdout).into_owned(), String::from_utf8_lossy(&o.stderr).into_owned());
    assert!(o.status.success(), "{name} failed:\n{se}\n{so}");
    (so, out)
}

fn number_after(out: &str, label: &str) -> f64 {
    let line = out.lines().find(|l| l.contains(label)).unwrap_or_else(|| panic!("no '{label}' in:\n{out}"));
    let rest = &line[line.find(label).map(|i| i + label.len()).unwrap_or(0)..];
    rest.split_whitespace()
        .find_map(|w| w.trim_end_matches([',', ')', ':', ';']).parse::<f64>().ok())
        .unwrap_or_else(|| panic!("no number after '{label}': {line}"))
}

#[test]
fn water_main_single_point() {
    let (out, dir) = run_script("water-main-single-point", &[]);
    // The cautions of the work, once, after the results (the script prints none itself).
    assert_eq!(out.matches("Caution:").count(), 1, "{out}");
    assert!(out.trim_end().ends_with("read every warning above."), "{out}");
    // U/U_c = 2n²/((n+1)(2n+1)) for the printed n (power law; check-values.md §6).
    let pl = out.lines().find(|l| l.contains("power law, n = ")).expect("power-law line");
    let n = number_after(pl, "n =");
    let ratio = number_after(pl, "U/U_c =");
    assert!((ratio - 2.0 * n * n / ((n + 1.0) * (2.0 * n + 1.0))).abs() < 1e-4, "{pl}");
    // Mean centreline velocity of the six readings: iapws 1.5.5 water and the hydrostatic
    // balance give 3.19929 m/s for 09:00 (see demo test); the mean is 3.20871 m/s, printed
    // to four figures (half a unit of the last: 0.0005 m/s).
    assert!((number_after(&out, "mean of 6 readings:") - 3.20871).abs() <= 5e-4, "{out}");
    let q = number_after(&out, "flow (power law):");
    assert!((q - ratio * 3.20871 * std::f64::consts::PI * 0.04 * 1e3).abs() < 0.2, "Q = U·πD²/4 in L/s: {q}");
    assert!(dir.join("water-main-readings.csv").is_file() && dir.join("water-main-readings.csv.units.csv").is_file());
}

#[test]
fn ventilation_duct_traverse() {
    let (out, dir) = run_script("ventilation-duct-traverse", &[]);
    // Equal-area wall distance of point 1 of 10 on 600 mm: (1 − √0.9)/2 · D = 15.4 mm (US EPA
    // Method 1 Table 1-1: 2.6 % of D); D ≤ 0.61 m, so the 1.3 cm minimum of §11.3 leaves it in place.
    assert!(out.contains("A1") && out.contains("15.4"), "{out}");
    let q = number_after(&out, "volume flow");
    let mean = number_after(&out, "mean velocity");
    // v̄ is printed to four figures: allow half a unit of its last figure, times the area.
    let half_unit = 0.5 * 10f64.powi(mean.abs().log10().floor() as i32 - 3);
    let area_h = std::f64::consts::PI * 0.09 * 3600.0;
    assert!((q - mean * area_h).abs() < half_unit * area_h + 1.0, "Q = v̄·πD²/4 in m³/h: {q} vs {mean}");
    for f in ["duct-layout.svg", "duct-points.csv", "duct-profile.svg"] {
        assert!(dir.join(f).is_file(), "{f} written");
    }
    let svg = std::fs::read_to_string(dir.join("duct-profile.svg")).unwrap_or_default();
    assert!(svg.contains("power-law fit n = "), "fitted law drawn");
}

#[test]
fn stack_test_by_the_methods_equations() {
    let (out, dir) = run_script("stack-s-type", &[]);
    // Calibration record SP-07 (invented readings): C_p(s) = 0.99·√(Δp_std/Δp_s) per reading
    // (US EPA Method 2 §10.1, from memory); side means 0.83940 and 0.83722, C_p = 0.83831
    // (hand calculation, Python 3.11).
    assert!(out.contains("C_p(A) = 0.8394, C_p(B) = 0.8372, C_p = 0.8383"), "{out}");
    assert_eq!(out.matches("Stack run R").count(), 3, "{out}");
    assert!(out.contains("all method checks passed: true"), "{out}");
    assert!(out.contains("Caution: Stack gas"), "{out}");
    assert_eq!(out.matches("Caution:").count(), 1, "the sheets' own, none added by the runner: {out}");
    // Run R2 by hand from the runs table (method symbols and constants from the Method 2,
    // 3, 4 nomenclature; arithmetic with Python 3.11):
    //   M_d = 0.440·10.1 + 0.320·8.3 + 0.280·81.6 = 29.948; P_s = 745.8 − 15.1/13.6 = 744.690 mmHg
    //   k = 0.06236·293/(760·18.0); V_wc = 71.2·0.9982·k = 0.094926; V_wsg = 9.1·k = 0.012154;
    //   V_m(std) = 0.8547·0.994·(745.8 + 38/13.6)·293/(760·296.1) = 0.828061 → B_ws = 0.114507
    //   M_s = 29.948·(1 − B_ws) + 18.0·B_ws = 28.5799
    let r2 = &out[out.find("Stack run R2").expect("R2 sheet")..out.find("Stack run R3").expect("R3 sheet")];
    assert!((number_after(r2, "M_d ") - 29.95).abs() < 0.006, "{r2}");
    assert!((number_after(r2, "P_s ") - 744.7).abs() < 0.06, "{r2}");
    assert!((number_after(r2, "B_ws(meas)") - 0.1145).abs() < 6e-5, "{r2}");
    assert!((number_after(r2, "M_s ") - 28.58).abs() < 0.006, "{r2}");
    // Method 2 velocity from the sheet's own intermediates: v_s = 34.97 C_p (√Δp)avg
    // √(T_s/(P_s M_s)) (check-values.md §4.2); the printed intermediates are rounded.
    let s = number_after(r2, "(√Δp)avg");
    let ts = number_after(r2, "T_s(avg)");
    let v = 34.97 * 0.838_31 * s * (ts / (744.690 * 28.5799)).sqrt();
    let printed =
        r2.lines().find(|l| l.trim_start().starts_with("v_s ")).map(|l| number_after(l, "v_s")).unwrap_or(0.0);
    assert!((printed - v).abs() < 0.01, "v_s {printed} vs {v}");
    // Method 2H default for a steel stack, 0.9950 (Method 2H §2.2.2, read in the text).
    assert!((number_after(r2, "v_s,adj") - 0.995 * v).abs() < 0.01, "{r2}");
    // The campaign path with each run's conditions (runs table) against the sheet's physics
    // route for R2: the same physics by two code paths (the sheet's Q_sd includes the 0.995
    // wall factor, the campaign does not), within 0.1 %.
    let row: Vec<&str> = out
        .lines()
        .map(|l| l.split_whitespace().collect::<Vec<_>>())
        .find(|c| c.first() == Some(&"R2"))
        .expect("campaign row for R2");
    let q_campaign = row[3].parse::<f64>().expect("dry flow");
    let physics = r2
        .lines()
        .filter(|l| l.trim_start().starts_with("Q_sd"))
        .nth(1)
        .map(|l| number_after(l, "Q_sd"))
        .expect("physics Q_sd");
    assert!((q_campaign * 3600.0 / (physics / 0.995) - 1.0).abs() < 1e-3, "{q_campaign} m³/s vs {physics} dscm/h");
    // The campaign's Method 2 route (eq. 2-7 over the same runs, M_d by Method 3 from the
    // runs table) against the sheet's unadjusted v_s for R2: the same equations by two code
    // paths; the Δp differ only by the gas density over the gauge oil (1.15 kg/m³ typed on
    // the sheet, the stack gas at the section in the campaign), under 0.1 %.
    let m2_campaign = row[4].parse::<f64>().expect("Method 2 velocity");
    assert!((m2_campaign / v - 1.0).abs() < 1e-3, "{m2_campaign} m/s vs {v} m/s");
    let csv = std::fs::read_to_string(dir.join("stack-run-sheets.csv")).unwrap_or_default();
    assert!(csv.starts_with("run,group,symbol,quantity,value,unit,verdict,source"), "{csv}");
    assert!(csv.contains("R3,reported,Q_sd,"), "{csv}");
}

#[test]
fn profile_study_across_traverses() {
    let (out, dir) = run_script("profile-study", &[]);
    // The invented rig data were generated with n rising from 5.5 (2 D) towards 8 (30 D).
    let first = number_after(&out, "exponent n from");
    let last = number_after(&out, "(first station) to");
    assert!(first < 6.0 && last > 7.5 && last > first, "{out}");
    assert_eq!(out.lines().filter(|l| l.contains(": power-law n = ")).count(), 12);
    // One rig, one flow: the equal-area means agree along it within the readings' scatter
    // (mass conservation; the scenario's stations were generated at 10.0 m/s ± 0.3 %).
    let spread = number_after(&out, ", spread");
    assert!(spread < 1.0, "mean velocity spread {spread} % along the rig:\n{out}");
    assert!((number_after(&out, "mean velocity over the stations:") - 10.0).abs() < 0.05, "{out}");
    let png = std::fs::read(dir.join("stations.png")).unwrap_or_default();
    assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n"); // PNG signature (ISO/IEC 15948 §5.2)
    assert!(dir.join("profiles.svg").is_file());
}

#[test]
fn batch_runs_many_files_in_parallel_and_never_overwrites_inputs() {
    let dir = tempdir("batch");
    let data = root().join("demo-data/neverbrook-main.csv");
    let a = dir.join("main-a.csv");
    let b = dir.join("main-b.csv");
    std::fs::copy(&data, &a).expect("copy");
    std::fs::copy(&data, &b).expect("copy");
    let script = dir.join("mean.rhai");
    std::fs::write(
        &script,
        "let t = read_table(input).units(#{water_temp_c: \"degC\"});\nprint(`${input_name}: ${t[\"water_temp_c\"].mean()} at ${site}, d = ${d}`);\nt.write(\"copy.csv\");\n",
    )
    .expect("script");
    let out = dir.join("out");
    let o = stagna(&[
        "run",
        script.to_str().unwrap_or_default(),
        a.to_str().unwrap_or_default(),
        b.to_str().unwrap_or_default(),
        "--set",
        "site=Neverbrook",
        "--set",
        "d=400 mm",
        "-o",
        out.to_str().unwrap_or_default(),
    ]);
    let so = String::from_utf8_lossy(&o.stdout);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(so.contains("main-a: ") && so.contains("main-b: ") && so.contains("at Neverbrook, d = 400 mm"), "{so}");
    assert!(out.join("main-a/copy.csv").is_file() && out.join("main-b/copy.csv").is_file());

    // A script that tries to overwrite its input is refused; the input is untouched.
    std::fs::write(&script, "read_table(input).head(1).write(input);").expect("script");
    let before = std::fs::read(&a).expect("read");
    let o = stagna(&[
        "run",
        script.to_str().unwrap_or_default(),
        a.to_str().unwrap_or_default(),
        "-o",
        dir.to_str().unwrap_or_default(),
    ]);
    assert!(!o.status.success());
    assert!(String::from_utf8_lossy(&o.stderr).contains("refusing to overwrite an input file"));
    assert_eq!(std::fs::read(&a).expect("read"), before);

    // A failing file is named, the run exits non-zero, the good file still ran.
    std::fs::write(dir.join("empty.csv"), "").expect("write");
    std::fs::write(&script, "let t = read_table(input); print(t.height);").expect("script");
    let o = stagna(&[
        "run",
        script.to_str().unwrap_or_default(),
        a.to_str().unwrap_or_default(),
        dir.join("empty.csv").to_str().unwrap_or_default(),
        "-o",
        out.to_str().unwrap_or_default(),
    ]);
    let se = String::from_utf8_lossy(&o.stderr);
    assert!(!o.status.success() && se.contains("empty.csv") && se.contains("the file is empty"), "{se}");
    assert!(String::from_utf8_lossy(&o.stdout).contains("\n6\n"), "the good file ran");

    // A runaway loop stops at the operation limit with a clear message.
    std::fs::write(&script, "let x = 0; loop { x += 1; }").expect("script");
    let o = stagna(&[
        "run",
        script.to_str().unwrap_or_default(),
        "--max-operations",
        "100000",
        "-o",
        out.to_str().unwrap_or_default(),
    ]);
    assert!(!o.status.success());
    assert!(String::from_utf8_lossy(&o.stderr).contains("operation limit"));
}

#[test]
fn batch_outputs_are_unique_per_input_and_every_written_file_is_checked() {
    // Regressions (issue 16): inputs with one file name in two folders wrote to one
    // output folder (one result silently lost); the CSV units sidecar could overwrite
    // an input; a killed writer's temporary file stayed behind.
    let dir = tempdir("unique");
    let data = root().join("demo-data/neverbrook-main.csv");
    for site in ["siteX", "siteY"] {
        std::fs::create_dir_all(dir.join(site)).expect("dir");
        std::fs::copy(&data, dir.join(site).join("run.csv")).expect("copy");
    }
    std::fs::copy(&data, dir.join("siteX").join("run.tsv")).expect("copy");
    let script = dir.join("tag.rhai");
    std::fs::write(&script, "table_from(#{where: [input]}).write(\"result.csv\");").expect("script");
    let out = dir.join("out");
    std::fs::create_dir_all(out.join("siteX")).expect("dir");
    let stale = out.join("siteX").join(format!(".result.csv.{}-0.stagna-tmp", u32::MAX - 1));
    std::fs::write(&stale, "half a file").expect("stale");
    let inputs = [dir.join("siteX/run.csv"), dir.join("siteY/run.csv"), dir.join("siteX/run.tsv")];
    let mut args = vec!["run", script.to_str().unwrap_or_default(), "-j", "3", "-o", out.to_str().unwrap_or_default()];
    args.extend(inputs.iter().map(|p| p.to_str().unwrap_or_default()));
    let o = stagna(&args);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(String::from_utf8_lossy(&o.stderr).contains("removed 1 temporary file"));
    assert!(!stale.exists());
    for (sub, input) in [("siteX/run-csv", &inputs[0]), ("siteY/run", &inputs[1]), ("siteX/run-tsv", &inputs[2])] {
        let text = std::fs::read_to_string(out.join(sub).join("result.csv")).expect("each input has its own result");
        assert!(text.contains(input.to_str().unwrap_or_default()), "{sub}: {text}");
    }

    // The same file twice is refused before anything runs.
    let o = stagna(&["run", script.to_str().unwrap_or_default(), args[6], args[6], "-o", args[5]]);
    assert!(!o.status.success() && String::from_utf8_lossy(&o.stderr).contains("given twice"));

    // A units sidecar that would land on an input file is refused; the input is intact.
    let victim = dir.join("t.csv.units.csv");
    std::fs::write(&victim, "column,unit\nkeep,me\n").expect("victim");
    std::fs::write(&script, "table_from(#{a: [1.0]}).unit(\"a\", \"mm\").write(\"t.csv\");").expect("script");
    let o = stagna(&[
        "run",
        script.to_str().unwrap_or_default(),
        victim.to_str().unwrap_or_default(),
        "-o",
        dir.to_str().unwrap_or_default(),
    ]);
    assert!(!o.status.success());
    assert!(String::from_utf8_lossy(&o.stderr).contains("refusing to overwrite an input file"));
    assert_eq!(std::fs::read_to_string(&victim).expect("read"), "column,unit\nkeep,me\n");
}

#[test]
fn batch_scripts_write_only_inside_the_output_folder_unless_allowed() {
    // Issue 16 (sandbox): batch runs confine writes to the output folder; reads stay open.
    let dir = tempdir("confine");
    let out = dir.join("out");
    let elsewhere = dir.join("elsewhere");
    std::fs::create_dir_all(&elsewhere).expect("dir");
    let script = dir.join("w.rhai");
    for target in [elsewhere.join("x.csv").display().to_string(), "../escape.csv".to_string()] {
        std::fs::write(&script, format!("table_from(#{{a: [1.0]}}).write(\"{target}\");")).expect("script");
        let o = stagna(&["run", script.to_str().unwrap_or_default(), "-o", out.to_str().unwrap_or_default()]);
        let se = String::from_utf8_lossy(&o.stderr);
        assert!(!o.status.success() && se.contains("outside the folders this session may write"), "{target}: {se}");
        assert!(se.contains("--allow-write"), "{se}");
    }
    assert!(!elsewhere.join("x.csv").exists() && !dir.join("escape.csv").exists());
    // Reading anywhere is fine; writing where --allow-write says is fine.
    let data = root().join("demo-data/neverbrook-main.csv");
    std::fs::write(
        &script,
        format!("let t = read_table(\"{}\"); t.write(\"{}\");", data.display(), elsewhere.join("x.csv").display()),
    )
    .expect("script");
    let o = stagna(&[
        "run",
        script.to_str().unwrap_or_default(),
        "-o",
        out.to_str().unwrap_or_default(),
        "--allow-write",
        elsewhere.to_str().unwrap_or_default(),
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(elsewhere.join("x.csv").is_file());
}

#[test]
fn logged_traverse_builds_its_budget_from_the_samples() {
    let (out, _) = run_script("logged-traverse", &[]);
    assert_eq!(out.matches("Caution:").count(), 1, "{out}");
    // The samples were generated (demo-data/make-gloomwater-logged.py) from a 1/7 power-law
    // profile of 1.50 m/s mean velocity with a 4 % streamwise fluctuation. The equal-area
    // mean of 10 points overstates a 1/7 profile by 0.538 % (check-values.md §5.4, computed)
    // and the fluctuation raises √(mean Δp) by √(1 + 0.04²) (derived): 1.5093 m/s, within
    // the samples' scatter (about 0.25 % on the mean of 10 points of ~30 independent samples).
    let read = number_after(&out, "mean velocity read over 10 equal-area points:");
    assert!((read - 1.50 * 1.00538 * (1.0f64 + 0.0016).sqrt()).abs() < 0.008, "{read}");
    // The local corrections: the samples' own turbulence (about 4 %, so −0.08 % a point),
    // the displacement and the wall for a 5 mm head, together a factor a little below 1;
    // the corrected mean is the read one times it.
    let factor = number_after(&out, "mean factor");
    assert!((0.99..0.9995).contains(&factor), "{factor}");
    let v = number_after(&out, "mean velocity over 10 equal-area points, corrected:");
    assert!((v - read * factor).abs() < 0.001, "{v} vs {read} × {factor}");
    assert!((v - 1.50).abs() < 0.01, "{v}");
    for k in ["pass  probe head diameter ÷ conduit diameter", "pass  smallest probe Reynolds number"] {
        assert!(out.contains(k), "{k}: {out}");
    }
    assert!(out.contains("ISO 3966 (conditions of use: size of the probe head) (from memory, unverified)"), "{out}");
    assert!(out.lines().any(|l| l.starts_with("local corrections ") && l.contains("0.99")), "{out}");
    // The budget by stage: the corrections' own line, and the stages' shares add to 100 %.
    let shares: f64 = [
        "local velocity: probe, Δp, fluid",
        "local corrections and flow conditions",
        "probe position",
        "integration over the section",
        "section area",
    ]
    .iter()
    .map(|stage| {
        let l = out
            .lines()
            .find(|l| l.starts_with(&format!("{stage}  ")))
            .unwrap_or_else(|| panic!("no stage {stage}: {out}"));
        l.split_whitespace().last().and_then(|w| w.parse::<f64>().ok()).unwrap_or(f64::NAN)
    })
    .sum();
    assert!((shares - 100.0).abs() < 0.05, "{shares}");
    // Q = v̄·πD²/4 for D = 300 mm, in m³/h.
    let q = number_after(&out, "volume flow");
    assert!((q - v * std::f64::consts::PI * 0.0225 * 3600.0).abs() < 0.5, "{q} vs {v}");
    // Every point: 300 samples at 5 Hz, 8 s settling drops 40.
    assert_eq!(
        out.lines().filter(|l| l.starts_with('P') && l.contains(" 260  ") && l.contains(" 40  ")).count(),
        10,
        "{out}"
    );
    // The budget's Δp lines are Type A from the samples; no assumed unsteadiness term.
    assert!(out.contains("Type A from the logged samples") && !out.contains("flow unsteadiness"), "{out}");
    assert!(out.contains("adaptive procedure (§7.9), stable"), "{out}");
}
