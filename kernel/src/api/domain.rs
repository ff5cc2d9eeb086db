//! Fluids, gauge liquids, manometers, probes, conduits, profiles, layouts and flows in
//! scripts, each with scalar and whole-column forms where the library has them.

use rhai::{Array, Dynamic, Map};
use stagna::dimension::Dimension as D;
use stagna::profile::{KAPPA, StraightLengths};
use stagna::quantity::format_number;
use stagna::*;

use super::*;
use crate::catalog::Doc;

/// A fluid state with the worked steps of its density, when the model has them.
#[derive(Debug, Clone)]
pub struct State {
    /// The state.
    pub s: FluidState,
    /// Worked steps (CIPM-2007 for humid air).
    pub steps: Steps,
}

fn temperature(d: &Dynamic, what: &str) -> Res<Temperature> {
    if let Some(q) = d.clone().try_cast::<Q>()
        && q.q.dimension == D::TEMPERATURE
        && !q.q.absolute_temperature
    {
        return Err(rt(format!("{what} must be an absolute temperature (e.g. 20.degC), got a temperature difference")));
    }
    Ok(Temperature::kelvin(si_of(d, D::TEMPERATURE, what)?))
}

fn length(d: &Dynamic, what: &str) -> Res<Length> {
    Ok(Length::m(si_of(d, D::LENGTH, what)?))
}

fn pressure(d: &Dynamic, what: &str) -> Res<Pressure> {
    Ok(Pressure::pa(si_of(d, D::PRESSURE, what)?))
}

/// A fraction from a plain number in [0, 1] or a percentage quantity (45.percent).
fn fraction(d: &Dynamic, what: &str) -> Res<f64> {
    let v = number(d, what)?;
    if !(0.0..=1.0).contains(&v) {
        return Err(rt(format!("{what} is a fraction in [0, 1] (or write 45.percent), got {}", format_number(v))));
    }
    Ok(v)
}

/// The density argument of a manometer or probe: a density, a fluid state or a column.
fn density_arg(d: &Dynamic, what: &str) -> Res<Arg> {
    if let Some(s) = d.clone().try_cast::<State>() {
        return Ok(Arg::Scalar(s.s.density.si()));
    }
    arg_of(d, D::DENSITY, what)
}

fn warnings_of(w: &[Warning]) -> Array {
    w.iter().map(|w| Dynamic::from(w.message.clone())).collect()
}

fn show_q(v: f64, dim: D, prefs: &SharedPrefs) -> String {
    Q::si(v, dim).show(super::prefs(prefs).system)
}

fn layout_rule(s: &str) -> Res<LayoutRule> {
    match s.to_ascii_lowercase().replace(['_', ' '], "-").as_str() {
        "equal-area" | "centroid" => Ok(LayoutRule::EqualArea),
        "log-linear" => Ok(LayoutRule::LogLinear),
        "log-chebyshev" | "log-tchebycheff" => Ok(LayoutRule::LogChebyshev),
        _ => Err(rt(format!("layout rule: \"equal-area\", \"log-linear\" or \"log-chebyshev\", got \"{s}\""))),
    }
}

