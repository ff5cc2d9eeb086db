//! Logged samples per point: a block of transducer or data-logger samples of Δp at one
//! traverse point, reduced to the numbers a budget needs.
//!
//! Per block (after the settling time is dropped): the mean Δp and its standard deviation;
//! the mean of √Δp beside √(mean Δp) and their difference; a turbulence intensity estimated
//! from the Δp fluctuation; the fraction of negative samples; the drift between the first
//! and the last third of the block; the effective number of independent samples from the
//! autocorrelation, and from it the Type A standard uncertainty of the mean Δp.
//!
//! # Formulas
//! - Mean x̄ = Σx/n; standard deviation s = √(Σ(x − x̄)²/(n − 1)) (JCGM 100:2008 §4.2.2).
//! - Signed root √x = sign(x)·√|x|, so that a reversing sample counts against the mean
//!   (a probe's velocity follows the root of each instantaneous Δp, not of the mean).
//! - Turbulence intensity from Δp = ½ρv²: σ_v/v̄ ≈ s_Δp/(2·Δp̄) to first order (derived).
//!   It includes the transducer's own noise, so it is an upper estimate of the flow's.
//! - Autocorrelation r_k = Σ_{i<n−k} e_i e_{i+k} / Σ e_i², e the samples' deviations from
//!   the block's least-squares straight line (so that a drift, flagged separately, does not
//!   pass for a long correlation); effective
//!   number of independent samples n_eff = n / (1 + 2 Σ_{k=1}^{K} (1 − k/n)·r_k), the sum
//!   stopped before the first r_k ≤ 0 (K at most [`MAX_LAG`]), n_eff kept in [1, n]. This is
//!   the variance of the mean of a stationary series (from memory: standard time-series
//!   result; JCGM 100 §4.2.7 says correlated observations need such treatment, and
//!   Zięba & Ramza, Metrologia 48 (2011), discuss this estimator).
//! - Type A standard uncertainty of the mean u_A = s/√n_eff with ν = n_eff − 1 degrees of
//!   freedom (JCGM 100 §4.2.3 with n_eff in place of n).
//! - Drift: the means of the first and the last third, their difference relative to the
//!   mean, and z = |x̄₃ − x̄₁| / √(u₁² + u₃²) with u of each third from s and n_eff/3;
//!   z > 3 is flagged (common practice, no source).

use rayon::prelude::*;

use crate::error::{Error, Result, Warning};

/// Lags summed at most for the effective sample count.
pub const MAX_LAG: usize = 2000;

/// How blocks are reduced.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SampleOptions {
    /// Seconds dropped from the start of each block while the reading settles.
    pub settle_s: f64,
    /// Drift flagged above this many standard uncertainties of the difference of thirds.
    pub drift_z: f64,
    /// Fewer effective samples than this is flagged (few degrees of freedom).
    pub min_effective: f64,
}

impl Default for SampleOptions {
    fn default() -> Self {
        Self { settle_s: 0.0, drift_z: 3.0, min_effective: 10.0 }
    }
}

/// The numbers of one block.
#[derive(Debug, Clone, PartialEq)]
pub struct BlockStats {
    /// Samples used (after settling).
    pub n: usize,
    /// Samples dropped while settling.
    pub dropped: usize,
    /// Time from the first to the last sample used, s.
    pub duration_s: f64,
    /// Mean Δp, Pa.
    pub mean_dp: f64,
    /// Standard deviation of the samples, Pa.
    pub sd_dp: f64,
    /// Mean of the signed roots √Δp, √Pa.
    pub mean_sqrt: f64,
    /// Signed root of the mean Δp, √Pa.
    pub sqrt_mean: f64,
    /// (mean √Δp − √mean Δp) / √mean Δp, % (negative: the root of the mean overstates).
    pub sqrt_difference_pct: f64,
    /// Turbulence intensity estimated from the Δp fluctuation, %.
    pub turbulence_pct: f64,
    /// Fraction of samples below zero, %.
    pub negative_pct: f64,
    /// (mean of the last third − mean of the first third) / mean, %.
    pub drift_pct: f64,
    /// The drift in standard uncertainties of the difference.
    pub drift_z: f64,
    /// Lag-1 autocorrelation.
    pub r1: f64,
    /// Effective number of independent samples.
    pub n_effective: f64,
    /// True when the autocorrelation was still positive at [`MAX_LAG`] (n_eff too high).
    pub lag_capped: bool,
    /// Type A standard uncertainty of the mean Δp, Pa.
    pub u_mean_dp: f64,
    /// Its degrees of freedom, n_eff − 1.
    pub dof: f64,
    /// What the checks found.
    pub warnings: Vec<Warning>,
}

