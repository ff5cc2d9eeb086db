//! Darcy friction factor of pipe flow: laminar, the Colebrook equation solved
//! to machine precision, and two explicit approximations named as such.
//!
//! # Formula
//! - Laminar (Re < 2300): f = 64/Re
//! - Colebrook: 1/√f = −2 log₁₀(ε/(3.7 D) + 2.51/(Re √f)), solved by Newton's
//!   method on x = 1/√f until the step is below 4 ulp
//! - Haaland (approximation): 1/√f = −1.8 log₁₀[(ε/D/3.7)^1.11 + 6.9/Re]
//! - Swamee–Jain (approximation): f = 0.25 / [log₁₀(ε/(3.7 D) + 5.74/Re^0.9)]²
//!
//! where Re is the Reynolds number on the hydraulic diameter D and ε/D the
//! relative roughness. Regimes: laminar below Re = 2300, transitional to
//! 4000 (no formula is reliable there; a warning says so), turbulent above
//! (critical Reynolds number: common practice, no source).
//!
//! # References
//! - C. F. Colebrook, *Turbulent flow in pipes...*, J. Inst. Civ. Eng. 11 (1939) 133.
//! - S. E. Haaland, *Simple and explicit formulas for the friction factor in
//!   turbulent pipe flow*, J. Fluids Eng. 105 (1983) 89 (valid 4e3–1e8, ε/D 1e-6–5e-2).
//! - P. K. Swamee, A. K. Jain, *Explicit equations for pipe-flow problems*,
//!   J. Hydraul. Div. ASCE 102 (1976) 657.

use crate::error::{Error, Result, Warning, finite};

/// Which turbulent friction relation to use.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum FrictionModel {
    /// Colebrook equation, solved iteratively (the reference).
    #[default]
    Colebrook,
    /// Haaland's explicit approximation (within about 1.5 % of Colebrook).
    Haaland,
    /// Swamee–Jain's explicit approximation (within about 1 % of Colebrook).
    SwameeJain,
}

impl FrictionModel {
    /// Name for reports, saying whether it is an approximation.
    pub fn name(self) -> &'static str {
        match self {
            Self::Colebrook => "Colebrook (1939), solved exactly",
            Self::Haaland => "Haaland (1983) explicit approximation",
            Self::SwameeJain => "Swamee-Jain (1976) explicit approximation",
        }
    }
}

/// Flow regime from the Reynolds number.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Regime {
    /// Re < 2300.
    Laminar,
    /// 2300 ≤ Re ≤ 4000.
    Transitional,
    /// Re > 4000.
    Turbulent,
}

impl Regime {
    /// Regime of a Reynolds number.
    pub fn of(re: f64) -> Self {
        if re < 2300.0 {
            Self::Laminar
        } else if re <= 4000.0 {
            Self::Transitional
        } else {
            Self::Turbulent
        }
    }
}

/// A friction factor with how it was obtained.
#[derive(Debug, Clone, PartialEq)]
pub struct FrictionFactor {
    /// Darcy friction factor f.
    pub f: f64,
    /// Regime.
    pub regime: Regime,
    /// The relation used ("laminar 64/Re" or the turbulent model's name).
    pub model: &'static str,
    /// Remarks.
    pub warnings: Vec<Warning>,
}

/// Colebrook friction factor, solved to machine precision (no checks).
pub(crate) fn colebrook(re: f64, rel_roughness: f64) -> f64 {
    let a = rel_roughness / 3.7;
    let b = 2.51 / re;
    let ln10 = std::f64::consts::LN_10;
    // Start from Swamee–Jain, within about 1 % of the root.
    let mut x = 1.0 / swamee_jain(re, rel_roughness).sqrt();
    for _ in 0..50 {
        let arg = a + b * x;
        let g = x + 2.0 * arg.log10();
        let dg = 1.0 + 2.0 * b / (arg * ln10);
        let step = g / dg;
        x -= step;
        if step.abs() <= 4.0 * f64::EPSILON * x {
            break;
        }
    }
    1.0 / (x * x)
}

pub(crate) fn haaland(re: f64, rel_roughness: f64) -> f64 {
    let x = -1.8 * ((rel_roughness / 3.7).powf(1.11) + 6.9 / re).log10();
    1.0 / (x * x)
}

pub(crate) fn swamee_jain(re: f64, rel_roughness: f64) -> f64 {
    0.25 / (rel_roughness / 3.7 + 5.74 / re.powf(0.9)).log10().powi(2)
}

/// Darcy friction factor for a Reynolds number and relative roughness ε/D.
///
/// ```
/// use stagna::section::friction::{friction_factor, FrictionModel};
/// let f = friction_factor(1e5, 1e-4, FrictionModel::Colebrook).unwrap();
/// assert!((f.f - 0.018513866077471).abs() < 1e-14); // `fluids` 1.3.1 Colebrook(1e5, 1e-4)
/// ```
pub fn friction_factor(re: f64, rel_roughness: f64, model: FrictionModel) -> Result<FrictionFactor> {
    finite("friction factor", "Reynolds number", re)?;
    finite("friction factor", "relative roughness", rel_roughness)?;
    if re <= 0.0 {
        return Err(Error::OutOfRange {
            context: "friction factor",
            param: "Reynolds number",
            value: re,
            unit: "",
            allowed: "greater than 0".into(),
        });
    }
    if !(0.0..0.1).contains(&rel_roughness) {
        return Err(Error::OutOfRange {
            context: "friction factor",
            param: "relative roughness ε/D",
            value: rel_roughness,
            unit: "",
            allowed: "in [0, 0.1)".into(),
        });
    }
    let regime = Regime::of(re);
    let mut warnings = Vec::new();
    if regime == Regime::Laminar {
        return Ok(FrictionFactor { f: 64.0 / re, regime, model: "laminar 64/Re", warnings });
    }
    if regime == Regime::Transitional {
        warnings.push(Warning::new(
            "transitional",
            format!("Reynolds number {re:.0} is transitional (2300–4000): the friction factor and the velocity profile are uncertain"),
        ));
    }
    let f = match model {
        FrictionModel::Colebrook => colebrook(re, rel_roughness),
        FrictionModel::Haaland => {
            if re > 1e8 || rel_roughness > 0.05 {
                warnings.push(Warning::new(
                    "outside-validity",
                    "Haaland's formula is fitted for 4e3 ≤ Re ≤ 1e8 and ε/D ≤ 0.05",
                ));
            }
            haaland(re, rel_roughness.max(1e-12))
        }
        FrictionModel::SwameeJain => swamee_jain(re, rel_roughness),
    };
    Ok(FrictionFactor { f, regime, model: model.name(), warnings })
}

