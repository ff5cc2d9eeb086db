//! Moist air: density by the CIPM-2007 equation, viscosity by Sutherland's
//! law (dry air), SI units (Pa, K, kg/m³, Pa·s).
//!
//! # Formula (CIPM-2007)
//! ρ = p M_a / (Z R T) · [1 − x_v (1 − M_v / M_a)]
//!
//! where p is the absolute pressure (Pa), T the temperature (K), t = T − 273.15,
//! M_a = [28.965 46 + 12.011 (x_CO2 − 0.0004)]·10⁻³ kg/mol the dry-air molar
//! mass, M_v = 18.015 28·10⁻³ kg/mol, R = 8.314 472 J/(mol·K) (the value the
//! CIPM equation was fitted with), x_v the mole fraction of water vapour:
//! x_v = h f(p,t) p_sv(T) / p from relative humidity h, or
//! x_v = f(p,t_d) p_sv(T_d) / p from the dew point, with
//! p_sv = exp(A T² + B T + C + D/T) Pa and f = α + β p + γ t²; Z is the
//! compressibility factor (virial form, constants a0…e below).
//!
//! Valid 600–1100 hPa and 15–27 °C; outside, a warning is attached (the
//! ideal-gas mixture route in [`crate::GasMixture`] is meant for stack gas).
//! Relative standard uncertainty of the formula itself: 22·10⁻⁶.
//!
//! # Formula (Sutherland, U.S. Standard Atmosphere 1976)
//! μ = β T^{3/2} / (T + S), β = 1.458·10⁻⁶ kg/(m·s·K^{1/2}), S = 110.4 K.
//! Humidity lowers μ by under 1 % at room conditions; it is ignored here.
//!
//! # References
//! - A. Picard, R. S. Davis, M. Gläser, K. Fujii, *Revised formula for the
//!   density of moist air (CIPM-2007)*, Metrologia 45 (2008) 149–155.
//! - U.S. Standard Atmosphere, 1976 (NOAA/NASA/USAF), eq. 51.

use crate::error::{Error, Result, Warning, finite, within};
use crate::units::constants::{MOLAR_MASS_WATER, ZERO_CELSIUS};
use crate::units::quantity::{Density, DynamicViscosity, Pressure, Temperature};

const R_CIPM: f64 = 8.314_472; // J/(mol·K), Picard et al. 2008 Table 1
const PSV: [f64; 4] = [1.237_884_7e-5, -1.912_131_6e-2, 33.937_110_47, -6.343_164_5e3]; // A, B, C, D
const ENH: [f64; 3] = [1.000_62, 3.14e-8, 5.6e-7]; // α, β (1/Pa), γ (1/K²)
const Z_A: [f64; 3] = [1.581_23e-6, -2.933_1e-8, 1.104_3e-10]; // a0 K/Pa, a1 1/Pa, a2 1/(K·Pa)
const Z_B: [f64; 2] = [5.707e-6, -2.051e-8]; // b0 K/Pa, b1 1/Pa
const Z_C: [f64; 2] = [1.989_8e-4, -2.376e-6]; // c0 K/Pa, c1 1/Pa
const Z_D: f64 = 1.83e-11; // K²/Pa²
const Z_E: f64 = -0.765e-8; // K²/Pa²
const SUTHERLAND_BETA: f64 = 1.458e-6; // kg/(m·s·K^½), USSA 1976
const SUTHERLAND_S: f64 = 110.4; // K, USSA 1976

/// Ratio of specific heats of dry air used for compressibility corrections,
/// γ = 1.4 (ideal diatomic gas; common practice, no source).
pub const AIR_ISENTROPIC_EXPONENT: f64 = 1.4;

/// How the moisture of the air is given.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Humidity {
    /// Relative humidity as a fraction 0…1.
    Relative(f64),
    /// Dew-point temperature.
    DewPoint(Temperature),
    /// Mole fraction of water vapour.
    MoleFraction(f64),
}

/// Moist air of a given humidity and CO₂ content.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HumidAir {
    /// Moisture.
    pub humidity: Humidity,
    /// Mole fraction of CO₂ (CIPM reference 0.0004).
    pub x_co2: f64,
}

impl Default for HumidAir {
    fn default() -> Self {
        Self { humidity: Humidity::Relative(0.0), x_co2: 0.0004 }
    }
}

