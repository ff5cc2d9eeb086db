//! Traverse layouts for planning a measurement: where to put the probe.
//!
//! # Rules
//! - **Equal-area (centroid)**, circular, m points per radius: r_i/R =
//!   √((2i − 1)/(2m)), i = 1…m (US EPA Method 1 Table 1-1). Rectangular: the
//!   section divided into equal rectangles, points at their centroids,
//!   x/W = (2i − 1)/(2 n_w) (Method 1 §11.3.1 and Table 1-2 matrices).
//! - **Log-linear**, circular, 3 or 4 points per radius (ISO 5802:2001
//!   Table 2); 5 per radius from a secondary reproduction of the ASHRAE table.
//! - **Log-Chebyshev**, circular, 3 or 4 per radius (ISO 5802:2001 Table 3),
//!   5 per radius (ISO 3966 r/R values, from memory);
//!   rectangular, 5, 6 or 7 per side (ISO 3966 / ASHRAE Handbook—Fundamentals
//!   measurement chapter): 5 on a side under 762 mm, 6 for 762–914 mm, 7 above.
//!
//! Positions are given as the distance from the port-side wall along the
//! traverse line and as the probe insertion depth (that distance plus the
//! port or nipple length). For the equal-area rule US EPA Method 1 keeps
//! points at least 25 mm (stacks over 0.61 m) or 13 mm (0.61 m and under) from
//! the wall (§11.3.2, §11.3.3); points closer are moved out and marked.
//!
//! # References
//! US EPA 40 CFR 60 App. A-1 Method 1; ISO 5802:2001 Tables 2–3; ISO 3966;
//! ASHRAE Handbook—Fundamentals (values as collected in
//! `shared/reference/check-values.md` §5).

use std::fmt;

use crate::error::{Error, Result, Warning, finite};
use crate::section::conduit::{Conduit, Section};
use crate::units::quantity::{Length, format_number};

/// A port length must be finite and not negative (it is added to insertion depths).
fn check_port(port_length: Length) -> Result<()> {
    finite("traverse layout", "port length", port_length.si())?;
    if port_length.si() < 0.0 {
        return Err(Error::OutOfRange {
            context: "traverse layout",
            param: "port length (wall thickness plus nozzle, added to insertion depths)",
            value: port_length.si() * 1e3,
            unit: "mm",
            allowed: "0 or more".into(),
        });
    }
    Ok(())
}

/// Most points on one traverse line (or lines across a rectangle), checked before any
/// allocation: far beyond what the published rules tabulate, and a bound on what a
/// mistyped option can ask for (common practice, no source).
pub const MAX_POINTS_PER_LINE: usize = 200;

/// A point-placement rule.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LayoutRule {
    /// Equal-area (centroid) rule.
    EqualArea,
    /// Log-linear rule (circular only).
    LogLinear,
    /// Log-Chebyshev (log-Tchebycheff) rule.
    LogChebyshev,
}

impl fmt::Display for LayoutRule {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            LayoutRule::EqualArea => "equal-area",
            LayoutRule::LogLinear => "log-linear",
            LayoutRule::LogChebyshev => "log-Chebyshev",
        })
    }
}

/// Log-linear y/D from the wall, near half of a diameter (ISO 5802 Table 2; 5/radius secondary).
const LOG_LINEAR: [&[f64]; 3] =
    [&[0.032, 0.135, 0.321], &[0.021, 0.117, 0.184, 0.345], &[0.019, 0.076, 0.153, 0.217, 0.361]];
/// Log-Chebyshev y/D from the wall, near half, 3 and 4 per radius (ISO 5802:2001 Table 3, read).
const LOG_CHEBYSHEV: [&[f64]; 2] = [&[0.032, 0.137, 0.312], &[0.024, 0.100, 0.194, 0.334]];
/// Log-Chebyshev r/R for 5 per radius (ISO 3966, from memory; ISO 5802 does not tabulate it).
const LOG_CHEBYSHEV_5_R: [f64; 5] = [0.2866, 0.5700, 0.6892, 0.8472, 0.9622];
/// Rectangular log-Chebyshev x/L per side (ASHRAE / ISO 3966, as read in check-values.md §5.3).
const LOG_CHEBYSHEV_RECT: [&[f64]; 3] = [
    &[0.074, 0.288, 0.500, 0.712, 0.926],
    &[0.061, 0.235, 0.437, 0.563, 0.765, 0.939],
    &[0.053, 0.203, 0.366, 0.500, 0.634, 0.797, 0.947],
];
/// US EPA Method 1 Table 1-2: total points → (points along the longer side, along the shorter) (from memory).
const EPA_RECT_MATRIX: [(usize, usize, usize); 9] =
    [(9, 3, 3), (12, 4, 3), (16, 4, 4), (20, 5, 4), (25, 5, 5), (30, 6, 5), (36, 6, 6), (42, 7, 6), (49, 7, 7)];

