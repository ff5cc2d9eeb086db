//! Liquid manometers: from a deflection to a differential pressure, Pa.
//!
//! # Formula
//! With g the local gravity, ρ_m the gauge-liquid density at its
//! temperature and ρ_f the density of the fluid above it in the lines:
//! - U-tube: Δp = (ρ_m − ρ_f) g h
//! - inverted U-tube (gauge fluid lighter, on top): Δp = (ρ_f − ρ_m) g h
//! - inclined tube with reservoir, reading L along the tube at angle θ from
//!   horizontal, tube bore area a, reservoir area A: Δp = (ρ_m − ρ_f) g L (sin θ + a/A)
//! - well (reservoir) type, rise h in the tube: Δp = (ρ_m − ρ_f) g h (1 + a/A)
//! - two-liquid micromanometer, heavy liquid ρ₂ in the U-bend, light liquid ρ₁
//!   above it up to reservoirs, h the interface separation:
//!   Δp = g h [ρ₂ − ρ₁ (1 − a/A)] − ρ_f g h a/A
//!
//! h is the deflection: one value, the difference of a scale reading and its
//! zero reading, or for two legs (rise of the low-pressure leg) + (fall of
//! the high-pressure leg), each against its zero reading. A negative h means
//! the pressure difference is reversed.
//!
//! # References
//! Hydrostatic balance of each arrangement (derived; common practice, no
//! source). The reservoir and two-liquid terms follow from volume continuity
//! between tube and reservoir. Scale expansion is not corrected.

use crate::error::{Error, Result, Warning, finite, within};
use crate::fluids::gauge_liquid::GaugeLiquid;
use crate::steps::Steps;
use crate::units::quantity::{Acceleration, Density, Length, Pressure, Temperature, format_number};

/// The arrangement of a manometer.
#[derive(Debug, Clone, PartialEq)]
pub enum ManometerKind {
    /// Vertical U-tube, gauge liquid below the working fluid.
    UTube,
    /// Inverted U-tube, lighter gauge fluid (often air) on top of a liquid.
    InvertedUTube,
    /// Inclined tube with a reservoir.
    Inclined {
        /// Angle of the tube from horizontal, degrees, in (0, 90].
        angle_deg: f64,
        /// Tube bore area over reservoir area, a/A, in [0, 1).
        area_ratio: f64,
    },
    /// Vertical well (reservoir) type.
    Well {
        /// Tube bore area over reservoir area, a/A, in [0, 1).
        area_ratio: f64,
    },
    /// Two-liquid micromanometer; the manometer's `liquid` is the heavy one.
    TwoLiquid {
        /// The lighter liquid above the interface.
        light: GaugeLiquid,
        /// Tube bore area over reservoir area, a/A, in [0, 1).
        area_ratio: f64,
    },
}

/// How the deflection was read.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Reading {
    /// The deflection itself (along the tube for an inclined gauge).
    Deflection(Length),
    /// One scale reading and its zero reading.
    Scale {
        /// Reading under flow.
        reading: Length,
        /// Reading with both sides open to the same pressure.
        zero: Length,
    },
    /// Two legs of a U-tube, heights on an upward scale, each with its zero.
    Legs {
        /// High-pressure leg under flow.
        high: Length,
        /// Low-pressure leg under flow.
        low: Length,
        /// High-pressure leg at zero.
        high_zero: Length,
        /// Low-pressure leg at zero.
        low_zero: Length,
    },
}

impl Reading {
    /// The deflection h.
    pub fn deflection(&self) -> Result<Length> {
        let c = "manometer reading";
        Ok(Length::m(match *self {
            Reading::Deflection(h) => finite(c, "deflection", h.si())?,
            Reading::Scale { reading, zero } => {
                finite(c, "reading", reading.si())? - finite(c, "zero reading", zero.si())?
            }
            Reading::Legs { high, low, high_zero, low_zero } => {
                (finite(c, "low leg", low.si())? - finite(c, "low leg zero", low_zero.si())?)
                    + (finite(c, "high leg zero", high_zero.si())? - finite(c, "high leg", high.si())?)
            }
        }))
    }
}

