//! Propagation of distributions by Monte Carlo (JCGM 101:2008): seeded and
//! reproducible, multi-threaded, 10⁶ trials by default, probabilistically
//! symmetric and shortest coverage intervals, the adaptive procedure (§7.9)
//! and validation of a GUM result (§8).
//!
//! Trials are drawn in fixed chunks of 65 536, each chunk with its own
//! generator seeded from the run's seed and the chunk's number, so the result
//! depends on the seed and the number of trials only, not on the number of
//! threads. Correlated inputs must be normal (JCGM 101 §6.4.8, multivariate
//! Gaussian), drawn through the Cholesky factor of their correlation matrix.
//!
//! # References
//! JCGM 101:2008 §6 (sampling), §7.5–7.7 (estimate, standard uncertainty,
//! coverage intervals), §7.9 (adaptive procedure), §8 (validation).

use rand::rngs::SmallRng;
use rand::{RngExt, SeedableRng};
use rayon::prelude::*;
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};

use crate::error::{Error, Result};
use crate::uncertainty::normal::standard_normal;
use crate::uncertainty::{Correlations, Distribution, GumResult, Input, Model, cholesky};

const CHUNK: usize = 65_536;

/// Trials drawn, then evaluated, together ([`Model::eval_rows`]): 128 trials of 28 inputs
/// are 28 KiB, within the first-level cache. The random stream is drawn trial by trial as
/// before, so results do not depend on it.
const BLOCK: usize = 128;

/// Options of a Monte Carlo run.
#[derive(Debug, Clone)]
pub struct McOptions {
    /// Number of trials M.
    pub trials: usize,
    /// Seed of the generator.
    pub seed: u64,
    /// Coverage probability p.
    pub coverage: f64,
    /// Set from another thread to stop the run; it is polled between chunks of trials
    /// and the run ends with [`Error::Interrupted`].
    pub cancel: Option<Arc<AtomicBool>>,
    /// Told how many trials are done, chunk by chunk.
    pub progress: Option<crate::progress::Progress>,
}

impl Default for McOptions {
    fn default() -> Self {
        Self { trials: 1_000_000, seed: 20_261_202, coverage: 0.95, cancel: None, progress: None }
    }
}

/// Most trials one run may ask for: 8 bytes each are held and sorted (0.8 GB at the
/// bound), far past the 10⁶ that JCGM 101 §7.2.2 suggests for a 95 % interval.
pub const MAX_TRIALS: usize = 100_000_000;

/// Result of a Monte Carlo run.
#[derive(Debug, Clone, PartialEq)]
pub struct McResult {
    /// Trials used.
    pub trials: usize,
    /// Mean of the model values (the estimate of y).
    pub mean: f64,
    /// Standard deviation of the model values (u(y)).
    pub u: f64,
    /// Probabilistically symmetric coverage interval.
    pub symmetric: (f64, f64),
    /// Shortest coverage interval.
    pub shortest: (f64, f64),
    /// Coverage probability.
    pub coverage: f64,
}

