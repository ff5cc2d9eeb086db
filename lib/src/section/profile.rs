//! Velocity profiles of fully developed pipe flow: laminar, power law and log
//! law; mean/centreline ratio, the radius of mean velocity, and the
//! single-point (centreline) method.
//!
//! The models disagree by 2–4 % on the mean/centreline ratio, so every factor
//! here names its model; the user chooses.
//!
//! # Formula
//! With r the radius, R the pipe radius, y = R − r, U_c the centreline and U
//! the mean velocity:
//! - Laminar: u/U_c = 1 − (r/R)², U/U_c = 1/2, mean at r/R = 1/√2.
//! - Power law: u/U_c = (y/R)^{1/n}, U/U_c = 2n²/((n + 1)(2n + 1)), mean at
//!   y/R = (U/U_c)ⁿ. The exponent n from the Reynolds number by a named
//!   relation: n = 1/√f (Darcy f from Colebrook), or Nikuradse's measurements
//!   as tabulated by Schlichting (interpolated in log Re).
//! - Log law (velocity-defect form): (U_c − u)/u_τ = −(1/κ) ln(y/R); integrated
//!   over the section (U_c − U)/u_τ = 3/(2κ), so U/U_c = 1/(1 + (3/(2κ))√(f/8)),
//!   mean at y/R = e^{−3/2} = 0.2231; κ = 0.41 by default (0.40 offered).
//!
//! # References
//! - H. Schlichting, K. Gersten, *Boundary-Layer Theory*, Nikuradse's
//!   power-law exponents versus Reynolds number (table from memory; the
//!   mean/maximum ratios it lists are reproduced exactly by the formula above).
//! - n ≈ 1/√f: a standard relation between the power law and the friction law
//!   (from memory).
//! - Log-law constants: κ = 0.41 (Coles), κ = 0.40 (Nikuradse/Prandtl), from memory.
//! - ISO 7145:1982, single-point (mean velocity) determination in circular
//!   conduits, assumes fully developed flow (from memory).

use crate::error::{Error, Result, Warning, finite, within};
use crate::fluids::fluid::FluidState;
use crate::section::conduit::Conduit;
use crate::section::friction::{FrictionModel, Regime, friction_factor};
use crate::units::quantity::{Velocity, VolumeFlow};

/// Nikuradse's power-law exponents versus Re (Schlichting's table, from memory).
const NIKURADSE: [(f64, f64); 6] =
    [(4.0e3, 6.0), (2.3e4, 6.6), (1.1e5, 7.0), (1.1e6, 8.8), (2.0e6, 10.0), (3.2e6, 10.0)];

/// Default von Kármán constant.
pub const KAPPA: f64 = 0.41;

/// A velocity-profile model with its parameters fixed.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum ProfileModel {
    /// Poiseuille flow.
    Laminar,
    /// u/U_c = (y/R)^{1/n}.
    PowerLaw {
        /// Exponent n.
        n: f64,
    },
    /// Velocity-defect log law.
    LogLaw {
        /// von Kármán constant κ.
        kappa: f64,
        /// Darcy friction factor f.
        friction_factor: f64,
    },
}

/// How to choose a turbulent profile for a Reynolds number.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub enum ProfileFamily {
    /// Power law, n = 1/√f.
    #[default]
    PowerLawFromFriction,
    /// Power law, n from Nikuradse's table.
    PowerLawNikuradse,
    /// Power law with a fixed exponent.
    PowerLawFixed(f64),
    /// Log law with von Kármán constant κ.
    LogLaw {
        /// κ (0.41 or 0.40 usually).
        kappa: f64,
    },
}

