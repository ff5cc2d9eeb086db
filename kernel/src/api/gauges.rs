//! Gauge liquids and liquid manometers in scripts: from a deflection or a scale
//! reading to a differential pressure.

use rhai::Dynamic;
use stagna::units::dimension::Dimension as D;
use stagna::*;

use super::*;
use crate::catalog::Doc;

/// Registers the package.
pub fn register(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.engine
        .register_type_with_name::<GaugeLiquid>("GaugeLiquid")
        .register_type_with_name::<Manometer>("Manometer")
        .register_type_with_name::<ManometerResult>("GaugeReading");
    r.group("Gauge liquids and manometers");
    liquids(r, prefs);
    manometers(r);
    manometer_members(r, prefs);
    readings(r, prefs);
}

/// Mercury, water and user gauge liquids.
fn liquids(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    let p = prefs.clone();
    r.func(
        "mercury",
        &Doc::new("mercury() -> GaugeLiquid", "Deprecated spelling of gauge_mercury() (gauge liquids are all gauge_*); works for this release, with a warning.")
            .example("print(gauge_mercury().density(20.degC));")
            .source("density 13 595.08 kg/m³ at 0 °C and expansion: NPL / Bigg 1964 (see lib docs)"),
        move || {
            super::warn_once(&p, "mercury() is deprecated and will be removed in the next release; write gauge_mercury()");
            GaugeLiquid::Mercury
        },
    );
    r.func(
        "gauge_mercury",
        &Doc::new("gauge_mercury() -> GaugeLiquid", "Mercury as a gauge liquid (density with its thermal expansion). Mercury vapour is toxic: follow your site's rules for mercury-filled instruments.")
            .example("print(gauge_mercury().density(20.degC));")
            .source("density 13 595.08 kg/m³ at 0 °C and expansion: NPL / Bigg 1964 (see lib docs)"),
        || GaugeLiquid::Mercury,
    );
    r.func(
        "gauge_water",
        &Doc::new("gauge_water() -> GaugeLiquid", "Water as a gauge liquid (Tanaka 2001 density within 0–40 °C).")
            .example("print(gauge_water().density(18.degC));")
            .source("Tanaka et al., Metrologia 38 (2001) 301–309"),
        || GaugeLiquid::Water(stagna::fluids::water::WaterModel::Tanaka2001),
    );
    r.func(
        "gauge_liquid",
        &Doc::new("gauge_liquid(name, density, at, expansion_per_K) -> GaugeLiquid", "A gauge liquid by its stated density at a reference temperature and its volumetric expansion coefficient (from the maker's data sheet; never estimated).")
            .param("name", "for reports")
            .param("density", "density at `at`, e.g. 826.kg_m3")
            .param("at", "reference temperature, e.g. 20.degC")
            .param("expansion_per_K", "volumetric expansion coefficient, 1/K (e.g. 7.5e-4)")
            .example("let oil = gauge_liquid(\"red gauge oil\", 826.kg_m3, 20.degC, 7.5e-4);\nprint(oil.density(25.degC));")
            .source("ρ(t) = ρ₀ / (1 + β (t − t₀)); maker's data"),
        |name: &str, rho: Dynamic, at: Dynamic, beta: Dynamic| -> Res<GaugeLiquid> {
            Ok(GaugeLiquid::User(lib(UserLiquid::new(
                name,
                Density::kg_m3(si_of(&rho, D::DENSITY, "density")?),
                temperature(&at, "reference temperature")?,
                Some(number(&beta, "expansion coefficient")?),
            ))?))
        },
    );
    r.func(
        "gauge_liquid_sg",
        &Doc::new(
            "gauge_liquid_sg(name, specific_gravity, at, water_at) -> GaugeLiquid",
            "A gauge liquid by specific gravity at `at` relative to water at `water_at` (no thermal expansion).",
        )
        .param("specific_gravity", "e.g. 0.826")
        .param("at", "liquid temperature of the stated SG")
        .param("water_at", "reference water temperature (e.g. 15.6.degC for 60 °F)")
        .example("print(gauge_liquid_sg(\"gauge oil\", 0.826, 15.6.degC, 15.6.degC).density(15.6.degC));")
        .source("water density: Tanaka et al. 2001 (0–40 °C), else IAPWS-IF97"),
        |name: &str, sg: Dynamic, at: Dynamic, wat: Dynamic| -> Res<GaugeLiquid> {
            Ok(GaugeLiquid::User(lib(UserLiquid::from_specific_gravity(
                name,
                number(&sg, "specific gravity")?,
                temperature(&at, "liquid temperature")?,
                temperature(&wat, "water temperature")?,
                None,
            ))?))
        },
    );
    r.engine.register_fn("to_string", |g: &mut GaugeLiquid| format!("GaugeLiquid: {}", g.name()));
    r.method(
        "GaugeLiquid",
        "density",
        &Doc::new("liquid.density(temperature) -> Quantity", "Density of the gauge liquid at its temperature.")
            .example("print(gauge_mercury().density(25.degC));")
            .source("the liquid's law (see mercury, gauge_water, gauge_liquid)"),
        |g: &mut GaugeLiquid, t: Dynamic| -> Res<Q> {
            Ok(Q { q: lib(g.density(temperature(&t, "temperature")?))?.into(), unit: Some("kg/m^3".into()) })
        },
    );
}