fn signed_sqrt(x: f64) -> f64 {
    x.signum() * x.abs().sqrt()
}

/// Reduces one block of samples: `time_s` seconds (increasing), `dp_pa` Δp in Pa.
pub fn block_stats(time_s: &[f64], dp_pa: &[f64], opts: &SampleOptions) -> Result<BlockStats> {
    const CTX: &str = "logged samples";
    if time_s.len() != dp_pa.len() {
        return Err(Error::Inconsistent {
            context: CTX,
            message: format!("{} times for {} Δp samples", time_s.len(), dp_pa.len()),
        });
    }
    if dp_pa.is_empty() {
        return Err(Error::Inconsistent { context: CTX, message: "the block is empty".into() });
    }
    if !(opts.settle_s >= 0.0 && opts.settle_s.is_finite()) {
        return Err(Error::OutOfRange {
            context: CTX,
            param: "settling time",
            value: opts.settle_s,
            unit: "s",
            allowed: "finite and ≥ 0".into(),
        });
    }
    for (i, (t, x)) in time_s.iter().zip(dp_pa).enumerate() {
        if !t.is_finite() || !x.is_finite() {
            return Err(Error::Row {
                row: i + 1,
                source: Box::new(Error::NotFinite {
                    context: CTX,
                    param: if t.is_finite() { "Δp" } else { "time" },
                    value: if t.is_finite() { *x } else { *t },
                }),
            });
        }
        if i > 0 && *t <= time_s[i - 1] {
            return Err(Error::Row {
                row: i + 1,
                source: Box::new(Error::Inconsistent {
                    context: CTX,
                    message: format!(
                        "time {t} s does not follow {} s: timestamps must increase within a block (sort the samples, or split the block)",
                        time_s[i - 1]
                    ),
                }),
            });
        }
    }
    let t0 = time_s[0];
    let start = time_s.partition_point(|&t| t - t0 < opts.settle_s);
    let (t, x) = (&time_s[start..], &dp_pa[start..]);
    let n = x.len();
    if n < 2 {
        return Err(Error::Inconsistent {
            context: CTX,
            message: format!(
                "{} sample(s) left after the {} s settling time of a block lasting {} s: shorten the settling time or log longer",
                n,
                opts.settle_s,
                time_s[time_s.len() - 1] - t0
            ),
        });
    }
    let nf = n as f64;
    let mean = x.iter().sum::<f64>() / nf;
    let ss: f64 = x.iter().map(|v| (v - mean).powi(2)).sum();
    let sd = (ss / (nf - 1.0)).sqrt();
    let mean_sqrt = x.iter().map(|&v| signed_sqrt(v)).sum::<f64>() / nf;
    let sqrt_mean = signed_sqrt(mean);
    let negative = x.iter().filter(|&&v| v < 0.0).count() as f64 / nf;

    // Autocorrelation of the fluctuations about the block's straight-line trend (a drift
    // would otherwise read as a long correlation and hide itself), until it first stops
    // being positive.
    let centre = (nf - 1.0) / 2.0;
    let sxx: f64 = (0..n).map(|i| (i as f64 - centre).powi(2)).sum();
    let slope = x.iter().enumerate().map(|(i, v)| (i as f64 - centre) * (v - mean)).sum::<f64>() / sxx;
    let f: Vec<f64> = x.iter().enumerate().map(|(i, v)| v - mean - slope * (i as f64 - centre)).collect();
    let fss: f64 = f.iter().map(|v| v * v).sum();
    let (mut sum, mut r1, mut lag_capped) = (0.0, 0.0, false);
    if fss > 0.0 {
        let max_lag = MAX_LAG.min(n - 1);
        for k in 1..=max_lag {
            let c: f64 = f[..n - k].iter().zip(&f[k..]).map(|(a, b)| a * b).sum();
            let r = c / fss;
            if k == 1 {
                r1 = r;
            }
            if r <= 0.0 {
                break;
            }
            sum += (1.0 - k as f64 / nf) * r;
            if k == max_lag && max_lag == MAX_LAG {
                lag_capped = true;
            }
        }
    }
    let n_eff = (nf / (1.0 + 2.0 * sum)).clamp(1.0, nf);
    let u_mean = sd / n_eff.sqrt();

    let third = n / 3;
    let (drift_pct, drift_z) = if third >= 2 {
        let m1 = x[..third].iter().sum::<f64>() / third as f64;
        let m3 = x[n - third..].iter().sum::<f64>() / third as f64;
        let u_third = sd / (n_eff / 3.0).max(1.0).sqrt();
        let z = if u_third > 0.0 { (m3 - m1).abs() / (2f64.sqrt() * u_third) } else { 0.0 };
        (if mean != 0.0 { 100.0 * (m3 - m1) / mean.abs() } else { f64::NAN }, z)
    } else {
        (f64::NAN, 0.0)
    };

    let mut warnings = Vec::new();
    if negative > 0.0 {
        warnings.push(Warning::new(
            "reversing",
            format!(
                "{:.1} % of the samples are negative: the flow reverses or the probe is misaligned at this point; the √Δp mean counts them as negative velocities",
                100.0 * negative
            ),
        ));
    }
    if drift_z > opts.drift_z {
        warnings.push(Warning::new(
            "drifting",
            format!(
                "the mean drifts {:.2} % from the first to the last third of the block ({:.1} standard uncertainties): unsteady flow or transducer zero drift; the Type A term does not cover a drift",
                drift_pct, drift_z
            ),
        ));
    }
    if n_eff < opts.min_effective {
        warnings.push(Warning::new(
            "few-independent-samples",
            format!(
                "only {:.1} effective independent samples (of {n}): log longer or sample less often; u_A has {:.1} degrees of freedom",
                n_eff,
                n_eff - 1.0
            ),
        ));
    }
    if lag_capped {
        warnings.push(Warning::new(
            "long-correlation",
            format!("the autocorrelation is still positive at lag {MAX_LAG}: n_eff is overstated and u_A understated; log longer"),
        ));
    }
    if mean <= 0.0 {
        warnings
            .push(Warning::new("unsteady", "the mean Δp is not positive: no velocity can be reduced from this block"));
    }
    Ok(BlockStats {
        n,
        dropped: start,
        duration_s: t[n - 1] - t[0],
        mean_dp: mean,
        sd_dp: sd,
        mean_sqrt,
        sqrt_mean,
        sqrt_difference_pct: if sqrt_mean != 0.0 {
            100.0 * (mean_sqrt - sqrt_mean) / sqrt_mean.abs()
        } else {
            f64::NAN
        },
        turbulence_pct: if mean > 0.0 { 100.0 * sd / (2.0 * mean) } else { f64::NAN },
        negative_pct: 100.0 * negative,
        drift_pct,
        drift_z,
        r1,
        n_effective: n_eff,
        lag_capped,
        u_mean_dp: u_mean,
        dof: n_eff - 1.0,
        warnings,
    })
}