/// A manometer: arrangement, gauge liquid and local gravity (fixed at construction,
/// since the geometric factor is computed once).
#[derive(Debug, Clone, PartialEq)]
pub struct Manometer {
    kind: ManometerKind,
    liquid: GaugeLiquid,
    gravity: Acceleration,
    /// g times the geometric factor of the arrangement (sin θ + a/A, 1 + a/A or 1),
    /// computed once in `new`.
    g_factor: f64,
}

/// A differential pressure from a manometer reading, with what went into it.
#[derive(Debug, Clone, PartialEq)]
pub struct ManometerResult {
    /// Differential pressure (negative when reversed).
    pub dp: Pressure,
    /// Deflection used.
    pub deflection: Length,
    /// Gauge-liquid density used.
    pub gauge_density: Density,
    /// Working-fluid density used.
    pub fluid_density: Density,
    /// Light-liquid density (two-liquid gauges).
    pub light_density: Option<Density>,
    /// Arrangement.
    pub kind: ManometerKind,
    /// Gravity used.
    pub gravity: Acceleration,
    /// Remarks.
    pub warnings: Vec<Warning>,
}

fn area_ratio_ok(r: f64) -> Result<f64> {
    finite("manometer", "area ratio a/A", r)?;
    if (0.0..1.0).contains(&r) {
        Ok(r)
    } else {
        Err(Error::OutOfRange {
            context: "manometer",
            param: "area ratio a/A",
            value: r,
            unit: "",
            allowed: "in [0, 1) (tube bore area over reservoir area)".into(),
        })
    }
}

impl Manometer {
    /// A manometer; checks the arrangement's geometry.
    ///
    /// ```
    /// use stagna::{gravity, GaugeLiquid, Manometer, ManometerKind};
    /// let m = Manometer::new(ManometerKind::Inclined { angle_deg: 95.0, area_ratio: 0.0 },
    ///                        GaugeLiquid::Mercury, gravity::standard());
    /// assert_eq!(m.unwrap_err().to_string(),
    ///            "manometer: tube angle must be in (0, 90] ° from horizontal, got 95 °");
    /// ```
    pub fn new(kind: ManometerKind, liquid: GaugeLiquid, gravity: Acceleration) -> Result<Self> {
        within("manometer", "gravity", gravity.si(), "m/s²", 9.7, 9.9)?;
        match &kind {
            ManometerKind::Inclined { angle_deg, area_ratio } => {
                finite("manometer", "tube angle", *angle_deg)?;
                if !(*angle_deg > 0.0 && *angle_deg <= 90.0) {
                    return Err(Error::OutOfRange {
                        context: "manometer",
                        param: "tube angle",
                        value: *angle_deg,
                        unit: "°",
                        allowed: "in (0, 90] ° from horizontal".into(),
                    });
                }
                area_ratio_ok(*area_ratio)?;
            }
            ManometerKind::Well { area_ratio } | ManometerKind::TwoLiquid { area_ratio, .. } => {
                area_ratio_ok(*area_ratio)?;
            }
            ManometerKind::UTube | ManometerKind::InvertedUTube => {}
        }
        let geometry = match &kind {
            ManometerKind::Inclined { angle_deg, area_ratio } => angle_deg.to_radians().sin() + area_ratio,
            ManometerKind::Well { area_ratio } => 1.0 + area_ratio,
            _ => 1.0,
        };
        Ok(Self { g_factor: gravity.si() * geometry, kind, liquid, gravity })
    }

    /// The arrangement.
    pub fn kind(&self) -> &ManometerKind {
        &self.kind
    }

    /// The gauge liquid (the heavy one for a two-liquid gauge).
    pub fn liquid(&self) -> &GaugeLiquid {
        &self.liquid
    }

    /// The local acceleration of free fall used.
    pub fn gravity(&self) -> Acceleration {
        self.gravity
    }

