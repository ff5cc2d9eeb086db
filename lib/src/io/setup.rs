//! Set-up files: the instruments, sites and campaigns a team measures with month after
//! month, kept in one hand-editable file instead of being re-typed in every script.
//!
//! Format `stagna-setup`, version 1: TOML (JSON with the same keys is read too), with
//! arrays of tables `[[probe]]`, `[[gauge]]`, `[[transducer]]`, `[[site]]` and
//! `[[campaign]]`. Quantities are text with their unit (`"600 mm"`, `"826 kg/m^3"`).
//! The whole file is checked before anything is returned — unknown keys, wrong types,
//! unknown units, quantities of the wrong kind, duplicated ids, transducer calibrations
//! with too few points, references to records or ids that do not exist, a version newer
//! than this build — and every message names the file, the line (TOML) and the key.
//! Nothing is half-loaded. The format is documented in `docs/records.md`.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};
use crate::fluids::gauge_liquid::{GaugeLiquid, UserLiquid};
use crate::fluids::gravity;
use crate::fluids::water::WaterModel;
use crate::instruments::manometer::{Manometer, ManometerKind};
use crate::instruments::probe::{Probe, ProbeKind};
use crate::instruments::transducer::{CalibrationPoint, Transducer, TransducerCalibration};
use crate::methods::us_epa::calibration::CalibrationRecord;
use crate::section::conduit::Conduit;
use crate::units::dimension::Dimension;
use crate::units::quantity::{Acceleration, Density, Length, Pressure, Quantity, Temperature};

/// The format name in the file's `format` key.
pub const FORMAT: &str = "stagna-setup";
/// The newest version this build reads and writes.
pub const VERSION: u32 = 1;

/// A probe entry, as written in the file.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct ProbeEntry {
    /// Identifier, unique among the file's instruments.
    pub id: String,
    /// `pitot-static`, `pitot-wall-taps` or `s-type`.
    pub kind: String,
    /// Coefficient C (or C_p), when no calibration record is named.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub coefficient: Option<f64>,
    /// Standard uncertainty of the coefficient (k = 1), absolute.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub coefficient_standard_uncertainty: Option<f64>,
    /// Where the coefficient comes from (certificate, maker's statement).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub coefficient_source: Option<String>,
    /// An S-type calibration record file, relative to the set-up file.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub calibration: Option<String>,
    /// Head (tip) diameter, e.g. `"8 mm"`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub head_diameter: Option<String>,
    /// Serial number.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub serial: Option<String>,
    /// Free text.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub note: Option<String>,
}

/// A liquid manometer entry.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct GaugeEntry {
    /// Identifier.
    pub id: String,
    /// `u-tube`, `inverted-u-tube`, `inclined` or `well`.
    pub arrangement: String,
    /// `mercury`, `water`, or the name of another liquid (then `liquid_density` and
    /// `liquid_temperature` are required).
    pub liquid: String,
    /// Density of the liquid at `liquid_temperature`, e.g. `"826 kg/m^3"`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub liquid_density: Option<String>,
    /// Temperature at which `liquid_density` holds.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub liquid_temperature: Option<String>,
    /// Volumetric expansion coefficient of the liquid, 1/K.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub liquid_expansion_per_k: Option<f64>,
    /// The liquid's certificate (number, issuer).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub liquid_certificate: Option<String>,
    /// Inclined gauges: tube angle from horizontal, degrees.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub angle_deg: Option<f64>,
    /// Inclined and well gauges: tube bore area over reservoir area.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub area_ratio: Option<f64>,
    /// Serial number.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub serial: Option<String>,
    /// Free text.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub note: Option<String>,
}

/// A differential-pressure transducer entry.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct TransducerEntry {
    /// Identifier.
    pub id: String,
    /// The unit its readings are logged in, e.g. `"Pa"`.
    pub unit: String,
    /// Rated range, low and high, e.g. `["0 Pa", "500 Pa"]`.
    pub range: Vec<String>,
    /// Serial number.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub serial: Option<String>,
    /// Calibration date, `YYYY-MM-DD` (required with `points`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub calibrated: Option<String>,
    /// Who calibrated, where, against which reference.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub calibrated_by: Option<String>,
    /// Degree of the calibration polynomial (1 linear, 2, 3); 1 when absent.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub degree: Option<usize>,
    /// Calibration points `[indicated, reference]`, both in `unit`.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub points: Vec<Vec<f64>>,
    /// Free text.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub note: Option<String>,
}