impl ProfileModel {
    /// Profile for a Reynolds number and relative roughness: laminar below
    /// Re = 2300, else the chosen family.
    pub fn for_flow(family: ProfileFamily, re: f64, rel_roughness: f64) -> Result<Self> {
        let ff = friction_factor(re, rel_roughness, FrictionModel::Colebrook)?;
        if ff.regime == Regime::Laminar {
            return Ok(Self::Laminar);
        }
        Ok(match family {
            ProfileFamily::PowerLawFromFriction => Self::PowerLaw { n: 1.0 / ff.f.sqrt() },
            ProfileFamily::PowerLawNikuradse => Self::PowerLaw { n: nikuradse_exponent(re) },
            ProfileFamily::PowerLawFixed(n) => Self::power_law(n)?,
            ProfileFamily::LogLaw { kappa } => {
                within("profile", "von Kármán constant", kappa, "", 0.3, 0.5)?;
                Self::LogLaw { kappa, friction_factor: ff.f }
            }
        })
    }

    /// A power law with exponent n (1 < n ≤ 20).
    pub fn power_law(n: f64) -> Result<Self> {
        finite("profile", "power-law exponent", n)?;
        if !(n > 1.0 && n <= 20.0) {
            return Err(Error::OutOfRange {
                context: "profile",
                param: "power-law exponent n",
                value: n,
                unit: "",
                allowed: "in (1, 20]".into(),
            });
        }
        Ok(Self::PowerLaw { n })
    }

    /// Mean over centreline velocity U/U_c.
    pub fn mean_to_centreline(&self) -> f64 {
        match *self {
            Self::Laminar => 0.5,
            Self::PowerLaw { n } => 2.0 * n * n / ((n + 1.0) * (2.0 * n + 1.0)),
            Self::LogLaw { kappa, friction_factor } => 1.0 / (1.0 + 1.5 / kappa * (friction_factor / 8.0).sqrt()),
        }
    }

    /// Distance from the wall, as y/R, where the local velocity equals the mean.
    pub fn mean_velocity_wall_distance(&self) -> f64 {
        match *self {
            Self::Laminar => 1.0 - std::f64::consts::FRAC_1_SQRT_2,
            Self::PowerLaw { n } => self.mean_to_centreline().powf(n),
            Self::LogLaw { .. } => (-1.5f64).exp(),
        }
    }

    /// Local over centreline velocity u/U_c at r/R in [0, 1] (0 at the wall).
    pub fn velocity_ratio(&self, r_over_r: f64) -> f64 {
        let r = r_over_r.abs().min(1.0);
        let y = 1.0 - r;
        match *self {
            Self::Laminar => 1.0 - r * r,
            Self::PowerLaw { n } => y.powf(1.0 / n),
            Self::LogLaw { kappa, friction_factor } => {
                if y <= 0.0 {
                    return 0.0;
                }
                let ut_over_uc = (friction_factor / 8.0).sqrt() * self.mean_to_centreline();
                (1.0 + ut_over_uc / kappa * y.ln()).max(0.0)
            }
        }
    }

    /// Name with parameters, for reports.
    pub fn name(&self) -> String {
        match *self {
            Self::Laminar => "laminar (Poiseuille)".into(),
            Self::PowerLaw { n } => format!("power law, n = {n:.3}"),
            Self::LogLaw { kappa, friction_factor } => format!("log law, κ = {kappa}, f = {friction_factor:.5}"),
        }
    }
}

/// Nikuradse's exponent interpolated in log₁₀ Re, clamped to the table's ends.
pub fn nikuradse_exponent(re: f64) -> f64 {
    let l = re.max(1.0).log10();
    let first = NIKURADSE[0];
    if re <= first.0 {
        return first.1;
    }
    for w in NIKURADSE.windows(2) {
        let (a, b) = (w[0], w[1]);
        if re <= b.0 {
            let t = (l - a.0.log10()) / (b.0.log10() - a.0.log10());
            return a.1 + t * (b.1 - a.1);
        }
    }
    NIKURADSE[NIKURADSE.len() - 1].1
}

/// Straight pipe around the measuring section, in diameters.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StraightLengths {
    /// Straight length upstream (to the nearest disturbance), in diameters.
    pub upstream_diameters: f64,
    /// Straight length downstream, in diameters.
    pub downstream_diameters: f64,
}

