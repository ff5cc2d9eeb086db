//! Corrections of the local velocity a pitot reads, and the conditions of use of the
//! probe, for points of a round section (the kinds ISO 3966 names).
//!
//! Takes in the points of a traverse (diameter line, distance from the port-side wall,
//! velocity as read), the probe's head and stem sizes, a turbulence intensity per point
//! (from logged samples, see [`crate::campaign::samples`]) and the fluid, and gives out
//! each named correction per point as a relative change, the corrected velocities, the
//! factor they make on the arithmetic mean, and the conditions of use as
//! [`MethodCheck`]s.
//!
//! Every correction is opt-in and says where it comes from. ISO 3966's annexes on the
//! turbulence correction and on a transverse velocity gradient, and its clauses on the
//! local corrections, are known here by their titles only (the published contents of the
//! identical BS 1042-2.1:1983); their formulas could not be read. So:
//! - **turbulence** is derived: a probe facing the mean flow senses ½ρ(ū² + u′²) of the
//!   streamwise fluctuation, so ū = u/√(1 + Tu²) (transverse fluctuations, which depend
//!   on the probe's yaw response, are not counted);
//! - **velocity gradient**: the effective centre of a round-nosed tube sits ε·d toward the
//!   higher velocity, ε = 0.15 (MacMillan 1957, ARC R&M 3028: from memory, unverified;
//!   rectangular mouths give 0.19 of their thickness, Quarmby & Das 1969, read in the
//!   abstract). Applied to first order, u(y) = u_read − ε·d·|du/dy| (derived), with
//!   du/dy from the neighbouring points, or at the point nearest a wall from the power law
//!   through it and its neighbour. The size of this effect in wall turbulence is contested:
//!   "The behaviour of a Pitot tube in transverse shear" (J. Fluid Mech. 3 (1957) 441–456,
//!   abstract read) found displacements in a turbulent boundary layer an order of magnitude
//!   smaller than in a wake, negligible for a round Pitot even touching the wall;
//! - **wall proximity**: Δu/u = a·exp(−b·(y/d − 0.5)) for y < 2 d, a = 0.015, b = 3.5
//!   (MacMillan 1957: from memory, unverified); that the effect fades beyond about two
//!   tube diameters from the wall is read in a published text on pitot probes near walls;
//! - **stem blockage** is derived from continuity: the stem inserted to the point and the
//!   head block A_b = d_s·L + π d²/4 of the section, so the flow past them speeds up by
//!   about A/(A − A_b) and u = u_read·(1 − k·A_b/A), with k = 1 an upper bound.
//!
//! The coefficients are the caller's to change; the printed sources say which are recalled.

use std::collections::BTreeMap;

use crate::error::{Error, Result, Warning, finite};
use crate::fluids::fluid::FluidState;
use crate::instruments::probe::{ISO3966_MACH_LIMIT, LOW_REYNOLDS_LIMIT};
use crate::methods::us_epa::check::{Citation, MethodCheck};
use crate::uncertainty::flow_models::{MethodTerm, TermDistribution};

/// Source of the turbulence correction.
pub const TURBULENCE_SOURCE: &str = "derived: the probe senses ½ρ(ū² + u′²) of the streamwise fluctuation, ū = u/√(1 + Tu²); transverse fluctuations not counted (ISO 3966's annex on the turbulence correction: title read, formula not re-read)";
/// Source of the velocity-gradient (displacement) correction.
pub const GRADIENT_SOURCE: &str = "effective centre ε·d toward the higher velocity, ε = 0.15 for a round nose (MacMillan 1957, ARC R&M 3028: from memory, unverified), applied as u − ε·d·|du/dy| (derived); contested in wall turbulence (J. Fluid Mech. 3 (1957) 441, abstract read: negligible for a round Pitot in a turbulent boundary layer)";
/// Source of the wall-proximity correction.
pub const WALL_SOURCE: &str =
    "Δu/u = a·exp(−b(y/d − 0.5)) within 2 d of the wall, a = 0.015, b = 3.5 (MacMillan 1957: from memory, unverified)";