/// The row ranges of each point's block in a table whose `points` column names the point of
/// every sample, in order of first appearance. A point whose rows are not contiguous is an
/// error (two visits to one point need two ids).
pub fn blocks_by_point(points: &[String]) -> Result<Vec<(String, std::ops::Range<usize>)>> {
    blocks_of(points.iter().map(|p| Some(p.as_str())))
}

/// As [`blocks_by_point`], over borrowed ids (a table's text column read in place, without a
/// string per sample); a missing id is an error naming its row.
pub fn blocks_of<'a>(points: impl Iterator<Item = Option<&'a str>>) -> Result<Vec<(String, std::ops::Range<usize>)>> {
    let mut out: Vec<(String, std::ops::Range<usize>)> = Vec::new();
    let mut seen = std::collections::HashMap::new();
    for (i, p) in points.enumerate() {
        let Some(p) = p else {
            return Err(Error::Row {
                row: i + 1,
                source: Box::new(Error::Inconsistent { context: "logged samples", message: "missing point id".into() }),
            });
        };
        match out.last_mut() {
            Some((last, r)) if last == p => r.end = i + 1,
            _ => {
                if let Some(&first) = seen.get(p) {
                    return Err(Error::Row {
                        row: i + 1,
                        source: Box::new(Error::Inconsistent {
                            context: "logged samples",
                            message: format!(
                                "point '{p}' appears again after other points (its first block starts at row {}): give each visit its own point id",
                                first + 1
                            ),
                        }),
                    });
                }
                seen.insert(p.to_string(), i);
                out.push((p.to_string(), i..i + 1));
            }
        }
    }
    Ok(out)
}