fn splitmix(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// How one input is drawn: its distribution's scale held inline (no heap data in the loop).
#[derive(Debug, Clone, Copy)]
enum Draw {
    Normal(f64),
    Rectangular(f64),
    Triangular(f64),
    Samples(usize),
}

struct Sampler {
    values: Vec<f64>,
    dists: Vec<Draw>,
    /// The deviations of inputs given by samples (`Draw::Samples` indexes this).
    samples: Vec<Arc<Vec<f64>>>,
    /// For correlated normal inputs: their indices, standard deviations and Cholesky factor.
    correlated: Vec<usize>,
    sds: Vec<f64>,
    chol: Vec<Vec<f64>>,
}

impl Sampler {
    fn new(inputs: &[Input], correlations: &Correlations) -> Result<Self> {
        let n = inputs.len();
        let r = correlations.matrix(n)?;
        let correlated: Vec<usize> = (0..n).filter(|&i| (0..n).any(|j| j != i && r[i][j] != 0.0)).collect();
        for &i in &correlated {
            if !matches!(inputs[i].distribution, Distribution::Normal { .. }) {
                return Err(Error::Inconsistent {
                    context: "Monte Carlo",
                    message: format!(
                        "input '{}' is correlated but not normal; JCGM 101 draws correlated inputs from a multivariate Gaussian",
                        inputs[i].name
                    ),
                });
            }
        }
        let sub: Vec<Vec<f64>> = correlated.iter().map(|&i| correlated.iter().map(|&j| r[i][j]).collect()).collect();
        let chol = cholesky(&sub).map_err(|_| Error::Inconsistent {
            context: "Monte Carlo",
            message: "correlation matrix is not positive semi-definite".into(),
        })?;
        let mut samples = Vec::new();
        let dists = inputs
            .iter()
            .map(|i| match &i.distribution {
                Distribution::Normal { sd } => Draw::Normal(*sd),
                Distribution::Rectangular { half_width } => Draw::Rectangular(*half_width),
                Distribution::Triangular { half_width } => Draw::Triangular(*half_width),
                Distribution::Samples(dev) => {
                    samples.push(dev.clone());
                    Draw::Samples(samples.len() - 1)
                }
            })
            .collect();
        Ok(Self {
            values: inputs.iter().map(|i| i.value).collect(),
            dists,
            samples,
            sds: correlated.iter().map(|&i| inputs[i].standard_uncertainty()).collect(),
            correlated,
            chol,
        })
    }

    fn draw(&self, rng: &mut SmallRng, x: &mut [f64], z: &mut [f64]) {
        for ((xi, &v), &d) in x.iter_mut().zip(&self.values).zip(&self.dists) {
            *xi = v + match d {
                Draw::Normal(sd) => sd * standard_normal(rng),
                Draw::Rectangular(a) => a * (2.0 * rng.random::<f64>() - 1.0),
                Draw::Triangular(a) => a * (rng.random::<f64>() - rng.random::<f64>()),
                Draw::Samples(k) => {
                    let dev = &self.samples[k];
                    dev[rng.random_range(0..dev.len())]
                }
            };
        }
        if !self.correlated.is_empty() {
            for zi in z.iter_mut() {
                *zi = standard_normal(rng);
            }
            for (a, &i) in self.correlated.iter().enumerate() {
                let mut s = 0.0;
                for (b, zb) in z.iter().enumerate().take(a + 1) {
                    s += self.chol[a][b] * zb;
                }
                x[i] = self.values[i] + self.sds[a] * s;
            }
        }
    }
}

/// Model values for `trials` trials, in trial order (reproducible for a seed).
pub fn sample_model<M: Model>(
    model: &M,
    inputs: &[Input],
    correlations: &Correlations,
    trials: usize,
    seed: u64,
    cancel: Option<&AtomicBool>,
) -> Result<Vec<f64>> {
    sample_model_reporting(model, inputs, correlations, trials, seed, cancel, None)
}

/// As [`sample_model`], telling `progress` how many trials are done chunk by chunk.
pub fn sample_model_reporting<M: Model>(
    model: &M,
    inputs: &[Input],
    correlations: &Correlations,
    trials: usize,
    seed: u64,
    cancel: Option<&AtomicBool>,
    progress: Option<&crate::progress::Progress>,
) -> Result<Vec<f64>> {
    if trials > MAX_TRIALS {
        return Err(Error::OutOfRange {
            context: "Monte Carlo",
            param: "number of trials",
            value: trials as f64,
            unit: "",
            allowed: format!("at most {MAX_TRIALS}"),
        });
    }
    if trials == 0 {
        return Err(Error::OutOfRange {
            context: "Monte Carlo",
            param: "number of trials",
            value: 0.0,
            unit: "",
            allowed: "at least 1".into(),
        });
    }
    if inputs.is_empty() {
        return Err(Error::Inconsistent { context: "Monte Carlo", message: "no inputs".into() });
    }
    let sampler = Sampler::new(inputs, correlations)?;
    let mut out = vec![0.0; trials];
    let stopped = || cancel.is_some_and(|c| c.load(Ordering::Relaxed));
    let counter = crate::progress::Counter::new(progress, trials as u64);
    out.par_chunks_mut(CHUNK).enumerate().for_each(|(c, chunk)| {
        if stopped() {
            return;
        }
        let n = chunk.len() as u64;
        let mut rng = SmallRng::seed_from_u64(splitmix(seed ^ splitmix(c as u64)));
        let width = inputs.len();
        let mut rows = vec![0.0; width * BLOCK];
        let mut z = vec![0.0; sampler.correlated.len()];
        for ys in chunk.chunks_mut(BLOCK) {
            let rows = &mut rows[..width * ys.len()];
            for x in rows.chunks_exact_mut(width) {
                sampler.draw(&mut rng, x, &mut z);
            }
            model.eval_rows(rows, ys);
        }
        counter.add(n);
    });
    if stopped() {
        return Err(Error::Interrupted { context: "Monte Carlo" });
    }
    if let Some(i) = out.iter().position(|y| !y.is_finite()) {
        return Err(Error::Inconsistent {
            context: "Monte Carlo",
            message: format!(
                "trial {} gave a non-finite model value; an input's distribution reaches outside the model's domain (e.g. a negative Δp under a square root)",
                i + 1
            ),
        });
    }
    Ok(out)
}

/// Model values for `trials` trials drawn in one thread, the model being any function of
/// the input values that may fail (a script's model: it cannot be shared between threads).
/// The inputs are drawn as [`sample_model`] draws them; `cancel` is polled every 4096 trials.
pub fn sample_with(
    inputs: &[Input],
    correlations: &Correlations,
    trials: usize,
    seed: u64,
    cancel: Option<&AtomicBool>,
    mut model: impl FnMut(&[f64]) -> Result<f64>,
) -> Result<Vec<f64>> {
    if trials == 0 || trials > MAX_TRIALS {
        return Err(Error::OutOfRange {
            context: "Monte Carlo",
            param: "number of trials",
            value: trials as f64,
            unit: "",
            allowed: format!("1 to {MAX_TRIALS}"),
        });
    }
    if inputs.is_empty() {
        return Err(Error::Inconsistent { context: "Monte Carlo", message: "no inputs".into() });
    }
    let sampler = Sampler::new(inputs, correlations)?;
    let mut rng = SmallRng::seed_from_u64(splitmix(seed));
    let mut x = vec![0.0; inputs.len()];
    let mut z = vec![0.0; sampler.correlated.len()];
    let mut out = Vec::with_capacity(trials);
    for t in 0..trials {
        if t % 4096 == 0 && cancel.is_some_and(|c| c.load(Ordering::Relaxed)) {
            return Err(Error::Interrupted { context: "Monte Carlo" });
        }
        sampler.draw(&mut rng, &mut x, &mut z);
        let y = model(&x)?;
        if !y.is_finite() {
            return Err(Error::Inconsistent {
                context: "Monte Carlo",
                message: format!(
                    "trial {} gave {y}; an input's distribution reaches outside the model's domain",
                    t + 1
                ),
            });
        }
        out.push(y);
    }
    Ok(out)
}

/// Summary of model values: mean, standard deviation and both coverage intervals.
pub fn summarize(mut values: Vec<f64>, coverage: f64) -> Result<McResult> {
    if !(coverage > 0.0 && coverage < 1.0) {
        return Err(Error::OutOfRange {
            context: "Monte Carlo",
            param: "coverage probability",
            value: coverage,
            unit: "",
            allowed: "in (0, 1)".into(),
        });
    }
    let m = values.len();
    if m < 2 {
        return Err(Error::Inconsistent { context: "Monte Carlo", message: "needs at least 2 trials".into() });
    }
    // Sums in a fixed order (chunk by chunk, then the chunks in turn), so that the result
    // does not depend on how the threads shared the work.
    fn ordered_sum(values: &[f64], f: impl Fn(f64) -> f64 + Sync) -> f64 {
        values.par_chunks(CHUNK).map(|c| c.iter().map(|&v| f(v)).sum::<f64>()).collect::<Vec<f64>>().iter().sum()
    }
    let mean = ordered_sum(&values, |v| v) / m as f64;
    let var = ordered_sum(&values, |v| (v - mean).powi(2)) / (m as f64 - 1.0);
    // JCGM 101 §7.7: q = pM + ½ rounded; symmetric interval [y_(r), y_(r+q)] with r = (M − q)/2.
    let q = ((coverage * m as f64) + 0.5).floor() as usize;
    let q = q.clamp(1, m - 1);
    // Both intervals read y_(r) with r < M − q and y_(r+q), which is high[r] below.
    let (low, high) = sorted_tails(&mut values, m - q);
    let r = (m - q) / 2;
    let symmetric = (low[r], high[r]);
    let (mut best, mut best_r) = (f64::INFINITY, 0);
    for (r, (lo, hi)) in low.iter().zip(&high).enumerate() {
        let w = hi - lo;
        if w < best {
            best = w;
            best_r = r;
        }
    }
    Ok(McResult { trials: m, mean, u: var.sqrt(), symmetric, shortest: (low[best_r], high[best_r]), coverage })
}

/// The lowest `tail` values and the highest `tail` values, each in ascending order: the
/// order statistics y_(0)…y_(tail−1) and y_(M−tail)…y_(M−1) of JCGM 101 §7.7, without
/// sorting all M values.
///
/// A sorted sample of every 64th value gives two thresholds a safe margin beyond the tails'
/// expected edges; one parallel pass collects the values beyond each and only those are
/// sorted (about 5.5 % of M each for p = 0.95). The result does not depend on the sample:
/// when fewer values than `tail` lie beyond a threshold (a margin too thin for these
/// values), the tail is found by selection instead. Tails that overlap (p < 0.5) or
/// small M sort the whole.
fn sorted_tails(values: &mut [f64], tail: usize) -> (Vec<f64>, Vec<f64>) {
    let m = values.len();
    let stride = 64;
    if 2 * tail >= m || m < 64 * stride {
        values.par_sort_unstable_by(f64::total_cmp);
        return (values[..tail].to_vec(), values[m - tail..].to_vec());
    }
    let mut sample: Vec<f64> = values.iter().step_by(stride).copied().collect();
    sample.sort_unstable_by(f64::total_cmp);
    let n = sample.len() as f64;
    // Expected share beyond each edge plus four binomial standard deviations of the
    // sample's count and a few values more.
    let f = tail as f64 / m as f64;
    let k = ((f + 4.0 * (f * (1.0 - f) / n).sqrt()) * n).ceil() as usize + 4;
    if k >= sample.len() / 2 {
        values.par_sort_unstable_by(f64::total_cmp);
        return (values[..tail].to_vec(), values[m - tail..].to_vec());
    }
    let (below, above) = (sample[k], sample[sample.len() - 1 - k]);
    let (mut low, mut high): (Vec<f64>, Vec<f64>) = values
        .par_chunks(CHUNK)
        .map(|c| {
            let low: Vec<f64> = c.iter().copied().filter(|v| v.total_cmp(&below).is_le()).collect();
            let high: Vec<f64> = c.iter().copied().filter(|v| v.total_cmp(&above).is_ge()).collect();
            (low, high)
        })
        .reduce(
            || (Vec::new(), Vec::new()),
            |(mut a, mut b), (c, d)| {
                a.extend(c);
                b.extend(d);
                (a, b)
            },
        );
    if low.len() < tail {
        values.select_nth_unstable_by(tail, f64::total_cmp);
        low = values[..tail].to_vec();
    }
    if high.len() < tail {
        values.select_nth_unstable_by(m - tail - 1, f64::total_cmp);
        high = values[m - tail..].to_vec();
    }
    rayon::join(|| low.sort_unstable_by(f64::total_cmp), || high.sort_unstable_by(f64::total_cmp));
    low.truncate(tail);
    high.drain(..high.len() - tail);
    (low, high)
}

/// A Monte Carlo run of M trials (JCGM 101 §7).
///
/// ```
/// use stagna::uncertainty::{Correlations, Input, Model, Real};
/// use stagna::uncertainty::monte_carlo::{monte_carlo, McOptions};
/// struct Sum;
/// impl Model for Sum { fn eval<R: Real>(&self, x: &[R]) -> R { x[0] + x[1] + x[2] + x[3] } }
/// let inputs: Vec<Input> = (0..4).map(|i| Input::normal(&format!("X{i}"), "1", 0.0, 1.0).unwrap()).collect();
/// let r = monte_carlo(&Sum, &inputs, &Correlations::none(), &McOptions::default()).unwrap();
/// assert!((r.u - 2.0).abs() < 0.01); // JCGM 101 §9.2.2: u(y) = 2
/// ```
pub fn monte_carlo<M: Model>(
    model: &M,
    inputs: &[Input],
    correlations: &Correlations,
    opts: &McOptions,
) -> Result<McResult> {
    summarize(
        sample_model_reporting(
            model,
            inputs,
            correlations,
            opts.trials,
            opts.seed,
            opts.cancel.as_deref(),
            opts.progress.as_ref(),
        )?,
        opts.coverage,
    )
}

/// The numerical tolerance δ of JCGM 101 §7.9.2 for u(y) stated to `ndig` significant digits:
/// u = c·10^l with c an `ndig`-digit integer, δ = ½·10^l.
pub fn numerical_tolerance(u: f64, ndig: u32) -> f64 {
    if u <= 0.0 || !u.is_finite() {
        return 0.0;
    }
    let l = u.log10().floor() as i32 - (ndig as i32 - 1);
    0.5 * 10f64.powi(l)
}

/// Result of the adaptive procedure.
#[derive(Debug, Clone, PartialEq)]
pub struct AdaptiveResult {
    /// The summary over all trials run.
    pub result: McResult,
    /// Numerical tolerance δ for `ndig` significant digits of u(y) over all trials (§7.9.2).
    pub tolerance: f64,
    /// Significant digits of u(y) asked for.
    pub ndig: u32,
    /// True when the results stabilised; false when the trial limit came first.
    pub stabilized: bool,
    /// Number h of sequences run.
    pub sequences: usize,
    /// Trials per sequence, M.
    pub per_sequence: usize,
}

/// Sequences drawn together, so that the threads share out one draw.
const SEQUENCES_PER_DRAW: usize = 8;

/// The adaptive Monte Carlo procedure of JCGM 101:2008 §7.9.4: sequences of
/// M = max(⌈100/(1 − p)⌉, 10⁴) trials until twice the standard deviations of the sequences'
/// means, standard uncertainties and interval ends (each the standard deviation of an
/// average of h values) are all within δ for `ndig` significant digits of u(y). The steps
/// were read against an independent open implementation of the procedure (an R function
/// `gumS1`) for their structure; the clause's wording itself is from memory.
///
/// `opts.trials` caps the total: a run that reaches it ends with `stabilized = false`.
/// Sequences are drawn eight at a time and the stopping rule is applied to them one by
/// one, so the result is that of the sequential procedure, reproducible for a seed.
pub fn monte_carlo_adaptive<M: Model>(
    model: &M,
    inputs: &[Input],
    correlations: &Correlations,
    ndig: u32,
    opts: &McOptions,
) -> Result<AdaptiveResult> {
    adaptive_with(|n, seed| sample_model(model, inputs, correlations, n, seed, opts.cancel.as_deref()), ndig, opts)
}

/// The adaptive procedure over any source of model values: `draw(n, seed)` gives n values.
pub fn adaptive_with(
    mut draw: impl FnMut(usize, u64) -> Result<Vec<f64>>,
    ndig: u32,
    opts: &McOptions,
) -> Result<AdaptiveResult> {
    if !(1..=3).contains(&ndig) {
        return Err(Error::OutOfRange {
            context: "Monte Carlo",
            param: "significant digits of u",
            value: f64::from(ndig),
            unit: "",
            allowed: "1, 2 or 3".into(),
        });
    }
    if !(opts.coverage > 0.0 && opts.coverage < 1.0) {
        return Err(Error::OutOfRange {
            context: "Monte Carlo",
            param: "coverage probability",
            value: opts.coverage,
            unit: "",
            allowed: "in (0, 1)".into(),
        });
    }
    let m = ((100.0 / (1.0 - opts.coverage)).ceil() as usize).max(10_000);
    if opts.trials < 2 * m {
        return Err(Error::OutOfRange {
            context: "Monte Carlo",
            param: "trial limit of the adaptive procedure",
            value: opts.trials as f64,
            unit: "",
            allowed: format!("at least two sequences, {}", 2 * m),
        });
    }
    let mut all: Vec<f64> = Vec::new();
    let mut stats: Vec<[f64; 4]> = Vec::new();
    // Running sums over all trials for u(y) (shifted by the first value against cancellation).
    let (mut n, mut shift, mut s1, mut s2) = (0.0f64, 0.0f64, 0.0f64, 0.0f64);
    for batch in 0u64.. {
        let room = (opts.trials - all.len()) / m;
        let k = room.min(SEQUENCES_PER_DRAW);
        if k == 0 {
            break;
        }
        let values = draw(k * m, splitmix(opts.seed.wrapping_add(batch)))?;
        for seq in values.chunks(m) {
            if n == 0.0 {
                shift = seq[0];
            }
            for &v in seq {
                n += 1.0;
                s1 += v - shift;
                s2 += (v - shift).powi(2);
            }
            all.extend_from_slice(seq);
            let s = summarize(seq.to_vec(), opts.coverage)?;
            stats.push([s.mean, s.u, s.symmetric.0, s.symmetric.1]);
            if stats.len() < 2 {
                continue;
            }
            let h = stats.len() as f64;
            let sd_of_average = |j: usize| {
                let mean = stats.iter().map(|s| s[j]).sum::<f64>() / h;
                (stats.iter().map(|s| (s[j] - mean).powi(2)).sum::<f64>() / (h * (h - 1.0))).sqrt()
            };
            let u_all = ((s2 - s1 * s1 / n) / (n - 1.0)).max(0.0).sqrt();
            let delta = numerical_tolerance(u_all, ndig);
            if (0..4).all(|j| 2.0 * sd_of_average(j) <= delta) {
                let sequences = stats.len();
                return Ok(AdaptiveResult {
                    result: summarize(all, opts.coverage)?,
                    tolerance: delta,
                    ndig,
                    stabilized: true,
                    sequences,
                    per_sequence: m,
                });
            }
        }
    }
    let sequences = stats.len();
    let result = summarize(all, opts.coverage)?;
    Ok(AdaptiveResult {
        tolerance: numerical_tolerance(result.u, ndig),
        result,
        ndig,
        stabilized: false,
        sequences,
        per_sequence: m,
    })
}

/// Validation of a GUM result by a Monte Carlo one (JCGM 101 §8).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Validation {
    /// Numerical tolerance δ.
    pub tolerance: f64,
    /// |y − U − y_low|.
    pub d_low: f64,
    /// |y + U − y_high|.
    pub d_high: f64,
    /// True when both are within δ.
    pub passed: bool,
}

