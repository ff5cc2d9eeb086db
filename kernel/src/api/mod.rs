//! The script API: the library's types as rhai values, registered with their docs.
//!
//! One file per script package, mirroring the library's stages (quantities; fluids,
//! gauges, probes; sections, profiles, flows, layouts; steps; tables, expressions,
//! columns, campaigns; charts; uncertainty). Each has one `register` that registers
//! its functions through the [`Registrar`] with their docs. The values that cross
//! between packages (quantities, columns, settings) live here; the argument
//! conversions every package shares live in `args`.

use std::fmt::Display;
use std::sync::{Arc, RwLock};

use rhai::{Dynamic, EvalAltResult, Position};
use stagna::units::dimension::Dimension;
use stagna::units::quantity::format_number;
use stagna::{Quantity, Unit};

use crate::catalog::Registrar;

mod args;
pub mod campaigns;
pub mod charts;
pub mod columns;
pub mod corrections;
pub mod expressions;
pub mod flows;
pub mod fluids;
pub mod gauges;
pub mod layouts;
pub mod probes;
pub mod profiles;
pub mod quantities;
pub mod reports;
pub mod samples;
pub mod scans;
pub mod sections;
pub mod setups;
pub mod stack;
pub mod steps;
pub mod table_view;
pub mod tables;
pub mod uncertainty;

pub use args::*;

/// Result type of host functions.
pub type Res<T> = Result<T, Box<EvalAltResult>>;

/// A script error from any message.
pub fn rt(msg: impl Display) -> Box<EvalAltResult> {
    EvalAltResult::ErrorRuntime(Dynamic::from(msg.to_string()), Position::NONE).into()
}

/// Maps a library result into a script result.
pub fn lib<T>(r: stagna::Result<T>) -> Res<T> {
    r.map_err(|e| match e {
        // The session reports this as an interrupt (KeyboardInterrupt in notebooks).
        stagna::Error::Interrupted { .. } => rt("interrupted"),
        e => rt(e),
    })
}

/// The unit system for display.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum UnitSystem {
    /// SI (Pa, m, m/s, m³/s, kg/s, kg/m³, °C).
    #[default]
    Si,
    /// US customary (in of water at 60 °F, in, ft/s, cfm, lb/h, lb/ft³, °F).
    Us,
}

/// How quantities and columns without a unit of their own are shown: a unit system,
/// and a unit chosen per dimension on top of it (m³/h for flows, ft/min for velocities).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct DisplayUnits {
    /// The base system.
    pub system: UnitSystem,
    /// Units chosen per dimension (and absolute temperature or difference), over the system.
    pub chosen: Vec<(Dimension, bool, Arc<str>)>,
    /// Significant figures a quantity is shown to (`None`: [`DEFAULT_FIGURES`]).
    pub figures: Option<u32>,
}

/// Significant figures of a shown quantity unless a script sets others: four, as a
/// measured flow quantity is rarely known to better than 0.1 %, and the value itself
/// keeps every digit (common practice, no source).
pub const DEFAULT_FIGURES: u32 = 4;

impl DisplayUnits {
    /// SI without choices.
    pub fn si() -> Self {
        Self::default()
    }
    /// The unit a value of this dimension is shown in, if any.
    pub fn unit_for(&self, d: Dimension, absolute_temperature: bool) -> Option<&str> {
        let abs = d == Dimension::TEMPERATURE && absolute_temperature;
        self.chosen
            .iter()
            .find(|(cd, ca, _)| *cd == d && *ca == abs)
            .map(|(_, _, u)| &**u)
            .or_else(|| preferred_unit(d, absolute_temperature, self.system))
    }
    /// Significant figures quantities are shown to.
    pub fn figures(&self) -> u32 {
        self.figures.unwrap_or(DEFAULT_FIGURES)
    }
    /// Chooses `unit` for its own dimension (replacing an earlier choice).
    pub fn choose(&mut self, unit: &str) -> stagna::Result<()> {
        let q = Quantity::new(1.0, unit)?;
        let abs = q.dimension == Dimension::TEMPERATURE && q.absolute_temperature;
        self.chosen.retain(|(d, a, _)| !(*d == q.dimension && *a == abs));
        self.chosen.push((q.dimension, abs, unit.into()));
        Ok(())
    }
}

