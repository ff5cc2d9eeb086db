//! Probes: from a differential pressure to a point velocity, m/s.
//!
//! # Formula
//! Incompressible (liquids, and gases at low Mach number):
//!
//! v = C √(2 Δp / ρ)
//!
//! Subsonic compressible (isentropic, ideal gas), with Δp' = C² Δp the
//! corrected dynamic pressure, p and ρ the static values at the probe:
//!
//! v = √{ 2γ/(γ−1) · p/ρ · [(1 + Δp'/p)^{(γ−1)/γ} − 1] },  M = v / √(γ p/ρ)
//!
//! where C is the probe coefficient (pitot-static, pitot with wall taps) or
//! C_p (S-type), Δp = total − static pressure (Pa), ρ the fluid density
//! (kg/m³), γ the ratio of specific heats. The incompressible formula
//! overestimates v by about M²/8.
//!
//! A zero Δp gives v = 0 (no flow); a negative Δp gives a negative velocity
//! of the same formula on |Δp| and a warning (reverse flow, or swapped lines).
//! Never NaN.
//!
//! # References
//! - ISO 3966:2008, *Measurement of fluid flow in closed conduits — Velocity
//!   area method using Pitot static tubes*: velocity equation, the
//!   compressibility correction, scope Mach ≤ 0.25.
//! - US EPA 40 CFR 60 App. A-1, Method 2 (S-type probe; see [`crate::methods::us_epa`]
//!   for that method's own constants).
//! - Low-velocity limit: ISO 3966 asks for a probe Reynolds number (head
//!   diameter) of at least 200; below it viscous effects raise the impact
//!   reading (from memory).

use std::fmt;

use crate::error::{Result, Warning, finite};
use crate::fluids::fluid::FluidState;
use crate::steps::Steps;
use crate::units::quantity::{Density, Length, Pressure, Velocity, format_number};

/// Mach number up to which ISO 3966 applies.
pub const ISO3966_MACH_LIMIT: f64 = 0.25;
/// Probe Reynolds number (head diameter) below which viscous effects matter (ISO 3966, from memory).
pub const LOW_REYNOLDS_LIMIT: f64 = 200.0;
/// Relative velocity error of the incompressible formula above which a warning is given.
const COMPRESSIBILITY_NOTICE: f64 = 1e-3;

/// The kind of probe.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ProbeKind {
    /// Pitot-static tube (ISO 3966 heads have C ≈ 1.000).
    PitotStatic,
    /// Pitot (total-pressure) tube read against wall static taps.
    WallTapPitot,
    /// S-type (reverse-type) probe, coefficient C_p typically about 0.84.
    SType,
}

impl fmt::Display for ProbeKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            ProbeKind::PitotStatic => "pitot-static tube",
            ProbeKind::WallTapPitot => "pitot tube with wall static taps",
            ProbeKind::SType => "S-type probe",
        })
    }
}

/// How compressibility is treated.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum VelocityMethod {
    /// Isentropic correction for gases (when γ is known), incompressible for liquids.
    #[default]
    Auto,
    /// Always v = C √(2Δp/ρ).
    Incompressible,
}

/// Whether the flow at a point goes the expected way.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FlowDirection {
    /// Δp > 0.
    Forward,
    /// Δp = 0.
    NoFlow,
    /// Δp < 0.
    Reverse,
}

impl std::fmt::Display for FlowDirection {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Self::Forward => "flow towards the probe",
            Self::NoFlow => "no flow (Δp = 0)",
            Self::Reverse => "reverse flow (Δp < 0)",
        })
    }
}

/// A probe with its coefficient.
#[derive(Debug, Clone, PartialEq)]
pub struct Probe {
    /// Kind.
    pub kind: ProbeKind,
    /// Coefficient C (or C_p).
    pub coefficient: f64,
    /// Head (tip) diameter, for the low-velocity check.
    pub head_diameter: Option<Length>,
    /// Where the coefficient comes from (a calibration record), when known.
    pub coefficient_source: Option<String>,
    /// Warnings every velocity from this probe carries (a calibration that fails its
    /// checks or is older than the limit set).
    pub notes: Vec<Warning>,
}