/// Source of the stem-blockage correction.
pub const BLOCKAGE_SOURCE: &str =
    "derived from continuity: u·(1 − k·A_b/A), A_b = stem diameter × insertion + head area, k = 1 an upper bound";

/// The wall-proximity correction's coefficients: Δu/u = a·exp(−b·(y/d − 0.5)) for y/d < reach.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WallProximity {
    /// a (0.015 recalled).
    pub amplitude: f64,
    /// b (3.5 recalled).
    pub decay: f64,
    /// Distance from the wall, in head diameters, beyond which no correction is made (2).
    pub reach: f64,
}

impl Default for WallProximity {
    fn default() -> Self {
        Self { amplitude: 0.015, decay: 3.5, reach: 2.0 }
    }
}

/// The stem's blockage: its diameter and the factor k on A_b/A.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StemBlockage {
    /// Stem diameter, m.
    pub stem_diameter: f64,
    /// k (1: the continuity upper bound).
    pub factor: f64,
}

/// Which corrections to make, with their coefficients, and the probe and fluid they need.
#[derive(Debug, Clone)]
pub struct CorrectionOptions {
    /// Probe head diameter d, m (needed by the gradient and wall corrections and the checks).
    pub head_diameter: Option<f64>,
    /// Turbulence intensity Tu per point (a fraction; one value for all points, or one per
    /// point), or `None` for no turbulence correction.
    pub turbulence: Option<Vec<f64>>,
    /// ε of the displacement in a velocity gradient, or `None` for no gradient correction.
    pub gradient: Option<f64>,
    /// The wall-proximity correction, or `None`.
    pub wall: Option<WallProximity>,
    /// The stem's blockage, or `None`.
    pub blockage: Option<StemBlockage>,
    /// Largest head diameter ÷ conduit diameter (0.02, recalled).
    pub head_ratio_limit: f64,
    /// Smallest probe Reynolds number on the head diameter (200, recalled).
    pub reynolds_limit: f64,
}

impl Default for CorrectionOptions {
    fn default() -> Self {
        Self {
            head_diameter: None,
            turbulence: None,
            gradient: None,
            wall: None,
            blockage: None,
            head_ratio_limit: HEAD_RATIO_LIMIT,
            reynolds_limit: LOW_REYNOLDS_LIMIT,
        }
    }
}

/// Head diameter ÷ conduit diameter above which the probe is too large for the conduit
/// (ISO 3966; from memory, unverified).
pub const HEAD_RATIO_LIMIT: f64 = 0.02;
/// ε of a round-nosed tube (MacMillan 1957; from memory, unverified).
pub const GRADIENT_EPSILON: f64 = 0.15;

/// One point's corrections, each a relative change of the velocity read (−0.002 = −0.2 %).
#[derive(Debug, Clone, PartialEq)]
pub struct PointCorrection {
    /// Diameter line.
    pub line: usize,
    /// Distance from the port-side wall, m.
    pub from_port_wall: f64,
    /// Distance from the nearer wall, m.
    pub from_wall: f64,
    /// Velocity as read, m/s.
    pub read: f64,
    /// Turbulence intensity used (fraction), or NaN.
    pub turbulence_intensity: f64,
    /// Relative corrections.
    pub turbulence: f64,
    /// Velocity-gradient correction.
    pub gradient: f64,
    /// Wall-proximity correction.
    pub wall: f64,
    /// Stem-blockage correction.
    pub blockage: f64,
    /// The velocity with every correction made, m/s.
    pub corrected: f64,
}

impl PointCorrection {
    /// Relative change of all corrections together.
    pub fn total(&self) -> f64 {
        self.corrected / self.read - 1.0
    }
}

