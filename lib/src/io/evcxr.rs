//! Rich display in Rust notebooks (the evcxr Jupyter kernel).
//!
//! evcxr calls an inherent `evcxr_display(&self)` method when a cell's value has one and
//! reads blocks printed as `EVCXR_BEGIN_CONTENT <mime>` … `EVCXR_END_CONTENT` on standard
//! output. No run-time dependency: each type builds its blocks as text
//! (`evcxr_blocks`, tested below) and `evcxr_display` prints them.

use crate::instruments::probe::PointVelocity;
use crate::io::plot::Chart;
use crate::section::flow::FlowResult;
use crate::section::layout::TraverseLayout;
use crate::steps::Steps;
use crate::uncertainty::GumResult;
use crate::units::quantity::format_number;

fn block(mime: &str, content: &str) -> String {
    format!("EVCXR_BEGIN_CONTENT {mime}\n{content}\nEVCXR_END_CONTENT\n")
}

fn esc(s: &str) -> String {
    s.replace('&', "&amp;").replace('<', "&lt;").replace('>', "&gt;")
}

macro_rules! display_via_blocks {
    ($($t:ty),*) => {$(
        impl $t {
            /// Prints this value's MIME blocks for the evcxr notebook kernel.
            pub fn evcxr_display(&self) {
                print!("{}", self.evcxr_blocks());
            }
        }
    )*};
}

display_via_blocks!(TraverseLayout, Chart, GumResult, Steps, PointVelocity, FlowResult);

impl TraverseLayout {
    /// The cross-section as SVG, with the field sheet as text.
    pub fn evcxr_blocks(&self) -> String {
        let mut s = block("text/plain", &self.field_table());
        if let Ok(svg) = self.to_svg() {
            s.push_str(&block("image/svg+xml", &svg));
        }
        s
    }
}

impl Chart {
    /// The chart as SVG.
    pub fn evcxr_blocks(&self) -> String {
        match self.to_svg() {
            Ok(svg) => block("image/svg+xml", &svg),
            Err(e) => block("text/plain", &format!("chart: {e}")),
        }
    }
}

impl GumResult {
    /// The budget as an HTML table, and as text.
    pub fn evcxr_blocks(&self) -> String {
        block("text/plain", &self.to_string()) + &block("text/html", &self.to_html())
    }

    /// The budget as an HTML table with the result line below it: the same columns and
    /// figures as the text form.
    pub fn to_html(&self) -> String {
        let mut h = String::from("<table class=\"stagna-table\"><thead><tr>");
        for (k, head) in Self::HEADS.iter().enumerate() {
            let align = if matches!(k, 0 | 3 | 7) { "" } else { " style=\"text-align:right\"" };
            h.push_str(&format!("<th{align}>{}</th>", esc(head)));
        }
        h.push_str("</tr></thead><tbody>");
        for r in self.rows() {
            h.push_str("<tr>");
            for (k, c) in r.iter().enumerate() {
                let align = if matches!(k, 0 | 3 | 7) { "" } else { " style=\"text-align:right\"" };
                h.push_str(&format!("<td{align}>{}</td>", esc(c)));
            }
            h.push_str("</tr>");
        }
        h.push_str(&format!("</tbody></table><p>{}</p>", esc(&self.result_line())));
        h
    }
}

impl Steps {
    /// The steps as text and as LaTeX.
    pub fn evcxr_blocks(&self) -> String {
        block("text/plain", &self.to_string()) + &block("text/latex", &format!("$$\n{}\n$$", self.to_latex()))
    }
}

impl PointVelocity {
    /// The velocity and its steps.
    pub fn evcxr_blocks(&self) -> String {
        let head = format!("v = {} m/s ({})", format_number(self.velocity.si()), self.direction);
        block("text/html", &format!("<p>{}</p><pre>{}</pre>", esc(&head), esc(&self.steps().to_string())))
    }
}

impl FlowResult {
    /// The flows as a small HTML table.
    pub fn evcxr_blocks(&self) -> String {
        let mut rows = vec![
            ("mean velocity".to_string(), format!("{} m/s", format_number(self.mean_velocity.si()))),
            (
                "volume flow at the measuring conditions".to_string(),
                format!("{} m³/s", format_number(self.volume_flow.si())),
            ),
            ("mass flow".to_string(), format!("{} kg/s", format_number(self.mass_flow.si()))),
        ];
        let at = self.reference.map(|r| r.label()).unwrap_or_default();
        if let Some(q) = self.reference_flow {
            rows.push((format!("volume flow at {at}"), format!("{} m³/s", format_number(q.si()))));
        }
        if let Some(q) = self.dry_reference_flow {
            rows.push((format!("dry volume flow at {at}"), format!("{} m³/s", format_number(q.si()))));
        }
        let body: String = rows.iter().map(|(k, v)| format!("<tr><td>{}</td><td>{v}</td></tr>", esc(k))).collect();
        block("text/html", &format!("<table>{body}</table>"))
    }
}

#[cfg(test)]
mod tests {
    use super::{GumResult, esc};
    use crate::section::layout::{LayoutRule, TraverseLayout};
    use crate::*;

    #[test]
    fn blocks_are_delimited_with_their_mime_types() {
        let c = Conduit::circular(Length::m(1.0)).unwrap();
        let l = TraverseLayout::circular(&c, LayoutRule::EqualArea, 4, 2, Length::mm(100.0)).unwrap();
        let b = l.evcxr_blocks();
        assert!(b.starts_with("EVCXR_BEGIN_CONTENT text/plain\n"));
        assert!(b.contains("EVCXR_BEGIN_CONTENT image/svg+xml\n<svg"));
        assert_eq!(b.matches("EVCXR_BEGIN_CONTENT").count(), b.matches("EVCXR_END_CONTENT").count());
        let air = Fluid::Gas(GasMixture::dry_air()).state(Pressure::kpa(101.325), Temperature::celsius(20.0)).unwrap();
        let v = Probe::new(ProbeKind::PitotStatic, 1.0)
            .unwrap()
            .velocity(Pressure::pa(50.0), &air, VelocityMethod::Auto)
            .unwrap();
        assert!(v.evcxr_blocks().starts_with("EVCXR_BEGIN_CONTENT text/html\n<p>v = "));
        assert!(v.steps().evcxr_blocks().contains("EVCXR_BEGIN_CONTENT text/latex\n"));
        let t = crate::uncertainty::flow_models::TraverseUncertainty::new(
            crate::uncertainty::Input::normal("C", "1", 1.0, 0.005).unwrap(),
            crate::uncertainty::Input::normal("rho", "kg/m3", 1.2, 0.002).unwrap(),
            crate::uncertainty::Input::normal("D", "m", 1.0, 0.001).unwrap(),
            &[],
            crate::uncertainty::flow_models::dp_inputs(&[100.0, 110.0], 0.005, 0.3).unwrap(),
        )
        .unwrap();
        let g = t.gum(0.95).unwrap();
        let html = g.evcxr_blocks();
        assert!(
            html.contains("EVCXR_BEGIN_CONTENT text/html\n<table class=\"stagna-table\">")
                && html.contains("<td>C</td>")
        );
        // Text and HTML carry the same columns and the same result line.
        for head in GumResult::HEADS {
            assert!(html.contains(&format!(">{}</th>", esc(head))), "{head}");
        }
        assert!(html.contains(&esc(&g.result_line())));
    }
}