/// Where a point lies in the section, normalised.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Position {
    /// On a diameter: signed r/R (negative on the port side of the centre).
    Radial {
        /// Signed r/R in [−1, 1].
        r_over_r: f64,
        /// Angle of the diameter, degrees.
        angle_deg: f64,
    },
    /// In a rectangle: x/W across the width, y/H down from the port wall.
    Grid {
        /// x/W in (0, 1).
        x_over_w: f64,
        /// y/H in (0, 1).
        y_over_h: f64,
    },
}

/// One traverse point.
#[derive(Debug, Clone, PartialEq)]
pub struct LayoutPoint {
    /// Traverse line (diameter or port), from 0.
    pub line: usize,
    /// Point on the line, from 0 at the port side.
    pub index: usize,
    /// Distance from the port-side wall along the line.
    pub wall_distance: Length,
    /// Probe insertion depth from the port reference (wall distance + port length).
    pub insertion: Length,
    /// Normalised position.
    pub position: Position,
    /// True when moved out to the minimum wall distance.
    pub moved: bool,
}

impl LayoutPoint {
    /// Label such as "A3" (line letter, point number from 1).
    pub fn label(&self) -> String {
        format!("{}{}", line_letter(self.line), self.index + 1)
    }
}

fn line_letter(i: usize) -> char {
    (b'A' + (i % 26) as u8) as char
}

/// A complete layout for one conduit.
#[derive(Debug, Clone, PartialEq)]
pub struct TraverseLayout {
    /// The conduit.
    pub conduit: Conduit,
    /// The rule.
    pub rule: LayoutRule,
    /// Number of traverse lines (diameters, or ports of a rectangle).
    pub lines: usize,
    /// Points per line.
    pub per_line: usize,
    /// Port (nipple) length added to each insertion depth.
    pub port_length: Length,
    /// The points, line by line, from the port side.
    pub points: Vec<LayoutPoint>,
    /// Remarks (moved points).
    pub warnings: Vec<Warning>,
}

/// Fewest points per radius ISO 5802:2001 asks for in an annular section upstream of an
/// axial fan (read; check-values.md §5.2).
pub const ISO5802_ANNULUS_MIN_POINTS: usize = 4;
/// Fewest radii ISO 5802:2001 asks for in that annulus (read; check-values.md §5.2).
pub const ISO5802_ANNULUS_MIN_RADII: usize = 6;

/// Equal-area measuring radii in an annulus (for example upstream of an axial fan, between
/// its casing and hub): n rings of equal area between the inner radius r_i and the outer
/// r_o, each point on the radius that halves its ring's area,
/// r_k = √(r_i² + (2k − 1)/(2n)·(r_o² − r_i²)), k = 1 … n, from the hub outwards. Derived
/// (the equal-area rule of a full circle with the hub's area taken away; a full circle,
/// r_i = 0, gives the usual √((2k − 1)/(2n))·R); ISO 5802 gives annulus layouts of its own,
/// not re-read here.
pub fn annulus_equal_area_radii(outer: Length, inner: Length, n: usize) -> Result<Vec<f64>> {
    let (ro, ri) = (outer.si() / 2.0, inner.si() / 2.0);
    crate::error::finite("annulus layout", "outer diameter", outer.si())?;
    crate::error::finite("annulus layout", "inner diameter", inner.si())?;
    if !(ri >= 0.0 && ro > ri) {
        return Err(Error::Inconsistent {
            context: "annulus layout",
            message: format!(
                "the inner diameter ({} m) must be at least 0 and less than the outer ({} m)",
                inner.si(),
                outer.si()
            ),
        });
    }
    if !(1..=50).contains(&n) {
        return Err(Error::OutOfRange {
            context: "annulus layout",
            param: "points per radius",
            value: n as f64,
            unit: "",
            allowed: "1 to 50".into(),
        });
    }
    Ok((1..=n).map(|k| (ri * ri + (2.0 * k as f64 - 1.0) / (2.0 * n as f64) * (ro * ro - ri * ri)).sqrt()).collect())
}

/// US EPA Method 1 minimum wall distance for the equal-area rule.
pub fn epa_min_wall_distance(diameter: Length) -> Length {
    if diameter.si() > 0.61 { Length::mm(25.0) } else { Length::mm(13.0) }
}

fn near_half_fractions(rule: LayoutRule, per_radius: usize) -> Result<Vec<f64>> {
    // Returns y/D (from the wall) of the near half, ascending.
    let unsupported = || Error::Inconsistent {
        context: "traverse layout",
        message: format!(
            "the {rule} rule is tabulated for 3, 4 or 5 points per radius (6, 8 or 10 per diameter), not {per_radius}"
        ),
    };
    Ok(match rule {
        LayoutRule::EqualArea => {
            let m = per_radius as f64;
            let mut v: Vec<f64> =
                (1..=per_radius).map(|i| (1.0 - ((2 * i - 1) as f64 / (2.0 * m)).sqrt()) / 2.0).collect();
            v.reverse();
            v
        }
        LayoutRule::LogLinear => LOG_LINEAR.get(per_radius.wrapping_sub(3)).ok_or_else(unsupported)?.to_vec(),
        LayoutRule::LogChebyshev => match per_radius {
            3 | 4 => LOG_CHEBYSHEV[per_radius - 3].to_vec(),
            5 => LOG_CHEBYSHEV_5_R.iter().rev().map(|r| (1.0 - r) / 2.0).collect(),
            _ => return Err(unsupported()),
        },
    })
}

