//! Campaign-scale benchmark: 500 000 traverses × 20 points (10 M readings) of a
//! synthetic duct campaign, reduced by `reduce_campaign` and by a hand-written
//! single-pass loop over the same columns in the same run. Prints times, their
//! ratio and the peak resident memory during the reduction against the raw column bytes.
//!
//! Run by hand, in release mode: `cargo bench -p stagna --bench campaign`
//! (`-- --traverses N` for another size).

use std::time::Instant;

#[path = "support/synthetic.rs"]
mod synthetic;

use polars::prelude::*;
use stagna::campaign::{CampaignSpec, reduce_campaign};
use stagna::instruments::probe::isentropic;
use stagna::*;

/// A field of /proc/self/status in bytes (Linux), e.g. "VmRSS" or "VmHWM".
fn proc_status(field: &str) -> Option<usize> {
    let s = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = s.lines().find(|l| l.starts_with(field))?;
    let kb: usize = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kb * 1024)
}

/// Resets the peak-RSS mark (writing 5 to /proc/self/clear_refs, Linux ≥ 4.0).
fn reset_peak() -> bool {
    std::fs::write("/proc/self/clear_refs", "5").is_ok()
}

fn mib(b: usize) -> f64 {
    b as f64 / (1024.0 * 1024.0)
}

fn main() -> std::result::Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().collect();
    let traverses: usize = args
        .iter()
        .position(|a| a == "--traverses")
        .and_then(|i| args.get(i + 1))
        .and_then(|s| s.parse().ok())
        .unwrap_or(500_000);
    let per = 20usize;
    let n = traverses * per;

    let df = synthetic::campaign(traverses)?;
    let raw = n * 8 * 6;
    let spec = synthetic::spec(per)?;

    println!("campaign: {traverses} traverses × {per} points = {n} readings; raw columns {:.0} MiB", mib(raw));
    let mut best_lib = f64::MAX;
    let mut best_loop = f64::MAX;
    let mut peak_lib = 0usize;
    let rss_with_data = proc_status("VmRSS").unwrap_or(0);
    let mut check = (0.0, 0.0);
    for _ in 0..3 {
        let can_reset = reset_peak();
        let t0 = Instant::now();
        let r = reduce_campaign(&df, &spec)?;
        best_lib = best_lib.min(t0.elapsed().as_secs_f64());
        if can_reset {
            peak_lib = peak_lib.max(proc_status("VmHWM").unwrap_or(0));
        }
        check.0 = r.traverses.column("volume_flow_m3_s")?.f64()?.sum().unwrap_or(0.0);
        if !r.failures.is_empty() {
            println!("{} traverses failed, first: {:?}", r.failures.len(), r.failures[0]);
        }

        let t1 = Instant::now();
        check.1 = baseline(&df, &spec)?;
        best_loop = best_loop.min(t1.elapsed().as_secs_f64());
    }
    // The same reduction on one thread, for the record.
    let one = rayon::ThreadPoolBuilder::new().num_threads(1).build()?;
    let mut best_one = f64::MAX;
    for _ in 0..2 {
        let t = Instant::now();
        one.install(|| reduce_campaign(&df, &spec))?;
        best_one = best_one.min(t.elapsed().as_secs_f64());
    }
    println!(
        "reduce_campaign (polars groups + fused kernel): {:8.1} ms on {} threads",
        best_lib * 1e3,
        rayon::current_num_threads()
    );
    println!(
        "reduce_campaign on one thread:                  {:8.1} ms (ratio {:.2})",
        best_one * 1e3,
        best_one / best_loop
    );
    println!("hand-written single-pass loop:                  {:8.1} ms", best_loop * 1e3);
    println!("ratio library/loop: {:.2} (goal ≤ 1.5)", best_lib / best_loop);
    if peak_lib > 0 {
        println!(
            "peak RSS during reduction: {:.0} MiB = {:.2} × raw column bytes (goal < 2); RSS with the data loaded {:.0} MiB",
            mib(peak_lib),
            peak_lib as f64 / raw as f64,
            mib(rss_with_data)
        );
    } else {
        println!("peak RSS: not measurable here (no /proc/self/clear_refs)");
    }
    println!("check: total flow library {:.6e} m³/s, loop {:.6e} m³/s", check.0, check.1);
    Ok(())
}

/// The same reduction as one loop over the column slices, ids sorted: what an engineer
/// would write by hand for this one fluid, gauge and probe.
fn baseline(df: &DataFrame, spec: &CampaignSpec) -> std::result::Result<f64, Box<dyn std::error::Error>> {
    let id = df.column("traverse")?.i64()?.cont_slice()?;
    let defl = df.column("deflection_mm")?.f64()?.cont_slice()?;
    let temp = df.column("fluid_temp_c")?.f64()?.cont_slice()?;
    let dia = df.column("diameter_mm")?.f64()?.cont_slice()?;
    let p = spec.static_pressure.si();
    let c = spec.probe.coefficient;
    let (mut flows, mut means) = (Vec::new(), Vec::new());
    let (mut last_t, mut rho_f, mut rho_m) = (f64::NAN, 0.0, 0.0);
    let mut i = 0;
    while i < id.len() {
        let key = id[i];
        let d = dia[i] * 1e-3;
        let (mut sum, mut k) = (0.0, 0);
        while i < id.len() && id[i] == key {
            let t = temp[i] + 273.15;
            if t != last_t {
                rho_f = spec.fluid.density_si(p, t)?;
                rho_m = spec.manometer.liquid().density(Temperature::kelvin(t))?.si();
                last_t = t;
            }
            let dp = spec.manometer.dp_from_densities(defl[i] * 1e-3, rho_m, None, rho_f)?;
            sum += isentropic(c, dp, rho_f, p, 1.4);
            k += 1;
            i += 1;
        }
        let mean = sum / k as f64;
        means.push(mean);
        flows.push(mean * std::f64::consts::PI * d * d / 4.0);
    }
    Ok(flows.iter().sum())
}