/// The corrections of a traverse.
#[derive(Debug, Clone)]
pub struct LocalCorrections {
    /// Per point, in the order given.
    pub points: Vec<PointCorrection>,
    /// Mean corrected ÷ mean read (arithmetic means): the factor on the section mean.
    pub factor: f64,
    /// Conditions of use.
    pub checks: Vec<MethodCheck>,
    /// The corrections made, each with its source.
    pub applied: Vec<(&'static str, String)>,
    /// Notes for the reader (effects present but not corrected, …).
    pub warnings: Vec<Warning>,
}

impl LocalCorrections {
    /// The corrections as a budget term: a factor `self.factor` with a rectangular half-width
    /// of `fraction` × the correction (0.5 by default in scripts: common practice, no source).
    pub fn budget_term(&self, fraction: f64) -> Result<MethodTerm> {
        crate::error::within("local corrections", "fraction of the correction", fraction, "", 0.0, 1.0)?;
        let half = fraction * (self.factor - 1.0).abs() / self.factor;
        let names: Vec<&str> = self.applied.iter().map(|a| a.0).collect();
        let term = MethodTerm::new(
            "local corrections",
            half / 3f64.sqrt(),
            &format!(
                "ISO 3966 local corrections made ({}), mean factor {:.5}; half-width {} × the correction, rectangular (common practice, no source)",
                if names.is_empty() { "none".to_string() } else { names.join(", ") },
                self.factor,
                fraction
            ),
        )?
        .with_distribution(TermDistribution::Rectangular);
        term.with_value(self.factor)
    }
}

/// The points of a round section's traverse.
#[derive(Debug, Clone, Copy)]
pub struct RoundTraverse<'a> {
    /// Conduit diameter, m.
    pub diameter: f64,
    /// Diameter line of each point.
    pub lines: &'a [usize],
    /// Distance of each point from the port-side wall (where the probe enters), m.
    pub from_port_wall: &'a [f64],
    /// Velocity read at each point, m/s.
    pub velocity: &'a [f64],
}

const CONTEXT: &str = "local corrections";