/// Detailed CIPM-2007 result, for worked steps and tests.
#[derive(Debug, Clone, PartialEq)]
pub struct HumidAirState {
    /// Absolute pressure used.
    pub pressure: Pressure,
    /// Temperature used.
    pub temperature: Temperature,
    /// Moisture as given.
    pub humidity: Humidity,
    /// Density.
    pub density: Density,
    /// Compressibility factor Z.
    pub z: f64,
    /// Mole fraction of water vapour.
    pub x_v: f64,
    /// Saturation vapour pressure at T, Pa.
    pub p_sv: f64,
    /// Enhancement factor f.
    pub f: f64,
    /// Dry-air molar mass, kg/mol.
    pub molar_mass_dry: f64,
    /// Notes on validity.
    pub warnings: Vec<Warning>,
}

/// Saturation vapour pressure over water, Pa (CIPM-2007 eq. A1.1).
pub(crate) fn p_sv(t_k: f64) -> f64 {
    let [a, b, c, d] = PSV;
    (a * t_k * t_k + b * t_k + c + d / t_k).exp()
}

fn enhancement(p: f64, t_c: f64) -> f64 {
    ENH[0] + ENH[1] * p + ENH[2] * t_c * t_c
}

/// Dry-air viscosity by Sutherland's law (USSA 1976 constants), Pa·s.
///
/// ```
/// use stagna::{humid_air, Temperature};
/// let mu = humid_air::sutherland_viscosity(Temperature::celsius(20.0));
/// assert!((mu.si() * 1e6 - 18.1341).abs() < 1e-4); // `fluids` 1.3.1 ATMOSPHERE_1976.viscosity
/// ```
pub fn sutherland_viscosity(t: Temperature) -> DynamicViscosity {
    let tk = t.k();
    DynamicViscosity::from_si(SUTHERLAND_BETA * tk.powf(1.5) / (tk + SUTHERLAND_S))
}

impl HumidAir {
    /// Air with relative humidity `rh` (fraction 0…1) and the CIPM reference CO₂ fraction.
    pub fn relative(rh: f64) -> Result<Self> {
        within("humid air", "relative humidity", rh, "(fraction)", 0.0, 1.0)?;
        Ok(Self { humidity: Humidity::Relative(rh), x_co2: 0.0004 })
    }

    /// Air with a given dew point and the CIPM reference CO₂ fraction.
    pub fn dew_point(td: Temperature) -> Result<Self> {
        finite("humid air", "dew point", td.k())?;
        Ok(Self { humidity: Humidity::DewPoint(td), x_co2: 0.0004 })
    }

    /// The same air with another CO₂ mole fraction (0…0.01).
    pub fn with_co2(mut self, x_co2: f64) -> Result<Self> {
        within("humid air", "CO2 mole fraction", x_co2, "(fraction)", 0.0, 0.01)?;
        self.x_co2 = x_co2;
        Ok(self)
    }

    /// Full CIPM-2007 evaluation at absolute pressure `p` and temperature `t`.
    ///
    /// ```
    /// use stagna::{HumidAir, Pressure, Temperature};
    /// let s = HumidAir::relative(0.5).unwrap()
    ///     .state(Pressure::pa(101_325.0), Temperature::celsius(20.0)).unwrap();
    /// assert!((s.density.si() - 1.199314).abs() < 1e-6); // check-values.md §2.1
    /// ```
    pub fn state(&self, p: Pressure, t: Temperature) -> Result<HumidAirState> {
        let p_pa = finite("humid air", "pressure", p.si())?;
        let t_k = finite("humid air", "temperature", t.k())?;
        if p_pa <= 0.0 {
            return Err(Error::OutOfRange {
                context: "humid air",
                param: "pressure",
                value: p_pa,
                unit: "Pa",
                allowed: "an absolute pressure greater than 0 (not gauge)".into(),
            });
        }
        if t_k <= 0.0 {
            return Err(Error::OutOfRange {
                context: "humid air",
                param: "temperature",
                value: t.c(),
                unit: "°C",
                allowed: "above absolute zero".into(),
            });
        }
        let (rho, z, x_v, psv, f, m_a) = self.compute(p_pa, t_k)?;
        let t_c = t_k - ZERO_CELSIUS;
        let mut warnings = Vec::new();
        if !(15.0..=27.0).contains(&t_c) || !(60_000.0..=110_000.0).contains(&p_pa) {
            warnings.push(Warning::new(
                "outside-validity",
                format!(
                    "CIPM-2007 is fitted for 15–27 °C and 600–1100 hPa; at {t_c:.1} °C and {:.1} hPa the ideal-gas error grows slowly (about 6e-5 at 40 °C)",
                    p_pa / 100.0
                ),
            ));
        }
        Ok(HumidAirState {
            pressure: p,
            temperature: t,
            humidity: self.humidity,
            density: Density::kg_m3(rho),
            z,
            x_v,
            p_sv: psv,
            f,
            molar_mass_dry: m_a,
            warnings,
        })
    }