/// The manometer arrangements (standard gravity until `.at_site(...)`).
fn manometers(r: &mut Registrar<'_>) {
    let std_g = gravity::standard();
    r.func(
        "u_tube",
        &Doc::new("u_tube(liquid) -> Manometer", "A vertical U-tube manometer, gauge liquid below the working fluid; standard gravity until .at_site(latitude, elevation).")
            .example("let g = u_tube(gauge_mercury()).at(53.4, 112.m);\nprint(g);")
            .source("hydrostatics: Δp = (ρ_m − ρ_f) g h"),
        move |l: GaugeLiquid| -> Res<Manometer> { lib(Manometer::new(ManometerKind::UTube, l, std_g)) },
    );
    r.func(
        "inverted_u_tube",
        &Doc::new(
            "inverted_u_tube(liquid) -> Manometer",
            "An inverted U-tube, a lighter gauge fluid (often air) above the working liquid.",
        )
        .example("print(inverted_u_tube(gauge_liquid(\"air\", 1.2.kg_m3, 20.degC, 0.0034)));")
        .source("hydrostatics: Δp = (ρ_f − ρ_m) g h"),
        move |l: GaugeLiquid| -> Res<Manometer> { lib(Manometer::new(ManometerKind::InvertedUTube, l, std_g)) },
    );
    r.func(
        "inclined_gauge",
        &Doc::new("inclined_gauge(liquid, angle_deg, area_ratio) -> Manometer", "An inclined-tube manometer with a reservoir; the reading is along the tube.")
            .param("angle_deg", "tube angle from horizontal, degrees, in (0, 90]")
            .param("area_ratio", "tube bore area over reservoir area a/A in [0, 1)")
            .example("let g = inclined_gauge(gauge_liquid(\"oil\", 826.kg_m3, 20.degC, 7.5e-4), 20, 0.0036);\nprint(g.dp(42.mm, 21.degC, 1.19.kg_m3));")
            .source("Δp = (ρ_m − ρ_f) g L (sin θ + a/A)"),
        move |l: GaugeLiquid, angle: Dynamic, ar: Dynamic| -> Res<Manometer> {
            lib(Manometer::new(
                ManometerKind::Inclined { angle_deg: number(&angle, "angle")?, area_ratio: number(&ar, "area ratio")? },
                l,
                std_g,
            ))
        },
    );
    r.func(
        "well_gauge",
        &Doc::new("well_gauge(liquid, area_ratio) -> Manometer", "A vertical well-type (reservoir) manometer.")
            .param("area_ratio", "tube bore area over well area a/A in [0, 1)")
            .example("print(well_gauge(gauge_water(), 0.01).dp(100.mm, 20.degC, 1.2.kg_m3));")
            .source("Δp = (ρ_m − ρ_f) g h (1 + a/A)"),
        move |l: GaugeLiquid, ar: Dynamic| -> Res<Manometer> {
            lib(Manometer::new(ManometerKind::Well { area_ratio: number(&ar, "area ratio")? }, l, std_g))
        },
    );
    r.func(
        "two_liquid_gauge",
        &Doc::new("two_liquid_gauge(heavy, light, area_ratio) -> Manometer", "A two-liquid micromanometer (heavy liquid below, light above, reservoirs of area ratio a/A).")
            .example("let g = two_liquid_gauge(gauge_water(), gauge_liquid(\"kerosene\", 790.kg_m3, 20.degC, 9.9e-4), 0.01);\nprint(g.dp(60.mm, 20.degC, 1.2.kg_m3));")
            .source("Δp = g h [ρ_h − ρ_l (1 − a/A) − ρ_f a/A]"),
        move |heavy: GaugeLiquid, light: GaugeLiquid, ar: Dynamic| -> Res<Manometer> {
            lib(Manometer::new(ManometerKind::TwoLiquid { light, area_ratio: number(&ar, "area ratio")? }, heavy, std_g))
        },
    );
}