/// Straight lengths below which the single-point method is not trusted: 25 D
/// upstream and 5 D downstream (common practice, no source; fully developed flow
/// may need 40 D or more).
pub const SINGLE_POINT_MIN_STRAIGHT: StraightLengths =
    StraightLengths { upstream_diameters: 25.0, downstream_diameters: 5.0 };

/// A velocity that must be finite and positive, measured in a round pipe (the profile
/// relations hold there only); its value in m/s.
fn positive_in_round_pipe(context: &'static str, param: &'static str, v: Velocity, conduit: &Conduit) -> Result<f64> {
    let x = finite(context, param, v.si())?;
    if x <= 0.0 {
        return Err(Error::OutOfRange { context, param, value: x, unit: "m/s", allowed: "greater than 0".into() });
    }
    if !conduit.is_circular() {
        return Err(Error::Inconsistent {
            context,
            message: "the profile relations hold for circular pipes only".into(),
        });
    }
    Ok(x)
}

/// The warning when straight lengths fall short of [`SINGLE_POINT_MIN_STRAIGHT`].
fn short_straight(s: StraightLengths, method: &str) -> Option<Warning> {
    let min = SINGLE_POINT_MIN_STRAIGHT;
    (s.upstream_diameters < min.upstream_diameters || s.downstream_diameters < min.downstream_diameters).then(|| {
        Warning::new(
            "straight-length",
            format!(
                "{method} assumes fully developed flow; {:.1} D upstream and {:.1} D downstream fall short of {} D and {} D",
                s.upstream_diameters, s.downstream_diameters, min.upstream_diameters, min.downstream_diameters
            ),
        )
    })
}

/// Result of the single-point method.
#[derive(Debug, Clone, PartialEq)]
pub struct SinglePointResult {
    /// Mean velocity.
    pub mean_velocity: Velocity,
    /// Centreline velocity used.
    pub centreline_velocity: Velocity,
    /// Reynolds number of the mean velocity.
    pub reynolds: f64,
    /// Profile model at convergence.
    pub model: ProfileModel,
    /// U/U_c.
    pub ratio: f64,
    /// Volume flow at the measuring conditions.
    pub volume_flow: VolumeFlow,
    /// Iterations to convergence.
    pub iterations: usize,
    /// Remarks (straight lengths, regime).
    pub warnings: Vec<Warning>,
}

/// Single-point method: mean velocity and flow from a centreline velocity,
/// iterating the Reynolds number to consistency with the profile model.
///
/// The method assumes fully developed, swirl-free flow in a straight circular
/// pipe; give `straight` to be warned when the installation falls short of
/// [`SINGLE_POINT_MIN_STRAIGHT`].
pub fn single_point(
    centreline: Velocity,
    fluid: &FluidState,
    conduit: &Conduit,
    family: ProfileFamily,
    straight: Option<StraightLengths>,
) -> Result<SinglePointResult> {
    let uc = positive_in_round_pipe("single-point method", "centreline velocity", centreline, conduit)?;
    let mut warnings = conduit.warnings.clone();
    let mut ratio = 0.8;
    let mut model = ProfileModel::Laminar;
    let mut re = 0.0;
    let mut iterations = 0;
    for i in 1..=100 {
        iterations = i;
        re = conduit.reynolds(Velocity::m_s(uc * ratio), fluid)?;
        model = ProfileModel::for_flow(family, re, conduit.relative_roughness())?;
        let new = model.mean_to_centreline();
        let done = (new - ratio).abs() < 1e-12;
        ratio = new;
        if done {
            break;
        }
    }
    let ff = friction_factor(re, conduit.relative_roughness(), FrictionModel::Colebrook)?;
    warnings.extend(ff.warnings);
    warnings.extend(straight.and_then(|s| short_straight(s, "the single-point method")));
    let mean = uc * ratio;
    Ok(SinglePointResult {
        mean_velocity: Velocity::m_s(mean),
        centreline_velocity: centreline,
        reynolds: re,
        model,
        ratio,
        volume_flow: VolumeFlow::from_si(mean * conduit.area().si()),
        iterations,
        warnings,
    })
}