/// Registers the domain objects.
#[allow(clippy::too_many_lines)]
pub fn register(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    let e = &mut *r.engine;
    e.register_type_with_name::<Fluid>("Fluid")
        .register_type_with_name::<State>("FluidState")
        .register_type_with_name::<GaugeLiquid>("GaugeLiquid")
        .register_type_with_name::<Manometer>("Manometer")
        .register_type_with_name::<ManometerResult>("GaugeReading")
        .register_type_with_name::<Probe>("Probe")
        .register_type_with_name::<PointVelocity>("PointVelocity")
        .register_type_with_name::<Conduit>("Conduit")
        .register_type_with_name::<ProfileModel>("ProfileModel")
        .register_type_with_name::<SinglePointResult>("SinglePoint")
        .register_type_with_name::<TraverseLayout>("Layout")
        .register_type_with_name::<FlowResult>("Flow")
        .register_type_with_name::<Steps>("Steps");

    // ---------------------------------------------------------------- fluids
    r.group("Fluids");
    r.func(
        "water",
        &Doc::new("water() -> Fluid", "Liquid water: density by IAPWS-IF97 region 1, viscosity by IAPWS 2008.")
            .returns("Fluid; call .state(p, T) or .density(p, T)")
            .example("let w = water();\nprint(w.state(101.325.kPa, 15.degC).density);")
            .source("IAPWS R7-97(2012) IF97 region 1; IAPWS R12-08 viscosity"),
        || Fluid::Water(Water::default()),
    );
    r.func(
        "humid_air",
        &Doc::new("humid_air(relative_humidity) -> Fluid", "Moist air by the CIPM-2007 equation, with the relative humidity as a fraction (0.45) or a percentage (45.percent).")
            .param("relative_humidity", "fraction in [0, 1], or a percentage quantity")
            .returns("Fluid")
            .example("let air = humid_air(45.percent);\nprint(air.density(100.8.kPa, 21.degC));")
            .source("CIPM-2007: Picard et al., Metrologia 45 (2008) 149–155"),
        |rh: Dynamic| -> Res<Fluid> { Ok(Fluid::HumidAir(lib(HumidAir::relative(fraction(&rh, "relative humidity")?))?)) },
    );
    r.func(
        "humid_air_dew_point",
        &Doc::new("humid_air_dew_point(dew_point) -> Fluid", "Moist air by CIPM-2007 from its dew-point temperature.")
            .param("dew_point", "absolute temperature, e.g. 9.degC")
            .example("print(humid_air_dew_point(9.degC).density(101.kPa, 20.degC));")
            .source("CIPM-2007: Picard et al., Metrologia 45 (2008) 149–155"),
        |td: Dynamic| -> Res<Fluid> { Ok(Fluid::HumidAir(lib(HumidAir::dew_point(temperature(&td, "dew point")?))?)) },
    );
    r.func(
        "humid_air_density",
        &Doc::new("humid_air_density(pressure, temperature, relative_humidity) -> Quantity | Column", "Moist-air density by CIPM-2007 where the humidity changes from row to row: any argument may be a column (a humidity column in % or as a fraction).")
            .param("relative_humidity", "fraction, percentage quantity, or a column (declare % columns with unit \"%\")")
            .example("let t = table_from(#{rh: [40.0, 60.0]}).unit(\"rh\", \"%\");\nprint(humid_air_density(101.kPa, 20.degC, t[\"rh\"]));")
            .source("CIPM-2007: Picard et al., Metrologia 45 (2008) 149–155"),
        |p: Dynamic, t: Dynamic, rh: Dynamic| -> Res<Dynamic> {
            let pa = arg_of(&p, D::PRESSURE, "pressure")?;
            let ta = arg_of(&t, D::TEMPERATURE, "temperature")?;
            let ha = arg_of(&rh, D::NONE, "relative humidity")?;
            match rows(&[(&pa, "pressure"), (&ta, "temperature"), (&ha, "relative humidity")])? {
                None => Ok(Dynamic::from(Q::si(lib(lib(HumidAir::relative(ha.at(0)))?.density_si(pa.at(0), ta.at(0)))?, D::DENSITY))),
                Some(n) => {
                    let mut out = Vec::with_capacity(n);
                    for i in 0..n {
                        let air = HumidAir::relative(ha.at(i)).map_err(|e| rt(e.at_row(i)))?;
                        out.push(air.density_si(pa.at(i), ta.at(i)).map_err(|e| rt(e.at_row(i)))?);
                    }
                    Ok(Dynamic::from(Col::new("density", out, D::DENSITY, Some("kg/m^3"))))
                }
            }
        },
    );
    r.func(
        "dry_air",
        &Doc::new("dry_air() -> Fluid", "Dry air as an ideal-gas mixture (N₂, O₂, Ar, CO₂).")
            .example("print(dry_air().density(101.325.kPa, 0.degC));")
            .source("composition and molar masses: ISO 2533 / CIPM-2007 dry-air molar mass"),
        || Fluid::Gas(GasMixture::dry_air()),
    );
    r.func(
        "flue_gas",
        &Doc::new("flue_gas(co2_pct, o2_pct, co_pct, moisture) -> Fluid", "Stack gas as an ideal-gas mixture from a dry-basis analysis (CO₂, O₂, CO in %, N₂ the balance) and the water-vapour mole fraction B_ws.")
            .param("co2_pct", "CO₂, % by volume, dry basis")
            .param("o2_pct", "O₂, % by volume, dry basis")
            .param("co_pct", "CO, % by volume, dry basis")
            .param("moisture", "water-vapour mole fraction B_ws in [0, 1)")
            .example("let gas = flue_gas(11.2, 7.1, 0.0, 0.12);\nprint(gas.molar_mass);")
            .source("ideal-gas mixing; molar masses CIAAW 2021; same result as US EPA Method 3 M_d for CO₂/O₂/N₂"),
        |co2: Dynamic, o2: Dynamic, co: Dynamic, bws: Dynamic| -> Res<Fluid> {
            Ok(Fluid::Gas(lib(GasMixture::flue_gas(
                number(&co2, "CO2 %")?,
                number(&o2, "O2 %")?,
                number(&co, "CO %")?,
                fraction(&bws, "moisture")?,
            ))?))
        },
    );
    r.func(
        "gas_mixture",
        &Doc::new("gas_mixture(dry_percentages, moisture) -> Fluid", "An ideal-gas mixture from dry-basis percentages by volume (a map of component names) and the water-vapour mole fraction.")
            .param("dry_percentages", "map, e.g. #{CO2: 9.5, O2: 8.0, N2: 82.5}; components N2, O2, Ar, CO2, CO, H2O, SO2, CH4")
            .param("moisture", "water-vapour mole fraction in [0, 1)")
            .example("let g = gas_mixture(#{CO2: 9.5, O2: 8.0, N2: 82.5}, 0.08);\nprint(g.density(99.kPa, 180.degC));")
            .source("ideal-gas mixing; molar masses CIAAW 2021"),
        |m: Map, bws: Dynamic| -> Res<Fluid> {
            let mut parts = Vec::new();
            for (k, v) in &m {
                parts.push((lib(Component::parse(k))?, number(v, &format!("percentage of {k}"))? / 100.0));
            }
            Ok(Fluid::Gas(lib(GasMixture::new(&parts, fraction(&bws, "moisture")?))?))
        },
    );
    r.func(
        "ideal_gas",
        &Doc::new(
            "ideal_gas(name, molar_mass, gamma) -> Fluid",
            "A user gas by molar mass and ratio of specific heats (no viscosity).",
        )
        .param("name", "for reports")
        .param("molar_mass", "e.g. 28.96.g_mol")
        .param("gamma", "ratio of specific heats, > 1")
        .example("let n2 = ideal_gas(\"nitrogen\", 28.014.g_mol, 1.4);\nprint(n2.density(101.325.kPa, 20.degC));")
        .source("ideal-gas law ρ = pM/(RT); R from CODATA 2018"),
        |name: &str, m: Dynamic, gamma: Dynamic| -> Res<Fluid> {
            let g = number(&gamma, "gamma")?;
            if !(g > 1.0 && g < 2.0) {
                return Err(rt(format!("ideal_gas: gamma must be in (1, 2), got {g}")));
            }
            Ok(Fluid::IdealGas {
                name: name.to_string(),
                molar_mass: MolarMass::from_si(si_of(&m, D::MOLAR_MASS, "molar mass")?),
                isentropic_exponent: g,
                viscosity: None,
            })
        },
    );
    let p = prefs.clone();
    r.engine.register_fn("to_string", move |f: &mut Fluid| {
        let name = match f {
            Fluid::Water(_) => "water (IAPWS-IF97)".to_string(),
            Fluid::HumidAir(_) => "humid air (CIPM-2007)".to_string(),
            Fluid::Gas(g) => format!("gas mixture, M = {} (wet)", show_q(g.wet_molar_mass().si(), D::MOLAR_MASS, &p)),
            Fluid::IdealGas { name, .. } => format!("ideal gas '{name}'"),
            Fluid::Liquid { liquid, .. } => format!("liquid '{}'", liquid.name),
        };
        format!("Fluid: {name}")
    });
    r.method(
        "Fluid",
        "state",
        &Doc::new("fluid.state(pressure, temperature) -> FluidState", "Properties at an absolute pressure and a temperature: density, viscosity, γ, the model used and its validity warnings.")
            .param("pressure", "absolute pressure, e.g. 100.8.kPa")
            .param("temperature", "absolute temperature, e.g. 21.degC")
            .example("let s = humid_air(0.45).state(100.8.kPa, 21.degC);\nprint(s);\nprint(s.steps());")
            .source("the fluid's model (see water, humid_air, gas_mixture)"),
        |f: &mut Fluid, p: Dynamic, t: Dynamic| -> Res<State> {
            let (p, t) = (pressure(&p, "pressure")?, temperature(&t, "temperature")?);
            let s = lib(f.state(p, t))?;
            let steps = match f {
                Fluid::HumidAir(h) => h.state(p, t).map(|hs| hs.steps()).unwrap_or_default(),
                _ => Steps::default(),
            };
            Ok(State { s, steps })
        },
    );
    r.method(
        "Fluid",
        "density",
        &Doc::new("fluid.density(pressure, temperature) -> Quantity | Column", "Density; either argument may be a column (e.g. a temperature column), and then the result is a column computed in Rust over every row.")
            .param("pressure", "absolute pressure (quantity or column)")
            .param("temperature", "absolute temperature (quantity or column)")
            .example("let t = table_from(#{t: [15.0, 20.0, 25.0]}).unit(\"t\", \"degC\");\nprint(water().density(101.325.kPa, t[\"t\"]));")
            .source("the fluid's model (see water, humid_air, gas_mixture)"),
        |f: &mut Fluid, p: Dynamic, t: Dynamic| -> Res<Dynamic> {
            let pa = arg_of(&p, D::PRESSURE, "pressure")?;
            if let Some(q) = t.clone().try_cast::<Q>()
                && !q.q.absolute_temperature
            {
                return Err(rt("temperature must be an absolute temperature (e.g. 20.degC)"));
            }
            let ta = arg_of(&t, D::TEMPERATURE, "temperature")?;
            match rows(&[(&pa, "pressure"), (&ta, "temperature")])? {
                None => Ok(Dynamic::from(Q::si(lib(f.density_si(pa.at(0), ta.at(0)))?, D::DENSITY))),
                Some(n) => {
                    let mut out = vec![0.0; n];
                    for (i, o) in out.iter_mut().enumerate() {
                        *o = f.density_si(pa.at(i), ta.at(i)).map_err(|e| rt(e.at_row(i)))?;
                    }
                    Ok(Dynamic::from(Col::new("density", out, D::DENSITY, None)))
                }
            }
        },
    );
    r.property(
        "Fluid",
        "molar_mass",
        &Doc::new(
            "fluid.molar_mass -> Quantity",
            "Molar mass of a gas (wet basis for mixtures); () for liquids and humid air.",
        )
        .example("print(flue_gas(12.0, 6.0, 0.0, 0.1).molar_mass);")
        .source("molar masses CIAAW 2021"),
        |f: &mut Fluid| -> Dynamic {
            match f {
                Fluid::Gas(g) => Dynamic::from(Q { q: g.wet_molar_mass().into(), unit: Some("g/mol".into()) }),
                Fluid::IdealGas { molar_mass, .. } => {
                    Dynamic::from(Q { q: (*molar_mass).into(), unit: Some("g/mol".into()) })
                }
                _ => Dynamic::UNIT,
            }
        },
    );

    let p = prefs.clone();
    r.engine.register_fn("to_string", move |s: &mut State| {
        let visc = s.s.viscosity.map(|m| show_q(m.si(), D::DYNAMIC_VISCOSITY, &p)).unwrap_or_else(|| "n/a".into());
        let mut out = format!(
            "FluidState ({}): p = {}, t = {}, ρ = {}, μ = {}",
            s.s.model,
            show_q(s.s.pressure.si(), D::PRESSURE, &p),
            Q::kelvin(s.s.temperature.k()).show(super::prefs(&p).system),
            Q { q: s.s.density.into(), unit: Some("kg/m^3".into()) }.show(UnitSystem::Si),
            visc
        );
        for w in &s.s.warnings {
            out.push_str(&format!("\n  warning: {}", w.message));
        }
        out
    });
    for (name, summary, dim) in
        [("density", "Density.", D::DENSITY), ("pressure", "Absolute pressure used.", D::PRESSURE)]
    {
        r.property(
            "FluidState",
            name,
            &Doc::new(&format!("state.{name} -> Quantity"), summary)
                .example(&format!("print(water().state(200.kPa, 12.degC).{name});"))
                .source("the fluid's model"),
            move |s: &mut State| Q::si(if dim == D::DENSITY { s.s.density.si() } else { s.s.pressure.si() }, dim),
        );
    }
    r.property(
        "FluidState",
        "temperature",
        &Doc::new("state.temperature -> Quantity", "Temperature used.")
            .example("print(water().state(200.kPa, 12.degC).temperature);")
            .source("the fluid's model"),
        |s: &mut State| Q::kelvin(s.s.temperature.k()),
    );
    r.property(
        "FluidState",
        "viscosity",
        &Doc::new("state.viscosity -> Quantity", "Dynamic viscosity, or () where the model has none.")
            .example("print(water().state(200.kPa, 12.degC).viscosity.to(\"cP\"));")
            .source("IAPWS R12-08 (water); Sutherland (air); Wilke mixing (gases)"),
        |s: &mut State| s.s.viscosity.map_or(Dynamic::UNIT, |m| Dynamic::from(Q::si(m.si(), D::DYNAMIC_VISCOSITY))),
    );
    r.property(
        "FluidState",
        "warnings",
        &Doc::new("state.warnings -> array", "Validity remarks of the model at this state.")
            .example("print(water().state(101.kPa, 99.degC).warnings);")
            .source("the fluid's model"),
        |s: &mut State| warnings_of(&s.s.warnings),
    );
    r.method(
        "FluidState",
        "steps",
        &Doc::new("state.steps() -> Steps", "How the density was obtained (formulas, substituted values, sources); humid air shows the CIPM-2007 steps.")
            .example("print(humid_air(0.5).state(101.kPa, 20.degC).steps());")
            .source("CIPM-2007: Picard et al., Metrologia 45 (2008) 149–155"),
        |s: &mut State| s.steps.clone(),
    );

    // ---------------------------------------------------------- gauge liquids
    r.group("Gauge liquids and manometers");
    r.func(
        "mercury",
        &Doc::new("mercury() -> GaugeLiquid", "Mercury as a gauge liquid (density with its thermal expansion). Mercury vapour is toxic: follow your site's rules for mercury-filled instruments.")
            .example("print(mercury().density(20.degC));")
            .source("density 13 595.08 kg/m³ at 0 °C and expansion: NPL / Bigg 1964 (see lib docs)"),
        || GaugeLiquid::Mercury,
    );
    r.func(
        "gauge_water",
        &Doc::new("gauge_water() -> GaugeLiquid", "Water as a gauge liquid (Tanaka 2001 density within 0–40 °C).")
            .example("print(gauge_water().density(18.degC));")
            .source("Tanaka et al., Metrologia 38 (2001) 301–309"),
        || GaugeLiquid::Water(stagna::water::WaterModel::Tanaka2001),
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
            .example("print(mercury().density(25.degC));")
            .source("the liquid's law (see mercury, gauge_water, gauge_liquid)"),
        |g: &mut GaugeLiquid, t: Dynamic| -> Res<Q> {
            Ok(Q { q: lib(g.density(temperature(&t, "temperature")?))?.into(), unit: Some("kg/m^3".into()) })
        },
    );

    // ------------------------------------------------------------- manometers
    let std_g = gravity::standard();
    r.func(
        "u_tube",
        &Doc::new("u_tube(liquid) -> Manometer", "A vertical U-tube manometer, gauge liquid below the working fluid; standard gravity until .at(latitude, elevation).")
            .example("let g = u_tube(mercury()).at(53.4, 112.m);\nprint(g);")
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
    r.method(
        "Manometer",
        "at",
        &Doc::new(
            "gauge.at(latitude_deg, elevation) -> Manometer",
            "The same manometer with local gravity for the site (WGS 84 normal gravity with the free-air correction).",
        )
        .param("latitude_deg", "geodetic latitude, degrees")
        .param("elevation", "height above sea level, e.g. 112.m")
        .example("print(u_tube(mercury()).at(53.4, 112.m).gravity);")
        .source("NIMA TR8350.2 (WGS 84) normal gravity; free-air gradient 3.086e-6 s⁻²"),
        |m: &mut Manometer, lat: Dynamic, h: Dynamic| -> Res<Manometer> {
            let g = lib(gravity::local(number(&lat, "latitude")?, length(&h, "elevation")?))?;
            lib(Manometer::new(m.kind().clone(), m.liquid().clone(), g))
        },
    );
    r.property(
        "Manometer",
        "gravity",
        &Doc::new("gauge.gravity -> Quantity", "Gravity used by the manometer.")
            .example("print(u_tube(mercury()).gravity);")
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
            .example("let g = u_tube(mercury());\nlet r = g.dp(85.mm, 18.degC, 999.kg_m3);\nprint(r.dp.to(\"kPa\"));\nprint(r.steps());")
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
    let p = prefs.clone();
    r.engine.register_fn("to_string", move |g: &mut ManometerResult| {
        let mut s = format!(
            "GaugeReading: Δp = {} (deflection {})",
            show_q(g.dp.si(), D::PRESSURE, &p),
            Q { q: g.deflection.into(), unit: Some("mm".into()) }.show(UnitSystem::Si)
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
            .example("print(u_tube(mercury()).dp(85.mm, 18.degC, 999.kg_m3).dp);")
            .source("hydrostatics"),
        |g: &mut ManometerResult| Q::si(g.dp.si(), D::PRESSURE),
    );
    r.property(
        "GaugeReading",
        "warnings",
        &Doc::new("reading.warnings -> array", "Remarks (liquid outside its data range, ...).")
            .example("print(u_tube(mercury()).dp(85.mm, 18.degC, 999.kg_m3).warnings);")
            .source("the liquid's data range"),
        |g: &mut ManometerResult| warnings_of(&g.warnings),
    );
    r.method(
        "GaugeReading",
        "steps",
        &Doc::new("reading.steps() -> Steps", "How Δp was obtained, with substituted values.")
            .example("print(u_tube(mercury()).dp(85.mm, 18.degC, 999.kg_m3).steps());")
            .source("hydrostatics"),
        |g: &mut ManometerResult| g.steps(),
    );

    // ------------------------------------------------------------------ probes
    r.group("Probes and point velocities");
    for (name, kind, summary, src) in [
        (
            "pitot_static",
            ProbeKind::PitotStatic,
            "A pitot-static tube of coefficient C (about 1 for standard heads).",
            "ISO 3966:2008 §7; v = C √(2Δp/ρ)",
        ),
        (
            "wall_tap_pitot",
            ProbeKind::WallTapPitot,
            "A pitot tube read against a wall static tap (coefficient C).",
            "ISO 3966:2008; v = C √(2Δp/ρ)",
        ),
        (
            "s_type",
            ProbeKind::SType,
            "An S-type (reverse-type) pitot tube with coefficient C_p from its calibration (about 0.84).",
            "US EPA Method 2 (40 CFR 60 App. A-1) §2, §10; v = C_p √(2Δp/ρ)",
        ),
    ] {
        r.func(
            name,
            &Doc::new(&format!("{name}(coefficient) -> Probe"), summary)
                .param("coefficient", "probe coefficient from the calibration certificate")
                .example(&format!("let p = {name}(0.99);\nprint(p.velocity(120.Pa, 1.2.kg_m3));"))
                .source(src),
            move |c: Dynamic| -> Res<Probe> { lib(Probe::new(kind, number(&c, "coefficient")?)) },
        );
    }
    r.method(
        "Probe",
        "head_diameter",
        &Doc::new(
            "probe.head_diameter(d) -> Probe",
            "The probe with its head diameter, for the low-velocity (probe Reynolds number) check.",
        )
        .example("print(pitot_static(0.998).head_diameter(8.mm));")
        .source("ISO 3966:2008 (probe Reynolds number limit, from memory)"),
        |p: &mut Probe, d: Dynamic| -> Res<Probe> { lib(p.clone().with_head_diameter(length(&d, "head diameter")?)) },
    );
    r.engine.register_fn("to_string", |p: &mut Probe| format!("Probe: {}, C = {}", p.kind, p.coefficient));
    r.method(
        "Probe",
        "velocity",
        &Doc::new("probe.velocity(dp, fluid) -> PointVelocity | Column", "Point velocity from the differential pressure. With a FluidState the isentropic correction is applied where it matters (gases); with a density (quantity or column) or a Δp column the incompressible formula runs in Rust over every row. Negative Δp gives a negative (reverse) velocity, never NaN.")
            .param("dp", "differential pressure (quantity or column)")
            .param("fluid", "FluidState, or density (quantity or column)")
            .returns("PointVelocity (.velocity, .mach, .steps()) or a velocity Column")
            .example("let air = humid_air(0.45).state(100.8.kPa, 21.degC);\nlet v = pitot_static(0.998).velocity(118.Pa, air);\nprint(v.velocity);\nprint(v.steps());")
            .source("ISO 3966:2008 §7 (incompressible and isentropic forms)"),
        |p: &mut Probe, dp: Dynamic, f: Dynamic| -> Res<Dynamic> {
            if let Some(s) = f.clone().try_cast::<State>()
                && dp.clone().try_cast::<Col>().is_none()
            {
                return Ok(Dynamic::from(lib(p.velocity(pressure(&dp, "dp")?, &s.s, VelocityMethod::Auto))?));
            }
            let da = arg_of(&dp, D::PRESSURE, "dp")?;
            let ra = density_arg(&f, "density")?;
            match rows(&[(&da, "dp"), (&ra, "density")])? {
                None => {
                    let rho = ra.at(0);
                    let state = FluidState {
                        pressure: Pressure::pa(101_325.0),
                        temperature: Temperature::celsius(20.0),
                        density: Density::kg_m3(rho),
                        viscosity: None,
                        isentropic_exponent: None,
                        model: "given density",
                        warnings: vec![],
                    };
                    Ok(Dynamic::from(lib(p.velocity(Pressure::pa(da.at(0)), &state, VelocityMethod::Incompressible))?))
                }
                Some(n) => {
                    let (dv, rv) = (da.expand(n), ra.expand(n));
                    let mut out = vec![0.0; n];
                    lib(p.velocity_column(&dv, &rv, &mut out))?;
                    Ok(Dynamic::from(Col::new("velocity", out, D::VELOCITY, Some("m/s"))))
                }
            }
        },
    );
    r.method(
        "Probe",
        "velocity",
        &Doc::new("probe.velocity(dp, density, static_pressure, gamma) -> Column", "Point velocities of a gas with the isentropic (compressibility) correction, over whole columns in Rust: any argument may be a column.")
            .param("static_pressure", "absolute static pressure at the probe (quantity or column)")
            .param("gamma", "ratio of specific heats (1.4 for air)")
            .example("let t = table_from(#{dp: [120.0, 2500.0]}).unit(\"dp\", \"Pa\");\nprint(pitot_static(1.0).velocity(t[\"dp\"], 1.2.kg_m3, 101.kPa, 1.4));")
            .source("ISO 3966:2008 §7 (isentropic form); reverse flow keeps its sign"),
        |p: &mut Probe, dp: Dynamic, rho: Dynamic, ps: Dynamic, gamma: Dynamic| -> Res<Dynamic> {
            let da = arg_of(&dp, D::PRESSURE, "dp")?;
            let ra = density_arg(&rho, "density")?;
            let pa = arg_of(&ps, D::PRESSURE, "static pressure")?;
            let g = number(&gamma, "gamma")?;
            if !(g > 1.0 && g < 2.0) {
                return Err(rt(format!("gamma must be in (1, 2), got {g}")));
            }
            let n = rows(&[(&da, "dp"), (&ra, "density"), (&pa, "static pressure")])?.unwrap_or(1);
            let mut out = Vec::with_capacity(n);
            for i in 0..n {
                let (d, r, s) = (da.at(i), ra.at(i), pa.at(i));
                if !(d.is_finite() && r.is_finite() && s.is_finite()) || r <= 0.0 || s <= 0.0 {
                    return Err(rt(stagna::Error::Inconsistent { context: "probe velocity", message: format!("Δp {d} Pa, ρ {r} kg/m³, p {s} Pa: need finite values, ρ and p > 0") }.at_row(i)));
                }
                out.push(stagna::probe::isentropic(p.coefficient, d, r, s, g));
            }
            Ok(Dynamic::from(Col::new("velocity", out, D::VELOCITY, Some("m/s"))))
        },
    );
    let p = prefs.clone();
    r.engine.register_fn("to_string", move |v: &mut PointVelocity| {
        let mut s = format!("PointVelocity: {} ({:?})", show_q(v.velocity.si(), D::VELOCITY, &p), v.direction);
        if let Some(m) = v.mach {
            s.push_str(&format!(", Mach {}", format_number(m)));
        }
        if v.compressible {
            s.push_str(", isentropic correction applied");
        }
        for w in &v.warnings {
            s.push_str(&format!("\n  warning: {}", w.message));
        }
        s
    });
    r.property(
        "PointVelocity",
        "velocity",
        &Doc::new("point.velocity -> Quantity", "The velocity, signed (negative for reverse flow).")
            .example("print(pitot_static(1.0).velocity(50.Pa, 1.2.kg_m3).velocity);")
            .source("ISO 3966:2008 §7"),
        |v: &mut PointVelocity| Q::si(v.velocity.si(), D::VELOCITY),
    );
    r.property(
        "PointVelocity",
        "mach",
        &Doc::new("point.mach -> number", "Mach number (gases), or () for liquids.")
            .example("print(pitot_static(1.0).velocity(5.kPa, dry_air().state(101.kPa, 20.degC)).mach);")
            .source("ISO 3966:2008 Annex (compressibility)"),
        |v: &mut PointVelocity| v.mach.map_or(Dynamic::UNIT, Dynamic::from),
    );
    r.property(
        "PointVelocity",
        "warnings",
        &Doc::new("point.warnings -> array", "Remarks (low velocity, reverse flow, Mach limit).")
            .example("print(pitot_static(1.0).velocity(-2.Pa, 1.2.kg_m3).warnings);")
            .source("ISO 3966:2008"),
        |v: &mut PointVelocity| warnings_of(&v.warnings),
    );
    r.method(
        "PointVelocity",
        "steps",
        &Doc::new("point.steps() -> Steps", "How the velocity was obtained, with substituted values.")
            .example("print(pitot_static(1.0).velocity(50.Pa, 1.2.kg_m3).steps());")
            .source("ISO 3966:2008 §7"),
        |v: &mut PointVelocity| v.steps(),
    );

    // ----------------------------------------------------- conduits and flows
    r.group("Conduits, profiles and flows");
    r.func(
        "round_duct",
        &Doc::new(
            "round_duct(diameter) -> Conduit",
            "A circular conduit; pass an array of measured diameters to use their mean.",
        )
        .param("diameter", "inside diameter, or an array of diameters measured across different angles")
        .example("let d = round_duct([600.mm, 602.mm, 599.mm]);\nprint(d.area);")
        .source("A = πD²/4"),
        |d: Dynamic| -> Res<Conduit> {
            if let Some(a) = d.clone().try_cast::<Array>() {
                let ds: Res<Vec<Length>> = a.iter().map(|x| length(x, "diameter")).collect();
                return lib(Conduit::circular_from_diameters(&ds?));
            }
            lib(Conduit::circular(length(&d, "diameter")?))
        },
    );
    r.func(
        "rect_duct",
        &Doc::new(
            "rect_duct(width, height) -> Conduit",
            "A rectangular conduit; the width is the side with the ports.",
        )
        .example("print(rect_duct(1200.mm, 800.mm).hydraulic_diameter);")
        .source("A = W H; D_h = 4A/P"),
        |w: Dynamic, h: Dynamic| -> Res<Conduit> {
            lib(Conduit::rectangular(length(&w, "width")?, length(&h, "height")?))
        },
    );
    r.method(
        "Conduit",
        "roughness",
        &Doc::new(
            "conduit.roughness(epsilon) -> Conduit",
            "The conduit with an equivalent sand-grain roughness (for friction and profile models).",
        )
        .example("print(round_duct(400.mm).roughness(0.05.mm));")
        .source("equivalent roughness: Moody 1944 tables (values are the user's)"),
        |c: &mut Conduit, eps: Dynamic| -> Res<Conduit> { lib(c.clone().with_roughness(length(&eps, "roughness")?)) },
    );
    let p = prefs.clone();
    r.engine.register_fn("to_string", move |c: &mut Conduit| {
        format!("Conduit: {c}, A = {}", show_q(c.area().si(), D::AREA, &p))
    });
    r.property(
        "Conduit",
        "area",
        &Doc::new("conduit.area -> Quantity", "Cross-section area.")
            .example("print(round_duct(600.mm).area);")
            .source("geometry"),
        |c: &mut Conduit| Q::si(c.area().si(), D::AREA),
    );
    r.property(
        "Conduit",
        "hydraulic_diameter",
        &Doc::new("conduit.hydraulic_diameter -> Quantity", "4A/P (the diameter itself for a circle).")
            .example("print(rect_duct(1.m, 0.5.m).hydraulic_diameter);")
            .source("D_h = 4A/P"),
        |c: &mut Conduit| Q { q: c.hydraulic_diameter().into(), unit: Some("mm".into()) },
    );
    r.method(
        "Conduit",
        "reynolds",
        &Doc::new("conduit.reynolds(velocity, state) -> number", "Reynolds number ρVD_h/μ of a mean velocity.")
            .example("print(round_duct(400.mm).reynolds(1.5.m_s, water().state(300.kPa, 12.degC)));")
            .source("Re = ρ V D_h / μ"),
        |c: &mut Conduit, v: Dynamic, s: State| -> Res<f64> {
            lib(c.reynolds(Velocity::m_s(si_of(&v, D::VELOCITY, "velocity")?), &s.s))
        },
    );
    r.method(
        "Conduit",
        "friction_factor",
        &Doc::new(
            "conduit.friction_factor(reynolds) -> number",
            "Darcy friction factor by the Colebrook equation (solved exactly), 64/Re when laminar.",
        )
        .example("print(round_duct(400.mm).roughness(0.05.mm).friction_factor(5e5));")
        .source("Colebrook, J. ICE 11 (1939) 133–156"),
        |c: &mut Conduit, re: Dynamic| -> Res<f64> {
            Ok(lib(c.friction_factor(number(&re, "Reynolds number")?, FrictionModel::Colebrook))?.f)
        },
    );

    r.func(
        "power_law",
        &Doc::new("power_law(n) -> ProfileModel", "The power-law profile u/U_c = (y/R)^(1/n).")
            .param("n", "exponent, 4 to 12 typical (7 is the classic 1/7 law)")
            .example("let m = power_law(7);\nprint(m.mean_to_centreline);")
            .source("U/U_c = 2n²/((n+1)(2n+1)); Schlichting, Boundary-Layer Theory"),
        |n: Dynamic| -> Res<ProfileModel> { lib(ProfileModel::power_law(number(&n, "n")?)) },
    );
    r.func(
        "profile_for",
        &Doc::new("profile_for(reynolds, relative_roughness, family) -> ProfileModel", "The developed-flow profile for a Reynolds number: family \"power-law\" (n = 1/√f) or \"log-law\" (velocity-defect law, κ = 0.41); laminar below Re 2300.")
            .example("print(profile_for(2e5, 1e-4, \"log-law\"));")
            .source("friction factor by Colebrook 1939; n = 1/√f after Zagarola & Smits 1998; log law κ = 0.41"),
        |re: Dynamic, rr: Dynamic, fam: &str| -> Res<ProfileModel> {
            let family = profile_family(fam)?;
            lib(ProfileModel::for_flow(family, number(&re, "Reynolds number")?, number(&rr, "relative roughness")?))
        },
    );
    r.engine.register_fn("to_string", |m: &mut ProfileModel| format!("ProfileModel: {}", m.name()));
    r.property(
        "ProfileModel",
        "mean_to_centreline",
        &Doc::new("model.mean_to_centreline -> number", "Ratio of mean to centreline velocity U/U_c.")
            .example("print(power_law(7).mean_to_centreline);")
            .source("integral of the profile over the circle"),
        |m: &mut ProfileModel| m.mean_to_centreline(),
    );
    r.method(
        "ProfileModel",
        "ratio",
        &Doc::new("model.ratio(r_over_R) -> number", "u/U_c at a radius ratio r/R.")
            .example("print(power_law(7).ratio(0.5));")
            .source("the model's law"),
        |m: &mut ProfileModel, x: Dynamic| -> Res<f64> { Ok(m.velocity_ratio(number(&x, "r/R")?)) },
    );
    r.func(
        "fit_power_law",
        &Doc::new("fit_power_law(r_over_R, velocity) -> map", "Least-squares power law u = U_c (1 − |r/R|)^(1/n) through measured points: #{n, centreline, r_squared}. Points at the wall or with u ≤ 0 are left out.")
            .param("r_over_R", "signed radius ratio of each point (column or array of numbers)")
            .param("velocity", "velocity column (or array of velocities)")
            .example("let t = table_from(#{r: [-0.9, -0.5, 0.0, 0.5, 0.9], v: [8.6, 10.6, 12.0, 10.6, 8.6]}).unit(\"v\", \"m/s\");\nprint(fit_power_law(t[\"r\"], t[\"v\"]));")
            .source("linear regression of ln u on ln(y/R) (common practice, no source)"),
        |x: Dynamic, v: Dynamic| -> Res<Map> {
            let xs: Vec<f64> = match x.clone().try_cast::<Col>() {
                Some(c) => c.si.to_vec(),
                None => x.clone().try_cast::<Array>().ok_or_else(|| rt("fit_power_law: r_over_R must be a column or an array"))?.iter().map(|d| number(d, "r/R")).collect::<Res<_>>()?,
            };
            let vs: Vec<f64> = match v.clone().try_cast::<Col>() {
                Some(c) if c.dimension == D::VELOCITY => c.si.to_vec(),
                Some(_) => return Err(rt("fit_power_law: velocity must be a velocity column (declare its unit)")),
                None => v.clone().try_cast::<Array>().ok_or_else(|| rt("fit_power_law: velocity must be a column or an array"))?.iter().map(|d| si_of(d, D::VELOCITY, "velocity")).collect::<Res<_>>()?,
            };
            if xs.len() != vs.len() {
                return Err(rt(format!("fit_power_law: {} positions but {} velocities", xs.len(), vs.len())));
            }
            let (yr, u): (Vec<f64>, Vec<f64>) = xs.iter().zip(&vs).map(|(x, v)| (1.0 - x.abs(), *v)).filter(|(y, v)| *y > 0.0 && *v > 0.0).unzip();
            let f = lib(stagna::analysis::fit_power_law(&yr, &u))?;
            let mut m = Map::new();
            m.insert("n".into(), Dynamic::from(f.n));
            m.insert("centreline".into(), Dynamic::from(Q::si(f.centreline, D::VELOCITY)));
            m.insert("r_squared".into(), Dynamic::from(f.r_squared));
            Ok(m)
        },
    );
    r.func(
        "single_point",
        &Doc::new("single_point(centreline_velocity, state, conduit, options) -> SinglePoint", "Mean velocity and flow from one centreline velocity, iterating the Reynolds number with the profile model. Assumes fully developed, swirl-free flow in a straight round pipe; options: family (\"power-law\" default or \"log-law\"), upstream_D and downstream_D (straight lengths, for warnings).")
            .example("let w = water().state(350.kPa, 11.degC);\nlet sp = single_point(1.62.m_s, w, round_duct(400.mm).roughness(0.05.mm), #{upstream_D: 30, downstream_D: 8});\nprint(sp);")
            .source("ISO 3966:2008 / ISO 7145:1982 (single point at the centre); profile models as in profile_for"),
        |v: Dynamic, s: State, c: Conduit, o: Map| -> Res<SinglePointResult> {
            check_keys(&o, &["family", "upstream_D", "downstream_D"], "single_point")?;
            let family = match field(&o, "family") {
                Some(f) => profile_family(&text(f, "family")?)?,
                None => ProfileFamily::PowerLawFromFriction,
            };
            let straight = match (field(&o, "upstream_D"), field(&o, "downstream_D")) {
                (Some(u), Some(d)) => Some(StraightLengths {
                    upstream_diameters: number(u, "upstream_D")?,
                    downstream_diameters: number(d, "downstream_D")?,
                }),
                (None, None) => None,
                _ => return Err(rt("single_point: give both upstream_D and downstream_D")),
            };
            lib(single_point(Velocity::m_s(si_of(&v, D::VELOCITY, "centreline velocity")?), &s.s, &c, family, straight))
        },
    );
    let p = prefs.clone();
    r.engine.register_fn("to_string", move |s: &mut SinglePointResult| {
        let mut out = format!(
            "SinglePoint ({}): U/U_c = {:.4}, mean {}, Q = {}, Re = {:.3e}",
            s.model.name(),
            s.ratio,
            show_q(s.mean_velocity.si(), D::VELOCITY, &p),
            show_q(s.volume_flow.si(), D::VOLUME_FLOW, &p),
            s.reynolds
        );
        for w in &s.warnings {
            out.push_str(&format!("\n  warning: {}", w.message));
        }
        out
    });
    r.property(
        "SinglePoint",
        "mean_velocity",
        &Doc::new("result.mean_velocity -> Quantity", "Mean velocity.").example("let w = water().state(350.kPa, 11.degC);\nprint(single_point(1.6.m_s, w, round_duct(400.mm), #{}).mean_velocity);").source("single-point method"),
        |s: &mut SinglePointResult| Q::si(s.mean_velocity.si(), D::VELOCITY),
    );
    r.property(
        "SinglePoint",
        "volume_flow",
        &Doc::new("result.volume_flow -> Quantity", "Volume flow at the measuring conditions.").example("let w = water().state(350.kPa, 11.degC);\nprint(single_point(1.6.m_s, w, round_duct(400.mm), #{}).volume_flow.to(\"L/s\"));").source("Q = U A"),
        |s: &mut SinglePointResult| Q::si(s.volume_flow.si(), D::VOLUME_FLOW),
    );
    r.property(
        "SinglePoint",
        "ratio",
        &Doc::new("result.ratio -> number", "U/U_c used.").example("let w = water().state(350.kPa, 11.degC);\nprint(single_point(1.6.m_s, w, round_duct(400.mm), #{}).ratio);").source("profile model"),
        |s: &mut SinglePointResult| s.ratio,
    );
    r.property(
        "SinglePoint",
        "warnings",
        &Doc::new("result.warnings -> array", "Remarks (straight lengths, regime).").example("let w = water().state(350.kPa, 11.degC);\nprint(single_point(1.6.m_s, w, round_duct(400.mm), #{upstream_D: 10, downstream_D: 3}).warnings);").source("common practice, no source (25 D / 5 D)"),
        |s: &mut SinglePointResult| warnings_of(&s.warnings),
    );

    r.func(
        "flow",
        &Doc::new("flow(mean_velocity, conduit, state, options) -> Flow", "Volume and mass flow from a section-mean velocity; options: reference (\"normal\" 0 °C and 101.325 kPa, \"standard\" 15 °C and 101.325 kPa, \"epa\" 20 °C and 760 mmHg, \"us\" 60 °F and 14.696 psi), moisture (B_ws for the dry-basis flow), wall_factor (a number, US EPA Method 2H).")
            .example("let air = humid_air(0.4).state(101.kPa, 22.degC);\nlet f = flow(6.9.m_s, round_duct(600.mm), air, #{reference: \"normal\"});\nprint(f);")
            .source("Q = U A; ṁ = ρ Q; ideal-gas correction to the reference condition; US EPA Method 2H for wall factors"),
        |v: Dynamic, c: Conduit, s: State, o: Map| -> Res<FlowResult> {
            let opts = flow_options(&o)?;
            lib(flow(Velocity::m_s(si_of(&v, D::VELOCITY, "mean velocity")?), &c, &s.s, &opts))
        },
    );
    let p = prefs.clone();
    r.engine.register_fn("to_string", move |f: &mut FlowResult| {
        let mut s = format!(
            "Flow: mean velocity {}, Q = {}, ṁ = {}",
            show_q(f.mean_velocity.si(), D::VELOCITY, &p),
            show_q(f.volume_flow.si(), D::VOLUME_FLOW, &p),
            show_q(f.mass_flow.si(), D::MASS_FLOW, &p)
        );
        if let Some(q) = f.reference_flow {
            s.push_str(&format!(", Q_ref = {}", show_q(q.si(), D::VOLUME_FLOW, &p)));
        }
        if let Some(q) = f.dry_reference_flow {
            s.push_str(&format!(", Q_ref,dry = {}", show_q(q.si(), D::VOLUME_FLOW, &p)));
        }
        s
    });
    for (name, summary) in [
        ("volume_flow", "Volume flow at the measuring conditions."),
        ("mass_flow", "Mass flow."),
        ("reference_flow", "Volume flow at the reference condition (wet), or ()."),
        ("dry_reference_flow", "Dry-basis volume flow at the reference condition, or ()."),
    ] {
        r.property(
            "Flow",
            name,
            &Doc::new(&format!("flow.{name} -> Quantity"), summary)
                .example(&format!("let air = dry_air().state(101.kPa, 20.degC);\nprint(flow(5.m_s, round_duct(1.m), air, #{{reference: \"normal\", moisture: 0.0}}).{name});"))
                .source("Q = U A; ideal-gas reference correction"),
            move |f: &mut FlowResult| -> Dynamic {
                let (v, dim) = match name {
                    "volume_flow" => (Some(f.volume_flow.si()), D::VOLUME_FLOW),
                    "mass_flow" => (Some(f.mass_flow.si()), D::MASS_FLOW),
                    "reference_flow" => (f.reference_flow.map(|q| q.si()), D::VOLUME_FLOW),
                    _ => (f.dry_reference_flow.map(|q| q.si()), D::VOLUME_FLOW),
                };
                v.map_or(Dynamic::UNIT, |v| Dynamic::from(Q::si(v, dim)))
            },
        );
    }

    r.func(
        "section_mean",
        &Doc::new("section_mean(wall_distance, velocity, conduit, options) -> Quantity", "Mean velocity of a round section from points on one or more diameters: the arithmetic mean (what equal-area and log-linear layouts are for) or numerical integration with a power-law wall region. Options: averaging (\"arithmetic\" or a wall exponent m, e.g. 7), line (a column of diameter numbers, when there are several).")
            .param("wall_distance", "distance of each point from the port-side wall (length column)")
            .param("velocity", "point velocities (velocity column)")
            .example("let t = table_from(#{y: [40.0, 140.0, 460.0, 560.0], v: [10.1, 11.8, 11.7, 10.0]}).units(#{y: \"mm\", v: \"m/s\"});\nprint(section_mean(t[\"y\"], t[\"v\"], round_duct(600.mm), #{averaging: 7}));")
            .source("ISO 3966:2008 §9–10 (velocity-area integration)"),
        |y: Col, v: Col, c: Conduit, o: Map| -> Res<Q> {
            check_keys(&o, &["averaging", "line"], "section_mean")?;
            if y.dimension != D::LENGTH || v.dimension != D::VELOCITY {
                return Err(rt("section_mean: wall distance must be a length column and velocity a velocity column (declare their units)"));
            }
            let stagna::Section::Circular { diameter } = c.section else {
                return Err(rt("section_mean: a round conduit (rectangular sections: use reduce_campaign)"));
            };
            let d = diameter.si();
            let positions: Vec<stagna::Position> =
                y.si.iter().map(|s| stagna::Position::Radial { r_over_r: 2.0 * s / d - 1.0, angle_deg: 0.0 }).collect();
            let lines: Vec<usize> = match field(&o, "line") {
                Some(l) => {
                    let lc: Col = l.clone().try_cast().ok_or_else(|| rt("section_mean: line must be a column"))?;
                    lc.si.iter().map(|x| x.max(0.0) as usize).collect()
                }
                None => vec![0; y.si.len()],
            };
            let averaging = match field(&o, "averaging") {
                None => Averaging::Arithmetic,
                Some(a) if a.is_string() => Averaging::Arithmetic,
                Some(a) => Averaging::Integrate { wall_exponent: number(a, "averaging")? },
            };
            let m = lib(section_mean(&lines, &positions, &v.si, averaging))?;
            Ok(Q { q: m.mean.into(), unit: Some("m/s".into()) })
        },
    );

    // ----------------------------------------------------------------- layouts
    r.group("Traverse layouts");
    r.func(
        "traverse_layout",
        &Doc::new("traverse_layout(conduit, options) -> Layout", "Traverse point positions and insertion depths. Round conduits: rule (\"equal-area\", \"log-linear\", \"log-chebyshev\"), points (per diameter, even), diameters (1–8), port_length. Rectangular: rule (\"equal-area\" or \"log-chebyshev\"), columns and rows (or total for the US EPA matrix), port_length.")
            .example("let l = traverse_layout(round_duct(600.mm), #{rule: \"log-linear\", points: 10, diameters: 2, port_length: 80.mm});\nprint(l.field_sheet());")
            .source("ISO 3966:2008 §9 (log-linear, log-Chebyshev); US EPA Method 1 (equal-area, wall distances)"),
        |c: Conduit, o: Map| -> Res<TraverseLayout> {
            check_keys(&o, &["rule", "points", "diameters", "columns", "rows", "total", "port_length"], "traverse_layout")?;
            let rule = layout_rule(&field(&o, "rule").map(|d| text(d, "rule")).transpose()?.unwrap_or_else(|| "equal-area".into()))?;
            let port = match field(&o, "port_length") {
                Some(d) => length(d, "port_length")?,
                None => Length::m(0.0),
            };
            if c.is_circular() {
                let points = field(&o, "points").map(|d| count(d, "points")).transpose()?.unwrap_or(10);
                let lines = field(&o, "diameters").map(|d| count(d, "diameters")).transpose()?.unwrap_or(2);
                lib(TraverseLayout::circular(&c, rule, points, lines, port))
            } else if let Some(t) = field(&o, "total") {
                lib(TraverseLayout::rectangular_epa(&c, count(t, "total")?, port))
            } else if rule == LayoutRule::LogChebyshev && field(&o, "columns").is_none() {
                lib(TraverseLayout::rectangular_log_chebyshev(&c, port))
            } else {
                let cols = field(&o, "columns").map(|d| count(d, "columns")).transpose()?.unwrap_or(4);
                let rws = field(&o, "rows").map(|d| count(d, "rows")).transpose()?.unwrap_or(4);
                lib(TraverseLayout::rectangular(&c, rule, cols, rws, port))
            }
        },
    );
    r.engine.register_fn("to_string", |l: &mut TraverseLayout| {
        let mut s = format!("Layout: {}, {} line(s) × {} points on {}", l.rule, l.lines, l.per_line, l.conduit);
        for w in &l.warnings {
            s.push_str(&format!("\n  warning: {}", w.message));
        }
        s
    });
    r.method(
        "Layout",
        "field_sheet",
        &Doc::new("layout.field_sheet() -> string", "The field sheet: one line per point with its label, wall distance and insertion depth (port length added).")
            .example("print(traverse_layout(round_duct(1.2.m), #{points: 8}).field_sheet());")
            .source("US EPA Method 1 Table 1-1 / ISO 3966 §9 positions"),
        |l: &mut TraverseLayout| l.field_table(),
    );
    r.property(
        "Layout",
        "warnings",
        &Doc::new("layout.warnings -> array", "Remarks (points moved away from the wall, ...).")
            .example("print(traverse_layout(round_duct(250.mm), #{points: 12}).warnings);")
            .source("US EPA Method 1 §11.3"),
        |l: &mut TraverseLayout| warnings_of(&l.warnings),
    );
    r.property(
        "Layout",
        "count",
        &Doc::new("layout.count -> integer", "Number of points.")
            .example("print(traverse_layout(round_duct(1.m), #{points: 8, diameters: 2}).count);")
            .source("common practice, no source"),
        |l: &mut TraverseLayout| l.points.len() as i64,
    );
    r.func(
        "epa_min_points",
        &Doc::new("epa_min_points(conduit, downstream_D, upstream_D) -> integer", "Minimum number of traverse points by US EPA Method 1 §11.2 for a site the given numbers of diameters after and before the nearest disturbances.")
            .example("print(epa_min_points(round_duct(1.5.m), 6.0, 1.5));")
            .source("US EPA Method 1 (40 CFR 60 App. A-1) §11.2, Figure 1-1 (breakpoints from memory)"),
        |c: Conduit, down: Dynamic, up: Dynamic| -> Res<i64> {
            let m = lib(stagna::layout::epa_method1_points(
                &c,
                number(&down, "downstream diameters")?,
                number(&up, "upstream diameters")?,
                stagna::layout::TraversePurpose::Velocity,
            ))?;
            Ok(m.minimum as i64)
        },
    );

    // ------------------------------------------------------------------- steps
    r.group("Worked steps");
    r.engine.register_fn("to_string", |s: &mut Steps| s.to_string());
    r.method(
        "Steps",
        "latex",
        &Doc::new("steps.latex() -> string", "The steps as LaTeX (for notebooks and reports).")
            .example("print(pitot_static(1.0).velocity(50.Pa, 1.2.kg_m3).steps().latex());")
            .source("common practice, no source"),
        |s: &mut Steps| s.to_latex(),
    );
    r.method(
        "Steps",
        "append",
        &Doc::new("steps.append(other) -> Steps", "The steps followed by another set (e.g. Δp then velocity).")
            .example("let r = u_tube(mercury()).dp(85.mm, 18.degC, 999.kg_m3);\nlet v = wall_tap_pitot(1.0).velocity(r.dp, 999.kg_m3);\nprint(r.steps().append(v.steps()));")
            .source("common practice, no source"),
        |s: &mut Steps, o: Steps| {
            let mut out = s.clone();
            out.extend(o);
            out
        },
    );
}

fn profile_family(s: &str) -> Res<ProfileFamily> {
    match s.to_ascii_lowercase().replace(['_', ' '], "-").as_str() {
        "power-law" | "power" => Ok(ProfileFamily::PowerLawFromFriction),
        "log-law" | "log" => Ok(ProfileFamily::LogLaw { kappa: KAPPA }),
        _ => Err(rt(format!("profile family: \"power-law\" or \"log-law\", got \"{s}\""))),
    }
}

/// Flow options from a script map.
pub fn flow_options(o: &Map) -> Res<FlowOptions> {
    check_keys(o, &["reference", "moisture", "wall_factor"], "flow options")?;
    let reference = field(o, "reference").map(|d| text(d, "reference")).transpose()?;
    let reference = reference
        .map(|s| match s.to_ascii_lowercase().as_str() {
            "standard" | "iso" => lib(ReferenceCondition::parse("iso_15c")),
            "us" => lib(ReferenceCondition::parse("us_60f")),
            other => lib(ReferenceCondition::parse(other)),
        })
        .transpose()?;
    let moisture = field(o, "moisture").map(|d| fraction(d, "moisture")).transpose()?;
    let wall_factor = field(o, "wall_factor")
        .map(|d| number(d, "wall_factor").map(stagna::flow::WallFactor::Measured))
        .transpose()?;
    Ok(FlowOptions { reference, moisture, wall_factor })
}