    /// CIPM-2007 core: (ρ, Z, x_v, p_sv, f, M_a) for p in Pa and T in K, no warnings.
    fn compute(&self, p_pa: f64, t_k: f64) -> Result<(f64, f64, f64, f64, f64, f64)> {
        let t_c = t_k - ZERO_CELSIUS;
        let psv = p_sv(t_k);
        let f = enhancement(p_pa, t_c);
        let x_v = match self.humidity {
            Humidity::Relative(h) => {
                within("humid air", "relative humidity", h, "(fraction)", 0.0, 1.0)?;
                h * f * psv / p_pa
            }
            Humidity::DewPoint(td) => {
                let td_k = finite("humid air", "dew point", td.k())?;
                if td_k > t_k + 1e-9 {
                    return Err(Error::Inconsistent {
                        context: "humid air",
                        message: format!(
                            "dew point {td} is above the air temperature {}; the air cannot hold that much water",
                            Temperature::kelvin(t_k)
                        ),
                    });
                }
                enhancement(p_pa, td_k - ZERO_CELSIUS) * p_sv(td_k) / p_pa
            }
            Humidity::MoleFraction(x) => within("humid air", "water mole fraction", x, "(fraction)", 0.0, 1.0)?,
        };
        let m_a = (28.965_46 + 12.011 * (self.x_co2 - 0.0004)) * 1e-3;
        let z = 1.0
            - p_pa / t_k
                * (Z_A[0]
                    + Z_A[1] * t_c
                    + Z_A[2] * t_c * t_c
                    + (Z_B[0] + Z_B[1] * t_c) * x_v
                    + (Z_C[0] + Z_C[1] * t_c) * x_v * x_v)
            + (p_pa / t_k).powi(2) * (Z_D + Z_E * x_v * x_v);
        let rho = p_pa * m_a / (z * R_CIPM * t_k) * (1.0 - x_v * (1.0 - MOLAR_MASS_WATER / m_a));
        Ok((rho, z, x_v, psv, f, m_a))
    }

    /// Density in kg/m³ for p in Pa (absolute) and T in K, without collecting
    /// warnings: the per-row path of column kernels.
    pub fn density_si(&self, p_pa: f64, t_k: f64) -> Result<f64> {
        finite("humid air", "pressure", p_pa)?;
        finite("humid air", "temperature", t_k)?;
        if p_pa <= 0.0 || t_k <= 0.0 {
            return Err(Error::Inconsistent {
                context: "humid air",
                message: format!("pressure {p_pa} Pa and temperature {t_k} K must be absolute and positive"),
            });
        }
        Ok(self.compute(p_pa, t_k)?.0)
    }

    /// Density only.
    pub fn density(&self, p: Pressure, t: Temperature) -> Result<Density> {
        Ok(self.state(p, t)?.density)
    }

    /// Density over whole columns (p in Pa absolute, T in K; either may have one row).
    pub fn density_column(&self, p_pa: &[f64], t_k: &[f64], out: &mut [f64]) -> Result<()> {
        let n = out.len();
        crate::columns::check_lengths(
            "humid air density",
            n,
            &[("pressure", p_pa.len()), ("temperature", t_k.len())],
            n,
        )?;
        for (row, o) in out.iter_mut().enumerate() {
            let p = Pressure::pa(crate::columns::at(p_pa, row));
            let t = Temperature::kelvin(crate::columns::at(t_k, row));
            *o = self.state(p, t).map_err(|e| e.at_row(row))?.density.si();
        }
        Ok(())
    }
}