    /// Differential pressure from a reading, the gauge-liquid temperature and
    /// the density of the fluid above the gauge liquid.
    pub fn differential_pressure(
        &self,
        reading: Reading,
        gauge_temperature: Temperature,
        fluid_density: Density,
    ) -> Result<ManometerResult> {
        let h = reading.deflection()?;
        let rho_m = self.liquid.density(gauge_temperature)?;
        let rho_f = finite("manometer", "working-fluid density", fluid_density.si())?;
        if rho_f < 0.0 {
            return Err(Error::OutOfRange {
                context: "manometer",
                param: "working-fluid density",
                value: rho_f,
                unit: "kg/m³",
                allowed: "0 or more".into(),
            });
        }
        let mut warnings = self.liquid.warnings(gauge_temperature);
        let (dp, light) = self.dp_si(h.si(), rho_m.si(), rho_f, gauge_temperature, &mut warnings)?;
        Ok(ManometerResult {
            dp: Pressure::pa(dp),
            deflection: h,
            gauge_density: rho_m,
            fluid_density: Density::kg_m3(rho_f),
            light_density: light,
            kind: self.kind.clone(),
            gravity: self.gravity,
            warnings,
        })
    }

    /// Δp in Pa from h (m), gauge-liquid density ρ_m, light-liquid density (two-liquid
    /// gauges only) and working-fluid density ρ_f: the per-row path of column kernels.
    #[inline]
    pub fn dp_from_densities(&self, h: f64, rho_m: f64, rho_light: Option<f64>, rho_f: f64) -> Result<f64> {
        let g = self.gravity.si();
        let denser = |rho_m: f64| -> Result<()> {
            if rho_m > rho_f {
                Ok(())
            } else {
                Err(Error::DensityOrder {
                    relation: "exceed",
                    gauge: rho_m,
                    working: rho_f,
                    hint: "; for a lighter gauge fluid use an inverted U-tube",
                })
            }
        };
        Ok(match &self.kind {
            ManometerKind::UTube => {
                denser(rho_m)?;
                (rho_m - rho_f) * g * h
            }
            ManometerKind::InvertedUTube => {
                if rho_m >= rho_f {
                    return Err(Error::DensityOrder {
                        relation: "be below",
                        gauge: rho_m,
                        working: rho_f,
                        hint: " in an inverted U-tube",
                    });
                }
                (rho_f - rho_m) * g * h
            }
            ManometerKind::Inclined { .. } | ManometerKind::Well { .. } => {
                denser(rho_m)?;
                (rho_m - rho_f) * self.g_factor * h
            }
            ManometerKind::TwoLiquid { area_ratio, .. } => {
                let rho1 = rho_light.ok_or_else(|| Error::Inconsistent {
                    context: "manometer",
                    message: "a two-liquid gauge needs the light liquid's density".into(),
                })?;
                if rho_m <= rho1 {
                    return Err(Error::Inconsistent {
                        context: "manometer",
                        message: format!(
                            "two-liquid gauge: heavy liquid density {rho_m:.4} kg/m³ must exceed light liquid density {rho1:.4} kg/m³"
                        ),
                    });
                }
                if rho1 <= rho_f {
                    return Err(Error::DensityOrder {
                        relation: "exceed",
                        gauge: rho1,
                        working: rho_f,
                        hint: " (light liquid of a two-liquid gauge)",
                    });
                }
                g * h * (rho_m - rho1 * (1.0 - area_ratio)) - rho_f * g * h * area_ratio
            }
        })
    }

