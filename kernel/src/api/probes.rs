//! Probes in scripts: pitot-static, wall-tap pitot and S-type, from a differential
//! pressure to a point velocity.

use rhai::Dynamic;
use stagna::units::dimension::Dimension as D;
use stagna::*;

use super::fluids::State;
use super::*;
use crate::catalog::Doc;

/// Registers the package.
pub fn register(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.engine.register_type_with_name::<Probe>("Probe").register_type_with_name::<PointVelocity>("PointVelocity");
    r.group("Probes and point velocities");
    constructors(r);
    velocity(r);
    results(r, prefs);
}

/// The probe kinds and their head size.
fn constructors(r: &mut Registrar<'_>) {
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
            move |c: Dynamic| -> Res<Probe> {
                if let Some(cal) = c.clone().try_cast::<super::stack::Calibration>() {
                    if kind != ProbeKind::SType {
                        return Err(rt(format!("{name}: an S-type calibration record is for s_type(...)")));
                    }
                    return lib(Probe::from_calibration(&cal.record, super::stack::today_days(), None));
                }
                lib(Probe::new(kind, number(&c, "coefficient")?))
            },
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
}

/// Point velocity, for one reading or a whole column.
fn velocity(r: &mut Registrar<'_>) {
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
                out.push(stagna::instruments::probe::isentropic(p.coefficient, d, r, s, g));
            }
            Ok(Dynamic::from(Col::new("velocity", out, D::VELOCITY, Some("m/s"))))
        },
    );
}

/// What a point velocity gives.
fn results(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    let p = prefs.clone();
    r.engine.register_fn("to_string", move |v: &mut PointVelocity| {
        let mut s = format!("point velocity {} ({})", show_q(v.velocity.si(), D::VELOCITY, &p), v.direction);
        if let Some(m) = v.mach {
            s.push_str(&format!(", Mach number {}", stagna::units::quantity::format_sig(m, 3)));
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
}
