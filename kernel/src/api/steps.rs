//! Worked steps in scripts: how a result was obtained, as text or LaTeX.

use stagna::*;

use super::*;
use crate::catalog::Doc;

/// Registers the package.
pub fn register(r: &mut Registrar<'_>, _prefs: &SharedPrefs) {
    r.engine.register_type_with_name::<Steps>("Steps");
    r.group("Worked steps");
    steps(r);
}

/// Steps as LaTeX, and joined.
fn steps(r: &mut Registrar<'_>) {
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
            .example("let r = u_tube(gauge_mercury()).dp(85.mm, 18.degC, 999.kg_m3);\nlet v = wall_tap_pitot(1.0).velocity(r.dp, 999.kg_m3);\nprint(r.steps().append(v.steps()));")
            .source("common practice, no source"),
        |s: &mut Steps, o: Steps| {
            let mut out = s.clone();
            out.extend(o);
            out
        },
    );
}
