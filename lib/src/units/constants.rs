//! Physical and conventional constants, SI units, each with its source.

/// Standard acceleration of free fall g_n, m/s² (exact).
/// Source: 3rd CGPM (1901); SI Brochure, 9th ed. (2019); NIST SP 811 (2008) App. B.
pub const STANDARD_GRAVITY: f64 = 9.806_65;

/// Molar gas constant R, J/(mol·K), exact since the 2019 SI redefinition (N_A·k).
/// Source: CODATA 2018, NIST SP 961 (2019).
pub const MOLAR_GAS_CONSTANT: f64 = 8.314_462_618;

/// Standard atmosphere, Pa (exact). Source: 10th CGPM (1954); NIST SP 811 App. B.
pub const STANDARD_ATMOSPHERE: f64 = 101_325.0;

/// 0 °C in kelvin (exact). Source: SI Brochure, 9th ed., §2.3.1.
pub const ZERO_CELSIUS: f64 = 273.15;

/// Molar mass of water, kg/mol, as used in CIPM-2007.
/// Source: Picard et al., Metrologia 45 (2008) 149, Table 1.
pub const MOLAR_MASS_WATER: f64 = 18.015_28e-3;