/// Local gravity and the Δp of a manometer.
fn manometer_members(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.method(
        "Manometer",
        "at_site",
        &Doc::new(
            "gauge.at_site(latitude_deg, elevation) -> Manometer",
            "The same manometer with local gravity for the site (WGS 84 normal gravity with the free-air correction).",
        )
        .param("latitude_deg", "geodetic latitude, degrees")
        .param("elevation", "height above sea level, e.g. 112.m")
        .example("print(u_tube(gauge_mercury()).at_site(53.4, 112.m).gravity);")
        .source("NIMA TR8350.2 (WGS 84) normal gravity; free-air gradient 3.086e-6 s⁻²"),
        |m: &mut Manometer, lat: Dynamic, h: Dynamic| -> Res<Manometer> {
            let g = lib(gravity::local(number(&lat, "latitude")?, length(&h, "elevation")?))?;
            lib(Manometer::new(m.kind().clone(), m.liquid().clone(), g))
        },
    );
    let p = prefs.clone();
    r.method(
        "Manometer",
        "at",
        &Doc::new(
            "gauge.at(latitude_deg, elevation) -> Manometer",
            "Deprecated spelling of gauge.at_site(latitude_deg, elevation) (column.at(row) reads a row); works for this release, with a warning.",
        )
        .example("print(u_tube(gauge_mercury()).at_site(53.4, 112.m).gravity);")
        .source("NIMA TR8350.2 (WGS 84) normal gravity; free-air gradient 3.086e-6 s⁻²"),
        move |m: &mut Manometer, lat: Dynamic, h: Dynamic| -> Res<Manometer> {
            super::warn_once(&p, "gauge.at(latitude, elevation) is deprecated and will be removed in the next release; write gauge.at_site(latitude, elevation)");
            let g = lib(gravity::local(number(&lat, "latitude")?, length(&h, "elevation")?))?;
            lib(Manometer::new(m.kind().clone(), m.liquid().clone(), g))
        },
    );
    r.property(
        "Manometer",
        "gravity",
        &Doc::new("gauge.gravity -> Quantity", "Gravity used by the manometer.")
            .example("print(u_tube(gauge_mercury()).gravity);")
            .source("standard gravity 9.80665 m/s² (CGPM 1901) or .at()"),
        |m: &mut Manometer| Q::si(m.gravity().si(), D::ACCELERATION),
    );
    let p = prefs.clone();
    r.engine.register_fn("to_string", move |m: &mut Manometer| {
        let kind = match m.kind() {
            ManometerKind::UTube => "U-tube".to_string(),
            ManometerKind::InvertedUTube => "inverted U-tube".to_string(),
            ManometerKind::Inclined { angle_deg, area_ratio } => format!("inclined {angle_deg}°, a/A = {area_ratio}"),
            ManometerKind::Well { area_ratio } => format!("well type, a/A = {area_ratio}"),
            ManometerKind::TwoLiquid { light, area_ratio } => {
                format!("two-liquid with {}, a/A = {area_ratio}", light.name())
            }
        };
        format!("Manometer: {kind}, {} , g = {}", m.liquid().name(), show_q(m.gravity().si(), D::ACCELERATION, &p))
    });
    r.method(
        "Manometer",
        "dp",
        &Doc::new("gauge.dp(deflection, gauge_temperature, fluid) -> GaugeReading | Column", "Differential pressure from a deflection (along the tube for inclined gauges). Any argument may be a column: then the result is a Δp column computed in Rust over every row. `fluid` is the working fluid's density, its FluidState, or a density column.")
            .param("deflection", "length (quantity or column), e.g. 42.mm; must be ≥ 0 in column form unless the flow can reverse")
            .param("gauge_temperature", "temperature of the gauge liquid (quantity or column)")
            .param("fluid", "density of the fluid above the liquid (quantity, FluidState or column)")
            .returns("GaugeReading (scalar: .dp, .steps()) or a pressure Column")
            .example("let g = u_tube(gauge_mercury());\nlet r = g.dp(85.mm, 18.degC, 999.kg_m3);\nprint(r.dp.to(\"kPa\"));\nprint(r.steps());")
            .source("hydrostatics; liquid densities as documented for each liquid"),
        |m: &mut Manometer, h: Dynamic, tg: Dynamic, f: Dynamic| -> Res<Dynamic> {
            let ha = arg_of(&h, D::LENGTH, "deflection")?;
            let ta = arg_of(&tg, D::TEMPERATURE, "gauge temperature")?;
            let fa = density_arg(&f, "fluid density")?;
            match rows(&[(&ha, "deflection"), (&ta, "gauge temperature"), (&fa, "fluid density")])? {
                None => Ok(Dynamic::from(lib(m.differential_pressure(
                    Reading::Deflection(Length::m(ha.at(0))),
                    Temperature::kelvin(ta.at(0)),
                    Density::kg_m3(fa.at(0)),
                ))?)),
                Some(n) => {
                    let (hv, tv, fv) = (ha.expand(n), ta.expand(n), fa.expand(n));
                    let mut out = vec![0.0; n];
                    lib(m.dp_column(&hv, &tv, &fv, &mut out))?;
                    Ok(Dynamic::from(Col::new("dp", out, D::PRESSURE, Some("Pa"))))
                }
            }
        },
    );
    r.method(
        "Manometer",
        "dp_scale",
        &Doc::new("gauge.dp_scale(reading, zero, gauge_temperature, fluid) -> GaugeReading", "Differential pressure from a scale reading and its zero reading (both along the tube).")
            .example("let g = inclined_gauge(gauge_liquid(\"oil\", 826.kg_m3, 20.degC, 7.5e-4), 20, 0.0036);\nprint(g.dp_scale(47.5.mm, 2.0.mm, 21.degC, 1.19.kg_m3).dp);")
            .source("hydrostatics; deflection = reading − zero"),
        |m: &mut Manometer, rd: Dynamic, z: Dynamic, tg: Dynamic, f: Dynamic| -> Res<ManometerResult> {
            let fa = density_arg(&f, "fluid density")?;
            lib(m.differential_pressure(
                Reading::Scale { reading: length(&rd, "reading")?, zero: length(&z, "zero")? },
                temperature(&tg, "gauge temperature")?,
                Density::kg_m3(fa.at(0)),
            ))
        },
    );
}

