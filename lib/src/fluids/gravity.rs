//! Acceleration of free fall: standard, or local from latitude and elevation.
//!
//! # Formula
//! Normal gravity on the WGS84 ellipsoid (Somigliana closed form):
//!
//! g₀(φ) = g_e (1 + k sin²φ) / √(1 − e² sin²φ)
//!
//! and above it (truncated series):
//!
//! g(φ, h) = g₀ [1 − (2/a)(1 + f + m − 2f sin²φ) h + 3h²/a²]
//!
//! where φ is the geodetic latitude, h the ellipsoidal height (m, taken here
//! as the elevation), g_e = 9.780 325 3359 m/s², k = 0.001 931 852 652 41,
//! e² = 0.006 694 379 990 13, a = 6 378 137 m, f = 1/298.257 223 563,
//! m = ω²a²b/GM = 0.003 449 786 506 84.
//!
//! # References
//! - NIMA TR8350.2, *Department of Defense World Geodetic System 1984*, 3rd
//!   ed. (2000), eq. 4-1 and eq. 4-3, Table 3.1.

use crate::error::{Result, within};
use crate::units::constants::STANDARD_GRAVITY;
use crate::units::quantity::{Acceleration, Length};

const G_EQUATOR: f64 = 9.780_325_335_9; // TR8350.2 Table 3.4
const SOMIGLIANA_K: f64 = 0.001_931_852_652_41; // TR8350.2 eq. 4-1
const E2: f64 = 0.006_694_379_990_13; // first eccentricity squared, TR8350.2 Table 3.3
const SEMI_MAJOR_AXIS_M: f64 = 6_378_137.0; // TR8350.2 Table 3.1
const FLATTENING: f64 = 1.0 / 298.257_223_563; // TR8350.2 Table 3.1
const M_RATIO: f64 = 0.003_449_786_506_84; // ω²a²b/GM, TR8350.2 Table 3.3

/// Standard gravity g_n = 9.806 65 m/s² (exact; 3rd CGPM 1901).
pub fn standard() -> Acceleration {
    Acceleration::from_si(STANDARD_GRAVITY)
}

/// Local normal gravity at a geodetic latitude (degrees, −90…90) and an
/// elevation (−500 m … 9000 m), WGS84 (see the module doc).
///
/// ```
/// use stagna::{gravity, Length};
/// let g = gravity::local(45.0, Length::m(0.0)).unwrap();
/// assert!((g.si() - 9.8061978).abs() < 1e-7); // WGS84 normal gravity at 45°
/// ```
pub fn local(latitude_deg: f64, elevation: Length) -> Result<Acceleration> {
    within("gravity", "latitude", latitude_deg, "°", -90.0, 90.0)?;
    let h = within("gravity", "elevation", elevation.si(), "m", -500.0, 9000.0)?;
    let s2 = latitude_deg.to_radians().sin().powi(2);
    let g0 = G_EQUATOR * (1.0 + SOMIGLIANA_K * s2) / (1.0 - E2 * s2).sqrt();
    let a = SEMI_MAJOR_AXIS_M;
    let g = g0 * (1.0 - 2.0 / a * (1.0 + FLATTENING + M_RATIO - 2.0 * FLATTENING * s2) * h + 3.0 * h * h / (a * a));
    Ok(Acceleration::from_si(g))
}

#[cfg(test)]
mod tests {
    use super::*;

    // Check values: shared/reference/check-values.md §3.4, computed with the TR8350.2
    // formulas; the equator and pole values equal the WGS84 defining constants
    // g_e = 9.780 325 3359 and g_p = 9.832 184 9378 m/s² (NIMA TR8350.2 Table 3.4).
    #[test]
    fn wgs84_normal_gravity_table() {
        let cases = [
            (0.0, 0.0, 9.780_325_3),
            (0.0, 1000.0, 9.777_238_4),
            (30.0, 0.0, 9.793_247_3),
            (30.0, 1000.0, 9.790_161_4),
            (45.0, 0.0, 9.806_197_8),
            (45.0, 1000.0, 9.803_112_9),
            (52.0, 0.0, 9.812_474_1),
            (52.0, 1000.0, 9.809_389_8),
            (60.0, 0.0, 9.819_177_0),
            (60.0, 1000.0, 9.816_093_2),
            (90.0, 0.0, 9.832_184_9),
            (90.0, 1000.0, 9.829_102_3),
        ];
        for (lat, h, want) in cases {
            let g = local(lat, Length::m(h)).unwrap().si();
            assert!((g - want).abs() < 1.0e-7, "{lat}° {h} m: {g} vs {want}");
        }
    }

    // fluids 1.3.1 `gravity(55, 1E4)` uses the CRC formula; the WGS84 value differs by < 5e-4
    // (check-values.md §3.4 shows CRC and WGS84 agree within 1.1e-4 at sea level).
    #[test]
    fn agrees_with_crc_formula_at_sea_level() {
        for lat in [0.0_f64, 30.0, 45.0, 60.0, 90.0] {
            let s2 = lat.to_radians().sin().powi(2);
            let s22 = (2.0 * lat.to_radians()).sin().powi(2);
            // CRC Handbook formula as quoted in fluids.core.gravity docstring
            let crc = 9.780_356 * (1.0 + 0.005_288_5 * s2 - 0.000_005_9 * s22);
            let g = local(lat, Length::m(0.0)).unwrap().si();
            assert!((g - crc).abs() < 1.1e-4, "{lat}");
        }
    }

    #[test]
    fn gravity_decreases_with_height_and_grows_with_latitude() {
        let mut last = 0.0;
        for lat in (0..=90).step_by(5) {
            let g = local(f64::from(lat), Length::m(0.0)).unwrap().si();
            assert!(g > last);
            last = g;
            assert!(local(f64::from(lat), Length::m(500.0)).unwrap().si() < g);
        }
    }

    #[test]
    fn bad_latitude_and_elevation_are_refused() {
        let e = local(91.0, Length::m(0.0)).unwrap_err().to_string();
        assert_eq!(e, "gravity: latitude must be in [-90, 90], got 91 °");
        let e = local(10.0, Length::m(f64::NAN)).unwrap_err().to_string();
        assert_eq!(e, "gravity: elevation must be a finite number, got NaN");
    }
}