#[cfg(test)]
mod tests {
    use super::*;

    // `fluids` 1.3.1: Colebrook (exact, Lambert W), Haaland, Swamee_Jain_1976, computed for this
    // project; the Colebrook(1e5, 1e-4) and Haaland(1e5, 1e-4) values are also the docstring
    // examples of `fluids` (check-values.md §6.1).
    const GRID: [(f64, f64, f64, f64, f64); 10] = [
        (4e3, 0.0, 0.039_907_014_055_634_9, 0.040_422_849_329_196_16, 0.040_551_412_594_169_98),
        (1e4, 0.0, 0.030_882_950_353_487_69, 0.030_886_203_731_458_7, 0.030_972_044_378_261_697),
        (1e4, 1e-3, 0.032_381_806_363_092_72, 0.032_174_894_739_979_074, 0.032_665_297_745_427_43),
        (1e5, 0.0, 0.017_989_773_084_273_84, 0.017_824_939_201_368_7, 0.017_862_555_049_240_728),
        (1e5, 1e-4, 0.018_513_866_077_471_648, 0.018_265_053_014_793_857, 0.018_452_424_431_901_808),
        (1e5, 1e-3, 0.022_174_535_944_515_097, 0.021_966_214_014_076_606, 0.022_342_399_325_420_106),
        (1e5, 1e-2, 0.038_503_543_527_335_19, 0.038_538_505_906_726_785, 0.038_750_927_211_322_304),
        (1e6, 1e-4, 0.013_441_437_692_508_489, 0.013_326_159_538_701_88, 0.013_507_695_879_564_031),
        (1e7, 1e-3, 0.019_667_052_432_096_76, 0.019_701_934_553_452_413, 0.019_686_171_580_594_693),
        (1e8, 1e-6, 0.006_432_556_519_692_28, 0.006_445_137_792_277_497, 0.006_505_777_885_690_829),
    ];

    #[test]
    fn against_fluids_grid() {
        for (re, ed, c, h, s) in GRID {
            let fc = friction_factor(re, ed, FrictionModel::Colebrook).unwrap().f;
            assert!((fc / c - 1.0).abs() < 1e-13, "Colebrook {re} {ed}: {fc} vs {c}");
            let fh = friction_factor(re, ed, FrictionModel::Haaland).unwrap().f;
            assert!((fh / h - 1.0).abs() < 1e-9, "Haaland {re} {ed}: {fh} vs {h}");
            let fs = friction_factor(re, ed, FrictionModel::SwameeJain).unwrap().f;
            // `fluids` writes the paper's 5.74 as 6.97^0.9 = 5.7395; that moves f by < 3e-6.
            assert!((fs / s - 1.0).abs() < 3e-6, "Swamee-Jain {re} {ed}: {fs} vs {s}");
        }
    }

    // Fully rough limit 1/√f = −2 log10(ε/3.7D): ε/D = 1e-2 → 0.03790 (check-values.md §6.1,
    // White's table as read there); Colebrook at Re = 1e12 approaches it.
    #[test]
    fn fully_rough_limit() {
        let f = friction_factor(1e12, 1e-2, FrictionModel::Colebrook).unwrap().f;
        assert!((f - 0.037_90).abs() < 5e-5);
    }

    #[test]
    fn laminar_and_regimes() {
        let f = friction_factor(1000.0, 0.0, FrictionModel::Colebrook).unwrap();
        assert_eq!(f.f, 0.064); // `fluids` friction_laminar(1000) = 0.064
        assert_eq!(f.regime, Regime::Laminar);
        let t = friction_factor(3000.0, 0.0, FrictionModel::Colebrook).unwrap();
        assert_eq!(t.regime, Regime::Transitional);
        assert_eq!(t.warnings.len(), 1);
        assert!(friction_factor(-5.0, 0.0, FrictionModel::Colebrook).is_err());
        let e = friction_factor(1e5, 0.2, FrictionModel::Colebrook).unwrap_err().to_string();
        assert_eq!(e, "friction factor: relative roughness ε/D must be in [0, 0.1), got 0.2");
    }

    proptest::proptest! {
        // f falls with Re and rises with roughness in turbulent flow (Moody chart; common practice, no source).
        #[test]
        fn monotonic(lre in 3.7f64..8.0, ed in 0.0f64..0.05) {
            let re = 10f64.powf(lre);
            let a = colebrook(re, ed);
            proptest::prop_assert!(colebrook(re * 1.1, ed) <= a * (1.0 + 1e-12));
            proptest::prop_assert!(colebrook(re, ed + 1e-4) > a);
        }
    }
}
