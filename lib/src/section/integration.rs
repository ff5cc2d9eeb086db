//! From point velocities to the mean velocity of a section.
//!
//! # Formula
//! - **Arithmetic mean** of the points: what equal-area, log-linear and
//!   log-Chebyshev layouts are designed for.
//! - **Numerical integration** for arbitrary positions. Circular: along each
//!   radius, U_radius = ∫₀¹ u d(r²/R²) — the centre region up to the innermost
//!   point at that point's velocity, trapezoids in (r/R)² between points, and
//!   the wall zone from the outermost point (at distance a from the wall) to
//!   the wall by the power law u = u_a (y/a)^{1/m}, integrated exactly with the
//!   curvature: (2 u_a/R²)[R a m/(m+1) − a² m/(2m+1)]. The section mean is the
//!   average over radii. Rectangular: the same along each line (both wall zones
//!   with u = u_a (y/a)^{1/m}, mean m/(m+1) u_a), then across the lines.
//!   The wall exponent m (about 4 rough … 10 smooth, 7 typical) is the user's,
//!   and the result names it.
//!
//! # References
//! ISO 3966 (numerical integration, wall-zone power law and the determination
//! of m in its annex), as summarised in `shared/reference/check-values.md`
//! §5.4; the wall-zone integral is derived there.

use std::collections::BTreeMap;

use crate::error::{Error, Result, finite, within};
use crate::section::layout::Position;
use crate::units::quantity::Velocity;

/// How point velocities are averaged.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Averaging {
    /// Arithmetic mean (layout-matched).
    Arithmetic,
    /// Numerical integration with a power-law wall region of exponent m.
    Integrate {
        /// Wall-region exponent m.
        wall_exponent: f64,
    },
}

impl Averaging {
    /// Name for reports.
    pub fn name(&self) -> String {
        match self {
            Averaging::Arithmetic => "arithmetic mean of points".into(),
            Averaging::Integrate { wall_exponent } => {
                format!("numerical integration, wall region power law m = {wall_exponent}")
            }
        }
    }
}

/// A section mean with its parts.
#[derive(Debug, Clone, PartialEq)]
pub struct SectionMean {
    /// Mean velocity of the section.
    pub mean: Velocity,
    /// Mean of each traverse line (diameter or port line), in line order.
    pub per_line: Vec<f64>,
    /// How it was obtained.
    pub method: String,
    /// Number of points used.
    pub points: usize,
}

fn check_inputs(positions: &[Position], velocities: &[f64]) -> Result<()> {
    if positions.len() != velocities.len() {
        return Err(Error::Inconsistent {
            context: "section mean",
            message: format!("{} positions but {} velocities", positions.len(), velocities.len()),
        });
    }
    if positions.is_empty() {
        return Err(Error::Inconsistent { context: "section mean", message: "no points".into() });
    }
    for (i, v) in velocities.iter().enumerate() {
        finite("section mean", "velocity", *v).map_err(|e| e.at_row(i))?;
    }
    Ok(())
}

/// Section mean velocity from points (each with its line number) by the chosen averaging.
pub fn section_mean(
    lines: &[usize],
    positions: &[Position],
    velocities: &[f64],
    averaging: Averaging,
) -> Result<SectionMean> {
    check_inputs(positions, velocities)?;
    if lines.len() != velocities.len() {
        return Err(Error::Inconsistent {
            context: "section mean",
            message: "one line number per point is needed".into(),
        });
    }
    match averaging {
        Averaging::Arithmetic => {
            let mut by_line: BTreeMap<usize, (f64, usize)> = BTreeMap::new();
            for (&l, &v) in lines.iter().zip(velocities) {
                let e = by_line.entry(l).or_default();
                e.0 += v;
                e.1 += 1;
            }
            Ok(SectionMean {
                mean: Velocity::m_s(velocities.iter().sum::<f64>() / velocities.len() as f64),
                per_line: by_line.values().map(|(s, n)| s / *n as f64).collect(),
                method: averaging.name(),
                points: velocities.len(),
            })
        }
        Averaging::Integrate { wall_exponent } => {
            within("section mean", "wall exponent m", wall_exponent, "", 1.0, 20.0)?;
            integrate(lines, positions, velocities, wall_exponent)
        }
    }
}

