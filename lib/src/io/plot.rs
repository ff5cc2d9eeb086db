//! Charts of the domain: velocity profiles, a campaign's flow per traverse and an
//! uncertainty budget, drawn with plotters as SVG or PNG. (The traverse cross-section
//! is [`crate::section::layout::TraverseLayout::to_svg`].)
//!
//! Text in PNG files uses the bundled DejaVu Sans font (free licence, see
//! `lib/assets/DejaVuSans-LICENSE.txt`), so PNG output needs no system fonts.

use std::sync::OnceLock;

use plotters::coord::Shift;
use plotters::prelude::*;

use crate::error::{Error, Result};
use crate::uncertainty::GumResult;

static FONT: &[u8] = include_bytes!("../../assets/DejaVuSans.ttf");
static FONT_READY: OnceLock<bool> = OnceLock::new();

fn ensure_font() -> Result<()> {
    let ok = *FONT_READY.get_or_init(|| {
        [FontStyle::Normal, FontStyle::Bold, FontStyle::Italic, FontStyle::Oblique]
            .into_iter()
            .all(|style| plotters::style::register_font("sans-serif", style, FONT).is_ok())
    });
    if ok { Ok(()) } else { Err(draw_err("the bundled font could not be loaded")) }
}

fn draw_err(message: impl ToString) -> Error {
    Error::Inconsistent { context: "chart", message: message.to_string() }
}

