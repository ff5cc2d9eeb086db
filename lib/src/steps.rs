//! Worked steps: how a scalar result was obtained (formula, substituted
//! values with units, result, source), as plain text or LaTeX.
//!
//! Results keep their inputs (a few numbers) and build steps only when asked,
//! so whole-column computations pay nothing for this.

use std::fmt;

/// One step of a calculation.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Step {
    /// What this step finds, e.g. "differential pressure".
    pub title: String,
    /// The formula in plain text, e.g. "Δp = (ρ_m − ρ_f)·g·h".
    pub formula: String,
    /// The same formula in LaTeX (no surrounding `$`).
    pub latex: String,
    /// The formula with the values put in, with units.
    pub substituted: String,
    /// The result with its unit.
    pub result: String,
    /// Where the formula comes from.
    pub source: String,
}

/// An ordered list of steps.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Steps(pub Vec<Step>);

impl Steps {
    /// Appends a step.
    pub fn push(&mut self, title: &str, formula: &str, latex: &str, substituted: String, result: String, source: &str) {
        self.0.push(Step {
            title: title.into(),
            formula: formula.into(),
            latex: latex.into(),
            substituted,
            result,
            source: source.into(),
        });
    }

    /// Appends all steps of another list.
    pub fn extend(&mut self, other: Steps) {
        self.0.extend(other.0);
    }

    /// LaTeX `aligned` block, one formula and its substitution per step (wrap it in `$$`
    /// for notebooks).
    pub fn to_latex(&self) -> String {
        let mut s = String::from("\\begin{aligned}\n");
        for st in &self.0 {
            s.push_str(&format!(
                "&\\text{{{}}}: & {} \\\\\n& & = {} = \\mathbf{{{}}} \\\\\n",
                st.title,
                st.latex,
                latex_text(&st.substituted),
                latex_text(&st.result)
            ));
        }
        s.push_str("\\end{aligned}");
        s
    }
}

/// Plain-text arithmetic with units as LaTeX: `√(…)` → `\sqrt{…}`, `·` → `\cdot`, Greek
/// letters and superscripts as commands, unit words upright after their numbers.
pub fn latex_text(s: &str) -> String {
    let chars: Vec<char> = s.chars().collect();
    let mut out = String::new();
    let mut i = 0;
    let mut closers: Vec<usize> = Vec::new(); // depth at which a \sqrt{ was opened
    let mut depth = 0usize;
    while i < chars.len() {
        let c = chars[i];
        match c {
            '√' if chars.get(i + 1) == Some(&'(') => {
                out.push_str("\\sqrt{");
                depth += 1;
                closers.push(depth);
                i += 2;
                continue;
            }
            '(' => {
                depth += 1;
                out.push('(');
            }
            ')' => {
                if closers.last() == Some(&depth) {
                    closers.pop();
                    out.push('}');
                } else {
                    out.push(')');
                }
                depth = depth.saturating_sub(1);
            }
            '·' => out.push_str(" \\cdot "),
            '×' => out.push_str(" \\times "),
            '−' => out.push('-'),
            '²' => out.push_str("^2"),
            '³' => out.push_str("^3"),
            'ρ' => out.push_str("\\rho "),
            'Δ' => out.push_str("\\Delta "),
            'μ' => out.push_str("\\mu "),
            'γ' => out.push_str("\\gamma "),
            'κ' => out.push_str("\\kappa "),
            '°' => out.push_str("^\\circ "),
            ' ' => out.push_str("\\ "),
            c if c.is_ascii_alphabetic() => {
                let start = i;
                while i < chars.len() && (chars[i].is_ascii_alphabetic() || chars[i] == '/' || chars[i] == '_') {
                    i += 1;
                }
                let word: String = chars[start..i].iter().collect();
                out.push_str(&format!("\\mathrm{{{word}}}"));
                continue;
            }
            c => out.push(c),
        }
        i += 1;
    }
    out
}

impl fmt::Display for Steps {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for (i, st) in self.0.iter().enumerate() {
            writeln!(f, "{}. {}", i + 1, st.title)?;
            writeln!(f, "   {}", st.formula)?;
            writeln!(f, "   = {}", st.substituted)?;
            writeln!(f, "   = {}", st.result)?;
            writeln!(f, "   source: {}", st.source)?;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::latex_text;

    #[test]
    fn substitutions_become_latex() {
        assert_eq!(
            latex_text("1 · √(2 · 50 Pa / 1.2 kg/m³)"),
            "1\\  \\cdot \\ \\sqrt{2\\  \\cdot \\ 50\\ \\mathrm{Pa}\\ /\\ 1.2\\ \\mathrm{kg/m}^3}"
        );
        assert_eq!(latex_text("(13565.5 − 999.933)"), "(13565.5\\ -\\ 999.933)");
    }
}
