//! `stagna demo`: reduces the bundled demo campaign through the library and
//! prints result tables with units, warnings, worked steps and cautions.
//!
//! The scenario is invented: a leisure centre's supply-air duct traversed
//! with a pitot-static tube on an inclined oil gauge, and a pumping station's
//! outlet main read at the centreline with a wall-tap pitot on a mercury
//! U-tube.

use std::collections::BTreeSet;
use std::error::Error;
use std::path::Path;

use comfy_table::{Cell, CellAlignment, Table, presets::UTF8_FULL_CONDENSED};
use stagna::profile::StraightLengths;
use stagna::quantity::format_number;
use stagna::*;

use crate::readings::Readings;

const DUCT_FILE: &str = "larkfield-ahu2-supply.csv";
const MAIN_FILE: &str = "hollin-brook-main.csv";
const DUCT_CSV: &str = include_str!("../../demo-data/larkfield-ahu2-supply.csv");
const MAIN_CSV: &str = include_str!("../../demo-data/hollin-brook-main.csv");

/// Printed wherever results may be acted on.
pub const CAUTION: &str = "\
Caution: pressurised and hot lines, hot or toxic stack gas, work at height and in confined
spaces, and mercury-filled gauges can injure. Follow your site's permits and local codes, and
have results that decide safety, compliance or money checked under licensed practice. These
figures are only as good as the readings, the stated fluid data and the method's assumptions;
read every warning above.";

type AnyResult<T> = Result<T, Box<dyn Error>>;

fn load(dir: Option<&Path>, file: &str, bundled: &str) -> AnyResult<Readings> {
    match dir {
        None => Ok(Readings::parse(&format!("bundled {file}"), bundled)?),
        Some(d) => {
            let path = d.join(file);
            let text = std::fs::read_to_string(&path).map_err(|e| format!("cannot read {}: {e}", path.display()))?;
            Ok(Readings::parse(&path.display().to_string(), &text)?)
        }
    }
}

fn table(headers: &[&str]) -> Table {
    let mut t = Table::new();
    t.load_preset(UTF8_FULL_CONDENSED);
    t.set_header(headers.iter().map(Cell::new));
    for i in 0..headers.len() {
        if let Some(c) = t.column_mut(i) {
            c.set_cell_alignment(CellAlignment::Right);
        }
    }
    t
}

fn fixed(v: f64, decimals: usize) -> String {
    format!("{v:.decimals$}")
}

/// Runs the demo; `data_dir` replaces the bundled files with files of the same names.
pub fn run(data_dir: Option<&Path>) -> AnyResult<()> {
    let duct = load(data_dir, DUCT_FILE, DUCT_CSV)?;
    let main = load(data_dir, MAIN_FILE, MAIN_CSV)?;
    let mut warnings = BTreeSet::new();
    let duct_report = reduce_duct(&duct, &mut warnings)?;
    let (main_report, steps) = reduce_main(&main, &mut warnings)?;
    println!("Stagna demo: invented scenario, bundled readings\n");
    println!("{duct_report}");
    println!("{main_report}");
    println!("How reading 1 of the water main was reduced:\n{steps}");
    if warnings.is_empty() {
        println!("Warnings: none.\n");
    } else {
        println!("Warnings:");
        for w in &warnings {
            println!("- {w}");
        }
        println!();
    }
    println!("{CAUTION}");
    Ok(())
}

fn row_err(r: &Readings, i: usize, e: stagna::Error) -> Box<dyn Error> {
    format!("{}, line {}: {e}", r.source, r.line(i)).into()
}

