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

/// The steps as an HTML table whose formulas are MathML (MathML Core, drawn by the
/// browser itself: no script, font or network). A formula the converter cannot read
/// falls back to its plain-text form, so a step is never lost.
pub fn html(s: &Steps) -> String {
    use super::table_view::esc;
    let mut h = String::from(
        "<table class=\"stagna-steps\">\n<thead><tr><th>#</th><th>step</th><th>formula and values</th><th>result</th><th>source</th></tr></thead>\n<tbody>\n",
    );
    for (i, st) in s.0.iter().enumerate() {
        let formula = mathml(&st.latex).unwrap_or_else(|| esc(&st.formula));
        // A thin space where the text had a space: the renderer spells `\ ` as an escaped
        // entity (pulldown-latex 0.8), and operators bring their own spacing.
        let values = mathml(&format!("= {}", stagna::steps::latex_text(&st.substituted).replace("\\ ", "\\,")))
            .unwrap_or_else(|| format!("= {}", esc(&st.substituted)));
        h.push_str(&format!(
            "<tr><td>{}</td><td>{}</td><td>{formula}<br>{values}</td><td><b>{}</b></td><td>{}</td></tr>\n",
            i + 1,
            esc(&st.title),
            esc(&st.result),
            esc(&st.source)
        ));
    }
    h.push_str("</tbody>\n</table>");
    h
}

/// One LaTeX formula as an inline MathML element, or `None` when it cannot be read.
fn mathml(latex: &str) -> Option<String> {
    let storage = pulldown_latex::Storage::new();
    let parser = pulldown_latex::Parser::new(latex, &storage);
    let mut out = String::new();
    pulldown_latex::push_mathml(&mut out, parser, pulldown_latex::RenderConfig::default()).ok()?;
    // The renderer writes its errors into the markup when it meets an unknown command.
    (!out.contains("merror")).then_some(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn steps_render_as_mathml_with_their_sources() {
        let mut s = Steps::default();
        s.push(
            "velocity",
            "v = C·√(2·Δp/ρ)",
            r"v = C\sqrt{2\,\Delta p/\rho}",
            "1 · √(2 · 50 Pa / 1.2 kg/m³)".into(),
            "9.13 m/s".into(),
            "ISO 3966:2008, 7.1",
        );
        let h = html(&s);
        assert!(h.contains("<math") && h.contains("<msqrt>"), "{h}");
        assert!(h.contains("9.13 m/s") && h.contains("ISO 3966:2008, 7.1"));
        assert!(!h.contains("merror") && !h.contains("nbsp"), "{h}");
    }

    #[test]
    fn an_unreadable_formula_falls_back_to_text() {
        let mut s = Steps::default();
        s.push("x", "a < b", r"\notacommand{a}", "1 < 2".into(), "yes".into(), "none");
        let h = html(&s);
        assert!(h.contains("a &lt; b"), "{h}");
    }
}