/// Starts the progress report of one long computation, named by a label.
pub type ProgressStart = Arc<dyn Fn(&str) -> stagna::progress::Progress + Send + Sync>;

/// The session's progress reporting (set by the session, which knows where output goes).
#[derive(Clone)]
pub struct ProgressHook(pub ProgressStart);

impl std::fmt::Debug for ProgressHook {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("ProgressHook")
    }
}

/// Where the session's warnings go (stderr of the REPL and batch runner, the notebook's
/// stderr stream).
#[derive(Clone)]
pub struct WarnHook(pub Arc<dyn Fn(&str) + Send + Sync>);

impl std::fmt::Debug for WarnHook {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("WarnHook")
    }
}

/// Sends a warning to the session's stderr, once per text in a session (deprecations and
/// other notes that would otherwise repeat on every row or call).
pub fn warn_once(p: &SharedPrefs, text: &str) {
    let (hook, new) = match p.write() {
        Ok(mut g) => (g.warn.clone(), g.warned.insert(text.to_string())),
        Err(e) => {
            let mut g = e.into_inner();
            (g.warn.clone(), g.warned.insert(text.to_string()))
        }
    };
    if let (Some(h), true) = (hook, new) {
        (h.0)(&format!("warning: {text}"));
    }
}

/// The value of option `new` in `o`, or of its deprecated spelling `old` with a warning
/// naming the new one (old names keep working for one release).
pub fn renamed_option<'a>(
    o: &'a rhai::Map,
    new: &str,
    old: &str,
    p: &SharedPrefs,
    function: &str,
) -> Option<&'a Dynamic> {
    if let Some(v) = o.get(new) {
        return Some(v);
    }
    let v = o.get(old)?;
    warn_once(
        p,
        &format!("{function}: option '{old}' is deprecated and will be removed in the next release; write '{new}'"),
    );
    Some(v)
}

/// A progress report for a long computation, when the session shows progress.
pub fn progress_for(p: &SharedPrefs, label: &str) -> Option<stagna::progress::Progress> {
    let hook = match p.read() {
        Ok(g) => g.progress.clone(),
        Err(e) => e.into_inner().progress.clone(),
    };
    hook.map(|h| (h.0)(label))
}

/// Per-session settings read by the display functions.
#[derive(Debug, Clone)]
pub struct Prefs {
    /// Display units.
    pub display: DisplayUnits,
    /// Folder where relative output paths go (batch runs) — `None` writes beside the script's
    /// working directory.
    pub output_dir: Option<std::path::PathBuf>,
    /// Files that must never be overwritten (the batch runner's inputs).
    pub protected: Vec<std::path::PathBuf>,
    /// Folder the bundled demo tables are read from instead of the embedded copies.
    pub data_dir: Option<std::path::PathBuf>,
    /// The session's interrupt flag, for long host functions to poll.
    pub interrupt: Arc<std::sync::atomic::AtomicBool>,
    /// Longest array a host function may return (the session's array limit).
    pub max_array: usize,
    /// Folders the session may write into (with their subfolders); `None` writes
    /// anywhere the user may (the REPL). Batch runs allow their output folder and the
    /// kernel its working folder, plus each `--allow-write DIR`.
    pub write_roots: Option<Vec<std::path::PathBuf>>,
    /// Progress reporting of long computations.
    pub progress: Option<ProgressHook>,
    /// How tables are shown.
    pub table: table_view::TableView,
    /// Where warnings go.
    pub warn: Option<WarnHook>,
    /// Warnings already given this session (given once).
    pub warned: std::collections::BTreeSet<String>,
    /// Everything the session has shown, for its report.
    pub record: Arc<std::sync::Mutex<crate::report::Record>>,
}

impl Default for Prefs {
    fn default() -> Self {
        Self {
            display: DisplayUnits::si(),
            output_dir: None,
            protected: Vec::new(),
            data_dir: None,
            interrupt: Arc::default(),
            max_array: usize::MAX,
            write_roots: None,
            progress: None,
            table: table_view::TableView::default(),
            warn: None,
            warned: Default::default(),
            record: Arc::default(),
        }
    }
}

/// Shared session settings.
pub type SharedPrefs = Arc<RwLock<Prefs>>;

/// Reads the prefs (a poisoned lock still holds valid settings).
pub fn prefs(p: &SharedPrefs) -> Prefs {
    match p.read() {
        Ok(g) => g.clone(),
        Err(e) => e.into_inner().clone(),
    }
}