impl TraverseLayout {
    /// Layout on `diameters` diameters of a circular conduit, `per_diameter`
    /// points each (even), ports of length `port_length`.
    ///
    /// ```
    /// use stagna::{Conduit, Length, layout::{TraverseLayout, LayoutRule}};
    /// let c = Conduit::circular(Length::m(2.0)).unwrap();
    /// let l = TraverseLayout::circular(&c, LayoutRule::EqualArea, 12, 2, Length::mm(150.0)).unwrap();
    /// assert_eq!(l.points.len(), 24);
    /// // (1 − √(11/12))/2 = 2.13 % of D; US EPA Method 1 Table 1-1 prints 2.1 %
    /// assert!((l.points[0].wall_distance.si() - 0.042_573).abs() < 1e-6);
    /// ```
    pub fn circular(
        conduit: &Conduit,
        rule: LayoutRule,
        per_diameter: usize,
        diameters: usize,
        port_length: Length,
    ) -> Result<Self> {
        let Section::Circular { diameter } = conduit.section else {
            return Err(Error::Inconsistent {
                context: "traverse layout",
                message: "a circular layout on a rectangular section; use TraverseLayout::rectangular".into(),
            });
        };
        check_port(port_length)?;
        if per_diameter > MAX_POINTS_PER_LINE {
            return Err(Error::OutOfRange {
                context: "traverse layout",
                param: "points per diameter",
                value: per_diameter as f64,
                unit: "",
                allowed: format!("at most {MAX_POINTS_PER_LINE}"),
            });
        }
        if per_diameter < 2 || !per_diameter.is_multiple_of(2) {
            return Err(Error::Inconsistent {
                context: "traverse layout",
                message: format!("points per diameter must be even and at least 2, got {per_diameter}"),
            });
        }
        if !(1..=8).contains(&diameters) {
            return Err(Error::Inconsistent {
                context: "traverse layout",
                message: format!("1 to 8 diameters, got {diameters}"),
            });
        }
        let d = diameter.si();
        let near = near_half_fractions(rule, per_diameter / 2)?;
        let mut fractions = near.clone();
        fractions.extend(near.iter().rev().map(|y| 1.0 - y));
        let min_wall = if rule == LayoutRule::EqualArea { epa_min_wall_distance(diameter).si() } else { 0.0 };
        let mut points = Vec::new();
        let mut moved_count = 0;
        for line in 0..diameters {
            let angle = 180.0 * line as f64 / diameters as f64;
            for (index, &yd) in fractions.iter().enumerate() {
                let mut s = yd * d;
                let mut moved = false;
                if s < min_wall {
                    s = min_wall;
                    moved = true;
                } else if d - s < min_wall {
                    s = d - min_wall;
                    moved = true;
                }
                moved_count += usize::from(moved && line == 0);
                points.push(LayoutPoint {
                    line,
                    index,
                    wall_distance: Length::m(s),
                    insertion: Length::m(s + port_length.si()),
                    position: Position::Radial { r_over_r: 2.0 * s / d - 1.0, angle_deg: angle },
                    moved,
                });
            }
        }
        let mut warnings = Vec::new();
        if moved_count > 0 {
            warnings.push(Warning::new(
                "moved-points",
                format!(
                    "{moved_count} point(s) per diameter lay closer than {} mm to the wall and were moved out to it (US EPA Method 1 §11.3)",
                    format_number(min_wall * 1e3)
                ),
            ));
        }
        Ok(Self {
            conduit: conduit.clone(),
            rule,
            lines: diameters,
            per_line: per_diameter,
            port_length,
            points,
            warnings,
        })
    }