/// The wall exponent m fitted from the two measured points nearest the wall on each radius.
#[derive(Debug, Clone, PartialEq)]
pub struct WallExponent {
    /// Mean of the radii's exponents.
    pub m: f64,
    /// (line, the radius's side: true for r/R < 0, its m) for every radius that gave one.
    pub per_radius: Vec<(usize, bool, f64)>,
}

/// The wall-region exponent m (u ∝ y^(1/m) near the wall) from measured points of a round
/// section: on each radius the two points nearest the wall, a and b, give
/// m = ln(y_a/y_b) / ln(u_a/u_b) (the power law's own ratio, derived); the section's m is the
/// mean over the radii. ISO 3966 gives an annex on determining m for the extrapolation near
/// the wall (its title read in the published contents of the identical BS 1042-2.1:1983; its
/// formulas not re-read here). An m outside 4 … 20 from a radius is an error naming it.
pub fn wall_exponent(lines: &[usize], positions: &[Position], velocities: &[f64]) -> Result<WallExponent> {
    check_inputs(positions, velocities)?;
    let mut radii: BTreeMap<(usize, bool), Vec<(f64, f64)>> = BTreeMap::new();
    for (i, ((&line, pos), &v)) in lines.iter().zip(positions).zip(velocities).enumerate() {
        let Position::Radial { r_over_r, .. } = *pos else {
            return Err(Error::Inconsistent {
                context: "wall exponent",
                message: "needs points on the radii of a round section".into(),
            });
        };
        finite("wall exponent", "r/R", r_over_r).map_err(|e| e.at_row(i))?;
        radii.entry((line, r_over_r < 0.0)).or_default().push((1.0 - r_over_r.abs(), v));
    }
    let mut per_radius = Vec::new();
    for ((line, side), mut pts) in radii {
        if pts.len() < 2 {
            continue;
        }
        pts.sort_by(|a, b| a.0.total_cmp(&b.0));
        let ((ya, ua), (yb, ub)) = (pts[0], pts[1]);
        if !(ya > 0.0 && yb > ya && ua > 0.0 && ub > ua) {
            return Err(Error::Inconsistent {
                context: "wall exponent",
                message: format!(
                    "line {line}, {} radius: the velocity does not rise away from the wall between its two outer points ({ua} and {ub} m/s): no power-law wall region to fit",
                    if side { "negative" } else { "positive" }
                ),
            });
        }
        let m = (ya / yb).ln() / (ua / ub).ln();
        if !(4.0..=20.0).contains(&m) {
            return Err(Error::Inconsistent {
                context: "wall exponent",
                message: format!(
                    "line {line}, {} radius: m = {m:.2} from its two outer points lies outside 4 … 20; the points do not follow a power-law wall region",
                    if side { "negative" } else { "positive" }
                ),
            });
        }
        per_radius.push((line, side, m));
    }
    if per_radius.is_empty() {
        return Err(Error::Inconsistent {
            context: "wall exponent",
            message: "no radius has two points to fit m from".into(),
        });
    }
    let m = per_radius.iter().map(|x| x.2).sum::<f64>() / per_radius.len() as f64;
    Ok(WallExponent { m, per_radius })
}