/// The point of each sample from point windows (`start_s`, `stop_s`, inclusive start,
/// exclusive stop): `None` for a sample outside every window. Windows must not overlap.
pub fn assign_windows(time_s: &[f64], windows: &[(String, f64, f64)]) -> Result<Vec<Option<usize>>> {
    let mut order: Vec<usize> = (0..windows.len()).collect();
    order.sort_by(|&a, &b| windows[a].1.total_cmp(&windows[b].1));
    for (k, &w) in order.iter().enumerate() {
        let (id, a, b) = &windows[w];
        if !(a.is_finite() && b.is_finite() && b > a) {
            return Err(Error::Inconsistent {
                context: "logged samples",
                message: format!("window of point '{id}': stop ({b} s) must come after start ({a} s)"),
            });
        }
        if let Some(&next) = order.get(k + 1)
            && windows[next].1 < *b
        {
            return Err(Error::Inconsistent {
                context: "logged samples",
                message: format!("the windows of points '{id}' and '{}' overlap", windows[next].0),
            });
        }
    }
    Ok(time_s.iter().map(|&t| order.iter().copied().find(|&w| t >= windows[w].1 && t < windows[w].2)).collect())
}

/// Every block of a samples table at once (blocks in parallel).
pub fn all_block_stats(
    time_s: &[f64],
    dp_pa: &[f64],
    blocks: &[(String, std::ops::Range<usize>)],
    opts: &SampleOptions,
) -> Result<Vec<BlockStats>> {
    blocks
        .par_iter()
        .map(|(id, r)| {
            block_stats(&time_s[r.clone()], &dp_pa[r.clone()], opts).map_err(|e| match e {
                Error::Row { row, source } => Error::Row { row: r.start + row, source },
                e => Error::Inconsistent { context: "logged samples", message: format!("point '{id}': {e}") },
            })
        })
        .collect()
}

/// The columns of a scan of samples and the factors that take them to SI.
#[derive(Debug, Clone, Copy)]
pub struct SampleColumns<'a> {
    /// Time column.
    pub time: &'a str,
    /// Δp column.
    pub dp: &'a str,
    /// Point id column.
    pub point: &'a str,
    /// Seconds per unit of the time column.
    pub time_scale: f64,
    /// Pa per unit of the Δp column.
    pub dp_scale: f64,
}

/// A block whose samples may run on into the next batch.
struct OpenBlock {
    id: String,
    /// Row (from 0, in the whole scan) of its first sample.
    start: usize,
    time: Vec<f64>,
    dp: Vec<f64>,
}