/// Duct traverse: humid air, inclined gauge, pitot-static tube.
fn reduce_duct(r: &Readings, warnings: &mut BTreeSet<String>) -> AnyResult<String> {
    let point = r.text("point")?;
    let insertion = r.numbers("insertion_mm", "mm")?;
    let reading = r.numbers("gauge_reading_mm", "mm")?;
    let zero = r.numbers("gauge_zero_mm", "mm")?;
    let gauge_t = r.numbers("gauge_temp_c", "°C")?;
    let air_t = r.numbers("air_temp_c", "°C")?;
    let rh = r.numbers("rel_humidity_pct", "%")?;
    let baro = r.numbers("barometer_hpa", "hPa")?;
    let static_pa = r.numbers("duct_static_pa", "Pa")?;

    let diameter = Length::mm(600.0);
    let oil = UserLiquid::new("gauge oil", Density::kg_m3(826.0), Temperature::celsius(20.0), Some(7.5e-4))?;
    let gauge = Manometer::new(
        ManometerKind::Inclined { angle_deg: 20.0, area_ratio: 0.0036 },
        GaugeLiquid::User(oil),
        gravity::local(52.2, Length::m(35.0))?,
    )?;
    let probe = Probe::new(ProbeKind::PitotStatic, 0.998)?.with_head_diameter(Length::mm(8.0))?;

    let mut t = table(&["point", "insertion (mm)", "deflection (mm)", "Δp (Pa)", "ρ air (kg/m³)", "v (m/s)", "Mach"]);
    let mut velocities = Vec::with_capacity(r.len());
    let mut dps = Vec::with_capacity(r.len());
    for i in 0..r.len() {
        let air = HumidAir::relative(rh[i] / 100.0).map_err(|e| row_err(r, i, e))?;
        let state = Fluid::HumidAir(air)
            .state(Pressure::pa(baro[i] * 100.0 + static_pa[i]), Temperature::celsius(air_t[i]))
            .map_err(|e| row_err(r, i, e))?;
        let dp = gauge
            .differential_pressure(
                Reading::Scale { reading: Length::mm(reading[i]), zero: Length::mm(zero[i]) },
                Temperature::celsius(gauge_t[i]),
                state.density,
            )
            .map_err(|e| row_err(r, i, e))?;
        let v = probe.velocity(dp.dp, &state, VelocityMethod::Auto).map_err(|e| row_err(r, i, e))?;
        for w in dp.warnings.iter().chain(&v.warnings) {
            warnings.insert(format!("duct point {}: {}", point[i], w.message));
        }
        velocities.push(v.velocity.si());
        dps.push(dp.dp.si());
        t.add_row(vec![
            point[i].clone(),
            fixed(insertion[i], 1),
            fixed(dp.deflection.si() * 1e3, 1),
            fixed(dp.dp.si(), 2),
            fixed(state.density.si(), 4),
            fixed(v.velocity.si(), 3),
            fixed(v.mach.unwrap_or(f64::NAN), 4),
        ]);
    }
    let n = r.len() as f64;
    // One diameter, positions from the port-side wall; arithmetic mean (what the
    // equal-area positions are for) and, for comparison, integration with m = 7.
    let conduit = Conduit::circular(diameter)?;
    let lines = vec![0; r.len()];
    let positions: Vec<Position> = insertion
        .iter()
        .map(|s| Position::Radial { r_over_r: 2.0 * s * 1e-3 / diameter.si() - 1.0, angle_deg: 0.0 })
        .collect();
    let arithmetic = section_mean(&lines, &positions, &velocities, Averaging::Arithmetic)?;
    let integrated = section_mean(&lines, &positions, &velocities, Averaging::Integrate { wall_exponent: 7.0 })?;
    let mean_of = |v: &[f64]| v.iter().sum::<f64>() / n;
    let air = HumidAir::relative(mean_of(&rh) / 100.0)?;
    let mean_p = mean_of(&baro) * 100.0 + mean_of(&static_pa);
    let state = Fluid::HumidAir(air).state(Pressure::pa(mean_p), Temperature::celsius(mean_of(&air_t)))?;
    let options = FlowOptions { reference: Some(ReferenceCondition::Normal0C), ..Default::default() };
    let f = flow(arithmetic.mean, &conduit, &state, &options)?;
    let q_ref = f.reference_flow.map_or(f64::NAN, |q| q.si());
    let budget = duct_uncertainty(&dps, state.density.si())?;
    Ok(format!(
        "Larkfield Leisure Centre, AHU-2 supply duct (Ø 600 mm): pitot-static C = 0.998, inclined oil gauge 20°\n{t}\n\
         mean velocity, arithmetic mean of {} equal-area points (one diameter)  {} m/s\n\
         mean velocity, integrated (wall region power law m = 7), for comparison {} m/s\n\
         volume flow at duct conditions                                         {} m³/s  ({} m³/h)\n\
         volume flow at 0 °C, 101.325 kPa (wet air)                             {} m³/s\n\
         mass flow                                                              {} kg/s\n\n\
         Uncertainty of the volume flow at duct conditions (m³/s):\n{budget}",
        r.len(),
        fixed(arithmetic.mean.si(), 3),
        fixed(integrated.mean.si(), 3),
        fixed(f.volume_flow.si(), 4),
        fixed(f.volume_flow.si() * 3600.0, 0),
        fixed(q_ref, 4),
        fixed(f.mass_flow.si(), 4),
    ))
}