    /// Layout on a rectangular conduit: `columns` traverse lines across the
    /// width (one per port) with `rows` points each down the height.
    pub fn rectangular(
        conduit: &Conduit,
        rule: LayoutRule,
        columns: usize,
        rows: usize,
        port_length: Length,
    ) -> Result<Self> {
        let Section::Rectangular { height, .. } = conduit.section else {
            return Err(Error::Inconsistent {
                context: "traverse layout",
                message: "a rectangular layout on a circular section; use TraverseLayout::circular".into(),
            });
        };
        check_port(port_length)?;
        let fractions = |n: usize| -> Result<Vec<f64>> {
            match rule {
                LayoutRule::EqualArea => {
                    if n == 0 {
                        return Err(Error::Inconsistent {
                            context: "traverse layout",
                            message: "at least one point per side".into(),
                        });
                    }
                    Ok((1..=n).map(|i| (2 * i - 1) as f64 / (2 * n) as f64).collect())
                }
                LayoutRule::LogChebyshev => {
                    LOG_CHEBYSHEV_RECT.get(n.wrapping_sub(5)).map(|v| v.to_vec()).ok_or_else(|| Error::Inconsistent {
                        context: "traverse layout",
                        message: format!(
                            "the rectangular log-Chebyshev rule is tabulated for 5, 6 or 7 points per side, not {n}"
                        ),
                    })
                }
                LayoutRule::LogLinear => Err(Error::Inconsistent {
                    context: "traverse layout",
                    message: "the log-linear rule is for circular sections here; use log-Chebyshev or equal-area"
                        .into(),
                }),
            }
        };
        for (param, n) in [("columns (traverse lines across the width)", columns), ("rows (points per line)", rows)] {
            if n == 0 || n > MAX_POINTS_PER_LINE {
                return Err(Error::OutOfRange {
                    context: "traverse layout",
                    param,
                    value: n as f64,
                    unit: "",
                    allowed: format!("from 1 to {MAX_POINTS_PER_LINE}"),
                });
            }
        }
        let xs = fractions(columns)?;
        let ys = fractions(rows)?;
        let mut points = Vec::new();
        for (line, &x) in xs.iter().enumerate() {
            for (index, &y) in ys.iter().enumerate() {
                let s = y * height.si();
                points.push(LayoutPoint {
                    line,
                    index,
                    wall_distance: Length::m(s),
                    insertion: Length::m(s + port_length.si()),
                    position: Position::Grid { x_over_w: x, y_over_h: y },
                    moved: false,
                });
            }
        }
        Ok(Self {
            conduit: conduit.clone(),
            rule,
            lines: columns,
            per_line: rows,
            port_length,
            points,
            warnings: Vec::new(),
        })
    }

    /// Rectangular equal-area layout for a total number of points from US EPA
    /// Method 1 Table 1-2 (9, 12, 16, 20, 25, 30, 36, 42, 49), the larger count
    /// along the longer side.
    pub fn rectangular_epa(conduit: &Conduit, total: usize, port_length: Length) -> Result<Self> {
        let Section::Rectangular { width, height } = conduit.section else {
            return Err(Error::Inconsistent {
                context: "traverse layout",
                message: "a rectangular layout on a circular section".into(),
            });
        };
        let &(_, long, short) = EPA_RECT_MATRIX.iter().find(|m| m.0 == total).ok_or_else(|| Error::Inconsistent {
            context: "traverse layout",
            message: format!(
                "US EPA Method 1 Table 1-2 has no {total}-point matrix; use 9, 12, 16, 20, 25, 30, 36, 42 or 49"
            ),
        })?;
        let (cols, rows) = if width.si() >= height.si() { (long, short) } else { (short, long) };
        Self::rectangular(conduit, LayoutRule::EqualArea, cols, rows, port_length)
    }

    /// Rectangular log-Chebyshev layout with points per side chosen from the
    /// side lengths (5 under 762 mm, 6 for 762–914 mm, 7 above).
    pub fn rectangular_log_chebyshev(conduit: &Conduit, port_length: Length) -> Result<Self> {
        let Section::Rectangular { width, height } = conduit.section else {
            return Err(Error::Inconsistent {
                context: "traverse layout",
                message: "a rectangular layout on a circular section".into(),
            });
        };
        let per_side = |l: Length| {
            if l.si() < 0.762 {
                5
            } else if l.si() <= 0.914 {
                6
            } else {
                7
            }
        };
        Self::rectangular(conduit, LayoutRule::LogChebyshev, per_side(width), per_side(height), port_length)
    }

    /// The field sheet: one row per point with distances in mm.
    pub fn field_table(&self) -> String {
        let along = if self.conduit.is_circular() { "% of D" } else { "% of H" };
        let span = match self.conduit.section {
            Section::Circular { diameter } => diameter.si(),
            Section::Rectangular { height, .. } => height.si(),
        };
        let mut s = format!(
            "{} layout, {} line(s) × {} points, {}; port length {} mm\n",
            self.rule,
            self.lines,
            self.per_line,
            self.conduit,
            format_number(self.port_length.si() * 1e3)
        );
        s.push_str(&format!("{:<6} {:>18} {:>8} {:>16}  note\n", "point", "from wall (mm)", along, "insertion (mm)"));
        for p in &self.points {
            s.push_str(&format!(
                "{:<6} {:>18.1} {:>8.1} {:>16.1}  {}\n",
                p.label(),
                p.wall_distance.si() * 1e3,
                p.wall_distance.si() / span * 100.0,
                p.insertion.si() * 1e3,
                if p.moved { "moved to minimum wall distance" } else { "" }
            ));
        }
        if let Some(ports) = self.port_positions() {
            s.push_str(&ports);
            s.push('\n');
        }
        for w in &self.warnings {
            s.push_str(&format!("{w}\n"));
        }
        s
    }