/// A point velocity and how it was obtained.
#[derive(Debug, Clone, PartialEq)]
pub struct PointVelocity {
    /// Velocity, signed (negative for reverse flow).
    pub velocity: Velocity,
    /// Direction from the sign of Δp.
    pub direction: FlowDirection,
    /// Mach number (gases).
    pub mach: Option<f64>,
    /// Whether the isentropic correction was applied.
    pub compressible: bool,
    /// Probe Reynolds number on the head diameter, when known.
    pub probe_reynolds: Option<f64>,
    /// Inputs kept for the worked steps.
    pub dp: Pressure,
    /// Density used.
    pub density: Density,
    /// Static pressure used (isentropic case).
    pub static_pressure: Pressure,
    /// γ used (isentropic case).
    pub isentropic_exponent: Option<f64>,
    /// Coefficient used.
    pub coefficient: f64,
    /// Probe kind.
    pub kind: ProbeKind,
    /// Where the coefficient comes from (a calibration or set-up record), when known.
    pub coefficient_source: Option<String>,
    /// Remarks.
    pub warnings: Vec<Warning>,
}

/// v = C√(2|Δp|/ρ) signed by Δp (m/s from Pa and kg/m³).
#[inline(always)]
pub fn incompressible(c: f64, dp: f64, rho: f64) -> f64 {
    let v = c * (2.0 * dp.abs() / rho).sqrt();
    if dp < 0.0 { -v } else { v }
}

/// Isentropic subsonic velocity signed by Δp, from C, Δp (Pa), static ρ (kg/m³), static p (Pa), γ.
#[inline(always)]
pub fn isentropic(c: f64, dp: f64, rho: f64, p: f64, gamma: f64) -> f64 {
    Isentropic::new(c, p, gamma).velocity(dp, rho)
}

/// The constants of the isentropic velocity for one probe coefficient C, static pressure p
/// and γ, so that a column of readings costs one division and one square root a row:
/// v = ±√( 2p/(eρ) · ((1 + C²|Δp|/p)^e − 1) ), e = (γ − 1)/γ.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Isentropic {
    e: f64,
    two_p_over_e: f64,
    c2_over_p: f64,
}

impl Isentropic {
    /// The constants for C, p (Pa) and γ.
    pub fn new(c: f64, p: f64, gamma: f64) -> Self {
        let e = (gamma - 1.0) / gamma;
        Self { e, two_p_over_e: 2.0 * p / e, c2_over_p: c * c / p }
    }

    /// Velocity (m/s) signed by Δp, from Δp (Pa) and the static density ρ (kg/m³).
    #[inline(always)]
    pub fn velocity(&self, dp: f64, rho: f64) -> f64 {
        let v = (self.two_p_over_e / rho * pow1p_m1(self.c2_over_p * dp.abs(), self.e)).sqrt();
        if dp < 0.0 { -v } else { v }
    }