/// A site and its measuring section.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct SiteEntry {
    /// Identifier.
    pub id: String,
    /// Name for reports.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub name: Option<String>,
    /// `circular` or `rectangular`.
    pub shape: String,
    /// Circular: nominal or mean inside diameter.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub diameter: Option<String>,
    /// Circular: measured inside diameters (their mean is used).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub measured_diameters: Vec<String>,
    /// Rectangular: inside width.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub width: Option<String>,
    /// Rectangular: inside height.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub height: Option<String>,
    /// Wall roughness.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub roughness: Option<String>,
    /// Number of sampling ports.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ports: Option<u32>,
    /// Straight length upstream of the measuring section (from the nearest disturbance
    /// upstream to the section).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub straight_upstream: Option<String>,
    /// Straight length downstream of the measuring section (from the section to the
    /// nearest disturbance downstream).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub straight_downstream: Option<String>,
    /// Elevation above sea level (for local gravity).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub elevation: Option<String>,
    /// Latitude, degrees north (for local gravity).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub latitude_deg: Option<f64>,
    /// Free text.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub note: Option<String>,
}

/// A campaign: which instruments on which site, which columns hold what.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct CampaignEntry {
    /// Identifier.
    pub id: String,
    /// The site's id.
    pub site: String,
    /// The probe's id.
    pub probe: String,
    /// The gauge's id (manometer readings).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub gauge: Option<String>,
    /// The transducer's id (logged Δp).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub transducer: Option<String>,
    /// Layout rule of the traverse points (`equal-area`, `log-linear`, `log-chebyshev`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub layout: Option<String>,
    /// Reference condition flows are reported at (as `reduce_campaign` takes it).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub reference: Option<String>,
    /// Which column of the readings holds what (as `reduce_campaign`'s `columns`).
    #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
    pub columns: BTreeMap<String, String>,
    /// Units of the readings' columns, column → unit.
    #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
    pub units: BTreeMap<String, String>,
    /// Free text.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub note: Option<String>,
}

/// A set-up file as written.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct SetupFile {
    /// Always `stagna-setup`.
    pub format: String,
    /// Format version.
    pub version: u32,
    /// Free text about the file.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub note: Option<String>,
    /// Probes.
    #[serde(default, rename = "probe", skip_serializing_if = "Vec::is_empty")]
    pub probes: Vec<ProbeEntry>,
    /// Liquid gauges.
    #[serde(default, rename = "gauge", skip_serializing_if = "Vec::is_empty")]
    pub gauges: Vec<GaugeEntry>,
    /// Transducers.
    #[serde(default, rename = "transducer", skip_serializing_if = "Vec::is_empty")]
    pub transducers: Vec<TransducerEntry>,
    /// Sites.
    #[serde(default, rename = "site", skip_serializing_if = "Vec::is_empty")]
    pub sites: Vec<SiteEntry>,
    /// Campaigns.
    #[serde(default, rename = "campaign", skip_serializing_if = "Vec::is_empty")]
    pub campaigns: Vec<CampaignEntry>,
}

/// A probe ready to use, with what the file says about it.
#[derive(Debug, Clone)]
pub struct SetupProbe {
    /// The probe (its `coefficient_source` names this file and entry).
    pub probe: Probe,
    /// Where the coefficient comes from (the calibration record, or the file's
    /// `coefficient_source`); the probe's `coefficient_source` adds the file and entry.
    pub source: String,
    /// Standard uncertainty of the coefficient, when given (absolute, k = 1).
    pub coefficient_standard_uncertainty: Option<f64>,
    /// The calibration record, when the coefficient comes from one.
    pub calibration: Option<CalibrationRecord>,
    /// The entry.
    pub entry: ProbeEntry,
}

/// A gauge ready to use once the local gravity is known.
#[derive(Debug, Clone)]
pub struct SetupGauge {
    /// Arrangement.
    pub kind: ManometerKind,
    /// Gauge liquid.
    pub liquid: GaugeLiquid,
    /// The entry.
    pub entry: GaugeEntry,
}

impl SetupGauge {
    /// The manometer at a local gravity.
    pub fn manometer(&self, g: Acceleration) -> Result<Manometer> {
        Manometer::new(self.kind.clone(), self.liquid.clone(), g)
    }
}

/// A site ready to use.
#[derive(Debug, Clone)]
pub struct SetupSite {
    /// The measuring section.
    pub conduit: Conduit,
    /// Straight length upstream of the section.
    pub straight_upstream: Option<Length>,
    /// Straight length downstream of the section.
    pub straight_downstream: Option<Length>,
    /// Elevation.
    pub elevation: Option<Length>,
    /// The entry.
    pub entry: SiteEntry,
}