fn integrate(lines: &[usize], positions: &[Position], velocities: &[f64], m: f64) -> Result<SectionMean> {
    let circular = matches!(positions[0], Position::Radial { .. });
    // Group into radii (line, side) or lines, with the normalised distance from the
    // centre (circular, r/R) or from the port wall (rectangular, y/H).
    let mut groups: BTreeMap<(usize, bool), Vec<(f64, f64)>> = BTreeMap::new();
    let mut xs: BTreeMap<usize, f64> = BTreeMap::new();
    for (i, ((&line, pos), &v)) in lines.iter().zip(positions).zip(velocities).enumerate() {
        match (*pos, circular) {
            (Position::Radial { r_over_r, .. }, true) => {
                finite("section mean", "r/R", r_over_r).map_err(|e| e.at_row(i))?;
                if r_over_r.abs() >= 1.0 {
                    return Err(outside(i, format!("r/R = {r_over_r}")));
                }
                groups.entry((line, r_over_r < 0.0)).or_default().push((r_over_r.abs(), v));
            }
            (Position::Grid { x_over_w, y_over_h }, false) => {
                if !(x_over_w > 0.0 && x_over_w < 1.0 && y_over_h > 0.0 && y_over_h < 1.0) {
                    return Err(outside(i, format!("x/W = {x_over_w}, y/H = {y_over_h}")));
                }
                if let Some(&x) = xs.get(&line)
                    && (x - x_over_w).abs() > 1e-9
                {
                    return Err(Error::Inconsistent {
                        context: "section mean",
                        message: format!(
                            "point {}: line {} has points at two x/W positions ({x} and {x_over_w})",
                            i + 1,
                            line + 1
                        ),
                    });
                }
                xs.insert(line, x_over_w);
                groups.entry((line, false)).or_default().push((y_over_h, v));
            }
            _ => {
                return Err(Error::Inconsistent {
                    context: "section mean",
                    message: "circular and rectangular positions mixed".into(),
                });
            }
        }
    }
    let mut line_sums: BTreeMap<usize, (f64, usize)> = BTreeMap::new();
    for ((line, _), pts) in groups.iter_mut() {
        pts.sort_by(|a, b| a.0.total_cmp(&b.0));
        if let Some(w) = pts.windows(2).find(|w| (w[1].0 - w[0].0).abs() < 1e-12) {
            return Err(Error::Inconsistent {
                context: "section mean",
                message: format!("line {}: duplicate position {} in the same radius or line", line + 1, w[0].0),
            });
        }
        let value = if circular { radius_mean(pts, m) } else { line_mean(pts, m) };
        let e = line_sums.entry(*line).or_default();
        e.0 += value;
        e.1 += 1;
    }
    let per_line: Vec<f64> = line_sums.values().map(|(s, n)| s / *n as f64).collect();
    let mean = if circular {
        let radii: usize = line_sums.values().map(|(_, n)| n).sum();
        line_sums.values().map(|(s, _)| s).sum::<f64>() / radii as f64
    } else {
        let across: Vec<(f64, f64)> = xs.iter().map(|(l, x)| (*x, per_line_value(&line_sums, *l))).collect();
        let mut across = across;
        across.sort_by(|a, b| a.0.total_cmp(&b.0));
        line_mean(&across, m)
    };
    Ok(SectionMean {
        mean: Velocity::m_s(mean),
        per_line,
        method: Averaging::Integrate { wall_exponent: m }.name(),
        points: velocities.len(),
    })
}

fn per_line_value(sums: &BTreeMap<usize, (f64, usize)>, line: usize) -> f64 {
    sums.get(&line).map_or(0.0, |(s, n)| s / *n as f64)
}

fn outside(i: usize, what: String) -> Error {
    Error::Inconsistent {
        context: "section mean",
        message: format!("point {}: {what} lies outside the section", i + 1),
    }
}