/// GUM budget of the duct flow, checked by an adaptive Monte Carlo run (JCGM 101).
fn duct_uncertainty(dps: &[f64], rho: f64) -> AnyResult<String> {
    use stagna::flow_uncertainty::{MethodTerm, TraverseUncertainty};
    use stagna::monte_carlo::{monte_carlo_adaptive, validate};
    use stagna::uncertainty::{Correlations, Input};
    // Scenario: probe certificate C = 0.998, U = 0.005 (k = 2); density from CIPM-2007 with
    // barometer, thermometer and hygrometer, u(ρ)/ρ = 0.15 %; diameter measured to ±1.5 mm;
    // gauge read to half a 1 mm division along the tube (±0.25 mm ≈ ±0.7 Pa) and 0.5 % for
    // gauge-oil and scale effects.
    let points = stagna::flow_uncertainty::dp_inputs(dps, 0.005, 0.7 / 3f64.sqrt())?;
    let t = TraverseUncertainty::new(
        Input::from_expanded("probe coefficient C", "1", 0.998, 0.005, 2.0)?.with_source("calibration certificate"),
        Input::normal("air density ρ", "kg/m³", rho, 0.0015 * rho)?.with_source("CIPM-2007 with p, t, RH readings"),
        Input::rectangular("duct diameter D", "m", 0.600, 0.0015)?.with_source("tape across two diameters"),
        &MethodTerm::typical(LayoutRule::EqualArea),
        points,
    )?;
    let g = t.gum(0.95)?;
    let (mc, delta) = monte_carlo_adaptive(&t.model, &t.inputs, &Correlations::none(), 2, 0.95, 20_261_202, 2_000_000)?;
    let v = validate(&g, &mc, 2);
    Ok(format!(
        "{g}Monte Carlo (JCGM 101, adaptive, {} trials): mean {} u {}, 95 % interval [{}, {}]; GUM {} at δ = {} (|Δlow| = {}, |Δhigh| = {})\n",
        mc.trials,
        fixed(mc.mean, 4),
        fixed(mc.u, 4),
        fixed(mc.symmetric.0, 4),
        fixed(mc.symmetric.1, 4),
        if v.passed { "validated" } else { "NOT validated" },
        format_number(delta),
        format_number(v.d_low),
        format_number(v.d_high),
    ))
}