    /// [`Isentropic::velocity`] of each (Δp, ρ) pair into `v`, the same values to the bit,
    /// computed so that the compiler can take two rows a step: every row runs the eight
    /// nested steps of [`pow1p_m1`]'s nine-term series, a row with x ≤ 10⁻³ (six terms,
    /// five steps) keeping s = 1 through the first three, and rows past the series' range
    /// (x > 10⁻²) are done again by `velocity`.
    pub fn velocities(&self, dp: &[f64], rho: &[f64], v: &mut [f64]) {
        let coef: [f64; 9] = std::array::from_fn(|k| (self.e - k as f64) * INV[(k + 1).min(9)]);
        let mut beyond = false;
        for ((v, &dp), &rho) in v.iter_mut().zip(dp).zip(rho) {
            let x = self.c2_over_p * dp.abs();
            let short = x <= 1e-3;
            let mut s = 1.0;
            for k in (1..9).rev() {
                let t = 1.0 + coef[k] * x * s;
                s = if k < 6 || !short { t } else { s };
            }
            beyond |= x > 1e-2;
            let w = (self.two_p_over_e / rho * (self.e * x * s)).sqrt();
            *v = if dp < 0.0 { -w } else { w };
        }
        if beyond {
            for ((v, &dp), &rho) in v.iter_mut().zip(dp).zip(rho) {
                if self.c2_over_p * dp.abs() > 1e-2 {
                    *v = self.velocity(dp, rho);
                }
            }
        }
    }
}

/// 1/k for the series of [`pow1p_m1`].
const INV: [f64; 10] =
    [0.0, 1.0, 1.0 / 2.0, 1.0 / 3.0, 1.0 / 4.0, 1.0 / 5.0, 1.0 / 6.0, 1.0 / 7.0, 1.0 / 8.0, 1.0 / 9.0];

/// (1 + x)^e − 1 for x ≥ 0 and 0 < e < 1: the binomial series Σ C(e, k) x^k in nested form
/// where it converges fast (the pitot's q/p, usually 10⁻⁴…10⁻²), else expm1(e·ln1p(x)). The ratio of
/// successive terms is |(e − k)/(k + 1)|·x ≤ x and |C(e, k)| ≤ e/k, so after N terms the
/// remainder is below x^N/(N(1 − x)) of the first term e·x (derived): N = 6 for x ≤ 10⁻³ and
/// N = 9 for x ≤ 10⁻² keep it under 2⁻⁵⁹, below the rounding of a double. Neither form
/// loses digits to cancellation as `(1 + x).powf(e) − 1` does at small x.
#[inline(always)]
pub fn pow1p_m1(x: f64, e: f64) -> f64 {
    let n = if x <= 1e-3 {
        6
    } else if x <= 1e-2 {
        9
    } else {
        return (e * x.ln_1p()).exp_m1();
    };
    let mut s = 1.0;
    for k in (1..n).rev() {
        s = 1.0 + (e - k as f64) * INV[k + 1] * x * s;
    }
    e * x * s
}

impl Probe {
    /// A probe; the coefficient must lie in [0.5, 1.2].
    ///
    /// ```
    /// use stagna::{Probe, ProbeKind};
    /// assert!(Probe::new(ProbeKind::SType, 0.84).is_ok());
    /// assert_eq!(Probe::new(ProbeKind::PitotStatic, 1.9).unwrap_err().to_string(),
    ///            "probe: coefficient must be in [0.5, 1.2], got 1.9");
    /// ```
    pub fn new(kind: ProbeKind, coefficient: f64) -> Result<Self> {
        crate::error::within("probe", "coefficient", coefficient, "", 0.5, 1.2)?;
        Ok(Self { kind, coefficient, head_diameter: None, coefficient_source: None, notes: Vec::new() })
    }

    /// An S-type probe whose C_p is the mean of a Method 2 calibration record's two
    /// sides; the record's failed checks and an age beyond `max_age_days` (on the day
    /// `today_days`, days since 1970-01-01) become warnings on every velocity.
    pub fn from_calibration(
        record: &crate::methods::us_epa::calibration::CalibrationRecord,
        today_days: i64,
        max_age_days: Option<i64>,
    ) -> Result<Self> {
        let c = record.calibration()?;
        let mut p = Self::new(ProbeKind::SType, c.cp())?;
        p.coefficient_source = Some(format!("S-type calibration {} of {}", record.probe_id, record.date));
        p.notes = record.warnings(today_days, max_age_days);
        Ok(p)
    }