impl SetupSite {
    /// Local gravity (WGS 84 normal gravity with the free-air term) when latitude and
    /// elevation are given, else `None`.
    pub fn gravity(&self) -> Result<Option<Acceleration>> {
        match (self.entry.latitude_deg, self.elevation) {
            (Some(lat), Some(h)) => gravity::local(lat, h).map(Some),
            (Some(lat), None) => gravity::local(lat, Length::m(0.0)).map(Some),
            _ => Ok(None),
        }
    }
}

/// A whole set-up file, checked and resolved.
#[derive(Debug, Clone)]
pub struct Setup {
    /// The file it came from.
    pub path: PathBuf,
    /// The file as written (saved back as is).
    pub file: SetupFile,
    /// Probes by id.
    pub probes: BTreeMap<String, SetupProbe>,
    /// Gauges by id.
    pub gauges: BTreeMap<String, SetupGauge>,
    /// Transducers by id.
    pub transducers: BTreeMap<String, Transducer>,
    /// Sites by id.
    pub sites: BTreeMap<String, SetupSite>,
    /// Campaigns by id.
    pub campaigns: BTreeMap<String, CampaignEntry>,
}

/// Where a problem is: the file, the line when it can be found, the entry and the key.
struct Origin<'a> {
    path: &'a str,
    text: &'a str,
    json: bool,
}

impl Origin<'_> {
    fn err(&self, table: &str, index: usize, id: &str, key: &str, message: impl std::fmt::Display) -> Error {
        let line = if self.json { None } else { toml_line(self.text, table, index, key) };
        let at = match line {
            Some(l) => format!("line {l}: "),
            None => String::new(),
        };
        let entry = if id.is_empty() { format!("[[{table}]] {}", index + 1) } else { format!("[[{table}]] '{id}'") };
        Error::File { path: self.path.into(), message: format!("{at}{entry}, key '{key}': {message}") }
    }
}

/// The line (from 1) of `key` in the `index`-th `[[table]]` of a TOML text, or of the
/// table's header when the key is not written there.
fn toml_line(text: &str, table: &str, index: usize, key: &str) -> Option<usize> {
    let header = format!("[[{table}]]");
    let mut seen = 0usize;
    let mut inside = false;
    let mut header_line = None;
    for (i, line) in text.lines().enumerate() {
        let t = line.trim_start();
        if t.starts_with('[') {
            if inside {
                break;
            }
            if t.starts_with(&header) {
                if seen == index {
                    inside = true;
                    header_line = Some(i + 1);
                }
                seen += 1;
            }
            continue;
        }
        if inside && t.strip_prefix(key).is_some_and(|rest| rest.trim_start().starts_with('=')) {
            return Some(i + 1);
        }
    }
    header_line
}

fn quantity(o: &Origin, table: &str, i: usize, id: &str, key: &str, text: &str, dim: Dimension) -> Result<Quantity> {
    let q = Quantity::parse(text).map_err(|e| o.err(table, i, id, key, e))?;
    if q.dimension != dim {
        return Err(o.err(
            table,
            i,
            id,
            key,
            format!("'{text}' is not a {} (write e.g. \"{}\")", dim.name().unwrap_or("quantity"), example_of(dim)),
        ));
    }
    Ok(q)
}

fn example_of(dim: Dimension) -> &'static str {
    match dim {
        Dimension::LENGTH => "600 mm",
        Dimension::PRESSURE => "500 Pa",
        Dimension::DENSITY => "826 kg/m^3",
        Dimension::TEMPERATURE => "20 degC",
        _ => "1 m",
    }
}

fn opt_len(o: &Origin, t: &str, i: usize, id: &str, key: &str, v: &Option<String>) -> Result<Option<Length>> {
    v.as_deref().map(|s| quantity(o, t, i, id, key, s, Dimension::LENGTH).map(|q| Length::m(q.si))).transpose()
}

fn probe_kind(s: &str) -> Option<ProbeKind> {
    match s {
        "pitot-static" => Some(ProbeKind::PitotStatic),
        "pitot-wall-taps" => Some(ProbeKind::WallTapPitot),
        "s-type" => Some(ProbeKind::SType),
        _ => None,
    }
}

impl Setup {
    /// Reads and checks a set-up file (TOML, or JSON when the name ends in `.json`).
    /// `today_days` (days since 1970-01-01) and `max_age_days` judge the age of the
    /// calibration records it names.
    pub fn load(path: &Path, today_days: i64, max_age_days: Option<i64>) -> Result<Self> {
        let shown = path.display().to_string();
        let text = std::fs::read_to_string(path)
            .map_err(|e| Error::File { path: shown.clone(), message: format!("cannot read the set-up file: {e}") })?;
        let json = path.extension().is_some_and(|e| e.eq_ignore_ascii_case("json"));
        Self::from_text(&text, path, json, today_days, max_age_days, &|p| std::fs::read_to_string(p))
    }