    /// Where the ports are: along the width of a rectangle (from its left-hand corner,
    /// looking at the port side), or round the circumference of a circle.
    pub fn port_positions(&self) -> Option<String> {
        let mut seen = Vec::new();
        match self.conduit.section {
            Section::Rectangular { width, .. } => {
                for p in &self.points {
                    if let Position::Grid { x_over_w, .. } = p.position
                        && !seen.iter().any(|(l, _)| *l == p.line)
                    {
                        seen.push((p.line, x_over_w * width.si() * 1e3));
                    }
                }
                let list: Vec<String> = seen
                    .iter()
                    .map(|(l, x)| format!("{} at {} mm", line_letter(*l), format_number((x * 10.0).round() / 10.0)))
                    .collect();
                Some(format!(
                    "ports along the {} mm side, from its left-hand corner: {}",
                    format_number(width.si() * 1e3),
                    list.join(", ")
                ))
            }
            Section::Circular { .. } if self.lines > 1 => {
                let list: Vec<String> = (0..self.lines)
                    .map(|l| format!("{} at {}°", line_letter(l), format_number(180.0 * l as f64 / self.lines as f64)))
                    .collect();
                Some(format!("ports round the circumference: {}", list.join(", ")))
            }
            _ => None,
        }
    }

    /// The cross-section with its traverse lines, ports and numbered points, as SVG.
    pub fn to_svg(&self) -> Result<String> {
        crate::io::plot::svg((520, 520), |root| self.draw(root))
    }

    /// The same drawing as PNG bytes.
    pub fn to_png(&self) -> Result<Vec<u8>> {
        crate::io::plot::png((520, 520), |root| self.draw(root))
    }

    /// Draws the cross-section on any plotters backend.
    pub fn draw<DB: plotters::prelude::DrawingBackend>(
        &self,
        root: &plotters::prelude::DrawingArea<DB, plotters::coord::Shift>,
    ) -> Result<()> {
        use plotters::prelude::*;
        let size = 520i32;
        let margin = 50.0;
        {
            let err = |e: String| Error::Inconsistent { context: "layout drawing", message: e };
            root.fill(&WHITE).map_err(|e| err(e.to_string()))?;
            let span = f64::from(size) - 2.0 * margin;
            let c = f64::from(size) / 2.0;
            let px = |x: f64, y: f64| ((c + x) as i32, (c + y) as i32);
            let wall = ShapeStyle { color: BLACK.to_rgba(), filled: false, stroke_width: 2 };
            let line_style = ShapeStyle { color: RGBColor(150, 150, 150).to_rgba(), filled: false, stroke_width: 1 };
            let point_style = ShapeStyle { color: RGBColor(20, 90, 160).to_rgba(), filled: true, stroke_width: 1 };
            let font = ("sans-serif", 12).into_font().color(&BLACK);
            let title = format!("{} layout, {} line(s) × {} points", self.rule, self.lines, self.per_line);
            root.draw(&Text::new(title, (10, 10), ("sans-serif", 14).into_font())).map_err(|e| err(e.to_string()))?;
            let dims = match self.conduit.section {
                Section::Circular { diameter } => format!("D = {} mm", format_number(diameter.si() * 1e3)),
                Section::Rectangular { width, height } => format!(
                    "W = {} mm (port side) × H = {} mm",
                    format_number(width.si() * 1e3),
                    format_number(height.si() * 1e3)
                ),
            };
            root.draw(&Text::new(dims, (10, size - 22), ("sans-serif", 12).into_font()))
                .map_err(|e| err(e.to_string()))?;
            let d = |e: DrawingAreaErrorKind<_>| err(e.to_string());
            match self.conduit.section {
                Section::Circular { .. } => {
                    let r = span / 2.0;
                    root.draw(&Circle::new(px(0.0, 0.0), r as i32, wall)).map_err(d)?;
                    for line in 0..self.lines {
                        let a = std::f64::consts::PI * line as f64 / self.lines as f64;
                        let (dx, dy) = (a.cos() * r, a.sin() * r);
                        root.draw(&PathElement::new(vec![px(-dx, -dy), px(dx, dy)], line_style)).map_err(d)?;
                        let (tx, ty) = (-a.cos() * (r + 14.0), -a.sin() * (r + 14.0));
                        root.draw(&Text::new(
                            format!("port {}", line_letter(line)),
                            px(tx - 14.0, ty - 6.0),
                            font.clone(),
                        ))
                        .map_err(d)?;
                    }
                    for p in &self.points {
                        if let Position::Radial { r_over_r, angle_deg } = p.position {
                            let a = angle_deg.to_radians();
                            let (x, y) = (r_over_r * r * a.cos(), r_over_r * r * a.sin());
                            root.draw(&Circle::new(px(x, y), 4, point_style)).map_err(d)?;
                            root.draw(&Text::new(p.label(), px(x + 5.0, y + 3.0), font.clone())).map_err(d)?;
                        }
                    }
                }
                Section::Rectangular { width, height } => {
                    let k = span / width.si().max(height.si());
                    let (w, h) = (width.si() * k, height.si() * k);
                    root.draw(&Rectangle::new([px(-w / 2.0, -h / 2.0), px(w / 2.0, h / 2.0)], wall)).map_err(d)?;
                    for p in &self.points {
                        if let Position::Grid { x_over_w, y_over_h } = p.position {
                            let (x, y) = (-w / 2.0 + x_over_w * w, -h / 2.0 + y_over_h * h);
                            if p.index == 0 {
                                root.draw(&Text::new(
                                    format!("port {}", line_letter(p.line)),
                                    px(x - 14.0, -h / 2.0 - 30.0),
                                    font.clone(),
                                ))
                                .map_err(d)?;
                                // Its position along the port side, mm from the left-hand corner.
                                root.draw(&Text::new(
                                    format_number((x_over_w * width.si() * 1e4).round() / 10.0),
                                    px(x - 10.0, -h / 2.0 - 16.0),
                                    font.clone(),
                                ))
                                .map_err(d)?;
                            }
                            root.draw(&Circle::new(px(x, y), 4, point_style)).map_err(d)?;
                            root.draw(&Text::new(p.label(), px(x + 5.0, y + 3.0), font.clone())).map_err(d)?;
                        }
                    }
                }
            }
        }
        Ok(())
    }
}