/// Compares the GUM interval y ± U with the Monte Carlo symmetric interval at tolerance δ
/// for `ndig` significant digits of the GUM u_c.
pub fn validate(gum: &GumResult, mc: &McResult, ndig: u32) -> Validation {
    let delta = numerical_tolerance(gum.u, ndig);
    let d_low = (gum.value - gum.expanded - mc.symmetric.0).abs();
    let d_high = (gum.value + gum.expanded - mc.symmetric.1).abs();
    Validation { tolerance: delta, d_low, d_high, passed: d_low <= delta && d_high <= delta }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::uncertainty::flow_models::PointVelocityModel;
    use crate::uncertainty::gum;
    use rand_distr::Distribution as _;

    fn pitot_inputs() -> Vec<Input> {
        vec![
            Input::normal("C", "1", 0.997, 0.003).unwrap(),
            Input::normal("Δp", "Pa", 250.0, 1.5).unwrap(),
            Input::normal("ρ", "kg/m³", 1.2, 0.003).unwrap(),
        ]
    }

    #[test]
    fn sorting_the_tails_gives_the_intervals_of_a_full_sort() {
        // Against a full sort (the order statistics of JCGM 101 §7.7), for skewed values,
        // ties and several coverages, including p < 0.5 where the tails overlap.
        let check = |values: Vec<f64>, p: f64, what: &str| {
            let m = values.len();
            let got = summarize(values.clone(), p).unwrap();
            let mut sorted = values;
            sorted.sort_unstable_by(f64::total_cmp);
            let q = (((p * m as f64) + 0.5).floor() as usize).clamp(1, m - 1);
            let r = (m - q) / 2;
            assert_eq!(got.symmetric, (sorted[r], sorted[(r + q).min(m - 1)]), "{what}: m {m}, p {p}");
            let best = (0..m - q)
                .min_by(|a, b| (sorted[a + q] - sorted[*a]).total_cmp(&(sorted[b + q] - sorted[*b])))
                .unwrap();
            assert_eq!(got.shortest, (sorted[best], sorted[best + q]), "{what}: m {m}, p {p}");
        };
        let mut rng = SmallRng::seed_from_u64(7);
        for (m, p) in [
            (1000usize, 0.95),
            (20_001, 0.95),
            (5000, 0.99),
            (777, 0.5),
            (400, 0.3),
            (3, 0.9),
            (2, 0.95),
            (300_000, 0.95),
            (300_000, 0.999),
            (100_000, 0.6),
        ] {
            let values: Vec<f64> = (0..m)
                .map(|i| {
                    let z: f64 = rand_distr::StandardNormal.sample(&mut rng);
                    if i % 17 == 0 { 1.0 } else { z.exp() }
                })
                .collect();
            check(values, p, "skewed with ties");
        }
        // Values the every-64th sample misjudges: the sampled ones are the extremes, so fewer
        // values than a tail lie beyond either threshold and selection takes over.
        let m = 200_000;
        let values: Vec<f64> = (0..m)
            .map(|i| match i % 128 {
                0 => -1e6 - i as f64,
                64 => 1e6 + i as f64,
                _ => (i as f64 * 0.618).fract(),
            })
            .collect();
        check(values, 0.95, "a misleading sample");
        // Already sorted, and reversed.
        let sorted: Vec<f64> = (0..100_000).map(|i| i as f64).collect();
        check(sorted.clone(), 0.95, "sorted");
        check(sorted.into_iter().rev().collect(), 0.95, "reversed");
    }

    #[test]
    fn trials_are_the_draws_of_rand_distr_through_the_model_trial_by_trial() {
        // Oracle: rand_distr 0.6 StandardNormal and rand's SmallRng, seeded chunk by chunk as
        // the module says, each trial evaluated alone by `Model::eval`. The blocked draws,
        // the library's own normal sampler and the vectorised traverse model must give the
        // same values to the bit (seeded results unchanged since they were introduced).
        use crate::section::layout::LayoutRule;
        use crate::uncertainty::flow_models::{MethodTerm, TraverseUncertainty};
        let dps: Vec<Input> = [150.0, 210.0, 240.0, 180.0, 95.0]
            .iter()
            .enumerate()
            .map(|(i, dp)| Input::normal(&format!("Δp{i}"), "Pa", *dp, 0.02 * dp).unwrap())
            .collect();
        let c = Input::normal("C", "1", 0.998, 0.0025).unwrap();
        let rho = Input::normal("ρ", "kg/m³", 1.2, 0.0024).unwrap();
        let terms = MethodTerm::typical(LayoutRule::EqualArea);
        let round = TraverseUncertainty::new(
            c.clone(),
            rho.clone(),
            Input::normal("D", "m", 0.8, 0.0008).unwrap(),
            &terms,
            dps.clone(),
        )
        .unwrap();
        let velocity = round.clone().for_mean_velocity();
        let w = Input::normal("W", "m", 1.2, 0.001).unwrap();
        let h = Input::normal("H", "m", 0.6, 0.001).unwrap();
        let rect = TraverseUncertainty::rectangular(c, rho, w, h, &terms, dps).unwrap();
        let trials = CHUNK + 4321; // two chunks, the second one with a part block at its end
        for t in [&round, &velocity, &rect] {
            let got = sample_model(&t.model, &t.inputs, &Correlations::none(), trials, 11, None).unwrap();
            let mut want = Vec::with_capacity(trials);
            for c in 0..trials.div_ceil(CHUNK) {
                let mut rng = SmallRng::seed_from_u64(splitmix(11 ^ splitmix(c as u64)));
                for _ in 0..CHUNK.min(trials - c * CHUNK) {
                    let x: Vec<f64> = t
                        .inputs
                        .iter()
                        .map(|i| {
                            let z: f64 = rand_distr::StandardNormal.sample(&mut rng);
                            i.value + i.standard_uncertainty() * z
                        })
                        .collect();
                    want.push(t.model.eval(&x));
                }
            }
            assert_eq!(got.len(), want.len());
            for (k, (g, w)) in got.iter().zip(&want).enumerate() {
                assert_eq!(g.to_bits(), w.to_bits(), "trial {k}: {g} against {w}");
            }
        }
    }

    #[test]
    fn a_cancelled_run_stops_between_chunks_and_says_so() {
        // Regression (issue 16): an interrupt waited for a 5·10⁷-trial run to finish.
        let i = pitot_inputs();
        let flag = Arc::new(AtomicBool::new(true));
        let opts = McOptions { trials: 50_000_000, cancel: Some(flag), ..Default::default() };
        let t = std::time::Instant::now();
        let e = monte_carlo(&PointVelocityModel, &i, &Correlations::none(), &opts).unwrap_err();
        assert_eq!(e, Error::Interrupted { context: "Monte Carlo" });
        assert!(t.elapsed().as_secs_f64() < 5.0, "stopped without running the trials");
        let too_many = McOptions { trials: MAX_TRIALS + 1, ..Default::default() };
        let e = monte_carlo(&PointVelocityModel, &i, &Correlations::none(), &too_many).unwrap_err();
        assert!(e.to_string().contains("at most"), "{e}");
    }

    #[test]
    fn reproducible_and_independent_of_threads() {
        let i = pitot_inputs();
        let a = sample_model(&PointVelocityModel, &i, &Correlations::none(), 200_000, 7, None).unwrap();
        let b = sample_model(&PointVelocityModel, &i, &Correlations::none(), 200_000, 7, None).unwrap();
        assert_eq!(a, b);
        let one = rayon::ThreadPoolBuilder::new().num_threads(1).build().unwrap();
        let c = one.install(|| sample_model(&PointVelocityModel, &i, &Correlations::none(), 200_000, 7, None).unwrap());
        assert_eq!(a, c);
        let d = sample_model(&PointVelocityModel, &i, &Correlations::none(), 200_000, 8, None).unwrap();
        assert_ne!(a, d);
    }

    // JCGM 101 §7.9.2 example of δ: u(y) = 0.09014 to 2 significant digits = 90 × 10⁻³ → δ = 0.0005.
    #[test]
    fn tolerance_and_adaptive_procedure() {
        assert!((numerical_tolerance(0.090_14, 2) - 0.0005).abs() < 1e-15);
        assert!((numerical_tolerance(2.0, 1) - 0.5).abs() < 1e-15);
        let i = pitot_inputs();
        let opts = McOptions { trials: 5_000_000, seed: 11, ..Default::default() };
        let a = monte_carlo_adaptive(&PointVelocityModel, &i, &Correlations::none(), 2, &opts).unwrap();
        assert!(a.stabilized && (a.tolerance - 0.0005).abs() < 1e-15, "{a:?}");
        let r = a.result.clone();
        assert_eq!(r.trials, a.sequences * 10_000);
        assert!(r.trials >= 20_000 && r.trials < 5_000_000);
        // Reproducible for a seed.
        assert_eq!(monte_carlo_adaptive(&PointVelocityModel, &i, &Correlations::none(), 2, &opts).unwrap(), a);
        let g = gum(&PointVelocityModel, &i, &Correlations::none(), 0.95).unwrap();
        let v = validate(&g, &r, 2);
        assert!(v.passed, "{v:?}"); // near-linear: GUM validated at 2 digits
    }

    /// JCGM 101:2008 §9.2.3's additive model: Y = X₁ + X₂ + X₃ + X₄, each input rectangular
    /// with u = 1. u(y) = 2 exactly; the 97.5 % quantile of the sum is 3.8794 (Irwin–Hall
    /// distribution, computed exactly in Python for this test; JCGM 101 Table 3 gives ±3.88,
    /// from memory).
    #[test]
    fn adaptive_procedure_on_the_additive_model_with_rectangular_inputs() {
        struct Sum4;
        impl Model for Sum4 {
            fn eval<R: crate::uncertainty::Real>(&self, x: &[R]) -> R {
                x[0] + x[1] + x[2] + x[3]
            }
        }
        let half = 3f64.sqrt();
        let i: Vec<Input> = (0..4).map(|k| Input::rectangular(&format!("X{k}"), "1", 0.0, half).unwrap()).collect();
        let opts = McOptions { trials: 10_000_000, seed: 3, ..Default::default() };
        let a = monte_carlo_adaptive(&Sum4, &i, &Correlations::none(), 2, &opts).unwrap();
        assert!(a.stabilized, "{a:?}");
        assert!((a.tolerance - 0.05).abs() < 1e-12, "u = 2.0 to 2 digits: δ = 0.05 (§7.9.2)");
        let r = &a.result;
        assert!((r.u - 2.0).abs() < 0.05 && r.mean.abs() < 0.05, "{r:?}");
        assert!((r.symmetric.1 - 3.8794).abs() < 0.05 && (r.symmetric.0 + 3.8794).abs() < 0.05, "{r:?}");
        // A limit below what stabilisation needs ends the run and says so.
        let short = McOptions { trials: 20_000, seed: 3, ..Default::default() };
        let b = monte_carlo_adaptive(&Sum4, &i, &Correlations::none(), 3, &short).unwrap();
        assert!(!b.stabilized && b.result.trials == 20_000 && b.sequences == 2, "{b:?}");
        // Bad requests.
        let e = monte_carlo_adaptive(&Sum4, &i, &Correlations::none(), 0, &opts).unwrap_err();
        assert!(e.to_string().contains("significant digits"), "{e}");
        let e = monte_carlo_adaptive(
            &Sum4,
            &i,
            &Correlations::none(),
            2,
            &McOptions { trials: 15_000, ..Default::default() },
        )
        .unwrap_err();
        assert!(e.to_string().contains("two sequences"), "{e}");
    }

    #[test]
    fn shortest_interval_of_a_skewed_output() {
        // y = x² with x ~ N(0, 1): shortest 95 % interval starts at 0 (chi-square, 1 dof:
        // [0, 3.841]; common practice, no source), the symmetric one at 0.000982.
        struct Square;
        impl Model for Square {
            fn eval<R: crate::uncertainty::Real>(&self, x: &[R]) -> R {
                x[0] * x[0]
            }
        }
        let i = vec![Input::normal("x", "1", 0.0, 1.0).unwrap()];
        let r = monte_carlo(&Square, &i, &Correlations::none(), &McOptions::default()).unwrap();
        assert!(r.shortest.0 < 1e-4 && (r.shortest.1 - 3.841).abs() < 0.03, "{:?}", r.shortest);
        assert!((r.symmetric.0 - 0.000_982).abs() < 2e-4 && (r.symmetric.1 - 5.024).abs() < 0.05, "{:?}", r.symmetric);
    }

    #[test]
    fn bad_requests() {
        let i = pitot_inputs();
        let e =
            monte_carlo(&PointVelocityModel, &i, &Correlations::none(), &McOptions { trials: 0, ..Default::default() })
                .unwrap_err();
        assert!(e.to_string().contains("number of trials must be at least 1"), "{e}");
        let rect = vec![Input::rectangular("a", "1", 1.0, 1.0).unwrap(), Input::normal("b", "1", 1.0, 1.0).unwrap()];
        struct Add2;
        impl Model for Add2 {
            fn eval<R: crate::uncertainty::Real>(&self, x: &[R]) -> R {
                x[0] + x[1]
            }
        }
        let corr = Correlations::none().with(0, 1, 0.5).unwrap();
        assert!(
            monte_carlo(&Add2, &rect, &corr, &McOptions::default()).unwrap_err().to_string().contains("not normal")
        );
        // Δp reaching below zero under the square root: a clear error, never NaN results.
        let wide = vec![
            Input::normal("C", "1", 1.0, 0.0).unwrap(),
            Input::rectangular("Δp", "Pa", 1.0, 2.0).unwrap(),
            Input::normal("ρ", "kg/m³", 1.2, 0.0).unwrap(),
        ];
        let e = monte_carlo(
            &PointVelocityModel,
            &wide,
            &Correlations::none(),
            &McOptions { trials: 10_000, ..Default::default() },
        )
        .unwrap_err();
        assert!(e.to_string().contains("non-finite"), "{e}");
    }

    #[test]
    fn progress_is_reported_to_the_last_trial() {
        let i = pitot_inputs();
        let seen = std::sync::Arc::new(std::sync::Mutex::new(Vec::new()));
        let s2 = seen.clone();
        let p = crate::progress::Progress::new(move |d, t| s2.lock().unwrap().push((d, t)));
        sample_model_reporting(&PointVelocityModel, &i, &Correlations::none(), 200_000, 7, None, Some(&p)).unwrap();
        let v = seen.lock().unwrap().clone();
        // 200 000 trials in chunks of 65 536: four reports, the largest being all of them.
        assert_eq!(v.len(), 4);
        assert_eq!(v.iter().map(|x| x.0).max(), Some(200_000));
        assert!(v.iter().all(|x| x.1 == 200_000));
    }
}
