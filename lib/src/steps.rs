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

    /// LaTeX `aligned` block, one formula and its substitution per step.
    pub fn to_latex(&self) -> String {
        let mut s = String::from("\\begin{aligned}\n");
        for st in &self.0 {
            s.push_str(&format!(
                "&\\text{{{}}}: & {} \\\\\n& & = {} = \\mathbf{{{}}} \\\\\n",
                st.title,
                st.latex,
                st.substituted.replace('·', "\\cdot ").replace('√', "\\sqrt"),
                st.result.replace(' ', "\\ ")
            ));
        }
        s.push_str("\\end{aligned}");
        s
    }
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