    /// Checks a set-up file's text; `path` names it in messages and anchors the
    /// relative paths of the records it names, which `read` reads (the file system, or
    /// bundled copies).
    pub fn from_text(
        text: &str,
        path: &Path,
        json: bool,
        today_days: i64,
        max_age_days: Option<i64>,
        read: &dyn Fn(&Path) -> std::io::Result<String>,
    ) -> Result<Self> {
        let shown = path.display().to_string();
        let file: SetupFile = if json {
            serde_json::from_str(text).map_err(|e| Error::File { path: shown.clone(), message: e.to_string() })?
        } else {
            crate::io::record::from_toml(text, &shown)?
        };
        let o = Origin { path: &shown, text, json };
        // Top-level keys: the line where the key is written (TOML).
        let top = |key: &str| {
            if json {
                return String::new();
            }
            text.lines()
                .position(|l| l.trim_start().strip_prefix(key).is_some_and(|r| r.trim_start().starts_with('=')))
                .map(|i| format!("line {}: ", i + 1))
                .unwrap_or_default()
        };
        if file.format != FORMAT {
            return Err(Error::File {
                path: shown.clone(),
                message: format!(
                    "{}key 'format': '{}' is not a set-up file (expected '{FORMAT}')",
                    top("format"),
                    file.format
                ),
            });
        }
        if file.version > VERSION || file.version == 0 {
            return Err(Error::File {
                path: shown.clone(),
                message: format!(
                    "{}key 'version': {} — this Stagna reads set-up files of version 1 to {VERSION}; a newer file needs a newer Stagna",
                    top("version"),
                    file.version
                ),
            });
        }
        let mut ids: BTreeMap<&str, &str> = BTreeMap::new();
        let all = file
            .probes
            .iter()
            .map(|p| ("probe", &p.id))
            .chain(file.gauges.iter().map(|g| ("gauge", &g.id)))
            .chain(file.transducers.iter().map(|t| ("transducer", &t.id)));
        let mut counters: BTreeMap<&str, usize> = BTreeMap::new();
        for (table, id) in all {
            let i = *counters.entry(table).and_modify(|c| *c += 1).or_insert(0);
            if id.trim().is_empty() {
                return Err(o.err(table, i, "", "id", "the id is empty: name the instrument"));
            }
            if let Some(first) = ids.insert(id, table) {
                return Err(o.err(
                    table,
                    i,
                    id,
                    "id",
                    format!("the id '{id}' is already used by a [[{first}]]; instrument ids must be unique"),
                ));
            }
        }
        let base = path.parent().map(Path::to_path_buf).unwrap_or_default();
        let mut probes = BTreeMap::new();
        for (i, e) in file.probes.iter().enumerate() {
            probes.insert(e.id.clone(), resolve_probe(&o, i, e, &base, today_days, max_age_days, read)?);
        }
        let mut gauges = BTreeMap::new();
        for (i, e) in file.gauges.iter().enumerate() {
            gauges.insert(e.id.clone(), resolve_gauge(&o, i, e)?);
        }
        let mut transducers = BTreeMap::new();
        for (i, e) in file.transducers.iter().enumerate() {
            transducers.insert(e.id.clone(), resolve_transducer(&o, i, e)?);
        }
        let mut sites = BTreeMap::new();
        for (i, e) in file.sites.iter().enumerate() {
            if sites.contains_key(&e.id) {
                return Err(o.err("site", i, &e.id, "id", format!("the site id '{}' is used twice", e.id)));
            }
            sites.insert(e.id.clone(), resolve_site(&o, i, e)?);
        }
        let mut campaigns = BTreeMap::new();
        for (i, e) in file.campaigns.iter().enumerate() {
            let missing = |key: &str, what: &str, id: &str, known: Vec<&String>| {
                let known: Vec<&str> = known.iter().map(|s| s.as_str()).collect();
                o.err(
                    "campaign",
                    i,
                    &e.id,
                    key,
                    format!(
                        "no {what} '{id}' in this file (its {what}s: {})",
                        if known.is_empty() { "none".into() } else { known.join(", ") }
                    ),
                )
            };
            if campaigns.contains_key(&e.id) {
                return Err(o.err("campaign", i, &e.id, "id", format!("the campaign id '{}' is used twice", e.id)));
            }
            if !sites.contains_key(&e.site) {
                return Err(missing("site", "site", &e.site, sites.keys().collect()));
            }
            if !probes.contains_key(&e.probe) {
                return Err(missing("probe", "probe", &e.probe, probes.keys().collect()));
            }
            if let Some(g) = &e.gauge
                && !gauges.contains_key(g)
            {
                return Err(missing("gauge", "gauge", g, gauges.keys().collect()));
            }
            if let Some(t) = &e.transducer
                && !transducers.contains_key(t)
            {
                return Err(missing("transducer", "transducer", t, transducers.keys().collect()));
            }
            if e.gauge.is_some() == e.transducer.is_some() {
                return Err(o.err(
                    "campaign",
                    i,
                    &e.id,
                    "gauge",
                    "name exactly one reading instrument: a gauge (manometer readings) or a transducer (logged Δp)",
                ));
            }
            if let Some(l) = &e.layout
                && !matches!(l.as_str(), "equal-area" | "log-linear" | "log-chebyshev")
            {
                return Err(o.err(
                    "campaign",
                    i,
                    &e.id,
                    "layout",
                    format!("'{l}' is not a layout rule (equal-area, log-linear or log-chebyshev)"),
                ));
            }
            for (col, unit) in &e.units {
                crate::units::unit::Unit::parse(unit)
                    .map_err(|err| o.err("campaign", i, &e.id, "units", format!("column '{col}': {err}")))?;
            }
            campaigns.insert(e.id.clone(), e.clone());
        }
        Ok(Self { path: path.to_path_buf(), file, probes, gauges, transducers, sites, campaigns })
    }