/// Which traverse: velocity only, or particulate sampling (US EPA Method 1 §11.2).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TraversePurpose {
    /// Velocity (non-particulate) traverse.
    Velocity,
    /// Particulate sampling traverse.
    Particulate,
}

/// The minimum number of traverse points by US EPA Method 1.
#[derive(Debug, Clone, PartialEq)]
pub struct Method1Points {
    /// Minimum total number of points.
    pub minimum: usize,
    /// Why, in words.
    pub basis: String,
}

/// Minimum number of traverse points by US EPA Method 1 §11.2 for a site
/// `downstream` diameters after the nearest upstream disturbance and
/// `upstream` diameters before the nearest downstream one (diameters of the
/// conduit's equivalent diameter).
///
/// Within the 8- and 2-diameter criterion: 12 points for D > 0.61 m, else 8
/// (circular) or 9 (rectangular). Otherwise Figure 1-1 (from memory: 24, 20,
/// 16, 12 points for 2–5, 5–6, 6–7, 7–8 diameters downstream or 0.5–1.25,
/// 1.25–1.5, 1.5–1.75, 1.75–2 upstream; the larger of the two), rounded up to
/// a multiple of 4 for circular and to a Table 1-2 matrix for rectangular
/// sections. Velocity traverses use Figure 1-1 as well: §11.2.2 allows Figure
/// 1-2, which asks for fewer points; more points are always allowed.
pub fn epa_method1_points(
    conduit: &Conduit,
    downstream: f64,
    upstream: f64,
    purpose: TraversePurpose,
) -> Result<Method1Points> {
    finite("US EPA Method 1", "diameters downstream of disturbance", downstream)?;
    finite("US EPA Method 1", "diameters upstream of disturbance", upstream)?;
    let de = conduit.hydraulic_diameter().si();
    if de < 0.30 || conduit.area().si() < 0.071 {
        return Err(Error::Inconsistent {
            context: "US EPA Method 1",
            message: format!(
                "the method does not apply below 0.30 m diameter or 0.071 m² (§1.2); this section is {de:.3} m; see Method 1A"
            ),
        });
    }
    if downstream < 2.0 || upstream < 0.5 {
        return Err(Error::Inconsistent {
            context: "US EPA Method 1",
            message: format!(
                "the site is {downstream:.2} D downstream and {upstream:.2} D upstream of disturbances; the simplified procedure needs at least 2 D and 0.5 D (§1.2): use the alternative procedure (§11.5) with a directional probe, or move the site"
            ),
        });
    }
    let circular = conduit.is_circular();
    let (minimum, basis) = if downstream >= 8.0 && upstream >= 2.0 {
        let n = if de > 0.61 {
            12
        } else if circular {
            8
        } else {
            9
        };
        (n, "8- and 2-diameter criterion met (§11.2.1)".to_string())
    } else {
        let by_down = match downstream {
            d if d < 5.0 => 24,
            d if d < 6.0 => 20,
            d if d < 7.0 => 16,
            _ => 12,
        };
        let by_up = match upstream {
            u if u < 1.25 => 24,
            u if u < 1.5 => 20,
            u if u < 1.75 => 16,
            _ => 12,
        };
        let n: usize = by_down.max(by_up);
        let n = if circular {
            n.div_ceil(4) * 4
        } else {
            EPA_RECT_MATRIX.iter().map(|m| m.0).find(|&m| m >= n).unwrap_or(49)
        };
        (
            n,
            format!(
                "Figure 1-1 ({downstream:.1} D straight before the ports, downstream of the disturbance → {by_down}; {upstream:.2} D after them → {by_up}; Figure 1-1 breakpoints unverified: recalled, not read in the published text)"
            ),
        )
    };
    let note = match purpose {
        TraversePurpose::Particulate => "",
        TraversePurpose::Velocity => "; velocity traverse: Figure 1-1 used, Figure 1-2 may allow fewer",
    };
    Ok(Method1Points { minimum, basis: format!("{basis}{note}") })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pct(l: &TraverseLayout) -> Vec<f64> {
        let d = l.conduit.hydraulic_diameter().si();
        l.points.iter().filter(|p| p.line == 0).map(|p| (p.wall_distance.si() / d * 1000.0).round() / 10.0).collect()
    }

    // US EPA Method 1 Table 1-1 (check-values.md §5.1, from r/R = √((2i−1)/N), matching the
    // printed table as remembered), for a large stack (no point near the wall is moved).
    #[test]
    fn equal_area_matches_epa_table_1_1() {
        let c = Conduit::circular(Length::m(10.0)).unwrap();
        let table: [(usize, &[f64]); 6] = [
            (2, &[14.6, 85.4]),
            (4, &[6.7, 25.0, 75.0, 93.3]),
            (6, &[4.4, 14.6, 29.6, 70.4, 85.4, 95.6]),
            (8, &[3.2, 10.5, 19.4, 32.3, 67.7, 80.6, 89.5, 96.8]),
            (12, &[2.1, 6.7, 11.8, 17.7, 25.0, 35.6, 64.4, 75.0, 82.3, 88.2, 93.3, 97.9]),
            (
                24,
                &[
                    1.1, 3.2, 5.5, 7.9, 10.5, 13.2, 16.1, 19.4, 23.0, 27.2, 32.3, 39.8, 60.2, 67.7, 72.8, 77.0, 80.6,
                    83.9, 86.8, 89.5, 92.1, 94.5, 96.8, 98.9,
                ],
            ),
        ];
        for (n, want) in table {
            let l = TraverseLayout::circular(&c, LayoutRule::EqualArea, n, 2, Length::m(0.0)).unwrap();
            assert_eq!(pct(&l), want.to_vec(), "{n} points");
            assert_eq!(l.points.len(), 2 * n);
        }
    }

    // ISO 5802:2001 Tables 2 and 3 (check-values.md §5.2).
    #[test]
    fn log_rules_match_iso_5802() {
        let c = Conduit::circular(Length::m(1.0)).unwrap();
        let ll = TraverseLayout::circular(&c, LayoutRule::LogLinear, 6, 1, Length::m(0.0)).unwrap();
        assert_eq!(pct(&ll), vec![3.2, 13.5, 32.1, 67.9, 86.5, 96.8]);
        let ll8 = TraverseLayout::circular(&c, LayoutRule::LogLinear, 8, 1, Length::m(0.0)).unwrap();
        assert_eq!(pct(&ll8), vec![2.1, 11.7, 18.4, 34.5, 65.5, 81.6, 88.3, 97.9]);
        let lc = TraverseLayout::circular(&c, LayoutRule::LogChebyshev, 6, 1, Length::m(0.0)).unwrap();
        assert_eq!(pct(&lc), vec![3.2, 13.7, 31.2, 68.8, 86.3, 96.8]);
        let lc8 = TraverseLayout::circular(&c, LayoutRule::LogChebyshev, 8, 1, Length::m(0.0)).unwrap();
        assert_eq!(pct(&lc8), vec![2.4, 10.0, 19.4, 33.4, 66.6, 80.6, 90.0, 97.6]);
        assert!(TraverseLayout::circular(&c, LayoutRule::LogLinear, 12, 1, Length::m(0.0)).is_err());
    }

    #[test]
    fn epa_wall_distance_moves_points() {
        // 0.5 m stack, 12 points: 2.1 % of D = 10.7 mm < 13 mm → moved (EPA Method 1 §11.3.3).
        let c = Conduit::circular(Length::m(0.5)).unwrap();
        let l = TraverseLayout::circular(&c, LayoutRule::EqualArea, 12, 2, Length::mm(100.0)).unwrap();
        assert!(l.points[0].moved && (l.points[0].wall_distance.si() - 0.013).abs() < 1e-12);
        assert!((l.points[0].insertion.si() - 0.113).abs() < 1e-12);
        assert!(l.points[11].moved && (l.points[11].wall_distance.si() - 0.487).abs() < 1e-12);
        assert!(!l.points[1].moved);
        assert_eq!(l.warnings.len(), 1);
        assert!(l.field_table().contains("A1"));
        assert!(l.field_table().contains("moved to minimum wall distance"));
    }

    #[test]
    fn rectangular_layouts() {
        let c = Conduit::rectangular(Length::m(1.2), Length::m(0.8)).unwrap();
        let l = TraverseLayout::rectangular_epa(&c, 12, Length::mm(50.0)).unwrap();
        assert_eq!((l.lines, l.per_line), (4, 3));
        // centroids x/L = (2i − 1)/(2n): derived from the equal-area division (check-values.md §5.1)
        let Position::Grid { x_over_w, y_over_h } = l.points[0].position else { panic!() };
        assert!((x_over_w - 0.125).abs() < 1e-15 && (y_over_h - 1.0 / 6.0).abs() < 1e-15);
        assert!(TraverseLayout::rectangular_epa(&c, 13, Length::m(0.0)).is_err());
        // 1.2 m side → 7 points, 0.8 m side → 6 points (ASHRAE rule, check-values.md §5.3)
        let lc = TraverseLayout::rectangular_log_chebyshev(&c, Length::m(0.0)).unwrap();
        assert_eq!((lc.lines, lc.per_line), (7, 6));
        let Position::Grid { x_over_w, .. } = lc.points[0].position else { panic!() };
        assert_eq!(x_over_w, 0.053);
        assert!(TraverseLayout::rectangular(&c, LayoutRule::LogLinear, 5, 5, Length::m(0.0)).is_err());
    }

    #[test]
    fn drawings_show_every_point() {
        let c = Conduit::circular(Length::m(1.2)).unwrap();
        let l = TraverseLayout::circular(&c, LayoutRule::EqualArea, 8, 2, Length::mm(100.0)).unwrap();
        let svg = l.to_svg().unwrap();
        assert!(svg.starts_with("<svg") && svg.contains("B8") && svg.contains("port A"));
        assert_eq!(svg.matches("<circle").count(), 1 + 16);
        let r = Conduit::rectangular(Length::m(1.0), Length::m(0.5)).unwrap();
        let lr = TraverseLayout::rectangular_epa(&r, 12, Length::m(0.0)).unwrap();
        assert!(lr.to_svg().unwrap().contains("D3"));
    }

    #[test]
    fn wrong_section_or_counts() {
        let round = Conduit::circular(Length::m(1.0)).unwrap();
        let rect = Conduit::rectangular(Length::m(1.0), Length::m(0.5)).unwrap();
        let e = TraverseLayout::rectangular(&round, LayoutRule::EqualArea, 4, 4, Length::m(0.0)).unwrap_err();
        assert_eq!(
            e.to_string(),
            "traverse layout: a rectangular layout on a circular section; use TraverseLayout::circular"
        );
        assert!(TraverseLayout::circular(&rect, LayoutRule::EqualArea, 8, 2, Length::m(0.0)).is_err());
        let e = TraverseLayout::circular(&round, LayoutRule::EqualArea, 7, 2, Length::m(0.0)).unwrap_err();
        assert!(e.to_string().contains("must be even"));
    }

    // US EPA Method 1 §11.2.1 (8/2 criterion: 12, 8, 9 points) and §1.2 (limits); Figure 1-1
    // steps from memory.
    #[test]
    fn method1_point_counts() {
        let big = Conduit::circular(Length::m(1.5)).unwrap();
        let small = Conduit::circular(Length::m(0.5)).unwrap();
        let rect = Conduit::rectangular(Length::m(0.6), Length::m(0.4)).unwrap();
        let p = TraversePurpose::Particulate;
        assert_eq!(epa_method1_points(&big, 9.0, 3.0, p).unwrap().minimum, 12);
        assert_eq!(epa_method1_points(&small, 9.0, 3.0, p).unwrap().minimum, 8);
        assert_eq!(epa_method1_points(&rect, 9.0, 3.0, p).unwrap().minimum, 9);
        assert_eq!(epa_method1_points(&big, 3.0, 3.0, p).unwrap().minimum, 24);
        assert_eq!(epa_method1_points(&big, 5.5, 3.0, p).unwrap().minimum, 20);
        assert_eq!(epa_method1_points(&big, 9.0, 1.6, p).unwrap().minimum, 16);
        assert_eq!(epa_method1_points(&rect, 3.0, 3.0, p).unwrap().minimum, 25);
        assert!(epa_method1_points(&big, 1.5, 3.0, p).unwrap_err().to_string().contains("alternative procedure"));
        let tiny = Conduit::circular(Length::m(0.25)).unwrap();
        assert!(epa_method1_points(&tiny, 9.0, 3.0, p).unwrap_err().to_string().contains("Method 1A"));
        assert!(epa_method1_points(&big, 9.0, 3.0, TraversePurpose::Velocity).unwrap().basis.contains("Figure 1-2"));
    }

    /// Equal-area rings: the n rings bounded by the radii that split the annulus into equal
    /// areas each contain their point at half their area; a full circle (hub 0) gives the
    /// equal-area rule of US EPA Method 1 Table 1-1 (10 points per diameter on 1 m: the
    /// outermost point 2.6 % of D from the wall).
    #[test]
    fn annulus_radii_split_the_area_equally() {
        let r = annulus_equal_area_radii(Length::mm(800.0), Length::mm(300.0), 4).unwrap();
        let (ro, ri) = (0.4f64, 0.15f64);
        let ring = (ro * ro - ri * ri) / 4.0;
        for (k, rk) in r.iter().enumerate() {
            let inner_edge = (ri * ri + k as f64 * ring).sqrt();
            assert!((rk * rk - inner_edge * inner_edge - ring / 2.0).abs() < 1e-12, "{k}");
            assert!(*rk > ri && *rk < ro);
        }
        let full = annulus_equal_area_radii(Length::m(1.0), Length::m(0.0), 5).unwrap();
        assert!(((0.5 - full[4]) / 1.0 * 100.0 - 2.6).abs() < 0.05, "{}", full[4]);
        assert!(annulus_equal_area_radii(Length::mm(300.0), Length::mm(300.0), 4).is_err());
        assert!(annulus_equal_area_radii(Length::mm(800.0), Length::mm(300.0), 0).is_err());
    }
}
