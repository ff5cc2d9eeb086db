//! `stagna layout`: plan a traverse, print the field sheet, optionally draw it.

use std::error::Error;
use std::path::{Path, PathBuf};

use stagna::section::layout::{TraversePurpose, epa_method1_points};
use stagna::{Conduit, LayoutRule, Length, Quantity, TraverseLayout};

/// Options of `stagna layout`.
#[derive(clap::Args, Debug)]
pub struct LayoutArgs {
    /// Inside diameter of a round conduit, e.g. "1.2 m" or "600mm".
    #[arg(long, conflicts_with_all = ["width", "height"])]
    diameter: Option<String>,
    /// Inside width of a rectangular conduit (the side with the ports).
    #[arg(long, requires = "height")]
    width: Option<String>,
    /// Inside height of a rectangular conduit (the traverse depth).
    #[arg(long, requires = "width")]
    height: Option<String>,
    /// Point rule: equal-area, log-linear or log-chebyshev.
    #[arg(long, default_value = "equal-area")]
    rule: String,
    /// Points per diameter (round) or in total (rectangular equal-area, US EPA Table 1-2).
    /// Without it the US EPA Method 1 minimum is used (needs --straight-upstream and
    /// --straight-downstream).
    #[arg(long)]
    points: Option<usize>,
    /// Number of diameters (round conduits).
    #[arg(long, default_value_t = 2)]
    diameters: usize,
    /// Port (nipple) length added to each insertion depth.
    #[arg(long, default_value = "0 mm")]
    port: String,
    /// Straight length before the ports, in diameters: from the nearest disturbance
    /// upstream (a bend, fan, damper) to the ports.
    #[arg(long, value_name = "D")]
    straight_upstream: Option<f64>,
    /// Straight length after the ports, in diameters: from the ports to the nearest
    /// disturbance downstream (or the outlet).
    #[arg(long, value_name = "D")]
    straight_downstream: Option<f64>,
    /// Deprecated spelling of --straight-upstream (the distance downstream of the
    /// disturbance); works for one more release, with a warning.
    #[arg(long, hide = true)]
    downstream: Option<f64>,
    /// Deprecated spelling of --straight-downstream; works for one more release, with a warning.
    #[arg(long, hide = true)]
    upstream: Option<f64>,
    /// Write the cross-section drawing to this SVG file.
    #[arg(long, value_name = "FILE")]
    svg: Option<PathBuf>,
}

fn length(text: &str, what: &str) -> Result<Length, Box<dyn Error>> {
    let q = Quantity::parse(text).map_err(|e| format!("--{what}: {e}"))?;
    Ok(Length::try_from(q).map_err(|e| format!("--{what}: {e}"))?)
}

/// Runs `stagna layout`.
pub fn run(a: &LayoutArgs) -> Result<(), Box<dyn Error>> {
    let rule = match a.rule.to_ascii_lowercase().replace('_', "-").as_str() {
        "equal-area" => LayoutRule::EqualArea,
        "log-linear" => LayoutRule::LogLinear,
        "log-chebyshev" | "log-tchebycheff" => LayoutRule::LogChebyshev,
        other => {
            return Err(format!("--rule: unknown rule '{other}'; use equal-area, log-linear or log-chebyshev").into());
        }
    };
    let port = length(&a.port, "port")?;
    let conduit = match (&a.diameter, &a.width, &a.height) {
        (Some(d), None, None) => Conduit::circular(length(d, "diameter")?)?,
        (None, Some(w), Some(h)) => Conduit::rectangular(length(w, "width")?, length(h, "height")?)?,
        _ => return Err("give --diameter for a round conduit, or --width and --height for a rectangular one".into()),
    };
    let mut notes = Vec::new();
    if a.downstream.is_some() || a.upstream.is_some() {
        eprintln!(
            "warning: --downstream and --upstream are deprecated and will be removed in the next release; write \
             --straight-upstream (the straight length before the ports) and --straight-downstream (after them)"
        );
    }
    let before = a.straight_upstream.or(a.downstream);
    let after = a.straight_downstream.or(a.upstream);
    let points = match (a.points, before, after) {
        (Some(p), _, _) => Some(p),
        (None, Some(before), Some(after)) => {
            let m = epa_method1_points(&conduit, before, after, TraversePurpose::Velocity)?;
            notes.push(format!("US EPA Method 1 minimum: {} points ({})", m.minimum, m.basis));
            Some(if conduit.is_circular() { m.minimum / a.diameters.max(1) } else { m.minimum })
        }
        _ => None,
    };
    let layout = match (conduit.is_circular(), rule, points) {
        (true, _, Some(p)) => TraverseLayout::circular(&conduit, rule, p, a.diameters, port)?,
        (false, LayoutRule::EqualArea, Some(p)) => TraverseLayout::rectangular_epa(&conduit, p, port)?,
        (false, LayoutRule::LogChebyshev, _) => TraverseLayout::rectangular_log_chebyshev(&conduit, port)?,
        (_, _, None) => {
            return Err(
                "give --points, or --straight-upstream and --straight-downstream for the US EPA Method 1 minimum"
                    .into(),
            );
        }
        (false, LayoutRule::LogLinear, _) => return Err("the log-linear rule is for round conduits here".into()),
    };
    for n in &notes {
        println!("{n}");
    }
    print!("{}", layout.field_table());
    if let Some(path) = &a.svg {
        write_atomically(path, layout.to_svg()?.as_bytes())?;
        println!("drawing written to {}", path.display());
    }
    println!(
        "\nCaution: check port access, platform loading and hot-gas or pressure hazards before work; follow site permits and local codes."
    );
    Ok(())
}

/// Writes to a temporary file beside `path`, then renames it into place.
pub fn write_atomically(path: &Path, bytes: &[u8]) -> Result<(), Box<dyn Error>> {
    let tmp = path.with_extension("tmp-stagna");
    std::fs::write(&tmp, bytes).map_err(|e| format!("cannot write {}: {e}", tmp.display()))?;
    std::fs::rename(&tmp, path).map_err(|e| format!("cannot move {} into place: {e}", tmp.display()))?;
    Ok(())
}