    /// [`Manometer::dp_from_densities`] a column at a time for the one-liquid gauges: each
    /// `h[i]` (m) becomes its Δp (Pa), with the same operations in the same order, so the
    /// same bits. `false` (and `h` untouched) for a two-liquid gauge, or when some row's
    /// densities are in the wrong order: the caller then takes the rows one by one, which
    /// names the row and the error.
    pub fn dp_from_density_columns(&self, h: &mut [f64], rho_m: &[f64], rho_f: &[f64]) -> bool {
        if rho_m.len() != h.len() || rho_f.len() != h.len() {
            return false;
        }
        let g = self.gravity.si();
        // The order checks over the whole column first (one well-predicted branch per row
        // and no early exit), then the arithmetic, which then vectorises.
        let (factor, inverted) = match &self.kind {
            ManometerKind::UTube => (g, false),
            ManometerKind::Inclined { .. } | ManometerKind::Well { .. } => (self.g_factor, false),
            ManometerKind::InvertedUTube => (g, true),
            ManometerKind::TwoLiquid { .. } => return false,
        };
        let ordered = if inverted {
            rho_m.iter().zip(rho_f).all(|(m, f)| m < f)
        } else {
            rho_m.iter().zip(rho_f).all(|(m, f)| m > f)
        };
        if !ordered {
            return false;
        }
        // h·((ρ_m − ρ_f)·g) is the per-row ((ρ_m − ρ_f)·g)·h: IEEE multiplication commutes.
        if inverted {
            for ((h, &m), &f) in h.iter_mut().zip(rho_m).zip(rho_f) {
                *h *= (f - m) * factor;
            }
        } else {
            for ((h, &m), &f) in h.iter_mut().zip(rho_m).zip(rho_f) {
                *h *= (m - f) * factor;
            }
        }
        true
    }

    /// Light-liquid density of a two-liquid gauge at `t` (None for other kinds).
    pub fn light_density(&self, t: Temperature) -> Result<Option<f64>> {
        match &self.kind {
            ManometerKind::TwoLiquid { light, .. } => Ok(Some(light.density(t)?.si())),
            _ => Ok(None),
        }
    }

    fn dp_si(
        &self,
        h: f64,
        rho_m: f64,
        rho_f: f64,
        gauge_temperature: Temperature,
        warnings: &mut Vec<Warning>,
    ) -> Result<(f64, Option<Density>)> {
        let light = self.light_density(gauge_temperature)?;
        if let ManometerKind::TwoLiquid { light: l, .. } = &self.kind {
            warnings.extend(l.warnings(gauge_temperature));
        }
        Ok((self.dp_from_densities(h, rho_m, light, rho_f)?, light.map(Density::kg_m3)))
    }

    /// Differential pressure over whole columns: deflections h (m), gauge
    /// temperatures (K) and working-fluid densities (kg/m³), each of one row
    /// or of the output's length. Stops at the first bad row and names it.
    pub fn dp_column(&self, h_m: &[f64], gauge_t_k: &[f64], fluid_rho: &[f64], out: &mut [f64]) -> Result<()> {
        use crate::columns::{at, check_lengths};
        let n = out.len();
        check_lengths(
            "manometer",
            n,
            &[("deflection", h_m.len()), ("gauge temperature", gauge_t_k.len()), ("fluid density", fluid_rho.len())],
            n,
        )?;
        let mut scratch = Vec::new();
        // The gauge density is recomputed only when the temperature changes (it
        // usually repeats within a traverse).
        let mut last_t = f64::NAN;
        let mut rho_m = 0.0;
        for (row, o) in out.iter_mut().enumerate() {
            let t = at(gauge_t_k, row);
            if t.to_bits() != last_t.to_bits() {
                rho_m = self.liquid.density(Temperature::kelvin(t)).map_err(|e| e.at_row(row))?.si();
                last_t = t;
            }
            let h = finite("manometer", "deflection", at(h_m, row)).map_err(|e| e.at_row(row))?;
            let rho_f = finite("manometer", "working-fluid density", at(fluid_rho, row)).map_err(|e| e.at_row(row))?;
            *o = self.dp_si(h, rho_m, rho_f, Temperature::kelvin(t), &mut scratch).map_err(|e| e.at_row(row))?.0;
            scratch.clear();
        }
        Ok(())
    }
}

