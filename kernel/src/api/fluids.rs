//! Fluids in scripts: water, humid air, dry air, flue gas and other ideal-gas mixtures,
//! and their states at the measuring conditions (scalar and whole-column forms).

use rhai::{Dynamic, Map};
use stagna::units::dimension::Dimension as D;
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

/// Registers the package.
pub fn register(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.engine.register_type_with_name::<Fluid>("Fluid").register_type_with_name::<State>("FluidState");
    r.group("Fluids");
    constructors(r, prefs);
    gas_constructors(r);
    fluid_members(r, prefs);
    state_members(r, prefs);
}

/// Water and humid air.
fn constructors(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
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
        "humid_air_from_dew_point",
        &Doc::new(
            "humid_air_from_dew_point(dew_point) -> Fluid",
            "Moist air by CIPM-2007 from its dew-point temperature.",
        )
        .param("dew_point", "absolute temperature, e.g. 9.degC")
        .example("print(humid_air_from_dew_point(9.degC).density(101.kPa, 20.degC));")
        .source("CIPM-2007: Picard et al., Metrologia 45 (2008) 149–155"),
        |td: Dynamic| -> Res<Fluid> { Ok(Fluid::HumidAir(lib(HumidAir::dew_point(temperature(&td, "dew point")?))?)) },
    );
    let pd = prefs.clone();
    r.func(
        "humid_air_dew_point",
        &Doc::new("humid_air_dew_point(dew_point) -> Fluid", "Deprecated spelling of humid_air_from_dew_point (it returns the air, not a dew point); works for this release, with a warning.")
            .param("dew_point", "absolute temperature, e.g. 9.degC")
            .example("print(humid_air_from_dew_point(9.degC).density(101.kPa, 20.degC));")
            .source("CIPM-2007: Picard et al., Metrologia 45 (2008) 149–155"),
        move |td: Dynamic| -> Res<Fluid> {
            super::warn_once(&pd, "humid_air_dew_point is deprecated and will be removed in the next release; write humid_air_from_dew_point");
            Ok(Fluid::HumidAir(lib(HumidAir::dew_point(temperature(&td, "dew point")?))?))
        },
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
}

/// Dry air, flue gas, gas mixtures and ideal gases.
fn gas_constructors(r: &mut Registrar<'_>) {
    r.func(
        "dry_air",
        &Doc::new("dry_air() -> Fluid", "Dry air as an ideal-gas mixture (N₂, O₂, Ar, CO₂).")
            .example("print(dry_air().density(101.325.kPa, 0.degC));")
            .source("composition and molar masses: ISO 2533 / CIPM-2007 dry-air molar mass"),
        || Fluid::Gas(GasMixture::dry_air()),
    );
    r.func(
        "flue_gas",
        &Doc::new("flue_gas(co2_pct, o2_pct, co_pct, moisture) -> Fluid", "Stack gas as an ideal-gas mixture from a dry-basis analysis (CO₂, O₂, CO in %, N₂ the balance) and the water-vapour mole fraction B_ws, with CIAAW molar masses: the physics route. US EPA Method 3's rounded coefficients give a dry molecular weight about 0.012 g/mol lower (29.912 against 29.924 for 9.8 % CO₂, 8.6 % O₂); where the method is followed use method3_dry_molar_mass or the run sheets.")
            .param("co2_pct", "CO₂, % by volume, dry basis")
            .param("o2_pct", "O₂, % by volume, dry basis")
            .param("co_pct", "CO, % by volume, dry basis")
            .param("moisture", "water-vapour mole fraction B_ws in [0, 1)")
            .example("let gas = flue_gas(11.2, 7.1, 0.0, 0.12);\nprint(gas.molar_mass);")
            .source("ideal-gas mixing; molar masses CIAAW 2021 (a separate route from US EPA Method 3 eq. 3-1)"),
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
            let mm = si_of(&m, D::MOLAR_MASS, "molar mass")?;
            if mm.is_nan() || mm <= 0.0 {
                return Err(rt(format!(
                    "ideal_gas: molar mass must be greater than 0, got {}",
                    Q::si(mm, D::MOLAR_MASS).show(&DisplayUnits::si())
                )));
            }
            Ok(Fluid::IdealGas {
                name: name.to_string(),
                molar_mass: MolarMass::from_si(mm),
                isentropic_exponent: g,
                viscosity: None,
            })
        },
    );
}

/// What a fluid gives: its state, density (also per row) and molar mass.
fn fluid_members(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
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
}

/// The properties of a fluid state.
fn state_members(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    let p = prefs.clone();
    r.engine.register_fn("to_string", move |s: &mut State| {
        let visc = s.s.viscosity.map(|m| show_q(m.si(), D::DYNAMIC_VISCOSITY, &p)).unwrap_or_else(|| "n/a".into());
        let mut out = format!(
            "FluidState ({}): p = {}, t = {}, ρ = {}, μ = {}",
            s.s.model,
            show_q(s.s.pressure.si(), D::PRESSURE, &p),
            Q::kelvin(s.s.temperature.k()).show(&super::display_of(&p)),
            Q { q: s.s.density.into(), unit: Some("kg/m^3".into()) }.show(&DisplayUnits::si()),
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
}