    /// The file as TOML, behind a header comment.
    pub fn to_toml(&self) -> Result<String> {
        crate::io::record::to_toml(
            &self.file,
            "Stagna set-up file: instruments, sites and campaigns (format described in docs/records.md).",
            "set-up file",
        )
    }

    /// The file as JSON.
    pub fn to_json(&self) -> Result<String> {
        serde_json::to_string_pretty(&self.file)
            .map_err(|e| Error::Inconsistent { context: "set-up file", message: format!("cannot write JSON: {e}") })
    }
}

fn resolve_probe(
    o: &Origin,
    i: usize,
    e: &ProbeEntry,
    base: &Path,
    today_days: i64,
    max_age_days: Option<i64>,
    read: &dyn Fn(&Path) -> std::io::Result<String>,
) -> Result<SetupProbe> {
    let t = "probe";
    let kind = probe_kind(&e.kind).ok_or_else(|| {
        o.err(
            t,
            i,
            &e.id,
            "kind",
            format!("'{}' is not a probe kind (pitot-static, pitot-wall-taps or s-type)", e.kind),
        )
    })?;
    let cite = |source: &str| {
        let name = Path::new(o.path).file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
        let serial = e.serial.as_deref().map(|s| format!(", serial {s}")).unwrap_or_default();
        format!("set-up {name}, probe '{}'{serial}: {source}", e.id)
    };
    let (mut probe, calibration, source) = match (&e.calibration, e.coefficient) {
        (Some(_), Some(_)) => {
            return Err(o.err(
                t,
                i,
                &e.id,
                "coefficient",
                "give either a coefficient or a calibration record, not both",
            ));
        }
        (None, None) => {
            return Err(o.err(t, i, &e.id, "coefficient", "missing: give a coefficient or a calibration record file"));
        }
        (Some(file), None) => {
            if kind != ProbeKind::SType {
                return Err(o.err(
                    t,
                    i,
                    &e.id,
                    "calibration",
                    "calibration records are S-type records (Method 2 §10.1); give a coefficient for this kind",
                ));
            }
            let p = base.join(file);
            let text = read(&p)
                .map_err(|err| o.err(t, i, &e.id, "calibration", format!("cannot read '{}': {err}", p.display())))?;
            let rec = CalibrationRecord::from_toml(&text, &p.display().to_string())
                .map_err(|err| o.err(t, i, &e.id, "calibration", err))?;
            let mut probe = Probe::from_calibration(&rec, today_days, max_age_days)
                .map_err(|err| o.err(t, i, &e.id, "calibration", err))?;
            let source = probe.coefficient_source.take().unwrap_or_default();
            probe.coefficient_source = Some(cite(&source));
            (probe, Some(rec), source)
        }
        (None, Some(c)) => {
            let mut probe = Probe::new(kind, c).map_err(|err| o.err(t, i, &e.id, "coefficient", err))?;
            let source = e.coefficient_source.clone().unwrap_or_else(|| "coefficient as stated in the file".into());
            probe.coefficient_source = Some(cite(&source));
            (probe, None, source)
        }
    };
    if let Some(d) = opt_len(o, t, i, &e.id, "head_diameter", &e.head_diameter)? {
        probe = probe.with_head_diameter(d).map_err(|err| o.err(t, i, &e.id, "head_diameter", err))?;
    }
    if let Some(u) = e.coefficient_standard_uncertainty
        && !(u.is_finite() && u >= 0.0)
    {
        return Err(o.err(t, i, &e.id, "coefficient_standard_uncertainty", format!("must be ≥ 0, got {u}")));
    }
    Ok(SetupProbe {
        probe,
        source,
        coefficient_standard_uncertainty: e.coefficient_standard_uncertainty,
        calibration,
        entry: e.clone(),
    })
}