/// Makes the corrections asked for in `o` and checks the conditions of use.
///
/// ```
/// use stagna::section::local_corrections::*;
/// let (y, u) = ([0.02, 0.08, 0.22, 0.38, 0.52, 0.58], [8.9, 10.6, 11.6, 11.6, 10.6, 8.9]);
/// let t = RoundTraverse { diameter: 0.6, lines: &[0; 6], from_port_wall: &y, velocity: &u };
/// let o = CorrectionOptions { head_diameter: Some(0.008), turbulence: Some(vec![0.06]), ..Default::default() };
/// let c = local_corrections(&t, &o, None).unwrap();
/// assert!((c.points[0].turbulence - (1.0 / 1.0036f64.sqrt() - 1.0)).abs() < 1e-12);
/// ```
pub fn local_corrections(
    t: &RoundTraverse<'_>,
    o: &CorrectionOptions,
    fluid: Option<&FluidState>,
) -> Result<LocalCorrections> {
    let n = t.velocity.len();
    let d_conduit = crate::error::positive(CONTEXT, "conduit diameter", t.diameter, "m")?;
    if n == 0 {
        return Err(Error::Inconsistent { context: CONTEXT, message: "no points".into() });
    }
    if t.from_port_wall.len() != n || t.lines.len() != n {
        return Err(Error::Inconsistent {
            context: CONTEXT,
            message: format!(
                "{} wall distances and {} line numbers for {n} velocities: give one of each per point",
                t.from_port_wall.len(),
                t.lines.len()
            ),
        });
    }
    for i in 0..n {
        let y = finite(CONTEXT, "distance from the port-side wall", t.from_port_wall[i]).map_err(|e| e.at_row(i))?;
        if !(y > 0.0 && y < d_conduit) {
            return Err(Error::OutOfRange {
                context: CONTEXT,
                param: "distance from the port-side wall",
                value: y * 1000.0,
                unit: "mm",
                allowed: format!("inside the conduit, between 0 and {} mm", d_conduit * 1000.0),
            }
            .at_row(i));
        }
        let u = finite(CONTEXT, "velocity", t.velocity[i]).map_err(|e| e.at_row(i))?;
        if u <= 0.0 {
            return Err(Error::Inconsistent {
                context: CONTEXT,
                message: format!(
                    "velocity {u} m/s: local corrections are for forward flow; reduce reversed points separately"
                ),
            }
            .at_row(i));
        }
    }
    let d = o.head_diameter.map(|d| crate::error::positive(CONTEXT, "probe head diameter", d, "m")).transpose()?;
    let needs_d = |what: &str| Error::Inconsistent {
        context: CONTEXT,
        message: format!("the {what} correction needs the probe head diameter (head_diameter)"),
    };
    let from_wall: Vec<f64> = t.from_port_wall.iter().map(|y| y.min(d_conduit - y)).collect();
    let mut applied = Vec::new();
    let mut warnings = Vec::new();

    // Turbulence.
    let tu: Vec<f64> = match &o.turbulence {
        None => vec![f64::NAN; n],
        Some(v) if v.len() == 1 || v.len() == n => {
            let mut out = Vec::with_capacity(n);
            for i in 0..n {
                let x = v[if v.len() == 1 { 0 } else { i }];
                if !(x.is_finite() && (0.0..=1.0).contains(&x)) {
                    return Err(Error::OutOfRange {
                        context: CONTEXT,
                        param: "turbulence intensity",
                        value: x * 100.0,
                        unit: "%",
                        allowed: "0 … 100 % (a fraction 0 … 1, or a column with its % unit)".into(),
                    }
                    .at_row(i));
                }
                out.push(x);
            }
            applied.push(("turbulence", TURBULENCE_SOURCE.to_string()));
            // Above 20 % the first-order model is stretched (common practice, no source).
            if out.iter().any(|x| *x > 0.2) {
                warnings.push(Warning::new(
                    "turbulence",
                    "a turbulence intensity above 20 %: the probe's yaw response and the transverse fluctuations matter there, which the correction does not count",
                ));
            }
            out
        }
        Some(v) => {
            return Err(Error::Inconsistent {
                context: CONTEXT,
                message: format!("{} turbulence intensities for {n} points: give one, or one per point", v.len()),
            });
        }
    };
    let c_turb: Vec<f64> = tu.iter().map(|x| if x.is_nan() { 0.0 } else { 1.0 / (1.0 + x * x).sqrt() - 1.0 }).collect();

    // Velocity gradient: |du/dy| per point, along each line.
    let mut c_grad = vec![0.0; n];
    if let Some(eps) = o.gradient {
        crate::error::within(CONTEXT, "displacement ε (÷ head diameter)", eps, "", 0.0, 1.0)?;
        let d = d.ok_or_else(|| needs_d("velocity-gradient"))?;
        let mut by_line: BTreeMap<usize, Vec<usize>> = BTreeMap::new();
        for (i, l) in t.lines.iter().enumerate() {
            by_line.entry(*l).or_default().push(i);
        }
        for (line, mut idx) in by_line {
            if idx.len() < 2 {
                return Err(Error::Inconsistent {
                    context: CONTEXT,
                    message: format!(
                        "line {line} has one point: the velocity-gradient correction needs its neighbours"
                    ),
                });
            }
            idx.sort_by(|a, b| t.from_port_wall[*a].total_cmp(&t.from_port_wall[*b]));
            for k in 0..idx.len() {
                let i = idx[k];
                let g = if k == 0 || k + 1 == idx.len() {
                    let j = if k == 0 { idx[1] } else { idx[k - 1] };
                    wall_gradient((from_wall[i], t.velocity[i]), (from_wall[j], t.velocity[j]))
                        .unwrap_or_else(|| secant(t, i, j))
                } else {
                    secant(t, idx[k - 1], idx[k + 1])
                };
                c_grad[i] = -eps * d * g / t.velocity[i];
            }
        }
        applied.push((
            "velocity gradient",
            if eps == GRADIENT_EPSILON {
                GRADIENT_SOURCE.to_string()
            } else {
                format!("{GRADIENT_SOURCE}; ε = {eps} as given in the script")
            },
        ));
    }

    // Wall proximity.
    let mut c_wall = vec![0.0; n];
    match (o.wall, d) {
        (Some(w), Some(d)) => {
            crate::error::within(CONTEXT, "wall-proximity amplitude a", w.amplitude, "", 0.0, 0.2)?;
            crate::error::within(CONTEXT, "wall-proximity decay b", w.decay, "", 0.0, 50.0)?;
            crate::error::within(CONTEXT, "wall-proximity reach (head diameters)", w.reach, "", 0.5, 10.0)?;
            for i in 0..n {
                let r = from_wall[i] / d;
                if r < w.reach {
                    c_wall[i] = w.amplitude * (-w.decay * (r - 0.5)).exp();
                }
            }
            let given = w != WallProximity::default();
            applied.push((
                "wall proximity",
                if given {
                    format!(
                        "{WALL_SOURCE}; a = {}, b = {}, reach {} d as given in the script",
                        w.amplitude, w.decay, w.reach
                    )
                } else {
                    WALL_SOURCE.to_string()
                },
            ));
        }
        (Some(_), None) => return Err(needs_d("wall-proximity")),
        (None, Some(d)) => {
            let reach = WallProximity::default().reach;
            let near = from_wall.iter().filter(|w| **w < reach * d).count();
            if near > 0 {
                warnings.push(Warning::new(
                    "wall-proximity",
                    format!("{near} point(s) lie within {reach} head diameters of the wall, where the wall changes the reading; make the wall-proximity correction or budget it"),
                ));
            }
        }
        (None, None) => {}
    }

    // Stem blockage.
    let mut c_block = vec![0.0; n];
    if let Some(b) = o.blockage {
        let ds = crate::error::positive(CONTEXT, "stem diameter", b.stem_diameter, "m")?;
        crate::error::within(CONTEXT, "blockage factor k", b.factor, "", 0.0, 1.0)?;
        let area = std::f64::consts::PI * d_conduit * d_conduit / 4.0;
        let head = d.map_or(0.0, |d| std::f64::consts::PI * d * d / 4.0);
        for (i, (c, y)) in c_block.iter_mut().zip(t.from_port_wall).enumerate() {
            let ratio = (ds * y + head) / area;
            if ratio >= 0.5 {
                return Err(Error::Inconsistent {
                    context: CONTEXT,
                    message: format!(
                        "the stem blocks {:.0} % of the section at this point: far outside a small correction",
                        ratio * 100.0
                    ),
                }
                .at_row(i));
            }
            *c = -b.factor * ratio;
        }
        applied.push((
            "stem blockage",
            if b.factor == 1.0 {
                BLOCKAGE_SOURCE.to_string()
            } else {
                format!("{BLOCKAGE_SOURCE}; k = {} as given", b.factor)
            },
        ));
    }

    let points: Vec<PointCorrection> = (0..n)
        .map(|i| {
            let read = t.velocity[i];
            let corrected = read * (1.0 + c_turb[i]) * (1.0 + c_grad[i]) * (1.0 + c_wall[i]) * (1.0 + c_block[i]);
            PointCorrection {
                line: t.lines[i],
                from_port_wall: t.from_port_wall[i],
                from_wall: from_wall[i],
                read,
                turbulence_intensity: tu[i],
                turbulence: c_turb[i],
                gradient: c_grad[i],
                wall: c_wall[i],
                blockage: c_block[i],
                corrected,
            }
        })
        .collect();
    let factor = points.iter().map(|p| p.corrected).sum::<f64>() / points.iter().map(|p| p.read).sum::<f64>();
    let checks = conditions_of_use(t, o, d, &from_wall, fluid);
    Ok(LocalCorrections { points, factor, checks, applied, warnings })
}