/// ∫₀¹ u d(r²) along one radius; `pts` = (r/R, u) sorted by r.
fn radius_mean(pts: &[(f64, f64)], m: f64) -> f64 {
    let (r1, u1) = pts[0];
    let mut s = r1 * r1 * u1;
    for w in pts.windows(2) {
        let ((ra, ua), (rb, ub)) = (w[0], w[1]);
        s += (rb * rb - ra * ra) * (ua + ub) / 2.0;
    }
    let (rk, uk) = pts[pts.len() - 1];
    let a = 1.0 - rk;
    s + 2.0 * uk * (a * m / (m + 1.0) - a * a * m / (2.0 * m + 1.0))
}

/// ∫₀¹ u dy along a line with power-law zones at both walls; `pts` = (y, u) sorted.
fn line_mean(pts: &[(f64, f64)], m: f64) -> f64 {
    let k = m / (m + 1.0);
    let (y1, u1) = pts[0];
    let (yk, uk) = pts[pts.len() - 1];
    let mut s = y1 * u1 * k + (1.0 - yk) * uk * k;
    for w in pts.windows(2) {
        s += (w[1].0 - w[0].0) * (w[0].1 + w[1].1) / 2.0;
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::section::conduit::Conduit;
    use crate::section::layout::{LayoutRule, TraverseLayout};
    use crate::section::profile::ProfileModel;
    use crate::units::quantity::Length;

    fn layout(rule: LayoutRule, per_radius: usize) -> TraverseLayout {
        TraverseLayout::circular(&Conduit::circular(Length::m(100.0)).unwrap(), rule, 2 * per_radius, 2, Length::m(0.0))
            .unwrap()
    }

    fn sample(l: &TraverseLayout, f: impl Fn(f64) -> f64) -> (Vec<usize>, Vec<Position>, Vec<f64>) {
        let lines = l.points.iter().map(|p| p.line).collect();
        let pos: Vec<Position> = l.points.iter().map(|p| p.position).collect();
        let v =
            pos.iter().map(|p| if let Position::Radial { r_over_r, .. } = p { f(*r_over_r) } else { 0.0 }).collect();
        (lines, pos, v)
    }

    // check-values.md §5.4, bias of each layout's arithmetic mean on power-law profiles,
    // (mean of points / exact area mean − 1) in %, computed there [C].
    #[test]
    fn layout_bias_on_power_law_profiles() {
        let rows: [(LayoutRule, usize, [f64; 4]); 8] = [
            (LayoutRule::EqualArea, 3, [0.986, 0.920, 0.857, 0.746]),
            (LayoutRule::EqualArea, 5, [0.570, 0.538, 0.504, 0.444]),
            (LayoutRule::LogLinear, 3, [-0.355, -0.274, -0.218, -0.147]),
            (LayoutRule::LogLinear, 4, [-0.117, -0.090, -0.071, -0.047]),
            (LayoutRule::LogLinear, 5, [-0.190, -0.147, -0.118, -0.080]),
            (LayoutRule::LogChebyshev, 3, [-0.457, -0.358, -0.289, -0.202]),
            (LayoutRule::LogChebyshev, 4, [-0.261, -0.200, -0.158, -0.105]),
            (LayoutRule::LogChebyshev, 5, [-0.214, -0.168, -0.135, -0.093]),
        ];
        for (rule, per_radius, bias) in rows {
            let l = layout(rule, per_radius);
            for (n, want) in [6.0, 7.0, 8.0, 10.0].into_iter().zip(bias) {
                let p = ProfileModel::power_law(n).unwrap();
                let (lines, pos, v) = sample(&l, |r| p.velocity_ratio(r));
                let m = section_mean(&lines, &pos, &v, Averaging::Arithmetic).unwrap().mean.si();
                let got = (m / p.mean_to_centreline() - 1.0) * 100.0;
                // EPA points of a 100 m stack are not moved; ISO tables have 3-4 digits.
                assert!((got - want).abs() < 0.003, "{rule} {per_radius}/radius n = {n}: {got:.4} vs {want}");
            }
        }
    }

    // check-values.md §5.4, log-law column: u⁺ = ln(y⁺)/0.41 + 5.0 with R⁺ = 2000, linear
    // u⁺ = y⁺ below y⁺ = 11; bias of the arithmetic mean in % [C].
    #[test]
    fn layout_bias_on_log_law_profile() {
        let u = |r: f64| {
            let yp = (1.0 - r.abs()) * 2000.0;
            if yp < 11.0 { yp } else { yp.ln() / 0.41 + 5.0 }
        };
        // exact area mean 2∫u r dr by the midpoint rule on 2 million strips
        let k = 2_000_000;
        let exact: f64 = (0..k).map(|i| (i as f64 + 0.5) / k as f64).map(|r| 2.0 * u(r) * r / k as f64).sum();
        let rows = [
            (LayoutRule::EqualArea, 3, 1.418),
            (LayoutRule::EqualArea, 5, 0.939),
            (LayoutRule::LogLinear, 3, 0.155),
            (LayoutRule::LogLinear, 4, 0.182),
            (LayoutRule::LogChebyshev, 3, 0.099),
            (LayoutRule::LogChebyshev, 4, 0.173),
            (LayoutRule::LogChebyshev, 5, 0.150),
            (LayoutRule::LogLinear, 5, 0.164),
        ];
        for (rule, per_radius, want) in rows {
            let l = layout(rule, per_radius);
            let (lines, pos, v) = sample(&l, u);
            let m = section_mean(&lines, &pos, &v, Averaging::Arithmetic).unwrap().mean.si();
            let got = (m / exact - 1.0) * 100.0;
            assert!((got - want).abs() < 0.003, "{rule} {per_radius}/radius: {got:.4} vs {want}");
        }
    }

    // Integrating an analytic profile: power law n = 7 sampled at 400 points per radius with the
    // wall exponent m = 7 reproduces the exact mean 2n²/((n+1)(2n+1)) (check-values.md §6).
    #[test]
    fn integration_of_analytic_profile() {
        let p = ProfileModel::power_law(7.0).unwrap();
        let k = 400;
        let mut lines = Vec::new();
        let mut pos = Vec::new();
        let mut v = Vec::new();
        for line in 0..2 {
            for i in 0..k {
                let r = (i as f64 + 0.5) / k as f64 * 0.98;
                for sign in [-1.0, 1.0] {
                    lines.push(line);
                    pos.push(Position::Radial { r_over_r: sign * r, angle_deg: 90.0 * line as f64 });
                    v.push(p.velocity_ratio(r));
                }
            }
        }
        let got = section_mean(&lines, &pos, &v, Averaging::Integrate { wall_exponent: 7.0 }).unwrap();
        assert!((got.mean.si() / p.mean_to_centreline() - 1.0).abs() < 2e-5, "{}", got.mean.si());
        assert_eq!(got.per_line.len(), 2);
        // Laminar profile as well: the power-law wall zone (m = 2) is then only an approximation
        // over the outer 2 % of the radius, worth 3e-4 of the mean.
        let (lines2, pos2, v2): (Vec<usize>, Vec<Position>, Vec<f64>) = (
            lines.clone(),
            pos.clone(),
            pos.iter()
                .map(|q| if let Position::Radial { r_over_r, .. } = q { 1.0 - r_over_r * r_over_r } else { 0.0 })
                .collect(),
        );
        let lam = section_mean(&lines2, &pos2, &v2, Averaging::Integrate { wall_exponent: 2.0 }).unwrap();
        assert!((lam.mean.si() - 0.5).abs() < 5e-4, "{}", lam.mean.si());
    }

    // Wall zone, a/R = 0.05, m = 7: mean velocity in the zone 0.8735 u_a (check-values.md §5.4 [C]).
    #[test]
    fn wall_zone_with_curvature() {
        let zone = radius_mean(&[(0.95, 1.0)], 7.0) - 0.95 * 0.95;
        let area = 1.0 - 0.95 * 0.95;
        assert!((zone / area - 0.8735).abs() < 5e-5);
        // flat wall zones, mean m/(m+1) = 0.875 for m = 7 (derived): one point mid-line gives
        // two zones of half the line each
        assert!((line_mean(&[(0.5, 1.0)], 7.0) - 0.875).abs() < 1e-15);
    }

    #[test]
    fn rectangular_integration_of_product_profile() {
        // u = f(x)·f(y) with f(s) = (min(s,1−s)·2)^{1/7}: each 1-D mean is 7/8 (exact), so the
        // section mean is (7/8)² (derived); 60 × 60 points.
        let f = |s: f64| (2.0 * s.min(1.0 - s)).powf(1.0 / 7.0);
        let n = 60;
        let (mut lines, mut pos, mut v) = (vec![], vec![], vec![]);
        for i in 0..n {
            for j in 0..n {
                let x = (i as f64 + 0.5) / n as f64;
                let y = (j as f64 + 0.5) / n as f64;
                lines.push(i);
                pos.push(Position::Grid { x_over_w: x, y_over_h: y });
                v.push(f(x) * f(y));
            }
        }
        let got = section_mean(&lines, &pos, &v, Averaging::Integrate { wall_exponent: 7.0 }).unwrap().mean.si();
        assert!((got / (0.875 * 0.875) - 1.0).abs() < 2e-3, "{got}");
    }

    #[test]
    fn bad_positions() {
        let r = |x: f64| Position::Radial { r_over_r: x, angle_deg: 0.0 };
        let integ = Averaging::Integrate { wall_exponent: 7.0 };
        let e = section_mean(&[0, 0], &[r(0.5), r(1.2)], &[1.0, 1.0], integ).unwrap_err();
        assert_eq!(e.to_string(), "section mean: point 2: r/R = 1.2 lies outside the section");
        let e = section_mean(&[0, 0], &[r(0.5), r(0.5)], &[1.0, 1.1], integ).unwrap_err();
        assert!(e.to_string().contains("duplicate position"), "{e}");
        let e = section_mean(&[0, 0], &[r(0.5), r(0.2)], &[1.0, f64::NAN], integ).unwrap_err();
        assert_eq!(e.to_string(), "row 2: section mean: velocity must be a finite number, got NaN");
        assert!(section_mean(&[0], &[r(0.5), r(0.2)], &[1.0, 1.0], Averaging::Arithmetic).is_err());
        assert!(section_mean(&[0], &[r(0.5)], &[1.0], Averaging::Integrate { wall_exponent: 0.5 }).is_err());
    }

    /// Points on an exact 1/7 power law give back m = 7 on every radius (u = (1 − |r/R|)^(1/7),
    /// check-values.md §6), and points on a 1/9 law m = 9.
    #[test]
    fn wall_exponent_recovers_the_power_law() {
        for n in [7.0, 9.0] {
            let rs = [-0.9487, -0.7746, -0.3162, 0.3162, 0.7746, 0.9487];
            let pos: Vec<Position> = rs.iter().map(|&r| Position::Radial { r_over_r: r, angle_deg: 0.0 }).collect();
            let v: Vec<f64> = rs.iter().map(|r: &f64| 12.0 * (1.0 - r.abs()).powf(1.0 / n)).collect();
            let w = wall_exponent(&[0; 6], &pos, &v).unwrap();
            assert!((w.m - n).abs() < 1e-9 && w.per_radius.len() == 2, "{w:?}");
        }
        let pos: Vec<Position> = [0.9, 0.5].iter().map(|&r| Position::Radial { r_over_r: r, angle_deg: 0.0 }).collect();
        assert!(wall_exponent(&[0, 0], &pos, &[10.0, 9.0]).unwrap_err().to_string().contains("does not rise"));
        assert!(wall_exponent(&[0, 0], &pos, &[10.0, 10.01]).unwrap_err().to_string().contains("outside 4"));
    }
}