/// The session's display units (read without copying the other settings).
pub fn display_of(p: &SharedPrefs) -> DisplayUnits {
    match p.read() {
        Ok(g) => g.display.clone(),
        Err(e) => e.into_inner().display.clone(),
    }
}

/// The preferred display unit of a dimension in a unit system.
pub fn preferred_unit(d: Dimension, absolute_temperature: bool, system: UnitSystem) -> Option<&'static str> {
    use UnitSystem::*;
    let u = match (d, system) {
        (Dimension::PRESSURE, Si) => "Pa",
        (Dimension::PRESSURE, Us) => "inH2O@60F",
        (Dimension::LENGTH, Si) => "m",
        (Dimension::LENGTH, Us) => "ft",
        (Dimension::AREA, Si) => "m^2",
        (Dimension::AREA, Us) => "ft^2",
        (Dimension::VELOCITY, Si) => "m/s",
        (Dimension::VELOCITY, Us) => "ft/s",
        (Dimension::VOLUME_FLOW, Si) => "m^3/s",
        (Dimension::VOLUME_FLOW, Us) => "cfm",
        (Dimension::MASS_FLOW, Si) => "kg/s",
        (Dimension::MASS_FLOW, Us) => "lb/h",
        (Dimension::DENSITY, Si) => "kg/m^3",
        (Dimension::DENSITY, Us) => "lb/ft^3",
        (Dimension::DYNAMIC_VISCOSITY, Si) => "Pa*s",
        (Dimension::DYNAMIC_VISCOSITY, Us) => "cP",
        (Dimension::TEMPERATURE, Si) if absolute_temperature => "degC",
        (Dimension::TEMPERATURE, Us) if absolute_temperature => "degF",
        (Dimension::TEMPERATURE, Si) => "delta_K",
        (Dimension::TEMPERATURE, Us) => "delta_degF",
        (Dimension::ACCELERATION, Si) => "m/s^2",
        (Dimension::ACCELERATION, Us) => "ft/s^2",
        (Dimension::MOLAR_MASS, _) => "kg/kmol",
        _ => return None,
    };
    Some(u)
}

/// A quantity in scripts: the library's SI quantity and the unit it is shown in.
#[derive(Debug, Clone)]
pub struct Q {
    /// The value.
    pub q: Quantity,
    /// Display unit chosen by the literal or by `.to(...)`; `None` follows the session.
    pub unit: Option<Arc<str>>,
}

impl Q {
    /// A quantity shown in the session's units.
    pub fn si(si: f64, dimension: Dimension) -> Self {
        Q { q: Quantity { si, dimension, absolute_temperature: false }, unit: None }
    }
    /// An absolute temperature in kelvins.
    pub fn kelvin(k: f64) -> Self {
        Q { q: Quantity { si: k, dimension: Dimension::TEMPERATURE, absolute_temperature: true }, unit: None }
    }
    /// A quantity with its display unit.
    pub fn with_unit(value: f64, unit: &str) -> stagna::Result<Self> {
        Ok(Q { q: Quantity::new(value, unit)?, unit: Some(unit.into()) })
    }
    /// Text in the display unit (explicit, else the session's preference, else SI), the
    /// number with the session's significant figures ([`DisplayUnits::figures`]).
    pub fn show(&self, display: &DisplayUnits) -> String {
        let n = display.figures();
        self.show_with(display, |v| stagna::units::quantity::format_figures(v, n))
    }

    /// As [`Q::show`], the number to `digits` significant figures (trailing zeros kept).
    pub fn show_sig(&self, display: &DisplayUnits, digits: u32) -> String {
        self.show_with(display, |v| stagna::units::quantity::format_sig(v, digits))
    }

    fn show_with(&self, display: &DisplayUnits, number: impl Fn(f64) -> String) -> String {
        let unit = self.unit.as_deref().or_else(|| display.unit_for(self.q.dimension, self.q.absolute_temperature));
        match unit.map(|u| self.q.value_in(u).map(|v| (v, u))) {
            Some(Ok((v, u))) => pretty_unit(&format!("{} {}", number(v), u.trim())),
            _ => {
                let sym = self.q.si_symbol();
                let n = number(self.q.si);
                pretty_unit(&if sym.is_empty() { n } else { format!("{n} {sym}") })
            }
        }
    }
}

