//! Monte Carlo benchmark: 10⁶ trials of a 20-point traverse flow with every input
//! uncertain (probe coefficient, density, diameter, five method terms, 20 Δp). Prints
//! the library's time (all threads), a single-threaded plain loop of the same model in
//! the same run, and a vectorised numpy version when Python with numpy is present.
//!
//! Run by hand, in release mode: `cargo bench -p stagna --bench monte_carlo`
//! (`STAGNA_PYTHON=/path/to/python` for an interpreter with numpy).

use std::process::Command;
use std::time::Instant;

use rand::SeedableRng;
use rand::rngs::SmallRng;
use rand_distr::{Distribution, StandardNormal};
use stagna::section::layout::LayoutRule;
use stagna::uncertainty::Input;
use stagna::uncertainty::flow_models::{MethodTerm, TraverseUncertainty};
use stagna::uncertainty::monte_carlo::{McOptions, monte_carlo, sample_model, summarize};

const M: usize = 1_000_000;
const DP: [f64; 20] = [
    150.0, 180.0, 200.0, 215.0, 225.0, 232.0, 238.0, 240.0, 241.0, 242.0, 242.0, 241.0, 239.0, 236.0, 230.0, 222.0,
    210.0, 196.0, 178.0, 148.0,
];

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let terms = MethodTerm::typical(LayoutRule::EqualArea);
    let dps: Vec<Input> = DP
        .iter()
        .enumerate()
        .map(|(i, dp)| Input::normal(&format!("Δp{}", i + 1), "Pa", *dp, 0.01 * dp))
        .collect::<Result<_, _>>()?;
    let t = TraverseUncertainty::new(
        Input::normal("C", "1", 0.998, 0.0025)?,
        Input::normal("ρ", "kg/m³", 1.2, 0.0024)?,
        Input::normal("D", "m", 0.8, 0.0008)?,
        &terms,
        dps,
    )?;
    println!("Monte Carlo: {M} trials, {} inputs (20-point traverse flow, every input uncertain)", t.inputs.len());
    let opts = McOptions { trials: M, ..Default::default() };
    let mut best_lib = f64::MAX;
    let mut lib = None;
    for _ in 0..3 {
        let t0 = Instant::now();
        let r = monte_carlo(&t.model, &t.inputs, &stagna::uncertainty::Correlations::none(), &opts)?;
        best_lib = best_lib.min(t0.elapsed().as_secs_f64());
        lib = Some(r);
    }
    let lib = lib.ok_or("no run")?;
    // The two stages apart: drawing the inputs and evaluating the model, then the summary.
    let (mut best_draw, mut best_sum) = (f64::MAX, f64::MAX);
    for _ in 0..3 {
        let t0 = Instant::now();
        let v = sample_model(&t.model, &t.inputs, &stagna::uncertainty::Correlations::none(), M, opts.seed, None)?;
        best_draw = best_draw.min(t0.elapsed().as_secs_f64());
        let t0 = Instant::now();
        summarize(v, opts.coverage)?;
        best_sum = best_sum.min(t0.elapsed().as_secs_f64());
    }
    println!(
        "library (draws, model, sort, intervals), {} threads: {:8.1} ms",
        rayon::current_num_threads(),
        best_lib * 1e3
    );
    println!(
        "  of which draws and model {:8.1} ms, summary (moments, intervals) {:8.1} ms",
        best_draw * 1e3,
        best_sum * 1e3
    );

    // Single-threaded plain loop of the same model: normal draws, model, mean, sd, sorted interval.
    let t0 = Instant::now();
    let mut rng = SmallRng::seed_from_u64(1);
    let mut q = Vec::with_capacity(M);
    let rel: Vec<f64> = terms.iter().map(|t| t.relative_u).collect();
    for _ in 0..M {
        let mut n = || -> f64 { StandardNormal.sample(&mut rng) };
        let c = 0.998 + 0.0025 * n();
        let rho = 1.2 + 0.0024 * n();
        let d = 0.8 + 0.0008 * n();
        let mut f = 1.0;
        for r in &rel {
            f *= 1.0 + r * n();
        }
        let mut s = 0.0;
        for dp in DP {
            s += (2.0 * (dp + 0.01 * dp * n()) / rho).sqrt();
        }
        q.push(f * std::f64::consts::PI / 4.0 * d * d * c * s / 20.0);
    }
    let loop_draw = t0.elapsed().as_secs_f64();
    let mean = q.iter().sum::<f64>() / M as f64;
    let sd = (q.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (M as f64 - 1.0)).sqrt();
    q.sort_unstable_by(f64::total_cmp);
    let (lo, hi) = (q[M / 40], q[M - M / 40]);
    let loop_s = t0.elapsed().as_secs_f64();
    println!(
        "plain loop, one thread:                       {:8.1} ms  (library is {:.1}× faster)",
        loop_s * 1e3,
        loop_s / best_lib
    );
    println!("  of which draws and model {:8.1} ms", loop_draw * 1e3);
    println!(
        "check: library mean {:.6} u {:.6} [{:.6}, {:.6}]; loop mean {mean:.6} u {sd:.6} [{lo:.6}, {hi:.6}] m³/s",
        lib.mean, lib.u, lib.symmetric.0, lib.symmetric.1
    );

    let script = format!(
        "import time, numpy as np\n\
         M={M}\ndp=np.array({dp:?})\nrel=np.array({rel:?})\nrng=np.random.default_rng(1)\n\
         best=1e9\n\
         for _ in range(3):\n\
         \x20   t=time.perf_counter()\n\
         \x20   c=0.998+0.0025*rng.standard_normal(M); rho=1.2+0.0024*rng.standard_normal(M); d=0.8+0.0008*rng.standard_normal(M)\n\
         \x20   f=np.prod(1+rel*rng.standard_normal((M,len(rel))),axis=1)\n\
         \x20   p=dp*(1+0.01*rng.standard_normal((M,len(dp))))\n\
         \x20   q=f*np.pi/4*d*d*c*np.sqrt(2*p/rho[:,None]).sum(axis=1)/len(dp)\n\
         \x20   m=q.mean(); u=q.std(ddof=1); s=np.sort(q); lo,hi=s[M//40],s[M-M//40]\n\
         \x20   best=min(best,time.perf_counter()-t)\n\
         print(best, m, u, lo, hi)\n",
        dp = DP.to_vec(),
        rel = rel
    );
    // STAGNA_PYTHON chooses the interpreter (one with numpy); python3 otherwise.
    let python = std::env::var("STAGNA_PYTHON").unwrap_or_else(|_| "python3".into());
    match Command::new(&python).arg("-c").arg(&script).output() {
        Ok(o) if o.status.success() => {
            let text = String::from_utf8_lossy(&o.stdout);
            let secs: f64 = text.split_whitespace().next().and_then(|s| s.parse().ok()).unwrap_or(f64::NAN);
            println!(
                "numpy, vectorised:                            {:8.1} ms  (library is {:.1}× faster; goal ≥ 5)",
                secs * 1e3,
                secs / best_lib
            );
            println!("numpy check (time, mean, u, low, high): {}", text.trim());
        }
        _ => println!("numpy: not measured (python3 with numpy not available here)"),
    }
    Ok(())
}