/// Result of a single-point measurement at the point of mean velocity.
#[derive(Debug, Clone, PartialEq)]
pub struct MeanPointResult {
    /// Mean velocity: the reading, or the mean of the readings at symmetric points.
    pub mean_velocity: Velocity,
    /// Volume flow at the measuring conditions.
    pub volume_flow: VolumeFlow,
    /// Reynolds number of the mean velocity.
    pub reynolds: f64,
    /// Profile model at that Reynolds number.
    pub model: ProfileModel,
    /// Where the local velocity equals the mean, as y/R from the wall.
    pub y_over_r: f64,
    /// That distance from the near wall.
    pub from_wall: crate::Length,
    /// |v₁ − v₂| / mean, % (two readings at symmetric points), if given.
    pub asymmetry_pct: Option<f64>,
    /// Remarks (asymmetry, straight lengths, the wall's regime).
    pub warnings: Vec<Warning>,
    /// The conduit's relative roughness ε/D (for the profile laws at this Reynolds number).
    pub rel_roughness: f64,
}

/// Asymmetry of two symmetric readings above which the result is flagged, %
/// (common practice, no source).
pub const MEAN_POINT_ASYMMETRY_PCT: f64 = 3.0;

/// Single-point method with the probe at the point of mean velocity: the distance from
/// the wall where the profile model's local velocity equals its mean (y/R = (U/U_c)^n for
/// the power law, e^(−3/2) for the log law; derived from the model), so that the reading is
/// the mean velocity itself; one reading, or two at that distance from opposite walls,
/// whose mean is taken and whose difference is checked against `tolerance_pct`. The
/// Reynolds number is that of the mean; the model follows it as in [`single_point`].
pub fn single_point_at_mean(
    readings: &[Velocity],
    fluid: &FluidState,
    conduit: &Conduit,
    family: ProfileFamily,
    straight: Option<StraightLengths>,
    tolerance_pct: f64,
) -> Result<MeanPointResult> {
    const CTX: &str = "point of mean velocity";
    if !(1..=2).contains(&readings.len()) {
        return Err(Error::Inconsistent {
            context: CTX,
            message: format!("give one reading, or two at symmetric points; got {}", readings.len()),
        });
    }
    for r in readings {
        positive_in_round_pipe(CTX, "velocity", *r, conduit)?;
    }
    let mean = readings.iter().map(|v| v.si()).sum::<f64>() / readings.len() as f64;
    let re = conduit.reynolds(Velocity::m_s(mean), fluid)?;
    let model = ProfileModel::for_flow(family, re, conduit.relative_roughness())?;
    let y_over_r = model.mean_velocity_wall_distance();
    let radius = conduit.hydraulic_diameter().si() / 2.0;
    let mut warnings = conduit.warnings.clone();
    let asymmetry_pct = (readings.len() == 2).then(|| 100.0 * (readings[0].si() - readings[1].si()).abs() / mean);
    if let Some(a) = asymmetry_pct
        && a > tolerance_pct
    {
        warnings.push(Warning::new(
            "asymmetric",
            format!(
                "the two readings at the point of mean velocity differ by {a:.1} % (more than {tolerance_pct} %): the profile is not axisymmetric, so one or two points do not give the mean; traverse the section"
            ),
        ));
    }
    warnings.extend(straight.and_then(|s| short_straight(s, "the point of mean velocity")));
    Ok(MeanPointResult {
        mean_velocity: Velocity::m_s(mean),
        volume_flow: VolumeFlow::from_si(mean * conduit.area().si()),
        reynolds: re,
        model,
        y_over_r,
        from_wall: crate::Length::m(y_over_r * radius),
        asymmetry_pct,
        warnings,
        rel_roughness: conduit.relative_roughness(),
    })
}