/// What a gauge reading gives.
fn readings(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    let p = prefs.clone();
    r.engine.register_fn("to_string", move |g: &mut ManometerResult| {
        let mut s = format!(
            "GaugeReading: Δp = {} (deflection {})",
            show_q(g.dp.si(), D::PRESSURE, &p),
            Q { q: g.deflection.into(), unit: Some("mm".into()) }.show(&DisplayUnits::si())
        );
        for w in &g.warnings {
            s.push_str(&format!("\n  warning: {}", w.message));
        }
        s
    });
    r.property(
        "GaugeReading",
        "dp",
        &Doc::new("reading.dp -> Quantity", "The differential pressure.")
            .example("print(u_tube(gauge_mercury()).dp(85.mm, 18.degC, 999.kg_m3).dp);")
            .source("hydrostatics"),
        |g: &mut ManometerResult| Q::si(g.dp.si(), D::PRESSURE),
    );
    r.property(
        "GaugeReading",
        "warnings",
        &Doc::new("reading.warnings -> array", "Remarks (liquid outside its data range, ...).")
            .example("print(u_tube(gauge_mercury()).dp(85.mm, 18.degC, 999.kg_m3).warnings);")
            .source("the liquid's data range"),
        |g: &mut ManometerResult| warnings_of(&g.warnings),
    );
    r.method(
        "GaugeReading",
        "steps",
        &Doc::new("reading.steps() -> Steps", "How Δp was obtained, with substituted values.")
            .example("print(u_tube(gauge_mercury()).dp(85.mm, 18.degC, 999.kg_m3).steps());")
            .source("hydrostatics"),
        |g: &mut ManometerResult| g.steps(),
    );
}