    /// The same probe with a head diameter (enables the low-velocity check).
    pub fn with_head_diameter(mut self, d: Length) -> Result<Self> {
        crate::error::positive("probe", "head diameter", d.si(), "m")?;
        self.head_diameter = Some(d);
        Ok(self)
    }

    /// Point velocity from a differential pressure and the fluid state at the probe.
    ///
    /// ```
    /// use stagna::{Fluid, HumidAir, Pressure, Probe, ProbeKind, Temperature, VelocityMethod};
    /// let air = Fluid::HumidAir(HumidAir::relative(0.0).unwrap())
    ///     .state(Pressure::pa(101_325.0), Temperature::celsius(20.0)).unwrap();
    /// let p = Probe::new(ProbeKind::PitotStatic, 1.0).unwrap();
    /// let v = p.velocity(Pressure::pa(250.0), &air, VelocityMethod::Auto).unwrap();
    /// assert!(v.velocity.si() > 20.0 && v.mach.unwrap() < 0.1);
    /// ```
    pub fn velocity(&self, dp: Pressure, fluid: &FluidState, method: VelocityMethod) -> Result<PointVelocity> {
        let dp_pa = finite("probe", "differential pressure", dp.si())?;
        let rho = crate::error::positive("probe", "fluid density", fluid.density.si(), "kg/m³")?;
        let p = fluid.pressure.si();
        let gamma = match method {
            VelocityMethod::Auto => fluid.isentropic_exponent,
            VelocityMethod::Incompressible => None,
        };
        let c = self.coefficient;
        let mut warnings = fluid.warnings.clone();
        warnings.extend(self.notes.iter().cloned());
        let v = match gamma {
            Some(g) => {
                crate::error::positive("probe", "static pressure", p, "Pa")?;
                isentropic(c, dp_pa, rho, p, g)
            }
            None => incompressible(c, dp_pa, rho),
        };
        let mach = fluid.isentropic_exponent.filter(|_| p > 0.0).map(|g| v.abs() / (g * p / rho).sqrt());
        if let Some(m) = mach {
            if m > ISO3966_MACH_LIMIT {
                warnings.push(Warning::new(
                    "compressibility",
                    format!("Mach number {m:.3} exceeds {ISO3966_MACH_LIMIT}, the limit of ISO 3966; the isentropic correction is approximate and probe coefficients may change"),
                ));
            } else if gamma.is_none() && m * m / 8.0 > COMPRESSIBILITY_NOTICE {
                warnings.push(Warning::new(
                    "compressibility",
                    format!(
                        "Mach number {m:.3}: the incompressible formula overstates the velocity by about {:.2} %",
                        m * m / 8.0 * 100.0
                    ),
                ));
            }
        }
        let direction = if dp_pa > 0.0 {
            FlowDirection::Forward
        } else if dp_pa == 0.0 {
            FlowDirection::NoFlow
        } else {
            warnings.push(Warning::new(
                "reverse-flow",
                format!(
                    "negative differential pressure ({} Pa): reverse flow at this point, or the total and static lines are swapped; the {} coefficient is not established for reverse flow",
                    format_number(dp_pa),
                    self.kind
                ),
            ));
            FlowDirection::Reverse
        };
        let probe_reynolds = match (self.head_diameter, fluid.viscosity) {
            (Some(d), Some(mu)) => Some(rho * v.abs() * d.si() / mu.si()),
            _ => None,
        };
        if let Some(re) = probe_reynolds.filter(|re| *re < LOW_REYNOLDS_LIMIT && direction != FlowDirection::NoFlow) {
            warnings.push(Warning::new(
                "low-velocity",
                format!("probe Reynolds number {re:.0} (head diameter) is below {LOW_REYNOLDS_LIMIT:.0}: viscous effects make the impact reading and so the velocity too high (ISO 3966 limit; unverified, recalled)"),
            ));
        }
        Ok(PointVelocity {
            velocity: Velocity::m_s(v),
            direction,
            mach,
            compressible: gamma.is_some(),
            probe_reynolds,
            dp,
            density: fluid.density,
            static_pressure: fluid.pressure,
            isentropic_exponent: gamma,
            coefficient: c,
            kind: self.kind,
            coefficient_source: self.coefficient_source.clone(),
            warnings,
        })
    }