/// Every block of a scan of samples, read a batch at a time (only the three columns), in
/// order: the same numbers as [`all_block_stats`] over the whole table, holding one batch
/// and the block that runs on from it. A block may run on from one batch (or file) into
/// the next; a point met again after other points is an error naming its row. `correct`
/// maps each Δp (Pa) before the statistics (a transducer's calibration).
pub fn scan_block_stats(
    scan: &crate::io::scan::TableScan,
    cols: &SampleColumns<'_>,
    correct: Option<&(dyn Fn(f64) -> f64 + Sync)>,
    opts: &SampleOptions,
    batch_rows: usize,
    cancel: Option<&std::sync::atomic::AtomicBool>,
) -> Result<Vec<(String, BlockStats)>> {
    use polars::prelude::DataType;
    let names = [cols.time, cols.dp, cols.point].map(str::to_string);
    let batches =
        scan.batches(&names, if batch_rows == 0 { crate::campaign::stream::DEFAULT_BATCH_ROWS } else { batch_rows })?;
    let column_err =
        |c: &str, e: polars::prelude::PolarsError| Error::Column { column: c.to_string(), message: e.to_string() };
    let numbers = |df: &polars::prelude::DataFrame, c: &str, scale: f64| -> Result<Vec<f64>> {
        let s = df.column(c).map_err(|e| column_err(c, e))?.cast(&DataType::Float64).map_err(|e| column_err(c, e))?;
        let ca = s.f64().map_err(|e| column_err(c, e))?;
        Ok(ca.iter().map(|v| v.map_or(f64::NAN, |v| v * scale)).collect())
    };
    let mut out: Vec<(String, BlockStats)> = Vec::new();
    let mut seen: std::collections::HashSet<String> = std::collections::HashSet::new();
    let mut open: Option<OpenBlock> = None;
    let mut row0 = 0usize;
    let finish = |id: &str, start: usize, t: &[f64], d: &[f64]| {
        block_stats(t, d, opts).map_err(|e| match e {
            Error::Row { row, source } => Error::Row { row: start + row, source },
            e => Error::Inconsistent { context: "logged samples", message: format!("point '{id}': {e}") },
        })
    };
    // One batch decoded ahead while this one is reduced.
    batches.read_ahead("sample scan", cancel, |df, _| {
        let n = df.height();
        let time = numbers(&df, cols.time, cols.time_scale)?;
        let mut dp = numbers(&df, cols.dp, cols.dp_scale)?;
        if let Some(f) = correct {
            dp.par_iter_mut().for_each(|x| *x = f(*x));
        }
        // Runs of one id in this batch.
        let runs: Vec<(String, std::ops::Range<usize>)> = crate::io::table::with_text_column(&df, cols.point, |ids| {
            let mut runs: Vec<(String, std::ops::Range<usize>)> = Vec::new();
            for (i, id) in ids.enumerate() {
                let Some(id) = id else {
                    return Err(Error::Row {
                        row: row0 + i + 1,
                        source: Box::new(Error::Inconsistent {
                            context: "logged samples",
                            message: "missing point id".into(),
                        }),
                    });
                };
                match runs.last_mut() {
                    Some((last, r)) if last == id => r.end = i + 1,
                    _ => runs.push((id.to_string(), i..i + 1)),
                }
            }
            Ok(runs)
        })?;
        let last = runs.len().saturating_sub(1);
        let mut done: Vec<(String, usize, std::ops::Range<usize>)> = Vec::new();
        let mut owned: Option<OpenBlock> = None;
        for (k, (id, r)) in runs.into_iter().enumerate() {
            if k == 0 && open.as_ref().is_some_and(|b| b.id == id) {
                let b = open.as_mut().expect("checked above");
                b.time.extend_from_slice(&time[r.clone()]);
                b.dp.extend_from_slice(&dp[r]);
                if k != last {
                    owned = open.take();
                }
                continue;
            }
            if k == 0 {
                owned = open.take();
            }
            if seen.contains(&id) || owned.as_ref().is_some_and(|b| b.id == id) {
                return Err(Error::Row {
                    row: row0 + r.start + 1,
                    source: Box::new(Error::Inconsistent {
                        context: "logged samples",
                        message: format!(
                            "point '{id}' appears again after other points: give each visit its own point id"
                        ),
                    }),
                });
            }
            seen.insert(id.clone());
            if k == last {
                open =
                    Some(OpenBlock { id, start: row0 + r.start, time: time[r.clone()].to_vec(), dp: dp[r].to_vec() });
            } else {
                done.push((id, row0 + r.start, r));
            }
        }
        if let Some(b) = owned {
            seen.insert(b.id.clone());
            let s = finish(&b.id, b.start, &b.time, &b.dp)?;
            out.push((b.id, s));
        }
        let stats: Vec<BlockStats> = done
            .par_iter()
            .map(|(id, start, r)| finish(id, *start, &time[r.clone()], &dp[r.clone()]))
            .collect::<Result<_>>()?;
        out.extend(done.into_iter().map(|d| d.0).zip(stats));
        row0 += n;
        Ok(())
    })?;
    if let Some(b) = open {
        let s = finish(&b.id, b.start, &b.time, &b.dp)?;
        out.push((b.id, s));
    }
    if out.is_empty() {
        return Err(Error::Inconsistent { context: "logged samples", message: "the scan holds no samples".into() });
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{SeedableRng, rngs::SmallRng};
    use rand_distr::{Distribution, StandardNormal};

    fn ar1(n: usize, phi: f64, seed: u64) -> Vec<f64> {
        let mut rng = SmallRng::seed_from_u64(seed);
        let mut x = Vec::with_capacity(n);
        let mut prev = 0.0;
        let scale = (1.0 - phi * phi).sqrt();
        for _ in 0..n {
            let e: f64 = StandardNormal.sample(&mut rng);
            prev = phi * prev + scale * e;
            x.push(prev);
        }
        x
    }

    fn times(n: usize, dt: f64) -> Vec<f64> {
        (0..n).map(|i| i as f64 * dt).collect()
    }

    /// Known effective sample counts: white noise n_eff ≈ n; AR(1) with φ has
    /// n_eff/n → (1 − φ)/(1 + φ) (variance of the mean of an AR(1) series; standard
    /// time-series result, from memory).
    #[test]
    fn effective_sample_count_of_white_and_correlated_noise() {
        let n = 200_000;
        let white: Vec<f64> = ar1(n, 0.0, 1).iter().map(|e| 100.0 + 2.0 * e).collect();
        let s = block_stats(&times(n, 0.01), &white, &SampleOptions::default()).unwrap();
        assert!((s.n_effective / n as f64 - 1.0).abs() < 0.05, "{}", s.n_effective);
        assert!((s.sd_dp - 2.0).abs() < 0.02 && (s.mean_dp - 100.0).abs() < 0.02, "{s:?}");
        assert!(s.warnings.is_empty(), "{:?}", s.warnings);
        for phi in [0.5, 0.9] {
            let x: Vec<f64> = ar1(n, phi, 2).iter().map(|e| 100.0 + 2.0 * e).collect();
            let s = block_stats(&times(n, 0.01), &x, &SampleOptions::default()).unwrap();
            let want = (1.0 - phi) / (1.0 + phi);
            assert!(
                ((s.n_effective / n as f64) / want - 1.0).abs() < 0.15,
                "φ = {phi}: {} vs {want}",
                s.n_effective / n as f64
            );
            assert!((s.r1 - phi).abs() < 0.01, "{}", s.r1);
            assert!((s.u_mean_dp - s.sd_dp / s.n_effective.sqrt()).abs() < 1e-12);
        }
    }

    /// Exact small cases, worked by hand: [4, 9, 16, 25] Pa gives mean 13.5, s = √(83/3)
    /// (Σ(x − x̄)² = 90.25 + 20.25 + 6.25 + 132.25 = 249, /3 = 83), mean √Δp = 3.5,
    /// √13.5 = 3.674235.
    #[test]
    fn hand_worked_block() {
        let s = block_stats(&[0.0, 1.0, 2.0, 3.0], &[4.0, 9.0, 16.0, 25.0], &SampleOptions::default()).unwrap();
        assert_eq!(s.n, 4);
        assert!((s.mean_dp - 13.5).abs() < 1e-12);
        assert!((s.sd_dp - 83f64.sqrt()).abs() < 1e-12);
        assert!((s.mean_sqrt - 3.5).abs() < 1e-12 && (s.sqrt_mean - 13.5f64.sqrt()).abs() < 1e-12);
        assert!((s.sqrt_difference_pct - 100.0 * (3.5 / 13.5f64.sqrt() - 1.0)).abs() < 1e-9);
        assert!((s.turbulence_pct - 100.0 * 83f64.sqrt() / 27.0).abs() < 1e-9);
        // Settling drops the first two seconds' samples (t − t0 < 2 s).
        let s = block_stats(
            &[0.0, 1.0, 2.0, 3.0],
            &[4.0, 9.0, 16.0, 25.0],
            &SampleOptions { settle_s: 2.0, ..Default::default() },
        )
        .unwrap();
        assert_eq!((s.n, s.dropped), (2, 2));
        assert!((s.mean_dp - 20.5).abs() < 1e-12);
    }

    #[test]
    fn checks_flag_reversal_drift_and_few_samples() {
        let n = 3000;
        let mut x: Vec<f64> = ar1(n, 0.0, 5).iter().map(|e| 20.0 + 10.0 * e).collect();
        let s = block_stats(&times(n, 0.1), &x, &SampleOptions::default()).unwrap();
        assert!(s.negative_pct > 1.0 && s.warnings.iter().any(|w| w.kind == "reversing"), "{s:?}");
        // A ramp of 20 % over the block.
        for (i, v) in x.iter_mut().enumerate() {
            *v = 50.0 + 10.0 * i as f64 / n as f64 + 0.5 * (i % 7) as f64;
        }
        let s = block_stats(&times(n, 0.1), &x, &SampleOptions::default()).unwrap();
        assert!(s.drift_pct > 10.0 && s.warnings.iter().any(|w| w.kind == "drifting"), "{s:?}");
        let few = block_stats(&[0.0, 1.0, 2.0], &[10.0, 11.0, 10.5], &SampleOptions::default()).unwrap();
        assert!(few.warnings.iter().any(|w| w.kind == "few-independent-samples"));
    }

    #[test]
    fn bad_blocks_are_clear_errors() {
        let o = SampleOptions::default();
        assert!(block_stats(&[], &[], &o).unwrap_err().to_string().contains("empty"));
        let e = block_stats(&[0.0], &[5.0], &o).unwrap_err().to_string();
        assert!(e.contains("1 sample(s) left"), "{e}");
        let e = block_stats(&[0.0, 2.0, 1.0], &[5.0, 5.0, 5.0], &o).unwrap_err().to_string();
        assert!(e.starts_with("row 3") && e.contains("must increase"), "{e}");
        let e = block_stats(&[0.0, 1.0, 2.0], &[5.0, 5.0, 5.0], &SampleOptions { settle_s: 10.0, ..o })
            .unwrap_err()
            .to_string();
        assert!(e.contains("settling time"), "{e}");
        let e = block_stats(&[0.0, 1.0], &[5.0, f64::NAN], &o).unwrap_err().to_string();
        assert!(e.contains("row 2") && e.contains("finite"), "{e}");
    }

    /// A scan read in batches of 37 rows (blocks run on across batches and files) gives
    /// the same numbers as the whole table; a point met again is refused by its row.
    #[test]
    fn scans_equal_the_whole_table() {
        let dir = std::env::temp_dir().join(format!("stagna-sample-scan-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(&dir).unwrap();
        let mut ids = Vec::new();
        let (mut t, mut d) = (Vec::new(), Vec::new());
        for (k, n) in [120usize, 75, 200, 33].iter().enumerate() {
            let x = ar1(*n, 0.6, k as u64 + 3);
            for (i, v) in x.iter().enumerate() {
                ids.push(format!("P{k}"));
                t.push(i as f64 * 0.2);
                d.push(400.0 + 10.0 * k as f64 + 8.0 * v);
            }
        }
        // Two files, the second block split between them.
        let cut = 150;
        for (name, r) in [("a.parquet", 0..cut), ("b.parquet", cut..ids.len())] {
            let df = polars::prelude::df!(
                "point" => ids[r.clone()].to_vec(),
                "time_s" => t[r.clone()].to_vec(),
                "dp" => d[r].iter().map(|v| v * 1000.0).collect::<Vec<f64>>()
            )
            .unwrap();
            crate::io::table::write_parquet(&df, &dir.join(name)).unwrap();
        }
        let scan = crate::io::scan::TableScan::open(&dir).unwrap();
        let cols = SampleColumns { time: "time_s", dp: "dp", point: "point", time_scale: 1.0, dp_scale: 1e-3 };
        let o = SampleOptions { settle_s: 1.0, ..Default::default() };
        let got = scan_block_stats(&scan, &cols, None, &o, 37, None).unwrap();
        let want = all_block_stats(&t, &d, &blocks_by_point(&ids).unwrap(), &o).unwrap();
        assert_eq!(got.iter().map(|g| g.0.as_str()).collect::<Vec<_>>(), ["P0", "P1", "P2", "P3"]);
        for ((_, g), w) in got.iter().zip(&want) {
            assert_eq!(g.n, w.n);
            assert!((g.mean_dp - w.mean_dp).abs() < 1e-9 && (g.u_mean_dp - w.u_mean_dp).abs() < 1e-9, "{g:?} {w:?}");
        }
        // A visit to P0 again after P1 is refused by its row.
        let again = polars::prelude::df!("point" => ["P0", "P0", "P1", "P1", "P0"], "time_s" => [0.0, 1.0, 0.0, 1.0, 0.0], "dp" => [1.0, 2.0, 3.0, 4.0, 5.0]).unwrap();
        let f = dir.join("again.parquet");
        crate::io::table::write_parquet(&again, &f).unwrap();
        let e = scan_block_stats(
            &crate::io::scan::TableScan::open(&f).unwrap(),
            &cols,
            None,
            &SampleOptions::default(),
            2,
            None,
        )
        .unwrap_err()
        .to_string();
        assert!(e.contains("row 5") && e.contains("appears again"), "{e}");
        let _ = std::fs::remove_dir_all(&dir);
    }

    #[test]
    fn blocks_and_windows() {
        let ids: Vec<String> = ["A1", "A1", "A2", "A2", "A2"].iter().map(|s| s.to_string()).collect();
        let b = blocks_by_point(&ids).unwrap();
        assert_eq!(b, vec![("A1".to_string(), 0..2), ("A2".to_string(), 2..5)]);
        let again: Vec<String> = ["A1", "A2", "A1"].iter().map(|s| s.to_string()).collect();
        assert!(blocks_by_point(&again).unwrap_err().to_string().contains("appears again"));
        // Read in place, a missing id names its row.
        let e = blocks_of([Some("A1"), None].into_iter()).unwrap_err().to_string();
        assert!(e.contains("row 2") && e.contains("missing point id"), "{e}");
        let w = vec![("P2".to_string(), 10.0, 20.0), ("P1".to_string(), 0.0, 10.0)];
        assert_eq!(
            assign_windows(&[-1.0, 0.0, 9.9, 10.0, 25.0], &w).unwrap(),
            vec![None, Some(1), Some(1), Some(0), None]
        );
        let overlap = vec![("P1".to_string(), 0.0, 11.0), ("P2".to_string(), 10.0, 20.0)];
        assert!(assign_windows(&[0.0], &overlap).unwrap_err().to_string().contains("overlap"));
    }
}