/// Draws with `f` on an SVG canvas of `size` pixels and returns the SVG text.
pub fn svg(size: (u32, u32), f: impl FnOnce(&DrawingArea<SVGBackend<'_>, Shift>) -> Result<()>) -> Result<String> {
    ensure_font()?;
    let mut out = String::new();
    {
        let root = SVGBackend::with_string(&mut out, size).into_drawing_area();
        f(&root)?;
        root.present().map_err(draw_err)?;
    }
    Ok(out)
}

/// Draws with `f` on a bitmap of `size` pixels and returns PNG bytes.
pub fn png(size: (u32, u32), f: impl FnOnce(&DrawingArea<BitMapBackend<'_>, Shift>) -> Result<()>) -> Result<Vec<u8>> {
    use image::ImageEncoder;
    ensure_font()?;
    let (w, h) = size;
    let mut rgb = vec![0u8; (w * h * 3) as usize];
    {
        let root = BitMapBackend::with_buffer(&mut rgb, size).into_drawing_area();
        f(&root)?;
        root.present().map_err(draw_err)?;
    }
    let mut bytes = Vec::new();
    image::codecs::png::PngEncoder::new(&mut bytes)
        .write_image(&rgb, w, h, image::ColorType::Rgb8)
        .map_err(draw_err)?;
    Ok(bytes)
}

/// One measured series of a profile chart.
#[derive(Debug, Clone, PartialEq)]
pub struct ProfileSeries {
    /// Legend text (e.g. "traverse 3, port A").
    pub label: String,
    /// Points (position, velocity).
    pub points: Vec<(f64, f64)>,
}

/// A chart to draw.
#[derive(Debug, Clone, PartialEq)]
pub enum Chart {
    /// Velocity against position, one marker series per line or traverse, optional curves
    /// (fitted or model laws).
    Profile {
        /// Title.
        title: String,
        /// x-axis label (e.g. "r/R" or "distance from wall (mm)").
        x_label: String,
        /// y-axis label.
        y_label: String,
        /// Measured series.
        series: Vec<ProfileSeries>,
        /// Curves drawn as lines.
        curves: Vec<ProfileSeries>,
    },
    /// A value per traverse (or per run), with optional ± expanded uncertainty bars.
    Trend {
        /// Title.
        title: String,
        /// y-axis label.
        y_label: String,
        /// Category labels along x.
        labels: Vec<String>,
        /// Values.
        values: Vec<f64>,
        /// Half-widths of the error bars, if any.
        errors: Option<Vec<f64>>,
        /// What the error bars are (e.g. "±U, expanded, k = 2, 95 % coverage"), printed
        /// under the chart; required wherever bars are drawn.
        error_label: Option<String>,
        /// Start the value axis at zero (so small changes are not exaggerated).
        from_zero: bool,
    },
    /// An uncertainty budget: each input's share of the variance, as horizontal bars.
    Budget {
        /// Title.
        title: String,
        /// (input name, share of u_c², 0..1).
        shares: Vec<(String, f64)>,
    },
}

const PALETTE: [RGBColor; 6] = [
    RGBColor(20, 90, 160),
    RGBColor(200, 80, 30),
    RGBColor(40, 140, 70),
    RGBColor(130, 60, 150),
    RGBColor(150, 120, 20),
    RGBColor(30, 150, 160),
];

fn span(values: impl Iterator<Item = f64>) -> Option<(f64, f64)> {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in values.filter(|v| v.is_finite()) {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    if lo > hi {
        return None;
    }
    let pad = if hi > lo { 0.06 * (hi - lo) } else { 0.5 * lo.abs().max(1.0) };
    Some((lo - pad, hi + pad))
}

/// A tick label: at most 4 significant figures, trailing zeros dropped, and never "-0".
fn tick(v: &f64) -> String {
    // Axis steps computed in floating point land a hair off zero (−1e−17): that is zero.
    if v.abs() < 1e-12 {
        return "0".into();
    }
    let s = crate::units::quantity::format_sig(*v, 4);
    let s = if s.contains('.') { s.trim_end_matches('0').trim_end_matches('.').to_string() } else { s };
    if s.starts_with('-') && s[1..].chars().all(|c| c == '0' || c == '.') { s[1..].to_string() } else { s }
}

/// Shares below this fraction of the combined variance are drawn as one bar.
const NEGLIGIBLE_SHARE: f64 = 0.01;

impl Chart {
    /// A budget chart from a GUM result: inputs below 1 % of the variance are grouped in
    /// one bar named with their count.
    pub fn budget(title: &str, g: &GumResult) -> Self {
        let mut shares: Vec<(String, f64)> = Vec::new();
        let (mut rest, mut n_rest) = (0.0, 0);
        for b in &g.budget {
            if b.share < NEGLIGIBLE_SHARE {
                rest += b.share;
                n_rest += 1;
            } else {
                shares.push((b.name.clone(), b.share));
            }
        }
        match n_rest {
            0 => {}
            1 => {
                shares.extend(g.budget.iter().filter(|b| b.share < NEGLIGIBLE_SHARE).map(|b| (b.name.clone(), b.share)))
            }
            _ => shares.push((format!("{n_rest} other inputs, each < 1 %"), rest)),
        }
        Chart::Budget { title: title.to_string(), shares }
    }

    /// Pixel size used for this chart.
    pub fn size(&self) -> (u32, u32) {
        match self {
            Chart::Budget { shares, .. } => (720, (120 + 26 * shares.len()).clamp(220, 1400) as u32),
            _ => (720, 460),
        }
    }

    /// SVG text.
    pub fn to_svg(&self) -> Result<String> {
        svg(self.size(), |root| self.draw(root))
    }

    /// PNG bytes.
    pub fn to_png(&self) -> Result<Vec<u8>> {
        png(self.size(), |root| self.draw(root))
    }

    /// Draws on any plotters backend.
    pub fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<()> {
        root.fill(&WHITE).map_err(draw_err)?;
        match self {
            Chart::Profile { title, x_label, y_label, series, curves } => {
                let all = || series.iter().chain(curves).flat_map(|s| s.points.iter());
                let (x0, x1) = span(all().map(|p| p.0)).ok_or_else(|| draw_err("no finite points to plot"))?;
                let (y0, y1) = span(all().map(|p| p.1).chain(std::iter::once(0.0))).unwrap_or((0.0, 1.0));
                let mut chart = ChartBuilder::on(root)
                    .caption(title, ("sans-serif", 18))
                    .margin(12)
                    .x_label_area_size(40)
                    .y_label_area_size(56)
                    .build_cartesian_2d(x0..x1, y0..y1)
                    .map_err(draw_err)?;
                chart
                    .configure_mesh()
                    .x_desc(x_label.as_str())
                    .y_desc(y_label.as_str())
                    .x_label_formatter(&tick)
                    .y_label_formatter(&tick)
                    .light_line_style(RGBColor(235, 235, 235))
                    .draw()
                    .map_err(draw_err)?;
                for (i, s) in series.iter().enumerate() {
                    let c = PALETTE[i % PALETTE.len()];
                    chart
                        .draw_series(
                            s.points
                                .iter()
                                .filter(|p| p.0.is_finite() && p.1.is_finite())
                                .map(|&p| Circle::new(p, 4, c.filled())),
                        )
                        .map_err(draw_err)?
                        .label(s.label.as_str())
                        .legend(move |(x, y)| Circle::new((x + 8, y), 4, c.filled()));
                }
                for (i, s) in curves.iter().enumerate() {
                    let c = PALETTE[(i + series.len()) % PALETTE.len()];
                    chart
                        .draw_series(LineSeries::new(
                            s.points.iter().copied().filter(|p| p.1.is_finite()),
                            c.stroke_width(2),
                        ))
                        .map_err(draw_err)?
                        .label(s.label.as_str())
                        .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 16, y)], c.stroke_width(2)));
                }
                chart
                    .configure_series_labels()
                    .background_style(WHITE.mix(0.85))
                    .border_style(BLACK)
                    .position(SeriesLabelPosition::LowerMiddle)
                    .draw()
                    .map_err(draw_err)?;
            }
            Chart::Trend { title, y_label, labels, values, errors, error_label, from_zero } => {
                let n = values.len();
                if n == 0 {
                    return Err(draw_err("no values to plot"));
                }
                if errors.is_some() && error_label.is_none() {
                    return Err(draw_err("error bars need a label saying what they are (±U, k, coverage)"));
                }
                let err_at = |i: usize| errors.as_ref().and_then(|e| e.get(i).copied()).unwrap_or(0.0);
                let extra = if *from_zero { Some(0.0) } else { None };
                let (y0, y1) = span((0..n).flat_map(|i| [values[i] - err_at(i), values[i] + err_at(i)]).chain(extra))
                    .ok_or_else(|| draw_err("no finite values to plot"))?;
                let y0 = if *from_zero && y0 < 0.0 && values.iter().all(|v| *v >= 0.0) { 0.0 } else { y0 };
                let (root, note) = match error_label {
                    Some(_) => {
                        let (w, h) = root.dim_in_pixel();
                        let (top, bottom) = root.split_vertically(h.saturating_sub(24));
                        let _ = w;
                        (top, Some(bottom))
                    }
                    None => (root.clone(), None),
                };
                if let (Some(area), Some(label)) = (&note, error_label) {
                    area.draw(&Text::new(
                        format!("error bars: {label}"),
                        (12, 4),
                        ("sans-serif", 13).into_font().color(&RGBColor(60, 60, 60)),
                    ))
                    .map_err(draw_err)?;
                }
                let mut chart = ChartBuilder::on(&root)
                    .caption(title, ("sans-serif", 18))
                    .margin(12)
                    .x_label_area_size(40)
                    .y_label_area_size(64)
                    .build_cartesian_2d(-0.5..(n as f64 - 0.5), y0..y1)
                    .map_err(draw_err)?;
                let step = n.div_ceil(12).max(1);
                let label_of = |x: &f64| {
                    let i = x.round();
                    if (x - i).abs() < 1e-6 && i >= 0.0 && (i as usize) < n && (i as usize).is_multiple_of(step) {
                        labels.get(i as usize).cloned().unwrap_or_default()
                    } else {
                        String::new()
                    }
                };
                chart
                    .configure_mesh()
                    .x_labels(n.clamp(2, 12) * 2 + 1)
                    .x_label_formatter(&label_of)
                    .y_label_formatter(&tick)
                    .y_desc(y_label.as_str())
                    .disable_x_mesh()
                    .light_line_style(RGBColor(235, 235, 235))
                    .draw()
                    .map_err(draw_err)?;
                let c = PALETTE[0];
                if errors.is_some() {
                    chart
                        .draw_series((0..n).map(|i| {
                            ErrorBar::new_vertical(
                                i as f64,
                                values[i] - err_at(i),
                                values[i],
                                values[i] + err_at(i),
                                c,
                                8,
                            )
                        }))
                        .map_err(draw_err)?;
                }
                chart
                    .draw_series(LineSeries::new((0..n).map(|i| (i as f64, values[i])), c.mix(0.5).stroke_width(1)))
                    .map_err(draw_err)?;
                chart
                    .draw_series((0..n).map(|i| Circle::new((i as f64, values[i]), 4, c.filled())))
                    .map_err(draw_err)?;
            }
            Chart::Budget { title, shares } => {
                let n = shares.len();
                if n == 0 {
                    return Err(draw_err("an empty budget"));
                }
                let mut chart = ChartBuilder::on(root)
                    .caption(title, ("sans-serif", 18))
                    .margin(12)
                    .x_label_area_size(40)
                    .y_label_area_size(220)
                    .build_cartesian_2d(0.0..100.0, -0.5..(n as f64 - 0.5))
                    .map_err(draw_err)?;
                let label_of = |y: &f64| {
                    let i = y.round();
                    if (y - i).abs() < 1e-6 && i >= 0.0 && (i as usize) < n {
                        shares[n - 1 - i as usize].0.clone()
                    } else {
                        String::new()
                    }
                };
                chart
                    .configure_mesh()
                    .y_labels(2 * n + 1)
                    .y_label_formatter(&label_of)
                    .x_desc("share of the combined variance (%)")
                    .disable_y_mesh()
                    .light_line_style(RGBColor(235, 235, 235))
                    .draw()
                    .map_err(draw_err)?;
                chart
                    .draw_series(shares.iter().enumerate().map(|(k, (_, s))| {
                        let y = (n - 1 - k) as f64;
                        Rectangle::new(
                            [(0.0, y - 0.35), ((s * 100.0).clamp(0.0, 100.0), y + 0.35)],
                            PALETTE[0].filled(),
                        )
                    }))
                    .map_err(draw_err)?;
            }
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn profile() -> Chart {
        Chart::Profile {
            title: "profile".into(),
            x_label: "r/R".into(),
            y_label: "velocity (m/s)".into(),
            series: vec![ProfileSeries { label: "line A".into(), points: vec![(-0.9, 9.0), (0.0, 12.0), (0.9, 9.2)] }],
            curves: vec![ProfileSeries { label: "1/7 law".into(), points: vec![(-1.0, 0.0), (0.0, 12.0), (1.0, 0.0)] }],
        }
    }

    #[test]
    fn charts_render_as_svg_and_png() {
        let svg = profile().to_svg().unwrap();
        assert!(svg.starts_with("<svg") && svg.contains("line A") && svg.contains("1/7 law"));
        let png = profile().to_png().unwrap();
        assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n"); // PNG signature (ISO/IEC 15948 §5.2)
        let t = Chart::Trend {
            title: "flow".into(),
            y_label: "m³/s".into(),
            labels: vec!["T1".into(), "T2".into()],
            values: vec![1.0, 1.1],
            errors: Some(vec![0.02, 0.03]),
            error_label: Some("±U, expanded, k = 2, 95 % coverage".into()),
            from_zero: true,
        };
        let svg = t.to_svg().unwrap();
        assert!(svg.contains("T2") && svg.contains("error bars: ±U, expanded, k = 2, 95 % coverage"), "{svg}");
        // Bars without saying what they are are refused.
        let unlabelled = match t.clone() {
            Chart::Trend { title, y_label, labels, values, errors, .. } => {
                Chart::Trend { title, y_label, labels, values, errors, error_label: None, from_zero: false }
            }
            other => other,
        };
        assert!(unlabelled.to_svg().unwrap_err().to_string().contains("need a label"));
        let b = Chart::Budget { title: "budget".into(), shares: vec![("C".into(), 0.7), ("ρ".into(), 0.3)] };
        assert!(b.to_png().unwrap().len() > 1000);
    }

    #[test]
    fn empty_charts_are_errors_not_panics() {
        let e = Chart::Trend {
            title: String::new(),
            y_label: String::new(),
            labels: vec![],
            values: vec![],
            errors: None,
            error_label: None,
            from_zero: false,
        };
        assert!(e.to_svg().is_err());
        let p = Chart::Profile {
            title: String::new(),
            x_label: String::new(),
            y_label: String::new(),
            series: vec![ProfileSeries { label: "x".into(), points: vec![(f64::NAN, 1.0)] }],
            curves: vec![],
        };
        assert!(p.to_svg().is_err());
    }

    // Tick labels: 4 significant figures, no "-0" (an axis crossing zero in floating point).
    #[test]
    fn ticks_never_print_minus_zero() {
        assert_eq!(tick(&-0.0), "0");
        assert_eq!(tick(&-1e-17), "0");
        assert_eq!(tick(&2.5), "2.5");
        assert_eq!(tick(&12.0), "12");
        assert_eq!(tick(&0.000123456), "0.0001235");
    }

    #[test]
    fn budget_charts_group_negligible_terms() {
        use crate::uncertainty::{Correlations, Input, Model, Real, gum};
        struct Sum;
        impl Model for Sum {
            fn eval<R: Real>(&self, x: &[R]) -> R {
                x[0] + x[1] + x[2] + x[3]
            }
        }
        let inputs = vec![
            Input::normal("a", "1", 1.0, 0.1).unwrap(),
            Input::normal("b", "1", 1.0, 0.05).unwrap(),
            Input::normal("c", "1", 1.0, 0.001).unwrap(),
            Input::normal("d", "1", 1.0, 0.001).unwrap(),
        ];
        let g = gum(&Sum, &inputs, &Correlations::none(), 0.95).unwrap();
        let Chart::Budget { shares, .. } = Chart::budget("b", &g) else { panic!("a budget chart") };
        let names: Vec<&str> = shares.iter().map(|s| s.0.as_str()).collect();
        assert_eq!(names, ["a", "b", "2 other inputs, each < 1 %"]);
        assert!((shares.iter().map(|s| s.1).sum::<f64>() - 1.0).abs() < 1e-12);
    }
}