    /// Incompressible velocities over whole columns: Δp (Pa) and density (kg/m³),
    /// each of one row or the output's length. Returns how many rows were
    /// reversed and how many had zero Δp. Stops at the first non-finite or
    /// non-positive-density row and names it.
    pub fn velocity_column(&self, dp_pa: &[f64], rho: &[f64], out: &mut [f64]) -> Result<ColumnCounts> {
        use crate::columns::{at, check_lengths};
        let n = out.len();
        check_lengths("probe velocity", n, &[("differential pressure", dp_pa.len()), ("density", rho.len())], n)?;
        let c = self.coefficient;
        let mut counts = ColumnCounts::default();
        for (row, o) in out.iter_mut().enumerate() {
            let dp = at(dp_pa, row);
            let r = at(rho, row);
            finite("probe", "differential pressure", dp).map_err(|e| e.at_row(row))?;
            crate::error::positive("probe", "fluid density", r, "kg/m³").map_err(|e| e.at_row(row))?;
            counts.reversed += usize::from(dp < 0.0);
            counts.zero += usize::from(dp == 0.0);
            *o = incompressible(c, dp, r);
        }
        Ok(counts)
    }
}

/// Counts of special rows from a column computation.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct ColumnCounts {
    /// Rows with negative Δp (reverse flow).
    pub reversed: usize,
    /// Rows with zero Δp (no flow).
    pub zero: usize,
}