impl HumidAirState {
    /// How the density was obtained (CIPM-2007, step by step).
    pub fn steps(&self) -> crate::Steps {
        use crate::units::quantity::format_number as n;
        let src = "CIPM-2007, Picard et al., Metrologia 45 (2008) 149";
        let (p, tk) = (self.pressure.si(), self.temperature.k());
        let mut s = crate::Steps::default();
        s.push(
            "saturation vapour pressure",
            "p_sv = exp(A·T² + B·T + C + D/T)",
            "p_{sv} = \\exp(A T^2 + B T + C + D/T)",
            format!("exp(A·{0}² + B·{0} + C + D/{0}) with T in K", n(tk)),
            format!("{} Pa", n(self.p_sv)),
            src,
        );
        s.push(
            "enhancement factor",
            "f = α + β·p + γ·t²",
            "f = \\alpha + \\beta p + \\gamma t^2",
            format!("1.00062 + 3.14e-8 · {} + 5.6e-7 · {}²", n(p), n(self.temperature.c())),
            n(self.f),
            src,
        );
        let (formula, latex, subst) = match self.humidity {
            Humidity::Relative(h) => (
                "x_v = h·f·p_sv/p",
                "x_v = h f p_{sv}/p",
                format!("{} · {} · {} Pa / {} Pa", n(h), n(self.f), n(self.p_sv), n(p)),
            ),
            Humidity::DewPoint(td) => (
                "x_v = f(p,t_d)·p_sv(T_d)/p",
                "x_v = f(p,t_d)\\, p_{sv}(T_d)/p",
                format!("f(p, {td}) · p_sv({td}) / {} Pa", n(p)),
            ),
            Humidity::MoleFraction(x) => ("x_v (given)", "x_v", n(x)),
        };
        s.push("water-vapour mole fraction", formula, latex, subst, n(self.x_v), src);
        s.push(
            "compressibility factor",
            "Z = 1 − (p/T)[a0 + a1·t + a2·t² + (b0 + b1·t)·x_v + (c0 + c1·t)·x_v²] + (p/T)²(d + e·x_v²)",
            "Z = 1 - \\tfrac{p}{T}[\\dots] + \\tfrac{p^2}{T^2}(d + e x_v^2)",
            format!("p/T = {} Pa/K, x_v = {}", n(p / tk), n(self.x_v)),
            n(self.z),
            src,
        );
        s.push(
            "moist-air density",
            "ρ = p·M_a/(Z·R·T)·[1 − x_v·(1 − M_v/M_a)]",
            "\\rho = \\frac{p M_a}{Z R T}\\left[1 - x_v\\left(1 - \\frac{M_v}{M_a}\\right)\\right]",
            format!(
                "{} Pa · {} kg/mol / ({} · 8.314472 · {} K) · [1 − {} · (1 − 0.01801528/{})]",
                n(p),
                n(self.molar_mass_dry),
                n(self.z),
                n(tk),
                n(self.x_v),
                n(self.molar_mass_dry)
            ),
            format!("{} kg/m³", n(self.density.si())),
            src,
        );
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn state(p: f64, t: f64, rh: f64) -> HumidAirState {
        HumidAir::relative(rh).unwrap().state(Pressure::pa(p), Temperature::celsius(t)).unwrap()
    }

    // check-values.md §2.1: our CIPM-2007 implementation there [C], constants read from
    // Picard et al. 2008 via two independent open implementations that agree.
    #[test]
    fn cipm_2007_table() {
        let rows = [
            (101_325.0, 20.0, 0.50, 1.199_314, 0.999_614_8, 0.011_589),
            (101_325.0, 20.0, 0.00, 1.204_557, 0.999_643_1, 0.0),
            (101_325.0, 0.0, 0.00, 1.293_050, 0.999_416_0, 0.0),
            (101_325.0, 15.0, 0.00, 1.225_521, 0.999_592_2, 0.0),
            (101_325.0, 25.0, 0.50, 1.177_315, 0.999_650_8, 0.015_706),
            (100_000.0, 20.0, 0.50, 1.183_557, 0.999_619_3, 0.011_742),
            (101_325.0, 20.0, 1.00, 1.194_087, 0.999_572_1, 0.023_179),
            (60_000.0, 20.0, 0.50, 0.707_934, 0.999_755_0, 0.019_546),
        ];
        for (p, t, rh, rho, z, xv) in rows {
            let s = state(p, t, rh);
            assert!((s.density.si() - rho).abs() < 1.5e-6, "{p} {t} {rh}: {}", s.density.si());
            assert!((s.z - z).abs() < 1.5e-7, "Z {p} {t} {rh}: {}", s.z);
            assert!((s.x_v - xv).abs() < 1.5e-6, "x_v {p} {t} {rh}: {}", s.x_v);
        }
    }

    // masscor R package test values attributed to a mass-metrology reference:
    // 10 °C, 730 mmHg, RH 40 % → 1.19569 kg/m³ (check-values.md §2.1).
    #[test]
    fn masscor_example() {
        let s = state(730.0 * 133.322_387_415, 10.0, 0.40);
        assert!((s.density.si() - 1.195_69).abs() < 1e-5);
        assert!(!s.warnings.is_empty(), "10 °C is outside 15–27 °C");
    }

    // CoolProp 8.0.0 HAPropsSI('Vha','T',293.15,'P',101325,'R',0.5): 1/Vha = 1.199359 kg/m³,
    // a different humid-air model; agreement to 5e-5 relative (check-values.md §2.1).
    #[test]
    fn coolprop_humid_air_cross_check() {
        assert!((state(101_325.0, 20.0, 0.5).density.si() / 1.199_359 - 1.0).abs() < 5e-5);
    }

    // CIPM p_sv against IAPWS-IF97 saturation pressure (check-values.md §2.1):
    // 20 °C 2339.163 Pa (CIPM), 30 °C 4246.799 Pa (CIPM).
    #[test]
    fn saturation_vapour_pressure() {
        assert!((p_sv(293.15) - 2339.163).abs() < 1e-3);
        assert!((p_sv(303.15) - 4246.799).abs() < 1e-3);
        let if97 = crate::fluids::water::if97_saturation_pressure(293.15);
        assert!((p_sv(293.15) / if97 - 1.0).abs() < 5e-5);
    }

    #[test]
    fn dew_point_equals_relative_humidity_route() {
        // At dew point = air temperature the air is saturated: RH = 100 % (definition).
        let t = Temperature::celsius(20.0);
        let a = HumidAir::dew_point(t).unwrap().state(Pressure::pa(101_325.0), t).unwrap();
        let b = state(101_325.0, 20.0, 1.0);
        assert!((a.density.si() - b.density.si()).abs() < 1e-12);
        let e = HumidAir::dew_point(Temperature::celsius(25.0))
            .unwrap()
            .state(Pressure::pa(101_325.0), t)
            .unwrap_err()
            .to_string();
        assert!(e.contains("dew point 25 °C is above the air temperature 20 °C"), "{e}");
    }

    // check-values.md §2.2, USSA-1976 Sutherland column (`fluids` 1.3.1).
    #[test]
    fn sutherland_table() {
        for (t, mu) in
            [(-20.0, 16.1533), (0.0, 17.1608), (20.0, 18.1341), (100.0, 21.7341), (300.0, 29.2678), (500.0, 35.4750)]
        {
            let got = sutherland_viscosity(Temperature::celsius(t)).si() * 1e6;
            assert!((got - mu).abs() < 1e-4, "{t}: {got}");
        }
    }

    // Picard et al. 2008: M_a = [28.965 46 + 12.011 (x_CO2 − 0.0004)] g/mol; for dry air the
    // density scales with M_a alone (Z does not depend on x_CO2).
    #[test]
    fn co2_fraction_changes_molar_mass() {
        let base = HumidAir::default().state(Pressure::pa(101_325.0), Temperature::celsius(20.0)).unwrap();
        let more = HumidAir::default()
            .with_co2(0.0005)
            .unwrap()
            .state(Pressure::pa(101_325.0), Temperature::celsius(20.0))
            .unwrap();
        let ratio = (28.965_46 + 12.011 * 0.0001) / 28.965_46;
        assert!((more.density.si() / base.density.si() - ratio).abs() < 1e-12);
        assert!(HumidAir::default().with_co2(0.2).is_err());
    }

    #[test]
    fn column_matches_scalar() {
        let air = HumidAir::relative(0.4).unwrap();
        let t = [288.15, 293.15, 298.15];
        let mut out = [0.0; 3];
        air.density_column(&[101_325.0], &t, &mut out).unwrap();
        for (tk, o) in t.iter().zip(out) {
            assert_eq!(air.density(Pressure::pa(101_325.0), Temperature::kelvin(*tk)).unwrap().si(), o);
        }
        let e = air.density_column(&[101_325.0, -1.0, 1.0], &t, &mut out).unwrap_err();
        assert!(e.to_string().starts_with("row 2: humid air: pressure"), "{e}");
    }

    #[test]
    fn steps_reach_the_density() {
        let s = state(101_325.0, 20.0, 0.5);
        let text = s.steps().to_string();
        assert!(text.contains("2339.16 Pa"), "{text}"); // p_sv(20 °C), check-values.md §2.1
        assert!(text.contains("1.19931 kg/m³"), "{text}");
        assert_eq!(s.steps().0.len(), 5);
    }

    #[test]
    fn humidity_lowers_density_and_bad_inputs() {
        let mut last = f64::INFINITY;
        for i in 0..=10 {
            let r = state(101_325.0, 22.0, f64::from(i) / 10.0).density.si();
            assert!(r < last);
            last = r;
        }
        assert_eq!(
            HumidAir::relative(1.5).unwrap_err().to_string(),
            "humid air: relative humidity must be in [0, 1], got 1.5 (fraction)"
        );
        let e = HumidAir::default().state(Pressure::pa(-5.0), Temperature::celsius(20.0)).unwrap_err();
        assert!(e.to_string().contains("not gauge"));
    }
}