impl ManometerResult {
    /// How the differential pressure was obtained.
    pub fn steps(&self) -> Steps {
        let mut s = Steps::default();
        let (g, h, rm, rf) =
            (self.gravity.si(), self.deflection.si(), self.gauge_density.si(), self.fluid_density.si());
        let n = format_number;
        let src = "hydrostatic balance of the manometer (derived; common practice, no source)";
        let result = format!("{} Pa", n(self.dp.si()));
        match &self.kind {
            ManometerKind::UTube => s.push(
                "differential pressure (U-tube)",
                "Δp = (ρ_m − ρ_f)·g·h",
                "\\Delta p = (\\rho_m - \\rho_f)\\, g\\, h",
                format!("({} − {}) kg/m³ · {} m/s² · {} m", n(rm), n(rf), n(g), n(h)),
                result,
                src,
            ),
            ManometerKind::InvertedUTube => s.push(
                "differential pressure (inverted U-tube)",
                "Δp = (ρ_f − ρ_m)·g·h",
                "\\Delta p = (\\rho_f - \\rho_m)\\, g\\, h",
                format!("({} − {}) kg/m³ · {} m/s² · {} m", n(rf), n(rm), n(g), n(h)),
                result,
                src,
            ),
            ManometerKind::Inclined { angle_deg, area_ratio } => s.push(
                "differential pressure (inclined tube)",
                "Δp = (ρ_m − ρ_f)·g·L·(sin θ + a/A)",
                "\\Delta p = (\\rho_m - \\rho_f)\\, g\\, L\\, (\\sin\\theta + a/A)",
                format!(
                    "({} − {}) kg/m³ · {} m/s² · {} m · (sin {}° + {})",
                    n(rm),
                    n(rf),
                    n(g),
                    n(h),
                    n(*angle_deg),
                    n(*area_ratio)
                ),
                result,
                src,
            ),
            ManometerKind::Well { area_ratio } => s.push(
                "differential pressure (well type)",
                "Δp = (ρ_m − ρ_f)·g·h·(1 + a/A)",
                "\\Delta p = (\\rho_m - \\rho_f)\\, g\\, h\\, (1 + a/A)",
                format!("({} − {}) kg/m³ · {} m/s² · {} m · (1 + {})", n(rm), n(rf), n(g), n(h), n(*area_ratio)),
                result,
                src,
            ),
            ManometerKind::TwoLiquid { area_ratio, .. } => {
                let r1 = self.light_density.map_or(f64::NAN, |d| d.si());
                s.push(
                    "differential pressure (two-liquid gauge)",
                    "Δp = g·h·[ρ₂ − ρ₁·(1 − a/A)] − ρ_f·g·h·a/A",
                    "\\Delta p = g h [\\rho_2 - \\rho_1 (1 - a/A)] - \\rho_f g h\\, a/A",
                    format!(
                        "{} m/s² · {} m · [{} − {} · (1 − {})] − {} · {} · {} · {}",
                        n(g),
                        n(h),
                        n(rm),
                        n(r1),
                        n(*area_ratio),
                        n(rf),
                        n(g),
                        n(h),
                        n(*area_ratio)
                    ),
                    result,
                    src,
                )
            }
        }
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fluids::gauge_liquid::UserLiquid;
    use crate::fluids::gravity;
    use crate::fluids::water::WaterModel;

    fn user(name: &str, rho: f64) -> GaugeLiquid {
        GaugeLiquid::User(UserLiquid::new(name, Density::kg_m3(rho), Temperature::celsius(20.0), None).unwrap())
    }

    fn dp(kind: ManometerKind, liquid: GaugeLiquid, h_mm: f64, rho_f: f64) -> f64 {
        Manometer::new(kind, liquid, gravity::standard())
            .unwrap()
            .differential_pressure(
                Reading::Deflection(Length::mm(h_mm)),
                Temperature::celsius(20.0),
                Density::kg_m3(rho_f),
            )
            .unwrap()
            .dp
            .si()
    }

    // check-values.md §3.3 check numbers, computed there from the hydrostatic equations with g_n.
    #[test]
    fn published_manometer_checks() {
        // water (998.2072) under air (1.2), h = 100 mm → 977.7301 Pa
        assert!((dp(ManometerKind::UTube, user("water", 998.2072), 100.0, 1.2) - 977.7301).abs() < 1e-4);
        // mercury (13545.85) under water (998.2072), 100 mm → 12305.034 Pa
        assert!((dp(ManometerKind::UTube, user("Hg", 13_545.85), 100.0, 998.2072) - 12_305.034).abs() < 1e-3);
        // inclined 10°, L = 150 mm, oil 826 under air 1.2, a/A = (3/50)² → 215.0514 Pa
        let k = ManometerKind::Inclined { angle_deg: 10.0, area_ratio: (3.0_f64 / 50.0).powi(2) };
        assert!((dp(k, user("oil", 826.0), 150.0, 1.2) - 215.0514).abs() < 1e-4);
        let k = ManometerKind::Inclined { angle_deg: 10.0, area_ratio: 0.0 };
        assert!((dp(k, user("oil", 826.0), 150.0, 1.2) - 210.6836).abs() < 1e-4);
        // well type, water under air, h = 100 mm, a/A = (6/60)² → 987.5074 Pa
        let k = ManometerKind::Well { area_ratio: 0.01 };
        assert!((dp(k, user("water", 998.2072), 100.0, 1.2) - 987.5074).abs() < 1e-4);
        // two-liquid: ρ1 = 998.2, ρ2 = 1050.0, a/A = 0.01, h = 80 mm, no gas term → 48.4700 Pa
        let k = ManometerKind::TwoLiquid { light: user("water", 998.2), area_ratio: 0.01 };
        assert!((dp(k, user("heavy", 1050.0), 80.0, 0.0) - 48.4700).abs() < 1e-4);
        let k = ManometerKind::TwoLiquid { light: user("water", 998.2), area_ratio: 0.0 };
        assert!((dp(k, user("heavy", 1050.0), 80.0, 0.0) - 40.6388).abs() < 1e-4);
    }

    // check-values.md §4.1: 50 mm Hg under water at 20 °C → Δp = 6152.52 Pa (mercury 13545.85,
    // water IAPWS-95 998.2072). With our mercury model and IF97 water the same to 0.01 Pa.
    #[test]
    fn mercury_under_water() {
        let rho_w =
            crate::Water::new(WaterModel::If97).density(Temperature::celsius(20.0), Pressure::pa(101_325.0)).unwrap();
        let m = Manometer::new(ManometerKind::UTube, GaugeLiquid::Mercury, gravity::standard()).unwrap();
        let r =
            m.differential_pressure(Reading::Deflection(Length::mm(50.0)), Temperature::celsius(20.0), rho_w).unwrap();
        assert!((r.dp.si() - 6152.52).abs() < 0.01, "{}", r.dp.si());
        assert!(r.steps().to_string().contains("Δp = (ρ_m − ρ_f)·g·h"));
    }

    // A reservoir-gauge sensitivity check computed in check-values.md §3.3: Δh_water = 25 mm,
    // SG_oil = 0.827, d/D = 6/18 → L = 27.207 mm of oil along a vertical reservoir tube.
    #[test]
    fn reservoir_gauge_sensitivity() {
        let water = 1000.0 * 9.80665 * 0.025;
        let k = ManometerKind::Well { area_ratio: (6.0_f64 / 18.0).powi(2) };
        let per_mm = dp(k, user("oil", 827.0), 1.0, 0.0);
        assert!((water / per_mm - 27.207).abs() < 1e-3);
    }

    #[test]
    fn readings_give_the_same_deflection() {
        let legs = Reading::Legs {
            high: Length::mm(140.0),
            low: Length::mm(260.0),
            high_zero: Length::mm(200.0),
            low_zero: Length::mm(200.0),
        };
        assert!((legs.deflection().unwrap().si() - 0.120).abs() < 1e-12);
        let scale = Reading::Scale { reading: Length::mm(57.5), zero: Length::mm(2.5) };
        assert!((scale.deflection().unwrap().si() - 0.055).abs() < 1e-12);
        let nan = Reading::Scale { reading: Length::mm(f64::NAN), zero: Length::mm(0.0) };
        assert_eq!(
            nan.deflection().unwrap_err().to_string(),
            "manometer reading: reading must be a finite number, got NaN"
        );
    }

    #[test]
    fn bad_geometry_and_liquids() {
        let g = gravity::standard();
        let e = Manometer::new(ManometerKind::Well { area_ratio: -0.1 }, GaugeLiquid::Mercury, g).unwrap_err();
        assert_eq!(
            e.to_string(),
            "manometer: area ratio a/A must be in [0, 1) (tube bore area over reservoir area), got -0.1"
        );
        let e = Manometer::new(ManometerKind::Inclined { angle_deg: 0.0, area_ratio: 0.0 }, GaugeLiquid::Mercury, g)
            .unwrap_err();
        assert!(e.to_string().contains("tube angle must be in (0, 90]"));
        let m = Manometer::new(ManometerKind::UTube, user("light oil", 800.0), g).unwrap();
        let e = m
            .differential_pressure(
                Reading::Deflection(Length::mm(10.0)),
                Temperature::celsius(20.0),
                Density::kg_m3(998.0),
            )
            .unwrap_err();
        assert_eq!(
            e.to_string(),
            "manometer: gauge liquid density must exceed the working fluid's (998.0000 kg/m³), got 800.0000 kg/m³; for a lighter gauge fluid use an inverted U-tube"
        );
        let m = Manometer::new(ManometerKind::InvertedUTube, GaugeLiquid::Water(WaterModel::If97), g).unwrap();
        assert!(
            m.differential_pressure(
                Reading::Deflection(Length::mm(10.0)),
                Temperature::celsius(20.0),
                Density::kg_m3(1.2)
            )
            .is_err()
        );
        let e = m
            .differential_pressure(
                Reading::Deflection(Length::mm(10.0)),
                Temperature::celsius(20.0),
                Density::kg_m3(f64::INFINITY),
            )
            .unwrap_err();
        assert_eq!(e.to_string(), "manometer: working-fluid density must be a finite number, got inf");
    }

    #[test]
    fn inverted_u_tube_air_over_water() {
        // Air (1.2) over water (998.2): Δp = (998.2 − 1.2)·g·h (hydrostatics, common practice, no source)
        let m = Manometer::new(ManometerKind::InvertedUTube, user("air", 1.2), gravity::standard()).unwrap();
        let r = m
            .differential_pressure(
                Reading::Deflection(Length::mm(100.0)),
                Temperature::celsius(20.0),
                Density::kg_m3(998.2),
            )
            .unwrap();
        assert!((r.dp.si() - 997.0 * 9.80665 * 0.1).abs() < 1e-9);
    }

    proptest::proptest! {
        // Δp grows with the deflection and with the gauge-liquid density (hydrostatics,
        // common practice, no source).
        #[test]
        fn dp_monotonic(h1 in 0.0f64..0.5, dh in 1e-4f64..0.1, rho in 900.0f64..14_000.0) {
            let k = ManometerKind::Inclined { angle_deg: 30.0, area_ratio: 0.01 };
            let a = dp(k.clone(), user("a", rho), h1 * 1e3, 1.2);
            let b = dp(k.clone(), user("a", rho), (h1 + dh) * 1e3, 1.2);
            let c = dp(k, user("a", rho + 50.0), (h1 + dh) * 1e3, 1.2);
            proptest::prop_assert!(b > a && c > b);
        }
    }

    #[test]
    fn density_columns_give_the_per_row_bits_or_leave_the_rows_to_it() {
        let liquids = || [user("oil", 826.0), user("water", 998.2), GaugeLiquid::Mercury];
        let kinds = [
            ManometerKind::UTube,
            ManometerKind::InvertedUTube,
            ManometerKind::Inclined { angle_deg: 30.0, area_ratio: 0.002 },
            ManometerKind::Well { area_ratio: 0.01 },
        ];
        // Deflections of both signs and sizes; densities around the gauge liquids' and
        // the working fluids' (air, water), so that some rows are in the wrong order.
        let mut h = Vec::new();
        let mut rho_m = Vec::new();
        let mut rho_f = Vec::new();
        for i in 0..997 {
            let x = i as f64;
            h.push((x * 0.37).sin() * 0.2 + 1e-4 * x);
            rho_m.push([826.0, 998.2, 13_546.0, 1.1][i % 4] + (x * 0.11).cos());
            rho_f.push([1.2, 998.0, 1.19, 999.0, 13_600.0][i % 5] + 0.01 * (x * 0.7).sin());
        }
        for kind in kinds.clone() {
            for liquid in liquids() {
                let m = Manometer::new(kind.clone(), liquid, gravity::standard()).unwrap();
                // Whole columns, and short windows (mostly all in order, or all not).
                for (lo, hi) in [(0, h.len()), (0, 1), (10, 12), (400, 403), (996, 997)] {
                    let rows: Vec<_> = (lo..hi).map(|i| m.dp_from_densities(h[i], rho_m[i], None, rho_f[i])).collect();
                    let mut col = h[lo..hi].to_vec();
                    let ok = m.dp_from_density_columns(&mut col, &rho_m[lo..hi], &rho_f[lo..hi]);
                    assert_eq!(ok, rows.iter().all(|r| r.is_ok()), "{kind:?} rows {lo}..{hi}");
                    if ok {
                        for (c, r) in col.iter().zip(&rows) {
                            assert_eq!(c.to_bits(), r.as_ref().unwrap().to_bits(), "{kind:?}");
                        }
                    }
                }
            }
        }
        // A whole column in order (oil over air; air over water in an inverted U-tube) is
        // taken here, to the bit.
        for kind in kinds {
            let m = Manometer::new(kind.clone(), user("oil", 826.0), gravity::standard()).unwrap();
            let inverted = matches!(kind, ManometerKind::InvertedUTube);
            let heavy: Vec<f64> = (0..500).map(|i| 826.0 + (i as f64 * 0.3).sin()).collect();
            let light: Vec<f64> = (0..500).map(|i| 1.2 + 0.01 * (i as f64).cos()).collect();
            let (gm, gf) = if inverted { (&light, &heavy) } else { (&heavy, &light) };
            let mut col = h[..500].to_vec();
            assert!(m.dp_from_density_columns(&mut col, gm, gf), "{kind:?}");
            for i in 0..500 {
                let r = m.dp_from_densities(h[i], gm[i], None, gf[i]).unwrap();
                assert_eq!(col[i].to_bits(), r.to_bits(), "{kind:?} row {i}");
            }
        }
        // NaN densities and mismatched lengths are left to the rows.
        let m = Manometer::new(ManometerKind::UTube, user("oil", 826.0), gravity::standard()).unwrap();
        assert!(!m.dp_from_density_columns(&mut [0.01], &[f64::NAN], &[1.2]));
        assert!(!m.dp_from_density_columns(&mut [0.01, 0.02], &[826.0], &[1.2, 1.2]));
        let two = Manometer::new(
            ManometerKind::TwoLiquid { light: user("water", 998.2), area_ratio: 0.01 },
            user("oil", 1200.0),
            gravity::standard(),
        );
        let two = two.unwrap();
        assert!(!two.dp_from_density_columns(&mut [0.01], &[826.0], &[1.2]), "two-liquid gauges are left to the rows");
    }

    #[test]
    fn column_matches_scalar_and_names_rows() {
        let m = Manometer::new(
            ManometerKind::Inclined { angle_deg: 30.0, area_ratio: 0.002 },
            user("oil", 826.0),
            gravity::standard(),
        )
        .unwrap();
        let h = [0.010, 0.020, -0.005];
        let mut out = [0.0; 3];
        m.dp_column(&h, &[293.15], &[1.2], &mut out).unwrap();
        for (hi, o) in h.iter().zip(out) {
            let s = m
                .differential_pressure(
                    Reading::Deflection(Length::m(*hi)),
                    Temperature::kelvin(293.15),
                    Density::kg_m3(1.2),
                )
                .unwrap();
            assert_eq!(s.dp.si(), o);
        }
        let e = m.dp_column(&[0.01, f64::NAN], &[293.15], &[1.2], &mut [0.0; 2]).unwrap_err();
        assert_eq!(e.to_string(), "row 2: manometer: deflection must be a finite number, got NaN");
        assert!(m.dp_column(&[0.01, 0.02], &[293.15, 1.0, 2.0], &[1.2], &mut [0.0; 2]).is_err());
    }
}