/// Water main: IF97 water, mercury U-tube, wall-tap pitot at the centreline.
fn reduce_main(r: &Readings, warnings: &mut BTreeSet<String>) -> AnyResult<(String, Steps)> {
    let time = r.text("time")?;
    let h = r.numbers("hg_deflection_mm", "mm")?;
    let gauge_t = r.numbers("gauge_temp_c", "°C")?;
    let water_t = r.numbers("water_temp_c", "°C")?;
    let line_kpa = r.numbers("line_gauge_kpa", "kPa")?;
    let baro = r.numbers("barometer_hpa", "hPa")?;

    let gauge = Manometer::new(ManometerKind::UTube, GaugeLiquid::Mercury, gravity::local(53.4, Length::m(112.0))?)?;
    let probe = Probe::new(ProbeKind::WallTapPitot, 1.0)?;
    let water = Fluid::Water(Water::default());

    let mut t = table(&["time", "Hg deflection (mm)", "Δp (kPa)", "ρ water (kg/m³)", "μ water (mPa·s)", "v (m/s)"]);
    let mut vs = Vec::with_capacity(r.len());
    let mut first_steps = Steps::default();
    for i in 0..r.len() {
        let state = water
            .state(Pressure::pa(line_kpa[i] * 1e3 + baro[i] * 100.0), Temperature::celsius(water_t[i]))
            .map_err(|e| row_err(r, i, e))?;
        let dp = gauge
            .differential_pressure(
                Reading::Deflection(Length::mm(h[i])),
                Temperature::celsius(gauge_t[i]),
                state.density,
            )
            .map_err(|e| row_err(r, i, e))?;
        let v = probe.velocity(dp.dp, &state, VelocityMethod::Auto).map_err(|e| row_err(r, i, e))?;
        for w in dp.warnings.iter().chain(&v.warnings).chain(&state.warnings) {
            warnings.insert(format!("water main {}: {}", time[i], w.message));
        }
        if i == 0 {
            first_steps.extend(dp.steps());
            first_steps.extend(v.steps());
        }
        vs.push(v.velocity.si());
        t.add_row(vec![
            time[i].clone(),
            fixed(h[i], 1),
            fixed(dp.dp.si() / 1e3, 3),
            fixed(state.density.si(), 3),
            fixed(state.viscosity.map_or(f64::NAN, |m| m.si() * 1e3), 4),
            fixed(v.velocity.si(), 3),
        ]);
    }
    let n = vs.len() as f64;
    let mean = vs.iter().sum::<f64>() / n;
    let sd = if vs.len() > 1 { (vs.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt() } else { 0.0 };
    // Single-point method at the mean state: the pipe is 400 mm cement-lined ductile iron
    // (roughness 0.05 mm assumed for the scenario), 30 D straight upstream and 8 D downstream.
    let mean_of = |v: &[f64]| v.iter().sum::<f64>() / n;
    let state = water.state(
        Pressure::pa(mean_of(&line_kpa) * 1e3 + mean_of(&baro) * 100.0),
        Temperature::celsius(mean_of(&water_t)),
    )?;
    let pipe = Conduit::circular(Length::mm(400.0))?.with_roughness(Length::mm(0.05))?;
    let straight = StraightLengths { upstream_diameters: 30.0, downstream_diameters: 8.0 };
    let mut lines = String::new();
    for family in [ProfileFamily::PowerLawFromFriction, ProfileFamily::LogLaw { kappa: stagna::profile::KAPPA }] {
        let sp = single_point(Velocity::m_s(mean), &state, &pipe, family, Some(straight))?;
        for w in &sp.warnings {
            warnings.insert(format!("water main: {}", w.message));
        }
        lines.push_str(&format!(
            "  {:<38} U/U_c = {}  mean {} m/s  flow {} L/s ({} m³/h)  Re = {:.3e}\n",
            sp.model.name(),
            fixed(sp.ratio, 4),
            fixed(sp.mean_velocity.si(), 3),
            fixed(sp.volume_flow.si() * 1e3, 1),
            fixed(sp.volume_flow.si() * 3600.0, 0),
            sp.reynolds
        ));
    }
    let report = format!(
        "Hollin Brook pumping station, DN400 outlet main: wall-tap pitot C = 1.0 at the centreline, mercury U-tube\n{t}\n\
         mean centreline velocity over {} readings  {} m/s  (standard deviation {} m/s, Type A standard uncertainty of the mean {} m/s)\n\
         single-point method (fully developed flow assumed; the two profile models differ):\n{lines}",
        vs.len(),
        fixed(mean, 3),
        fixed(sd, 3),
        fixed(sd / n.sqrt(), 3),
    );
    Ok((report, first_steps))
}

/// The unit table as text: names, what each is, SI value and source.
pub fn units_table() -> String {
    let mut t = table(&["names", "unit", "SI value", "dimension", "source"]);
    if let Some(c) = t.column_mut(0) {
        c.set_cell_alignment(CellAlignment::Left);
    }
    for u in stagna::unit::UNITS {
        t.add_row(vec![
            u.names.join(", "),
            u.description.to_string(),
            format!("{} {}", format_number(u.factor), stagna::quantity::si_symbol(u.dimension)),
            u.dimension.name().unwrap_or("").to_string(),
            u.source.to_string(),
        ]);
    }
    format!(
        "{t}\nTemperatures: K, degC (°C), degF (°F), degR (°R) are absolute; delta_K, delta_degC, delta_degF, delta_degR are differences.\n\
         Compound units: join names with * · or /, powers with ^ or a trailing digit (kg/m^3, m3/h, Pa*s).\n"
    )
}