/// The method terms of a result at the point of mean velocity, for a traverse budget of its
/// one or two readings (in place of a traverse's layout term), all derived from the profile
/// laws at the result's Reynolds number:
/// - **profile model**: the probe sits where the chosen law's local velocity equals its mean;
///   the other laws (power law with n = 1/√f and from Nikuradse's table, log law with
///   κ = 0.41 and 0.40) put the mean elsewhere. The largest |u(y)/U − 1| among them at that
///   distance is the half-width of a rectangular term;
/// - **positioning**: a standard uncertainty `u_position` (m) of the distance from the wall
///   moves the reading by (d ln u/dy)·u_position of the chosen law (a normal term), when
///   `u_position` is given.
///
/// - **asymmetry** (opt-in, with two readings): half their difference as a rectangular
///   half-width (common practice, no source).
///
/// ISO 7145's own uncertainty clause could not be read here; these terms stand on the
/// profile laws, and what the clause adds is the caller's to add.
pub fn mean_point_terms(
    r: &MeanPointResult,
    u_position: Option<f64>,
    asymmetry: bool,
) -> Result<Vec<crate::uncertainty::flow_models::MethodTerm>> {
    use crate::uncertainty::flow_models::{MethodTerm, TermDistribution};
    let y = r.y_over_r;
    let at = |m: &ProfileModel| m.velocity_ratio(1.0 - y) / m.mean_to_centreline();
    let mut spread: f64 = 0.0;
    let mut names = Vec::new();
    for family in [
        ProfileFamily::PowerLawFromFriction,
        ProfileFamily::PowerLawNikuradse,
        ProfileFamily::LogLaw { kappa: 0.41 },
        ProfileFamily::LogLaw { kappa: 0.40 },
    ] {
        let m = ProfileModel::for_flow(family, r.reynolds, r.rel_roughness)?;
        let d = at(&m) - 1.0;
        if d.abs() > spread.abs() {
            spread = d;
            names = vec![m.name()];
        }
    }
    let mut terms = vec![
        MethodTerm::new(
            "profile model at the point of mean velocity",
            spread.abs() / 3f64.sqrt(),
            &format!(
                "largest |u(y)/U − 1| of the profile laws at y/R = {y:.4}, Re = {:.3e}: {:+.3} % ({}); rectangular (derived)",
                r.reynolds,
                100.0 * spread,
                names.join(", ")
            ),
        )?
        .with_distribution(TermDistribution::Rectangular),
    ];
    if let Some(u_y) = u_position {
        let u_y = crate::error::positive("point of mean velocity", "u_position", u_y, "m")?;
        let radius = r.from_wall.si() / y;
        let h = 1e-4;
        let slope =
            (r.model.velocity_ratio(1.0 - (y + h)).ln() - r.model.velocity_ratio(1.0 - (y - h)).ln()) / (2.0 * h);
        let rel = slope.abs() * u_y / radius;
        terms.push(MethodTerm::new(
            "probe positioning",
            rel,
            &format!(
                "u(y) = {:.2} mm through d ln u/dy of the {} at y/R = {y:.4} (derived)",
                u_y * 1000.0,
                r.model.name()
            ),
        )?);
    }
    if asymmetry {
        let a = r.asymmetry_pct.ok_or_else(|| Error::Inconsistent {
            context: "point of mean velocity",
            message: "an asymmetry term needs two readings at symmetric points".into(),
        })?;
        terms.push(
            MethodTerm::new(
                "asymmetry of the two readings",
                a / 200.0 / 3f64.sqrt(),
                &format!(
                    "half the difference of the two readings ({a:.2} %) as a rectangular half-width (common practice, no source)"
                ),
            )?
            .with_distribution(TermDistribution::Rectangular),
        );
    }
    Ok(terms)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::units::quantity::{Density, DynamicViscosity, Length, Pressure, Temperature};

    // check-values.md §6: 2n²/((n+1)(2n+1)) for n = 5…10 (formula derived there, values [C]).
    #[test]
    fn power_law_ratios() {
        for (n, r) in [
            (5.0, 0.7576),
            (6.0, 0.7912),
            (6.6, 0.8073),
            (7.0, 0.8167),
            (8.0, 0.8366),
            (8.8, 0.8497),
            (9.0, 0.8526),
            (10.0, 0.8658),
        ] {
            let m = ProfileModel::power_law(n).unwrap();
            assert!((m.mean_to_centreline() - r).abs() < 5e-5, "{n}");
        }
    }

    /// At y/R = 0.2423 (power law, n = 7) the log law (κ = 0.41) gives
    /// u/U − 1 = (1/κ)(ln(y/R) + 3/2)·√(f/8) (its defect form, derived; check-values.md §6);
    /// the profile-model term takes the largest such spread, and positioning follows
    /// d ln u/dy = 1/(n·y) for the power law.
    #[test]
    fn mean_point_terms_from_the_profile_laws() {
        let water = crate::fluids::fluid::Fluid::Water(crate::fluids::water::Water::default())
            .state(Pressure::pa(300_000.0), Temperature::celsius(15.0))
            .unwrap();
        let pipe = Conduit::circular(Length::mm(400.0)).unwrap();
        let r =
            single_point_at_mean(&[Velocity::m_s(1.5)], &water, &pipe, ProfileFamily::PowerLawFromFriction, None, 3.0)
                .unwrap();
        let y = r.y_over_r;
        let f = friction_factor(r.reynolds, 0.0, FrictionModel::Colebrook).unwrap().f;
        let log41 = (y.ln() + 1.5) / 0.41 * (f / 8.0).sqrt();
        let log40 = (y.ln() + 1.5) / 0.40 * (f / 8.0).sqrt();
        let terms = mean_point_terms(&r, Some(0.002), false).unwrap();
        assert!(mean_point_terms(&r, None, true).unwrap_err().to_string().contains("two readings"));
        let want = log41.abs().max(log40.abs());
        // The Nikuradse power law is close to the chosen one, so a log law is the widest.
        assert!(
            (terms[0].relative_u * 3f64.sqrt() - want).abs() < 1e-9,
            "{} vs {want}",
            terms[0].relative_u * 3f64.sqrt()
        );
        assert!(terms[0].source.contains("log law"), "{}", terms[0].source);
        let ProfileModel::PowerLaw { n } = r.model else { panic!("power law expected") };
        let rel = 0.002 / (n * r.from_wall.si());
        assert!((terms[1].relative_u - rel).abs() < 1e-7 * rel.max(1.0), "{} vs {rel}", terms[1].relative_u);
    }

    // check-values.md §6: point of mean velocity y/R = 0.2453 / 0.2423 / 0.2400 / 0.2367 for
    // n = 6/7/8/10, and e^{-1.5} = 0.2231 for the log law; laminar 1 − 1/√2 (derived).
    #[test]
    fn radius_of_mean_velocity() {
        for (n, y) in [(6.0, 0.2453), (7.0, 0.2423), (8.0, 0.2400), (10.0, 0.2367)] {
            assert!((ProfileModel::power_law(n).unwrap().mean_velocity_wall_distance() - y).abs() < 5e-5);
        }
        let log = ProfileModel::LogLaw { kappa: 0.41, friction_factor: 0.018 };
        assert!((log.mean_velocity_wall_distance() - 0.2231).abs() < 5e-5);
        // and the local velocity there equals the mean (consistency of the defect law)
        let r = 1.0 - log.mean_velocity_wall_distance();
        assert!((log.velocity_ratio(r) - log.mean_to_centreline()).abs() < 1e-12);
        let p7 = ProfileModel::power_law(7.0).unwrap();
        assert!((p7.velocity_ratio(1.0 - p7.mean_velocity_wall_distance()) - p7.mean_to_centreline()).abs() < 1e-12);
        assert!((ProfileModel::Laminar.velocity_ratio(std::f64::consts::FRAC_1_SQRT_2) - 0.5).abs() < 1e-15);
    }

    // check-values.md §6 smooth-pipe table [C]: Re, f (Colebrook), n = 1/√f, ratio(n),
    // 1/(1 + 1.326√f) (κ = 0.40).
    #[test]
    fn ratio_versus_reynolds_three_models() {
        let rows = [
            (1e4, 5.690, 0.7818, 0.8110),
            (4e4, 6.747, 0.8108, 0.8357),
            (1e5, 7.456, 0.8263, 0.8490),
            (4e5, 8.542, 0.8457, 0.8656),
            (1e6, 9.267, 0.8564, 0.8748),
            (3e6, 10.143, 0.8675, 0.8844),
        ];
        for (re, n, rp, rl) in rows {
            let p = ProfileModel::for_flow(ProfileFamily::PowerLawFromFriction, re, 0.0).unwrap();
            let ProfileModel::PowerLaw { n: got } = p else { panic!("power law expected") };
            assert!((got - n).abs() < 5e-4, "{re}: n {got}");
            assert!((p.mean_to_centreline() - rp).abs() < 5e-5, "{re}");
            let l = ProfileModel::for_flow(ProfileFamily::LogLaw { kappa: 0.40 }, re, 0.0).unwrap();
            // the table used the rounded 1.326 for 3/(2κ√8) = 1.3258
            assert!((l.mean_to_centreline() - rl).abs() < 1e-4, "{re} log");
        }
    }

    // Nikuradse exponents as tabulated by Schlichting (from memory): Re 4e3, 2.3e4, 1.1e5,
    // 1.1e6, 2e6, 3.2e6 → n 6.0, 6.6, 7.0, 8.8, 10, 10, and mean/max 0.791, 0.807, 0.817,
    // 0.850, 0.865, 0.865 (check-values.md §6, reproduced there by the formula).
    #[test]
    fn nikuradse_table() {
        for (re, n, r) in [
            (4.0e3, 6.0, 0.791),
            (2.3e4, 6.6, 0.807),
            (1.1e5, 7.0, 0.817),
            (1.1e6, 8.8, 0.850),
            (2.0e6, 10.0, 0.865),
            (3.2e6, 10.0, 0.865),
        ] {
            assert!((nikuradse_exponent(re) - n).abs() < 1e-9);
            let p = ProfileModel::for_flow(ProfileFamily::PowerLawNikuradse, re, 0.0).unwrap();
            // the table truncates rather than rounds (n = 10: 0.8658 listed as 0.865)
            assert!((p.mean_to_centreline() - r).abs() < 1e-3, "{re}");
        }
        assert_eq!(nikuradse_exponent(1e9), 10.0);
        assert!(nikuradse_exponent(5e4) > 6.6 && nikuradse_exponent(5e4) < 7.0);
    }

    fn water() -> FluidState {
        FluidState {
            pressure: Pressure::pa(3e5),
            temperature: Temperature::celsius(20.0),
            density: Density::kg_m3(998.2),
            viscosity: Some(DynamicViscosity::from_si(1.0016e-3)),
            isentropic_exponent: None,
            model: "test",
            warnings: vec![],
        }
    }

    #[test]
    fn single_point_converges_and_is_consistent() {
        let pipe = Conduit::circular(Length::mm(400.0)).unwrap();
        let r = single_point(Velocity::m_s(2.0), &water(), &pipe, ProfileFamily::PowerLawFromFriction, None).unwrap();
        // Consistency: the Reynolds number of the returned mean gives back the same ratio.
        let re = pipe.reynolds(r.mean_velocity, &water()).unwrap();
        assert!((re / r.reynolds - 1.0).abs() < 1e-9);
        let again = ProfileModel::for_flow(ProfileFamily::PowerLawFromFriction, re, 0.0).unwrap();
        assert!((again.mean_to_centreline() - r.ratio).abs() < 1e-10);
        assert!((r.volume_flow.si() - r.mean_velocity.si() * pipe.area().si()).abs() < 1e-12);
        assert!(r.iterations < 20 && r.warnings.is_empty());
        // Laminar: a slow flow of a viscous liquid gives exactly one half.
        let mut oil = water();
        oil.viscosity = Some(DynamicViscosity::from_si(0.5));
        let l = single_point(Velocity::m_s(0.5), &oil, &pipe, ProfileFamily::PowerLawFromFriction, None).unwrap();
        assert_eq!(l.model, ProfileModel::Laminar);
        assert!((l.mean_velocity.si() - 0.25).abs() < 1e-15);
    }

    #[test]
    fn single_point_warns_and_refuses() {
        let pipe = Conduit::circular(Length::mm(400.0)).unwrap();
        let short = StraightLengths { upstream_diameters: 10.0, downstream_diameters: 3.0 };
        let r = single_point(Velocity::m_s(2.0), &water(), &pipe, ProfileFamily::LogLaw { kappa: KAPPA }, Some(short))
            .unwrap();
        assert!(r.warnings.iter().any(|w| w.kind == "straight-length"));
        let rect = Conduit::rectangular(Length::m(1.0), Length::m(0.5)).unwrap();
        assert!(single_point(Velocity::m_s(2.0), &water(), &rect, ProfileFamily::default(), None).is_err());
        assert!(single_point(Velocity::m_s(-1.0), &water(), &pipe, ProfileFamily::default(), None).is_err());
        assert!(ProfileModel::power_law(0.5).is_err());
    }

    /// The point of mean velocity of a 1/7 power law lies at y/R = 0.81667⁷ = 0.24228 from the
    /// wall (derived: U/U_c = 2n²/((n+1)(2n+1)), check-values.md §6; the 0.242 R figure is the
    /// usual one for this profile, from memory), so on a 400 mm pipe 48.5 mm from the wall.
    #[test]
    fn point_of_mean_velocity_single_and_symmetric() {
        let w = water();
        let pipe = Conduit::circular(Length::mm(400.0)).unwrap();
        let r = single_point_at_mean(
            &[Velocity::m_s(1.5)],
            &w,
            &pipe,
            ProfileFamily::PowerLawFromFriction,
            None,
            MEAN_POINT_ASYMMETRY_PCT,
        )
        .unwrap();
        assert!((r.mean_velocity.si() - 1.5).abs() < 1e-12);
        assert!((r.y_over_r - r.model.mean_velocity_wall_distance()).abs() < 1e-15);
        assert!((r.from_wall.si() - r.y_over_r * 0.2).abs() < 1e-12);
        assert!((r.volume_flow.si() - 1.5 * std::f64::consts::PI * 0.04).abs() < 1e-9);
        assert!(r.y_over_r > 0.2 && r.y_over_r < 0.26, "{}", r.y_over_r);
        let p7 = ProfileModel::power_law(7.0).unwrap();
        assert!((p7.mean_velocity_wall_distance() - 0.24228).abs() < 1e-5);
        // Two symmetric readings: their mean, and a flag past the tolerance.
        let at = |vs: &[f64]| {
            let vs: Vec<Velocity> = vs.iter().map(|v| Velocity::m_s(*v)).collect();
            single_point_at_mean(&vs, &w, &pipe, ProfileFamily::PowerLawFromFriction, None, 3.0)
        };
        let two = at(&[1.50, 1.56]).unwrap();
        assert!((two.mean_velocity.si() - 1.53).abs() < 1e-12);
        assert!((two.asymmetry_pct.unwrap() - 100.0 * 0.06 / 1.53).abs() < 1e-9);
        assert!(two.warnings.iter().any(|w| w.kind == "asymmetric"), "0.06/1.53 = 3.92 % > 3 %");
        assert!(at(&[1.50, 1.52]).unwrap().warnings.iter().all(|w| w.kind != "asymmetric"));
        assert!(at(&[]).is_err() && at(&[-1.0]).is_err() && at(&[1.5, 1.5, 1.5]).is_err());
    }
}