fn resolve_gauge(o: &Origin, i: usize, e: &GaugeEntry) -> Result<SetupGauge> {
    let t = "gauge";
    let need = |key: &str, v: Option<f64>| {
        v.ok_or_else(|| {
            o.err(
                t,
                i,
                &e.id,
                key,
                format!(
                    "missing: a{} {} gauge needs it",
                    if e.arrangement.starts_with('i') { "n" } else { "" },
                    e.arrangement
                ),
            )
        })
    };
    let kind = match e.arrangement.as_str() {
        "u-tube" => ManometerKind::UTube,
        "inverted-u-tube" => ManometerKind::InvertedUTube,
        "inclined" => ManometerKind::Inclined {
            angle_deg: need("angle_deg", e.angle_deg)?,
            area_ratio: e.area_ratio.unwrap_or(0.0),
        },
        "well" => ManometerKind::Well { area_ratio: e.area_ratio.unwrap_or(0.0) },
        other => {
            return Err(o.err(
                t,
                i,
                &e.id,
                "arrangement",
                format!("'{other}' is not an arrangement (u-tube, inverted-u-tube, inclined or well)"),
            ));
        }
    };
    let liquid = match e.liquid.as_str() {
        "mercury" => GaugeLiquid::Mercury,
        "water" => GaugeLiquid::Water(WaterModel::Tanaka2001),
        name => {
            let rho = e.liquid_density.as_deref().ok_or_else(|| {
                o.err(t, i, &e.id, "liquid_density", format!("missing: the density of '{name}' is needed"))
            })?;
            let rho = quantity(o, t, i, &e.id, "liquid_density", rho, Dimension::DENSITY)?;
            let at = e.liquid_temperature.as_deref().ok_or_else(|| {
                o.err(t, i, &e.id, "liquid_temperature", "missing: the temperature the density holds at is needed")
            })?;
            let at = quantity(o, t, i, &e.id, "liquid_temperature", at, Dimension::TEMPERATURE)?;
            GaugeLiquid::User(
                UserLiquid::new(name, Density::kg_m3(rho.si), Temperature::kelvin(at.si), e.liquid_expansion_per_k)
                    .map_err(|err| o.err(t, i, &e.id, "liquid_density", err))?,
            )
        }
    };
    // Build once at standard gravity so that the arrangement's limits are checked now.
    Manometer::new(kind.clone(), liquid.clone(), gravity::standard())
        .map_err(|err| o.err(t, i, &e.id, if e.angle_deg.is_some() { "angle_deg" } else { "area_ratio" }, err))?;
    Ok(SetupGauge { kind, liquid, entry: e.clone() })
}

fn resolve_transducer(o: &Origin, i: usize, e: &TransducerEntry) -> Result<Transducer> {
    let t = "transducer";
    let unit_q = Quantity::new(1.0, &e.unit).map_err(|err| o.err(t, i, &e.id, "unit", err))?;
    if unit_q.dimension != Dimension::PRESSURE {
        return Err(o.err(t, i, &e.id, "unit", format!("'{}' is not a pressure unit", e.unit)));
    }
    if e.range.len() != 2 {
        return Err(o.err(t, i, &e.id, "range", "give the low and the high end, e.g. [\"0 Pa\", \"500 Pa\"]"));
    }
    let lo = quantity(o, t, i, &e.id, "range", &e.range[0], Dimension::PRESSURE)?;
    let hi = quantity(o, t, i, &e.id, "range", &e.range[1], Dimension::PRESSURE)?;
    let mut tr = Transducer::new(&e.id, &e.unit, (Pressure::pa(lo.si), Pressure::pa(hi.si)))
        .map_err(|err| o.err(t, i, &e.id, "range", err))?;
    if !e.points.is_empty() {
        let date = e
            .calibrated
            .as_deref()
            .ok_or_else(|| o.err(t, i, &e.id, "calibrated", "missing: the calibration date (YYYY-MM-DD)"))?;
        if crate::io::record::days_from_iso_date(date).is_none() {
            return Err(o.err(
                t,
                i,
                &e.id,
                "calibrated",
                format!("'{date}' is not a calendar date written YYYY-MM-DD"),
            ));
        }
        let factor = unit_q.si; // Pa per reading unit
        let mut pts = Vec::with_capacity(e.points.len());
        for (k, p) in e.points.iter().enumerate() {
            if p.len() != 2 {
                return Err(o.err(
                    t,
                    i,
                    &e.id,
                    "points",
                    format!("point {} has {} numbers; each point is [indicated, reference]", k + 1, p.len()),
                ));
            }
            pts.push(CalibrationPoint { indicated_pa: p[0] * factor, reference_pa: p[1] * factor });
        }
        let cal =
            TransducerCalibration::fit(pts, e.degree.unwrap_or(1), date, e.calibrated_by.as_deref().unwrap_or(""))
                .map_err(|err| o.err(t, i, &e.id, "points", err))?;
        tr.calibration = Some(cal);
    } else if e.degree.is_some() || e.calibrated.is_some() {
        return Err(o.err(t, i, &e.id, "points", "a calibration date or degree is given but no calibration points"));
    }
    Ok(tr)
}