/// A bare number as scripts print it: ten significant figures at most, trailing zeros
/// dropped, so that binary rounding (0.1 + 0.2 = 0.30000000000000004) never reaches a
/// screen while every figure a measurement can carry does. Values keep every digit.
pub fn float_text(x: f64) -> String {
    stagna::units::quantity::format_figures(x, 10)
}

/// Typographic unit symbols for display (°C, m³/s, Pa·s).
pub fn pretty_unit(s: &str) -> String {
    s.replace("delta_degC", "K (difference)")
        .replace("delta_degF", "°F (difference)")
        .replace("delta_K", "K (difference)")
        .replace("degC", "°C")
        .replace("degF", "°F")
        .replace("degR", "°R")
        .replace("^3", "³")
        .replace("^2", "²")
        .replace("m3", "m³")
        .replace("m2", "m²")
        .replace("ft3", "ft³")
        .replace("ft2", "ft²")
        .replace('*', "·")
        .replace("inH2O@60F", "inH₂O (60 °F)")
        .replace("H2O", "H₂O")
}

/// A column in scripts: values in SI with their dimension, a name and a display unit.
#[derive(Debug, Clone)]
pub struct Col {
    /// Column name (used when put into a table).
    pub name: Arc<str>,
    /// Values in SI units.
    pub si: Arc<Vec<f64>>,
    /// Dimension.
    pub dimension: Dimension,
    /// Absolute temperature (vs. a difference).
    pub absolute_temperature: bool,
    /// Display unit; `None` follows the session.
    pub unit: Option<Arc<str>>,
}

impl Col {
    /// A new column of SI values.
    pub fn new(name: &str, si: Vec<f64>, dimension: Dimension, unit: Option<&str>) -> Self {
        Col { name: name.into(), si: Arc::new(si), dimension, absolute_temperature: false, unit: unit.map(Into::into) }
    }
    /// The unit to write the column in.
    pub fn out_unit(&self, display: &DisplayUnits) -> Option<String> {
        self.unit
            .as_deref()
            .map(str::to_string)
            .or_else(|| display.unit_for(self.dimension, self.absolute_temperature).map(str::to_string))
    }
    /// Values in `unit`.
    pub fn values_in(&self, unit: &str) -> stagna::Result<Vec<f64>> {
        let u = Unit::parse(unit)?;
        let one = Quantity { si: 0.0, dimension: self.dimension, absolute_temperature: self.absolute_temperature };
        one.value_in_unit(&u)?; // dimension check once
        Ok(self.si.iter().map(|&v| Quantity { si: v, ..one }.value_in_unit(&u).unwrap_or(f64::NAN)).collect())
    }
    /// A short summary: name, length, unit, first values.
    pub fn show(&self, display: &DisplayUnits) -> String {
        let unit = self.out_unit(display);
        let vals = match &unit {
            Some(u) => self.values_in(u).unwrap_or_else(|_| self.si.to_vec()),
            None => self.si.to_vec(),
        };
        let head: Vec<String> = vals.iter().take(6).map(|v| format_number(*v)).collect();
        let more = if vals.len() > 6 { ", …" } else { "" };
        format!(
            "column '{}' ({} rows{}): [{}{}]",
            self.name,
            vals.len(),
            unit.map(|u| format!(", {}", pretty_unit(&u))).unwrap_or_default(),
            head.join(", "),
            more
        )
    }
}

/// Registers the whole API.
pub fn register_all(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    // The order follows the reduction chain; it is also the order in which overloads of
    // one name are registered (a later registration of the same signature wins).
    quantities::register(r, prefs);
    fluids::register(r, prefs);
    gauges::register(r, prefs);
    probes::register(r, prefs);
    sections::register(r, prefs);
    profiles::register(r, prefs);
    flows::register(r, prefs);
    corrections::register(r, prefs);
    layouts::register(r, prefs);
    steps::register(r, prefs);
    tables::register(r, prefs);
    expressions::register(r, prefs);
    columns::register(r, prefs);
    campaigns::register(r, prefs);
    charts::register(r, prefs);
    uncertainty::register(r, prefs);
    stack::register(r, prefs);
    setups::register(r, prefs);
    reports::register(r, prefs);
    samples::register(r, prefs);
    scans::register(r, prefs);
}