/// |du/dy| at a point nearest a wall from the power law through it and its neighbour
/// (u ∝ y^(1/m): du/dy = u/(m·y)), or `None` when they do not follow one.
fn wall_gradient((ya, ua): (f64, f64), (yb, ub): (f64, f64)) -> Option<f64> {
    if !(yb > ya && ub > ua && ua > 0.0) {
        return None;
    }
    let m = (yb / ya).ln() / (ub / ua).ln();
    (m.is_finite() && (1.0..=20.0).contains(&m)).then(|| ua / (m * ya))
}

fn secant(t: &RoundTraverse<'_>, a: usize, b: usize) -> f64 {
    let dy = t.from_port_wall[b] - t.from_port_wall[a];
    if dy == 0.0 { 0.0 } else { ((t.velocity[b] - t.velocity[a]) / dy).abs() }
}

fn conditions_of_use(
    t: &RoundTraverse<'_>,
    o: &CorrectionOptions,
    d: Option<f64>,
    from_wall: &[f64],
    fluid: Option<&FluidState>,
) -> Vec<MethodCheck> {
    let mut checks = Vec::new();
    let umin = t.velocity.iter().copied().fold(f64::INFINITY, f64::min);
    let umax = t.velocity.iter().copied().fold(0.0, f64::max);
    if let Some(d) = d {
        let ratio = d / t.diameter;
        checks.push(MethodCheck {
            name: "probe head diameter ÷ conduit diameter, d/D".into(),
            value: ratio,
            unit: "",
            decimals: 4,
            limit: format!("≤ {}", o.head_ratio_limit),
            pass: ratio <= o.head_ratio_limit,
            source: "ISO 3966 (conditions of use: size of the probe head)",
            citation: if o.head_ratio_limit == HEAD_RATIO_LIMIT { Citation::FromMemory } else { Citation::Derived },
        });
        let nearest = from_wall.iter().copied().fold(f64::INFINITY, f64::min);
        checks.push(MethodCheck {
            name: "nearest point's distance from the wall ÷ head diameter".into(),
            value: nearest / d,
            unit: "",
            decimals: 2,
            limit: "> 0.5 (the head fits between the point and the wall)".into(),
            pass: nearest / d > 0.5,
            source: "geometry",
            citation: Citation::Derived,
        });
        if let Some(mu) = fluid.and_then(|f| f.viscosity) {
            let re = fluid.map_or(0.0, |f| f.density.si()) * umin * d / mu.si();
            checks.push(MethodCheck {
                name: "smallest probe Reynolds number, ρ u d/μ".into(),
                value: re,
                unit: "",
                decimals: 0,
                limit: format!("≥ {}", o.reynolds_limit),
                pass: re >= o.reynolds_limit,
                source: "ISO 3966 (conditions of use: Reynolds number of the probe head)",
                citation: if o.reynolds_limit == LOW_REYNOLDS_LIMIT { Citation::FromMemory } else { Citation::Derived },
            });
        }
    }
    if let Some((f, g)) = fluid.and_then(|f| f.isentropic_exponent.filter(|_| f.pressure.si() > 0.0).map(|g| (f, g))) {
        let a = (g * f.pressure.si() / f.density.si()).sqrt();
        let m = umax / a;
        checks.push(MethodCheck {
            name: "largest Mach number".into(),
            value: m,
            unit: "",
            decimals: 3,
            limit: format!("≤ {ISO3966_MACH_LIMIT}"),
            pass: m <= ISO3966_MACH_LIMIT,
            source: "ISO 3966:2020 §1 (scope, as published in the standard's abstract)",
            citation: Citation::Verified,
        });
    }
    checks
}