fn resolve_site(o: &Origin, i: usize, e: &SiteEntry) -> Result<SetupSite> {
    let t = "site";
    let len = |key: &str, v: &Option<String>| opt_len(o, t, i, &e.id, key, v);
    let conduit = match e.shape.as_str() {
        "circular" => {
            if !e.measured_diameters.is_empty() {
                let mut ds = Vec::new();
                for d in &e.measured_diameters {
                    ds.push(Length::m(quantity(o, t, i, &e.id, "measured_diameters", d, Dimension::LENGTH)?.si));
                }
                Conduit::circular_from_diameters(&ds).map_err(|err| o.err(t, i, &e.id, "measured_diameters", err))?
            } else {
                let d = len("diameter", &e.diameter)?.ok_or_else(|| {
                    o.err(
                        t,
                        i,
                        &e.id,
                        "diameter",
                        "missing: a circular section needs its diameter (or measured_diameters)",
                    )
                })?;
                Conduit::circular(d).map_err(|err| o.err(t, i, &e.id, "diameter", err))?
            }
        }
        "rectangular" => {
            let w = len("width", &e.width)?
                .ok_or_else(|| o.err(t, i, &e.id, "width", "missing: a rectangular section needs width and height"))?;
            let h = len("height", &e.height)?
                .ok_or_else(|| o.err(t, i, &e.id, "height", "missing: a rectangular section needs width and height"))?;
            Conduit::rectangular(w, h).map_err(|err| o.err(t, i, &e.id, "width", err))?
        }
        other => {
            return Err(o.err(
                t,
                i,
                &e.id,
                "shape",
                format!("'{other}' is not a section shape (circular or rectangular)"),
            ));
        }
    };
    let conduit = match len("roughness", &e.roughness)? {
        Some(r) => conduit.with_roughness(r).map_err(|err| o.err(t, i, &e.id, "roughness", err))?,
        None => conduit,
    };
    let site = SetupSite {
        conduit,
        straight_upstream: len("straight_upstream", &e.straight_upstream)?,
        straight_downstream: len("straight_downstream", &e.straight_downstream)?,
        elevation: len("elevation", &e.elevation)?,
        entry: e.clone(),
    };
    site.gravity().map_err(|err| o.err(t, i, &e.id, "latitude_deg", err))?;
    Ok(site)
}

#[cfg(test)]
mod tests {
    use super::*;

    const TODAY: i64 = 20_790; // 2026-12-03

    fn load(text: &str) -> Result<Setup> {
        Setup::from_text(text, Path::new("/nowhere/site.toml"), false, TODAY, None, &|p| std::fs::read_to_string(p))
    }

    const GOOD: &str = r#"
format = "stagna-setup"
version = 1

[[probe]]
id = "PS-12"
kind = "pitot-static"
coefficient = 0.998
coefficient_standard_uncertainty = 0.003
head_diameter = "8 mm"

[[gauge]]
id = "MN-3"
arrangement = "inclined"
liquid = "gauge oil"
liquid_density = "826 kg/m^3"
liquid_temperature = "20 degC"
liquid_expansion_per_k = 7.5e-4
angle_deg = 20
area_ratio = 0.0036

[[transducer]]
id = "DPT-1"
unit = "Pa"
range = ["0 Pa", "500 Pa"]
calibrated = "2026-10-14"
points = [[0.0, 0.5], [100.0, 101.0], [200.0, 201.5], [300.0, 301.0]]

[[site]]
id = "ahu-2"
shape = "circular"
measured_diameters = ["601 mm", "599 mm"]
straight_upstream = "4.2 m"
elevation = "35 m"
latitude_deg = 52.2

[[campaign]]
id = "monthly"
site = "ahu-2"
probe = "PS-12"
gauge = "MN-3"
columns = { traverse = "run", deflection = "h_mm" }
"#;