impl PointVelocity {
    /// How the velocity was obtained.
    pub fn steps(&self) -> Steps {
        let n = format_number;
        let mut s = Steps::default();
        let (c, dp, rho) = (self.coefficient, self.dp.si(), self.density.si());
        if let Some(src) = &self.coefficient_source {
            s.push("probe coefficient", "C (from its record)", "C", format!("C of the {}", self.kind), n(c), src);
        }
        match self.isentropic_exponent {
            None => s.push(
                "point velocity (incompressible)",
                "v = C·√(2·Δp/ρ)",
                "v = C\\sqrt{2\\,\\Delta p/\\rho}",
                format!("{} · √(2 · {} Pa / {} kg/m³)", n(c), n(dp), n(rho)),
                format!("{} m/s", n(self.velocity.si())),
                "ISO 3966:2008 velocity equation; US EPA Method 2 for S-type probes",
            ),
            Some(g) => s.push(
                "point velocity (isentropic, subsonic)",
                "v = √(2γ/(γ−1) · p/ρ · [(1 + C²·Δp/p)^((γ−1)/γ) − 1])",
                "v = \\sqrt{\\frac{2\\gamma}{\\gamma-1}\\frac{p}{\\rho}\\left[\\left(1+\\frac{C^2\\Delta p}{p}\\right)^{(\\gamma-1)/\\gamma}-1\\right]}",
                format!(
                    "√(2·{g}/({g}−1) · {} Pa / {} kg/m³ · [(1 + {}²·{} Pa / {} Pa)^({}) − 1])",
                    n(self.static_pressure.si()),
                    n(rho),
                    n(c),
                    n(dp),
                    n(self.static_pressure.si()),
                    n((g - 1.0) / g)
                ),
                format!("{} m/s", n(self.velocity.si())),
                "isentropic flow of an ideal gas, ISO 3966:2008 compressibility correction",
            ),
        }
        if let (Some(m), Some(g)) = (self.mach, self.isentropic_exponent) {
            s.push(
                "Mach number",
                "M = v / √(γ·p/ρ)",
                "M = v/\\sqrt{\\gamma p/\\rho}",
                format!(
                    "{} m/s / √({g} · {} Pa / {} kg/m³)",
                    n(self.velocity.si()),
                    n(self.static_pressure.si()),
                    n(rho)
                ),
                n(m),
                "speed of sound of an ideal gas",
            );
        }
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::units::quantity::{DynamicViscosity, Temperature};

    fn gas_state(p: f64, rho: f64, gamma: Option<f64>) -> FluidState {
        FluidState {
            pressure: Pressure::pa(p),
            temperature: Temperature::celsius(20.0),
            density: Density::kg_m3(rho),
            viscosity: Some(DynamicViscosity::from_si(1.81e-5)),
            isentropic_exponent: gamma,
            model: "test",
            warnings: vec![],
        }
    }

    // check-values.md §4.1: air, Δp = 250 Pa, ρ = 1.200 kg/m³, C = 0.997 → v = 20.35118 m/s.
    #[test]
    fn pitot_static_incompressible() {
        let p = Probe::new(ProbeKind::PitotStatic, 0.997).unwrap();
        let v = p.velocity(Pressure::pa(250.0), &gas_state(101_325.0, 1.2, None), VelocityMethod::Auto).unwrap();
        assert!((v.velocity.si() - 20.351_18).abs() < 1e-5);
        assert!(!v.compressible);
    }

    // check-values.md §4.1: water pipe, 50 mm Hg under water at 20 °C, C = 1:
    // Δp = 6152.52 Pa → v = 3.5110 m/s (ρ = 998.2072).
    #[test]
    fn water_pitot() {
        let p = Probe::new(ProbeKind::WallTapPitot, 1.0).unwrap();
        let v = p.velocity(Pressure::pa(6152.52), &gas_state(3e5, 998.2072, None), VelocityMethod::Auto).unwrap();
        assert!((v.velocity.si() - 3.5110).abs() < 1e-4);
    }

    // check-values.md §4.3: air at 101 325 Pa, 293.15 K, R_air = 287.05, γ = 1.4:
    // Δp = 1000 Pa → 40.7550 (incompressible) and 40.6835 m/s (isentropic);
    // Δp = 6000 Pa → 99.8288 vs 98.8023 m/s, M = 0.288.
    #[test]
    fn binomial_series_matches_the_power_to_rounding() {
        // Oracle: expm1(e·ln1p(x)), accurate to a few ulps with no cancellation at small x.
        for gamma in [1.4_f64, 1.3, 1.2, 1.67] {
            let e = (gamma - 1.0) / gamma;
            let mut x = 1e-12_f64;
            while x < 0.2 {
                let want = (e * x.ln_1p()).exp_m1();
                let got = pow1p_m1(x, e);
                assert!(((got - want) / want).abs() < 1e-15, "γ {gamma}, x {x}: {got} vs {want}");
                x *= 1.37;
            }
        }
    }

    #[test]
    fn column_velocities_are_the_row_velocities_to_the_bit() {
        // Against Isentropic::velocity row by row (itself checked against the closed form
        // below): x = C²|Δp|/p on both sides of the series' switches (10⁻³, 10⁻²) and past
        // them, negative, zero and signed-zero Δp, NaN, several γ.
        let mut dps: Vec<f64> = vec![0.0, -0.0, f64::NAN, 1e-9, -3.0];
        for k in 0..4000 {
            let x = 10f64.powf(-7.0 + 6.5 * k as f64 / 4000.0);
            dps.push(x * 101_325.0);
            dps.push(-x * 101_325.0);
        }
        for p in [101_325.0, 98_000.0 * (1.0 + 1e-3 / 0.997f64.powi(2))] {
            // The second pressure puts one Δp a hair either side of x = 10⁻³.
            for &x in &[1e-3, 1e-2] {
                dps.push(x * p / 0.997f64.powi(2));
                dps.push(f64::from_bits((x * p / 0.997f64.powi(2)).to_bits() + 1));
            }
            for gamma in [1.4, 1.3, 1.667, 1.135] {
                let k = Isentropic::new(0.997, p, gamma);
                let rho: Vec<f64> = (0..dps.len()).map(|i| 0.5 + (i % 97) as f64 * 0.02).collect();
                let mut v = vec![0.0; dps.len()];
                k.velocities(&dps, &rho, &mut v);
                for ((&dp, &r), &got) in dps.iter().zip(&rho).zip(&v) {
                    let want = k.velocity(dp, r);
                    assert_eq!(got.to_bits(), want.to_bits(), "Δp {dp} Pa, ρ {r}, γ {gamma}: {got} against {want}");
                }
            }
        }
    }

    #[test]
    fn isentropic_correction() {
        let rho = 101_325.0 / (287.05 * 293.15);
        let st = gas_state(101_325.0, rho, Some(1.4));
        let p = Probe::new(ProbeKind::PitotStatic, 1.0).unwrap();
        let inc = p.velocity(Pressure::pa(1000.0), &st, VelocityMethod::Incompressible).unwrap();
        let isen = p.velocity(Pressure::pa(1000.0), &st, VelocityMethod::Auto).unwrap();
        assert!((inc.velocity.si() - 40.7550).abs() < 1e-4);
        assert!((isen.velocity.si() - 40.6835).abs() < 1e-4);
        let hi = p.velocity(Pressure::pa(6000.0), &st, VelocityMethod::Auto).unwrap();
        assert!((hi.velocity.si() - 98.8023).abs() < 1e-4);
        assert!((hi.mach.unwrap() - 0.288).abs() < 1e-3);
        assert!(hi.warnings.iter().any(|w| w.kind == "compressibility"), "M 0.288 > 0.25");
        let inc_hi = p.velocity(Pressure::pa(6000.0), &st, VelocityMethod::Incompressible).unwrap();
        assert!((inc_hi.velocity.si() - 99.8288).abs() < 1e-4);
    }

    // check-values.md §4.3 table: (p0 − p)/(½ρv²) = (1 + (γ−1)/2 M²)^{γ/(γ−1)} − 1 over ½γM²,
    // exact values at M = 0.05…0.70: 1.000625, 1.002503, 1.010040, 1.015723, 1.022703, 1.064072, 1.128575.
    #[test]
    fn compressibility_factor_table() {
        let (p, rho, g) = (101_325.0_f64, 1.2_f64, 1.4_f64);
        let a = (g * p / rho).sqrt();
        for (m, f) in [
            (0.05, 1.000_625),
            (0.10, 1.002_503),
            (0.20, 1.010_040),
            (0.25, 1.015_723),
            (0.30, 1.022_703),
            (0.50, 1.064_072),
            (0.70, 1.128_575),
        ] {
            let v = m * a;
            let dp = p * ((1.0 + (g - 1.0) / 2.0 * m * m).powf(g / (g - 1.0)) - 1.0);
            assert!((dp / (0.5 * rho * v * v) - f).abs() < 2e-6, "{m}");
            let got = isentropic(1.0, dp, rho, p, g);
            assert!((got / v - 1.0).abs() < 1e-12, "inverse at M {m}");
        }
    }

    #[test]
    fn zero_and_reverse_never_nan() {
        let p = Probe::new(ProbeKind::SType, 0.84).unwrap();
        let st = gas_state(101_325.0, 1.2, Some(1.4));
        let z = p.velocity(Pressure::pa(0.0), &st, VelocityMethod::Auto).unwrap();
        assert_eq!(z.velocity.si(), 0.0);
        assert_eq!(z.direction, FlowDirection::NoFlow);
        let r = p.velocity(Pressure::pa(-40.0), &st, VelocityMethod::Auto).unwrap();
        assert_eq!(r.direction, FlowDirection::Reverse);
        assert!(r.velocity.si() < 0.0);
        assert!(r.warnings.iter().any(|w| w.kind == "reverse-flow"));
        let mut out = [0.0; 3];
        let counts = p.velocity_column(&[10.0, 0.0, -10.0], &[1.2], &mut out).unwrap();
        assert_eq!(counts, ColumnCounts { reversed: 1, zero: 1 });
        assert!(out.iter().all(|v| v.is_finite()));
        assert_eq!(out[0], -out[2]);
    }

    #[test]
    fn low_velocity_warning() {
        // 0.5 m/s in air with an 8 mm head: Re = 1.2·0.5·0.008/1.81e-5 ≈ 265 (no warning);
        // 0.2 m/s: Re ≈ 106 (warning). Arithmetic, common practice, no source.
        let p = Probe::new(ProbeKind::PitotStatic, 1.0).unwrap().with_head_diameter(Length::mm(8.0)).unwrap();
        let st = gas_state(101_325.0, 1.2, None);
        let fast = p.velocity(Pressure::pa(0.5 * 1.2 * 0.25), &st, VelocityMethod::Auto).unwrap();
        assert!(fast.warnings.is_empty(), "{:?}", fast.warnings);
        let slow = p.velocity(Pressure::pa(0.5 * 1.2 * 0.04), &st, VelocityMethod::Auto).unwrap();
        assert!(slow.warnings.iter().any(|w| w.kind == "low-velocity"));
    }

    #[test]
    fn bad_inputs() {
        let p = Probe::new(ProbeKind::PitotStatic, 1.0).unwrap();
        let e = p.velocity(Pressure::pa(f64::NAN), &gas_state(1e5, 1.2, None), VelocityMethod::Auto).unwrap_err();
        assert_eq!(e.to_string(), "probe: differential pressure must be a finite number, got NaN");
        let e = p.velocity(Pressure::pa(10.0), &gas_state(1e5, 0.0, None), VelocityMethod::Auto).unwrap_err();
        assert_eq!(e.to_string(), "probe: fluid density must be greater than 0, got 0 kg/m³");
        let e = p.velocity_column(&[1.0, 2.0], &[1.2, -1.0], &mut [0.0; 2]).unwrap_err();
        assert_eq!(e.to_string(), "row 2: probe: fluid density must be greater than 0, got -1 kg/m³");
    }

    proptest::proptest! {
        // Velocity grows with Δp, the isentropic value stays below the incompressible one
        // (by about M²/8, ISO 3966 compressibility correction), and the sign follows Δp.
        #[test]
        fn velocity_monotonic(dp in 0.1f64..20_000.0, ddp in 0.1f64..1000.0) {
            let p = Probe::new(ProbeKind::PitotStatic, 1.0).unwrap();
            let st = gas_state(101_325.0, 1.2, Some(1.4));
            let a = p.velocity(Pressure::pa(dp), &st, VelocityMethod::Auto).unwrap().velocity.si();
            let b = p.velocity(Pressure::pa(dp + ddp), &st, VelocityMethod::Auto).unwrap().velocity.si();
            let inc = p.velocity(Pressure::pa(dp), &st, VelocityMethod::Incompressible).unwrap().velocity.si();
            let neg = p.velocity(Pressure::pa(-dp), &st, VelocityMethod::Auto).unwrap().velocity.si();
            proptest::prop_assert!(b > a && a <= inc && neg == -a);
        }
    }

    #[test]
    fn steps_show_substitution() {
        let p = Probe::new(ProbeKind::PitotStatic, 0.997).unwrap();
        let v = p.velocity(Pressure::pa(250.0), &gas_state(101_325.0, 1.2, None), VelocityMethod::Auto).unwrap();
        let text = v.steps().to_string();
        assert!(text.contains("0.997 · √(2 · 250 Pa / 1.2 kg/m³)"), "{text}");
        assert!(text.contains("20.3512 m/s"), "{text}");
        assert!(v.steps().to_latex().contains("\\sqrt"));
    }
}