#[cfg(test)]
mod tests {
    use super::*;

    fn traverse<'a>(y: &'a [f64], u: &'a [f64], lines: &'a [usize]) -> RoundTraverse<'a> {
        RoundTraverse { diameter: 0.6, lines, from_port_wall: y, velocity: u }
    }

    #[test]
    fn turbulence_removes_the_fluctuation_energy() {
        // ū² + σ² = u_read² (derived): Tu = 10 % gives ū = u/√1.01, −0.4963 %.
        let (y, u) = ([0.1, 0.5], [10.0, 10.0]);
        let o = CorrectionOptions { turbulence: Some(vec![0.10, 0.05]), ..Default::default() };
        let c = local_corrections(&traverse(&y, &u, &[0, 0]), &o, None).unwrap();
        assert!((c.points[0].corrected - 10.0 / 1.01f64.sqrt()).abs() < 1e-12);
        assert!((c.points[0].turbulence * 100.0 + 0.4963).abs() < 1e-4);
        assert!((c.points[1].corrected - 10.0 / 1.0025f64.sqrt()).abs() < 1e-12);
        // Nothing else was made: no head, no gradient, no wall.
        assert_eq!(c.applied.len(), 1);
        assert!(c.checks.is_empty());
    }

    #[test]
    fn gradient_shift_is_first_order_exact_on_a_linear_profile() {
        // u = 5 + 20 y on the interior points: |du/dy| = 20 s⁻¹, ε d = 0.15 × 10 mm = 1.5 mm,
        // so every interior point loses 0.03 m/s (derived).
        let y = [0.05, 0.10, 0.15, 0.20];
        let u: Vec<f64> = y.iter().map(|y| 5.0 + 20.0 * y).collect();
        let o =
            CorrectionOptions { head_diameter: Some(0.010), gradient: Some(GRADIENT_EPSILON), ..Default::default() };
        let c = local_corrections(&traverse(&y, &u, &[0; 4]), &o, None).unwrap();
        for k in [1, 2] {
            assert!((c.points[k].read - c.points[k].corrected - 0.03).abs() < 1e-12, "{:?}", c.points[k]);
        }
        // The point nearest the wall takes the power law through it and its neighbour:
        // m = ln(2)/ln(7/6), du/dy = u/(m y).
        let m = 2f64.ln() / (7.0f64 / 6.0).ln();
        let g = 6.0 / (m * 0.05);
        assert!((c.points[0].read - c.points[0].corrected - 0.0015 * g).abs() < 1e-12);
        assert!(c.warnings.is_empty(), "every point is 5 head diameters or more from the wall: {:?}", c.warnings);
    }

    #[test]
    fn wall_proximity_follows_its_formula_and_reach() {
        // d = 10 mm: a point 5 mm from the wall (y/d = 0.5) gains a = 1.5 %; 15 mm
        // (y/d = 1.5) gains 0.015·e^(−3.5); 25 mm (2.5 d) nothing.
        let y = [0.005, 0.015, 0.025, 0.3, 0.595];
        let u = [8.0, 9.0, 9.5, 12.0, 8.0];
        let o = CorrectionOptions {
            head_diameter: Some(0.010),
            wall: Some(WallProximity::default()),
            ..Default::default()
        };
        let c = local_corrections(&traverse(&y, &u, &[0; 5]), &o, None).unwrap();
        assert!((c.points[0].wall - 0.015).abs() < 1e-15);
        assert!((c.points[1].wall - 0.015 * (-3.5f64).exp()).abs() < 1e-15);
        assert_eq!(c.points[2].wall, 0.0);
        assert!((c.points[4].wall - 0.015).abs() < 1e-15, "the far wall counts too");
        let fits = c.checks.iter().find(|k| k.name.starts_with("nearest")).unwrap();
        assert!(!fits.pass && fits.value == 0.5, "a point 0.5 d from the wall does not leave room for the head");
    }

    #[test]
    fn blockage_is_the_blocked_area_fraction() {
        // Stem 10 mm inserted 150 mm, head 8 mm, in a 600 mm pipe:
        // A_b/A = (0.01·0.15 + π·0.008²/4)/(π·0.6²/4) (derived).
        let (y, u) = ([0.15, 0.45], [10.0, 10.0]);
        let o = CorrectionOptions {
            head_diameter: Some(0.008),
            blockage: Some(StemBlockage { stem_diameter: 0.010, factor: 1.0 }),
            ..Default::default()
        };
        let c = local_corrections(&traverse(&y, &u, &[0, 0]), &o, None).unwrap();
        let a = std::f64::consts::PI * 0.36 / 4.0;
        let want = -(0.0015 + std::f64::consts::PI * 0.000064 / 4.0) / a;
        assert!((c.points[0].blockage - want).abs() < 1e-15);
        assert!(c.points[1].blockage < c.points[0].blockage, "deeper insertion blocks more");
    }

    #[test]
    fn conditions_of_use_name_their_sources() {
        let air = crate::fluids::fluid::Fluid::HumidAir(crate::fluids::humid_air::HumidAir::relative(0.0).unwrap())
            .state(crate::units::quantity::Pressure::pa(101_325.0), crate::units::quantity::Temperature::celsius(20.0))
            .unwrap();
        let (y, u) = ([0.03, 0.3, 0.57], [4.0, 6.0, 4.0]);
        let o = CorrectionOptions { head_diameter: Some(0.020), ..Default::default() };
        let c = local_corrections(&traverse(&y, &u, &[0; 3]), &o, Some(&air)).unwrap();
        let text: Vec<String> = c.checks.iter().map(|k| k.to_string()).collect();
        let ratio = c.checks.iter().find(|k| k.name.contains("d/D")).unwrap();
        assert!(!ratio.pass && (ratio.value - 0.020 / 0.6).abs() < 1e-12, "{text:?}");
        assert!(text.iter().any(|t| t.contains("d/D") && t.contains("from memory, unverified")), "{text:?}");
        assert!(
            text.iter().any(|t| t.contains("Mach") && t.starts_with("pass") && !t.contains("unverified")),
            "{text:?}"
        );
        let re = c.checks.iter().find(|k| k.name.contains("Reynolds")).unwrap();
        // ρ u d/μ of air at 20 °C, 4 m/s, 20 mm: about 5300.
        assert!(re.pass && (5000.0..5600.0).contains(&re.value), "{re:?}");
        assert!(c.warnings.iter().any(|w| w.kind == "wall-proximity"));
    }

    #[test]
    fn bad_inputs_are_named() {
        let (y, u) = ([0.05, 0.3], [4.0, 6.0]);
        let need = CorrectionOptions { gradient: Some(0.15), ..Default::default() };
        let e = local_corrections(&traverse(&y, &u, &[0, 0]), &need, None).unwrap_err().to_string();
        assert!(e.contains("head_diameter"), "{e}");
        let one = CorrectionOptions { head_diameter: Some(0.01), gradient: Some(0.15), ..Default::default() };
        let e = local_corrections(&traverse(&y, &u, &[0, 1]), &one, None).unwrap_err().to_string();
        assert!(e.contains("line 0 has one point"), "{e}");
        let e = local_corrections(&traverse(&[0.05, 0.7], &u, &[0, 0]), &CorrectionOptions::default(), None)
            .unwrap_err()
            .to_string();
        assert!(e.contains("row 2") && e.contains("inside the conduit"), "{e}");
        let e = local_corrections(&traverse(&y, &[4.0, -1.0], &[0, 0]), &CorrectionOptions::default(), None)
            .unwrap_err()
            .to_string();
        assert!(e.contains("forward flow"), "{e}");
        let tu = CorrectionOptions { turbulence: Some(vec![0.1, 0.1, 0.1]), ..Default::default() };
        assert!(
            local_corrections(&traverse(&y, &u, &[0, 0]), &tu, None).unwrap_err().to_string().contains("3 turbulence")
        );
    }

    #[test]
    fn the_budget_term_carries_the_factor() {
        let (y, u) = ([0.1, 0.5], [10.0, 10.0]);
        let o = CorrectionOptions { turbulence: Some(vec![0.10]), ..Default::default() };
        let c = local_corrections(&traverse(&y, &u, &[0, 0]), &o, None).unwrap();
        let t = c.budget_term(0.5).unwrap();
        assert!((t.value - 1.0 / 1.01f64.sqrt()).abs() < 1e-12);
        let half = 0.5 * (1.0 - t.value) / t.value;
        assert!((t.relative_u - half / 3f64.sqrt()).abs() < 1e-15);
        assert!(t.source.contains("turbulence") && t.source.contains("common practice, no source"));
        let i = t.input().unwrap();
        assert!((i.value - t.value).abs() < 1e-15);
    }
}