    #[test]
    fn a_whole_file_resolves() {
        let s = load(GOOD).unwrap();
        let p = &s.probes["PS-12"];
        assert_eq!(p.probe.coefficient, 0.998);
        assert!(p.probe.coefficient_source.as_deref().unwrap().contains("set-up site.toml, probe 'PS-12'"));
        // mean of 601 and 599 mm = 600 mm (arithmetic)
        let site = &s.sites["ahu-2"];
        assert!((site.conduit.area().si() - std::f64::consts::PI * 0.09).abs() < 1e-6);
        let g = site.gravity().unwrap().unwrap();
        // WGS84 normal gravity at 52.2° less the free-air term 3.086e-6 per m × 35 m
        // (see fluids::gravity tests for the formula's check values): about 9.8128 m/s².
        assert!((g.si() - 9.8128).abs() < 2e-3, "{}", g.si());
        let m = s.gauges["MN-3"].manometer(g).unwrap();
        assert!(matches!(m.kind(), ManometerKind::Inclined { .. }));
        let t = &s.transducers["DPT-1"];
        assert_eq!(t.calibration.as_ref().unwrap().dof, 2);
        assert_eq!(s.campaigns["monthly"].columns["deflection"], "h_mm");
        // Saved and read back, it is the same file.
        let again = load(&s.to_toml().unwrap()).unwrap();
        assert_eq!(again.file, s.file);
        let json = Setup::from_text(&s.to_json().unwrap(), Path::new("x.json"), true, TODAY, None, &|p| {
            std::fs::read_to_string(p)
        })
        .unwrap();
        assert_eq!(json.file, s.file);
    }

    fn refused(text: &str) -> String {
        load(text).unwrap_err().to_string()
    }

    #[test]
    fn bad_files_name_file_line_and_key() {
        // Unknown key: the TOML reader's message names the line and the key.
        let e = refused(&GOOD.replace("head_diameter = \"8 mm\"", "head_diam = \"8 mm\""));
        assert!(e.contains("/nowhere/site.toml") && e.contains("head_diam") && e.contains("line"), "{e}");
        // Unknown unit, with its line (line 10 of GOOD: its first line is empty).
        let e = refused(&GOOD.replace("\"8 mm\"", "\"8 mmm\""));
        assert!(e.contains("line 10") && e.contains("'head_diameter'") && e.contains("mmm"), "{e}");
        // Wrong kind of quantity.
        let e = refused(&GOOD.replace("\"8 mm\"", "\"8 Pa\""));
        assert!(e.contains("is not a length"), "{e}");
        // Wrong type.
        let e = refused(&GOOD.replace("coefficient = 0.998", "coefficient = \"high\""));
        assert!(e.contains("coefficient") && e.contains("line"), "{e}");
        // A calibration with one point.
        let e =
            refused(&GOOD.replace(
                "points = [[0.0, 0.5], [100.0, 101.0], [200.0, 201.5], [300.0, 301.0]]",
                "points = [[0.0, 0.5]]",
            ));
        assert!(e.contains("'points'") && e.contains("at least 3 points") && e.contains("line 27"), "{e}");
        // Duplicated instrument ids.
        let e = refused(&GOOD.replace("id = \"DPT-1\"", "id = \"PS-12\""));
        assert!(e.contains("already used by a [[probe]]") && e.contains("line 23"), "{e}");
        // A version from the future.
        let e = refused(&GOOD.replace("version = 1", "version = 7"));
        assert!(e.contains("'version'") && e.contains("newer Stagna"), "{e}");
        // Truncated: the TOML reader stops at the cut.
        let cut = &GOOD[..GOOD.find("angle_deg").unwrap() + 6];
        let e = refused(cut);
        assert!(e.contains("line"), "{e}");
        // Missing field and a dangling reference.
        let e = refused(&GOOD.replace("arrangement = \"inclined\"\n", ""));
        assert!(e.contains("arrangement"), "{e}");
        let e = refused(&GOOD.replace("probe = \"PS-12\"", "probe = \"PS-99\""));
        assert!(e.contains("no probe 'PS-99'") && e.contains("PS-12"), "{e}");
        // A calibration record file that is not there.
        let e = refused(
            &GOOD.replace("coefficient = 0.998", "calibration = \"sp07.toml\"").replace("pitot-static", "s-type"),
        );
        assert!(e.contains("sp07.toml"), "{e}");
        // JSON: the reader's line and column.
        let e = Setup::from_text(
            "{\"format\": \"stagna-setup\", \"version\": 1,\n \"probe\": [{\"id\": 3}]}",
            Path::new("x.json"),
            true,
            TODAY,
            None,
            &|p| std::fs::read_to_string(p),
        )
        .unwrap_err()
        .to_string();
        assert!(e.contains("x.json") && e.contains("line 2"), "{e}");
    }
}
