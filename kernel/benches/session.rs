//! Script-session benchmark (run by hand, release): prints figures, asserts nothing.
//!
//! 1. The 10 M-reading campaign (500 000 traverses × 20 points, the same synthetic campaign
//!    as `lib/benches/campaign.rs`, stored as Parquet) reduced by a script through
//!    `stagna run` against the same read + `reduce_campaign` called directly in Rust, in one
//!    run; the script's figure includes the process start.
//! 2. Start-up of the session front end (piped REPL to exit) and the cost of a trivial input.
//!
//! `cargo bench -p stagna-kernel --bench session` (`-- --traverses N` for another size).

use std::io::Write;
use std::process::{Command, Stdio};
use std::time::Instant;

use polars::prelude::*;

#[path = "../../lib/benches/support/synthetic.rs"]
mod synthetic;
use stagna::campaign::reduce_campaign;
use stagna::*;

const STAGNA: &str = env!("CARGO_BIN_EXE_stagna");

const SCRIPT: &str = r#"
let t = read_table(input).units(#{deflection_mm: "mm", fluid_temp_c: "degC", diameter_mm: "mm", position_mm: "mm"});
let spec = #{
    fluid: humid_air(0.5), static_pressure: 101.kPa,
    manometer: inclined_gauge(gauge_liquid("oil", 826.kg_m3, 20.degC, 7.5e-4), 30, 0.002),
    probe: pitot_static(0.998),
    columns: #{traverse: "traverse", deflection: "deflection_mm", fluid_temperature: "fluid_temp_c",
               size: "diameter_mm", position: "position_mm", line: "line"},
    min_points: 20
};
let c = reduce_campaign(t, spec);
print(c.traverses["volume_flow_m3_s"].sum().value);
"#;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().collect();
    let traverses: usize = args
        .iter()
        .position(|a| a == "--traverses")
        .and_then(|i| args.get(i + 1))
        .and_then(|s| s.parse().ok())
        .unwrap_or(500_000);
    let dir = std::env::temp_dir().join(format!("stagna-bench-{}", std::process::id()));
    std::fs::create_dir_all(&dir)?;
    let data = dir.join("campaign.parquet");
    table::write_parquet(&synthetic::campaign(traverses)?, &data)?;
    let script = dir.join("reduce.rhai");
    std::fs::write(&script, SCRIPT)?;
    println!("campaign: {traverses} traverses × 20 points = {} readings (Parquet)", traverses * 20);

    let spec = synthetic::spec(20)?;
    let (mut best_rust, mut best_script) = (f64::MAX, f64::MAX);
    let mut sums = (0.0, String::new());
    for _ in 0..3 {
        let t0 = Instant::now();
        let df = table::read_parquet(&data)?;
        let r = reduce_campaign(&df, &spec)?;
        best_rust = best_rust.min(t0.elapsed().as_secs_f64());
        sums.0 = r.traverses.column("volume_flow_m3_s")?.f64()?.sum().unwrap_or(0.0);

        let t1 = Instant::now();
        let o = Command::new(STAGNA)
            .args(["run", script.to_str().unwrap_or_default(), data.to_str().unwrap_or_default(), "-o"])
            .arg(&dir)
            .output()?;
        best_script = best_script.min(t1.elapsed().as_secs_f64());
        if !o.status.success() {
            return Err(String::from_utf8_lossy(&o.stderr).into_owned().into());
        }
        sums.1 = String::from_utf8_lossy(&o.stdout).trim().to_string();
    }
    println!("read + reduce in Rust      {:8.1} ms (best of 3), Σ Q = {:.6} m³/s", best_rust * 1e3, sums.0);
    println!("same as a script (stagna run, process included) {:8.1} ms, Σ Q = {}", best_script * 1e3, sums.1);
    println!("ratio script / Rust: {:.2} (goal ≤ 1.5)", best_script / best_rust);

    // Start-up and trivial inputs through the piped REPL.
    let run_piped = |input: &str| -> Result<f64, Box<dyn std::error::Error>> {
        let t = Instant::now();
        let mut c = Command::new(STAGNA).stdin(Stdio::piped()).stdout(Stdio::null()).stderr(Stdio::null()).spawn()?;
        c.stdin.take().ok_or("stdin")?.write_all(input.as_bytes())?;
        c.wait()?;
        Ok(t.elapsed().as_secs_f64())
    };
    let mut start = f64::MAX;
    for _ in 0..20 {
        start = start.min(run_piped("")?);
    }
    let n = 20_000;
    let many: String = "1 + 1\n".repeat(n);
    let mut with_inputs = f64::MAX;
    for _ in 0..3 {
        with_inputs = with_inputs.min(run_piped(&many)?);
    }
    println!(
        "session start to exit (piped, nothing to evaluate): {:.1} ms (best of 20; goal < 100 ms to the prompt)",
        start * 1e3
    );
    println!(
        "trivial input `1 + 1`: {:.1} µs each ({} inputs, start-up subtracted; goal well under 1 ms)",
        (with_inputs - start) / n as f64 * 1e6,
        n
    );
    let _ = std::fs::remove_dir_all(&dir);
    Ok(())
}
