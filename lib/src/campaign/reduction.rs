//! Whole campaigns: many traverses in one polars `DataFrame`, reduced in one
//! call. Per-row physics (fluid density, Δp from the deflection, point
//! velocity) runs in one fused pass over the column buffers; polars finds the
//! traverse groups (slices when the key column is sorted); each traverse is
//! then averaged (arithmetic mean, or integration over positions). A traverse
//! with bad data fails alone, is listed with the reason, and the rest of the
//! campaign still reduces.
//!
//! Columns are read in declared units (`mm`, `degC`, ...) and converted to SI
//! on the fly; no intermediate column is allocated unless a column is not
//! `f64` without nulls.

use polars::prelude::*;

use crate::error::{Error, Result};
use crate::fluids::fluid::Fluid;
use crate::instruments::manometer::Manometer;
use crate::instruments::probe::{Probe, incompressible};
use crate::section::integration::{Averaging, section_mean};
use crate::section::layout::Position;
use crate::units::quantity::Pressure;
use crate::units::unit::Unit;

/// Which columns hold what, in which units.
#[derive(Debug, Clone)]
pub struct CampaignColumns {
    /// Traverse identifier (any type).
    pub traverse: String,
    /// The reading at each point, and its unit: a manometer deflection (a length unit,
    /// reduced through the spec's manometer) or a transducer's Δp (a pressure unit, used
    /// as it is; the manometer is then not read). The unit says which.
    pub reading: (String, Unit),
    /// Working-fluid temperature, and its unit (absolute temperature unit).
    pub fluid_temperature: (String, Unit),
    /// Inside diameter of a round conduit, or the width of a rectangular one (the side with
    /// the ports), and its unit.
    pub size: (String, Unit),
    /// For rectangular conduits: the height (traverse depth) and, per point, the distance
    /// of its traverse line from the side wall across the width.
    pub rectangular: Option<RectangularColumns>,
    /// Distance of the point from the port-side wall along its diameter, and its unit
    /// (needed for integration and for position checks).
    pub position: Option<(String, Unit)>,
    /// Diameter (line) number within the traverse, if several.
    pub line: Option<String>,
    /// Gauge-liquid temperature column; the fluid temperature is used when absent.
    pub gauge_temperature: Option<(String, Unit)>,
}

impl CampaignColumns {
    /// Every column a reduction reads, each once, the traverse column first: what a scan
    /// projects.
    pub fn names(&self) -> Vec<String> {
        let mut out = vec![self.traverse.clone()];
        let mut add = |n: &str| {
            if !out.iter().any(|o| o == n) {
                out.push(n.to_string());
            }
        };
        add(&self.reading.0);
        add(&self.fluid_temperature.0);
        add(&self.size.0);
        if let Some(r) = &self.rectangular {
            add(&r.height.0);
            add(&r.across.0);
        }
        if let Some(p) = &self.position {
            add(&p.0);
        }
        if let Some(l) = &self.line {
            add(l);
        }
        if let Some(g) = &self.gauge_temperature {
            add(&g.0);
        }
        out
    }

    /// Columns with the usual names and units: `traverse`, `deflection_mm`,
    /// `fluid_temp_c`, `diameter_mm`, `position_mm`.
    pub fn standard() -> Result<Self> {
        Ok(Self {
            traverse: "traverse".into(),
            reading: ("deflection_mm".into(), Unit::parse("mm")?),
            fluid_temperature: ("fluid_temp_c".into(), Unit::parse("degC")?),
            size: ("diameter_mm".into(), Unit::parse("mm")?),
            rectangular: None,
            position: Some(("position_mm".into(), Unit::parse("mm")?)),
            line: None,
            gauge_temperature: None,
        })
    }
}

/// The extra columns of a rectangular conduit.
#[derive(Debug, Clone)]
pub struct RectangularColumns {
    /// Inside height (the traverse depth), and its unit.
    pub height: (String, Unit),
    /// Distance of the point's traverse line from the side wall, across the width, and its unit.
    pub across: (String, Unit),
}

/// How a campaign is measured.
#[derive(Debug, Clone)]
pub struct CampaignSpec {
    /// Column names and units.
    pub columns: CampaignColumns,
    /// Working fluid.
    pub fluid: Fluid,
    /// Absolute static pressure at the section.
    pub static_pressure: Pressure,
    /// The manometer.
    pub manometer: Manometer,
    /// The probe.
    pub probe: Probe,
    /// Averaging over each traverse.
    pub averaging: Averaging,
    /// Fewest points a traverse must have.
    pub min_points: usize,
    /// Reference condition, moisture (dry basis) and wall factor for the reported flows.
    pub flow: crate::section::flow::FlowOptions,
    /// Per-traverse flow uncertainty by the GUM, if wanted.
    pub uncertainty: Option<CampaignUncertainty>,
    /// Conditions that change from traverse to traverse (runs on different days or
    /// loads): they replace `static_pressure`, `fluid` and `flow.moisture` for the
    /// traverses they name.
    pub conditions: Option<TraverseConditions>,
    /// Told how many traverses are done, as they finish.
    pub progress: Option<crate::progress::Progress>,
    /// The US EPA Method 2 route beside (or instead of) the physics route.
    pub method2: Option<Method2Route>,
}

/// The US EPA Method 2 route of a campaign: each traverse also reduced by the method's
/// own equations (eq. 2-7 velocity from the mean of √Δp in mm H₂O and the mean stack
/// temperature, eq. 2-10 dry flow at 20 °C and 760 mmHg, with the method's rounded
/// constants; see [`crate::methods::us_epa`]), beside the physics route (density per
/// point, compressibility correction) with the difference shown.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Method2Route {
    /// Dry molecular weight M_d (g/g-mol) for traverses whose conditions give none.
    pub dry_molecular_weight: Option<f64>,
    /// Report the method's velocity and flows in the main columns (the physics route's
    /// velocity is then kept beside); otherwise the physics route is reported.
    pub report: bool,
}

/// The static pressure, fluid and moisture of each traverse, by traverse key.
#[derive(Debug, Clone)]
pub struct TraverseConditions {
    /// Key of each traverse, as text (as the traverse column prints it).
    pub keys: Vec<String>,
    /// Absolute static pressure at the section, Pa.
    pub static_pressure_pa: Vec<f64>,
    /// Working fluid (e.g. a stack gas of that run's analysis and moisture).
    pub fluid: Vec<Fluid>,
    /// Water-vapour fraction B_ws for the dry-basis flow, if any.
    pub moisture: Vec<Option<f64>>,
    /// Dry molecular weight M_d (g/g-mol) of each traverse's gas for the Method 2 route,
    /// if given (from that run's analysis by Method 3, or directly).
    pub dry_molecular_weight: Vec<Option<f64>>,
}

impl TraverseConditions {
    /// Checks lengths, pressures and moistures.
    pub fn new(
        keys: Vec<String>,
        static_pressure_pa: Vec<f64>,
        fluid: Vec<Fluid>,
        moisture: Vec<Option<f64>>,
    ) -> Result<Self> {
        let n = keys.len();
        if static_pressure_pa.len() != n || fluid.len() != n || moisture.len() != n {
            return Err(Error::Inconsistent {
                context: "traverse conditions",
                message: "one static pressure, fluid and moisture per traverse key".into(),
            });
        }
        for (i, k) in keys.iter().enumerate() {
            if keys[..i].contains(k) {
                return Err(Error::Inconsistent {
                    context: "traverse conditions",
                    message: format!("traverse {k} is given twice"),
                });
            }
            crate::error::positive("traverse conditions", "absolute static pressure", static_pressure_pa[i], "Pa")
                .map_err(|e| Error::Inconsistent {
                    context: "traverse conditions",
                    message: format!("traverse {k}: {e}"),
                })?;
            if let Some(b) = moisture[i] {
                crate::error::within("traverse conditions", "moisture fraction B_ws", b, "", 0.0, 1.0).map_err(
                    |e| Error::Inconsistent { context: "traverse conditions", message: format!("traverse {k}: {e}") },
                )?;
            }
        }
        let dry_molecular_weight = vec![None; n];
        Ok(Self { keys, static_pressure_pa, fluid, moisture, dry_molecular_weight })
    }

    /// The dry molecular weight of each traverse (g/g-mol) for the Method 2 route.
    pub fn with_dry_molecular_weight(mut self, md: Vec<Option<f64>>) -> Result<Self> {
        if md.len() != self.keys.len() {
            return Err(Error::Inconsistent {
                context: "traverse conditions",
                message: "one dry molecular weight (or none) per traverse key".into(),
            });
        }
        for (k, m) in self.keys.iter().zip(&md) {
            if let Some(m) = m {
                crate::error::within("traverse conditions", "dry molecular weight M_d", *m, "g/g-mol", 2.0, 100.0)
                    .map_err(|e| Error::Inconsistent {
                        context: "traverse conditions",
                        message: format!("traverse {k}: {e}"),
                    })?;
            }
        }
        self.dry_molecular_weight = md;
        Ok(self)
    }
}

/// The conditions one traverse is reduced under.
#[derive(Clone, Copy)]
struct Cond<'a> {
    p: f64,
    fluid: &'a Fluid,
    dry: Option<f64>,
    /// Dry molecular weight for the Method 2 route, g/g-mol.
    md: Option<f64>,
    /// The isentropic velocity's constants (gases).
    isen: Option<crate::instruments::probe::Isentropic>,
}

impl<'a> Cond<'a> {
    fn new(p: f64, fluid: &'a Fluid, dry: Option<f64>, md: Option<f64>, coefficient: f64) -> Self {
        let isen = fluid.isentropic_exponent().map(|g| crate::instruments::probe::Isentropic::new(coefficient, p, g));
        Self { p, fluid, dry, md, isen }
    }

    /// Velocity (m/s) from Δp (Pa) and the fluid's density (kg/m³): isentropic for a gas.
    #[inline(always)]
    fn velocity(&self, coefficient: f64, dp: f64, rho: f64) -> f64 {
        match &self.isen {
            Some(k) => k.velocity(dp, rho),
            None => incompressible(coefficient, dp, rho),
        }
    }

    /// [`Cond::velocity`] of each (Δp, ρ) pair into `v` (the same values), a column at a time.
    fn velocities(&self, coefficient: f64, dp: &[f64], rho: &[f64], v: &mut Vec<f64>) {
        v.clear();
        v.resize(dp.len(), 0.0);
        match &self.isen {
            Some(k) => k.velocities(dp, rho, v),
            None => {
                for ((v, &dp), &rho) in v.iter_mut().zip(dp).zip(rho) {
                    *v = incompressible(coefficient, dp, rho);
                }
            }
        }
    }
}

/// Relative standard uncertainties for the per-traverse GUM budget of the flow
/// (see [`crate::uncertainty::flow_models::TraverseUncertainty`]).
#[derive(Debug, Clone, PartialEq)]
pub struct CampaignUncertainty {
    /// u(C)/C of the probe coefficient.
    pub coefficient_rel: f64,
    /// u(ρ)/ρ of the density.
    pub density_rel: f64,
    /// u(D)/D of the diameter (of the width and of the height for rectangular conduits).
    pub diameter_rel: f64,
    /// Relative part of each reading's u(Δp).
    pub dp_rel: f64,
    /// Absolute part of each reading's u(Δp), Pa (resolution, zero drift).
    pub dp_abs_pa: f64,
    /// Method terms (layout, positioning, unsteadiness, ...).
    pub terms: Vec<crate::uncertainty::flow_models::MethodTerm>,
    /// Coverage probability of the expanded uncertainty.
    pub coverage: f64,
}

/// A traverse that could not be reduced.
#[derive(Debug, Clone, PartialEq)]
pub struct TraverseFailure {
    /// The traverse identifier as text.
    pub traverse: String,
    /// Why.
    pub message: String,
}

/// Result of a campaign reduction.
#[derive(Debug, Clone)]
pub struct CampaignResult {
    /// One row per reduced traverse: the key column, `points`,
    /// `mean_velocity_m_s`, `volume_flow_m3_s`, `mass_flow_kg_s`,
    /// `mean_density_kg_m3`, `max_velocity_m_s`, `flatness`, `reversed_points`, and
    /// with a reference condition `flow_{tag}_m3_s` (and `dry_flow_{tag}_m3_s` with a
    /// moisture fraction), the condition written in the name by
    /// [`crate::ReferenceCondition::tag`], e.g. `flow_0C_101.325kPa_m3_s`. A wall factor scales the mean velocity and the flows.
    /// With an uncertainty spec (names: `u_` a standard uncertainty, k = 1; `U_` an
    /// expanded one with its coverage factor in `k`; `_rel_..._pct` relative, in %):
    /// `u_flow_m3_s`, `u_rel_flow_pct`, `k`, `U_flow_m3_s`, `effective_dof` (NaN where a point has Δp ≤ 0, which the
    /// velocity-area model cannot take).
    pub traverses: DataFrame,
    /// Traverses that failed, with the reason.
    pub failures: Vec<TraverseFailure>,
    /// Warnings that hold for every traverse (e.g. the probe's calibration record failing
    /// a check or past its age limit).
    pub warnings: Vec<crate::error::Warning>,
}

fn table_err(e: PolarsError) -> Error {
    Error::Inconsistent { context: "campaign", message: e.to_string() }
}

/// A column read in place when it is a single-chunk f64, i64 or i32 column without
/// nulls (any other numeric column is copied once into f64 with NaN for nulls); the
/// unit conversion to SI is applied on the fly.
struct SiColumn<'a> {
    data: ColumnData<'a>,
    factor: f64,
    offset: f64,
}

enum ColumnData<'a> {
    F64(&'a [f64]),
    I64(&'a [i64]),
    I32(&'a [i32]),
    Owned(Vec<f64>),
}

impl SiColumn<'_> {
    /// The raw value (before unit conversion).
    #[inline(always)]
    fn raw(&self, i: usize) -> f64 {
        match &self.data {
            ColumnData::F64(d) => d[i],
            ColumnData::I64(d) => d[i] as f64,
            ColumnData::I32(d) => f64::from(d[i]),
            ColumnData::Owned(d) => d[i],
        }
    }

    #[inline(always)]
    fn at(&self, i: usize) -> f64 {
        self.raw(i) * self.factor + self.offset
    }

    /// The raw values of rows `lo..hi` when the column holds them as f64 (in place or
    /// copied once), for loops that need no per-row dispatch.
    fn f64s(&self, lo: usize, hi: usize) -> Option<&[f64]> {
        match &self.data {
            ColumnData::F64(d) => d.get(lo..hi),
            ColumnData::Owned(d) => d.get(lo..hi),
            ColumnData::I64(_) | ColumnData::I32(_) => None,
        }
    }
}

fn column<'a>(df: &'a DataFrame, name: &str, unit: &Unit, what: &str) -> Result<SiColumn<'a>> {
    let col = df.column(name).map_err(|_| Error::Inconsistent {
        context: "campaign",
        message: format!(
            "missing column '{name}' ({what}); columns present: {}",
            df.get_column_names().iter().map(|s| s.as_str()).collect::<Vec<_>>().join(", ")
        ),
    })?;
    let s = col.as_materialized_series();
    let single = s.null_count() == 0 && s.n_chunks() == 1;
    let data = match s.dtype() {
        DataType::Float64 if single => ColumnData::F64(s.f64().map_err(table_err)?.cont_slice().map_err(table_err)?),
        DataType::Int64 if single => ColumnData::I64(s.i64().map_err(table_err)?.cont_slice().map_err(table_err)?),
        DataType::Int32 if single => ColumnData::I32(s.i32().map_err(table_err)?.cont_slice().map_err(table_err)?),
        // Several chunks (row groups, CSV batches) without nulls: one bulk copy per chunk.
        DataType::Float64 if s.null_count() == 0 => {
            let ca = s.f64().map_err(table_err)?;
            let mut v = Vec::with_capacity(ca.len());
            for arr in ca.downcast_iter() {
                v.extend_from_slice(arr.values().as_slice());
            }
            ColumnData::Owned(v)
        }
        DataType::Int64 if s.null_count() == 0 => {
            let ca = s.i64().map_err(table_err)?;
            let mut v = Vec::with_capacity(ca.len());
            for arr in ca.downcast_iter() {
                v.extend(arr.values().iter().map(|&x| x as f64));
            }
            ColumnData::Owned(v)
        }
        _ => {
            let cast = s.cast(&DataType::Float64).map_err(|_| Error::Inconsistent {
                context: "campaign",
                message: format!("column '{name}' ({what}) is {}, not numeric", s.dtype()),
            })?;
            let ca = cast.f64().map_err(table_err)?;
            ColumnData::Owned(ca.iter().map(|v| v.unwrap_or(f64::NAN)).collect())
        }
    };
    Ok(SiColumn { data, factor: unit.factor, offset: unit.offset })
}

/// Slots of a [`Memo`]: a campaign's temperatures read to 0.1 K recur across its
/// traverses (a few hundred distinct values, say). With 64 slots they evicted each other,
/// and the humid-air density took 9.5 % of a 10 M-reading bench scan's CPU time.
const MEMO_SLOTS: usize = 1024;

/// One slot of a [`Memo`]: key, generation and value side by side, so that a lookup reads
/// one place (three arrays took three).
#[derive(Clone, Copy)]
struct Slot {
    key: u64,
    generation: u32,
    value: f64,
}

/// Memo of an expensive scalar function of a temperature (a density): a direct-mapped
/// table keyed by the input's exact bits. Readings repeat their temperatures (one per
/// traverse, or a handful read to 0.1 K), so nearly every row is answered from it; a
/// value is the function's own, never an interpolation.
struct Memo {
    slots: Box<[Slot; MEMO_SLOTS]>,
    /// Slots of another generation are empty (a traverse with other conditions).
    generation: u32,
}

impl Memo {
    fn new() -> Self {
        Self { slots: Box::new([Slot { key: 0, generation: 0, value: 0.0 }; MEMO_SLOTS]), generation: 1 }
    }

    /// Forgets every value (in constant time).
    fn clear(&mut self) {
        self.generation = self.generation.wrapping_add(1);
        if self.generation == 0 {
            *self = Self::new();
        }
    }

    #[inline(always)]
    fn get(&mut self, x: f64, f: impl FnOnce(f64) -> Result<f64>) -> Result<f64> {
        if !x.is_finite() {
            return f(x);
        }
        let b = x.to_bits();
        let i = (b.wrapping_mul(0x9E37_79B9_7F4A_7C15) >> (64 - MEMO_SLOTS.trailing_zeros())) as usize;
        let slot = &mut self.slots[i];
        if slot.generation == self.generation && slot.key == b {
            return Ok(slot.value);
        }
        let value = f(x)?;
        *slot = Slot { key: b, generation: self.generation, value };
        Ok(value)
    }
}

/// Groups of the key column: slices when sorted (checked here for integer keys), else indices.
fn groups(df: &DataFrame, key: &str) -> Result<GroupPositions> {
    let col = df.column(key).map_err(|_| Error::Inconsistent {
        context: "campaign",
        message: format!("missing column '{key}' (traverse identifier)"),
    })?;
    let mut s = col.as_materialized_series().clone();
    if s.dtype().is_integer() && s.null_count() == 0 {
        let as_i64 = s.cast(&DataType::Int64).map_err(table_err)?;
        let ca = as_i64.i64().map_err(table_err)?;
        let mut sorted = true;
        let mut last = i64::MIN;
        for v in ca.into_no_null_iter() {
            if v < last {
                sorted = false;
                break;
            }
            last = v;
        }
        if sorted {
            s.set_sorted_flag(polars::series::IsSorted::Ascending);
        }
    }
    let keys = DataFrame::new_infer_height(vec![s.into()]).map_err(table_err)?;
    let gb = keys.group_by_stable([key]).map_err(table_err)?;
    Ok(gb.get_groups().clone())
}

struct TraverseOut {
    first_row: usize,
    points: u32,
    mean_v: f64,
    q: f64,
    m: f64,
    rho: f64,
    vmax: f64,
    reversed: u32,
    t_mean: f64,
    /// Static pressure (Pa) and dry factor 1 − B_ws the traverse was reduced under.
    p: f64,
    dry: Option<f64>,
    /// (u, relative u, k, U, ν_eff) of the flow.
    unc: Option<[f64; 5]>,
    /// Method 2 route: (v_s m/s, Q_sd dscm/h, physics velocity m/s).
    m2: Option<[f64; 3]>,
}

/// Everything a traverse reduction reads, shared by all threads.
/// The per-row physics shared by the campaign reduction and the per-point table:
/// fluid density, gauge-liquid densities, Δp from the deflection, point velocity.
struct RowPhysics<'a> {
    spec: &'a CampaignSpec,
    defl: SiColumn<'a>,
    temp: SiColumn<'a>,
    gauge_t: Option<SiColumn<'a>>,
    two_liquid: bool,
    /// The reading is a Δp (a transducer), not a deflection.
    dp_reading: bool,
}

/// Memos of the densities, which readings of one traverse usually repeat.
struct Memos {
    rho_f: Memo,
    rho_m: Memo,
    light: Memo,
}

impl Memos {
    fn new() -> Self {
        Self { rho_f: Memo::new(), rho_m: Memo::new(), light: Memo::new() }
    }

    fn clear(&mut self) {
        self.rho_f.clear();
        self.rho_m.clear();
        self.light.clear();
    }
}

impl<'a> RowPhysics<'a> {
    fn new(df: &'a DataFrame, spec: &'a CampaignSpec) -> Result<Self> {
        let cols = &spec.columns;
        let dim = crate::Quantity::from_unit(1.0, &cols.reading.1).dimension;
        if dim != crate::units::dimension::Dimension::PRESSURE && dim != crate::units::dimension::Dimension::LENGTH {
            return Err(Error::Column {
                column: cols.reading.0.clone(),
                message: "the reading must be a deflection (a length unit) or a Δp (a pressure unit)".into(),
            });
        }
        Ok(Self {
            spec,
            defl: column(df, &cols.reading.0, &cols.reading.1, "reading")?,
            temp: column(df, &cols.fluid_temperature.0, &cols.fluid_temperature.1, "fluid temperature")?,
            gauge_t: cols.gauge_temperature.as_ref().map(|(n, u)| column(df, n, u, "gauge temperature")).transpose()?,
            two_liquid: matches!(spec.manometer.kind(), crate::instruments::manometer::ManometerKind::TwoLiquid { .. }),
            dp_reading: crate::Quantity::from_unit(1.0, &cols.reading.1).dimension
                == crate::units::dimension::Dimension::PRESSURE,
        })
    }

    /// (Δp in Pa, fluid density in kg/m³, velocity in m/s, fluid temperature in K) of one row.
    #[inline(always)]
    fn point(&self, row: usize, c: &Cond, m: &mut Memos) -> Result<(f64, f64, f64, f64)> {
        let (dp, rho_f, t) = self.dp_density(row, c, m)?;
        Ok((dp, rho_f, c.velocity(self.spec.probe.coefficient, dp, rho_f), t))
    }

    /// (Δp in Pa, fluid density in kg/m³, fluid temperature in K) of one row: all of
    /// [`RowPhysics::point`] but the velocity, which a traverse takes a column at a time.
    #[inline(always)]
    fn dp_density(&self, row: usize, c: &Cond, m: &mut Memos) -> Result<(f64, f64, f64)> {
        let spec = self.spec;
        let h = self.defl.at(row);
        if !h.is_finite() {
            let param = if self.dp_reading { "Δp" } else { "deflection" };
            return Err(Error::NotFinite { context: "reading", param, value: self.defl.raw(row) });
        }
        let t = self.temp.at(row);
        if self.dp_reading {
            let rho_f = m.rho_f.get(t, |t| c.fluid.density_si(c.p, t))?;
            return Ok((h, rho_f, t));
        }
        let tg = self.gauge_t.as_ref().map_or(t, |g| g.at(row));
        let rho_f = m.rho_f.get(t, |t| c.fluid.density_si(c.p, t))?;
        let rho_m = m.rho_m.get(tg, |t| Ok(spec.manometer.liquid().density(crate::Temperature::kelvin(t))?.si()))?;
        let light = if self.two_liquid {
            Some(m.light.get(tg, |t| Ok(spec.manometer.light_density(crate::Temperature::kelvin(t))?.unwrap_or(0.0)))?)
        } else {
            None
        };
        let dp = spec.manometer.dp_from_densities(h, rho_m, light, rho_f)?;
        Ok((dp, rho_f, t))
    }
}

struct Kernel<'a> {
    phys: RowPhysics<'a>,
    dia: SiColumn<'a>,
    height: Option<SiColumn<'a>>,
    across: Option<SiColumn<'a>>,
    pos: Option<SiColumn<'a>>,
    line: Option<SiColumn<'a>>,
    integrate: bool,
    wall_factor: f64,
    /// Rows of the input before this frame (a scan's batch): row numbers in messages count from the input's start.
    row_base: usize,
}

impl<'a> Kernel<'a> {
    /// The columns and settings of `spec` in `df` (whose first row is input row `row_base`).
    fn new(df: &'a DataFrame, spec: &'a CampaignSpec, row_base: usize) -> Result<Self> {
        let cols = &spec.columns;
        let opt = |c: &Option<(String, Unit)>, what: &str| -> Result<Option<SiColumn<'_>>> {
            c.as_ref().map(|(n, u)| column(df, n, u, what)).transpose()
        };
        let one = Unit::parse("1")?;
        Ok(Kernel {
            phys: RowPhysics::new(df, spec)?,
            dia: column(df, &cols.size.0, &cols.size.1, "diameter or width")?,
            height: cols.rectangular.as_ref().map(|r| column(df, &r.height.0, &r.height.1, "height")).transpose()?,
            across: cols
                .rectangular
                .as_ref()
                .map(|r| column(df, &r.across.0, &r.across.1, "position across the width"))
                .transpose()?,
            pos: opt(&cols.position, "position")?,
            line: cols.line.as_ref().map(|n| column(df, n, &one, "line number")).transpose()?,
            integrate: !matches!(spec.averaging, Averaging::Arithmetic),
            wall_factor: match spec.flow.wall_factor {
                Some(w) => crate::error::within("campaign", "wall adjustment factor", w.value(), "", 0.9, 1.0)?,
                None => 1.0,
            },
            row_base,
        })
    }
}

/// Per-thread memos and buffers, reused from traverse to traverse.
struct Scratch {
    memos: Memos,
    lines: Vec<usize>,
    pos: Vec<Position>,
    v: Vec<f64>,
    keyed: Vec<(f64, f64)>,
    dps: Vec<f64>,
    rhos: Vec<f64>,
    /// Gauge-liquid densities (the in-place row pass).
    rhoms: Vec<f64>,
    vs: Vec<f64>,
}

impl Scratch {
    fn new() -> Self {
        Self {
            memos: Memos::new(),
            lines: vec![],
            pos: vec![],
            v: vec![],
            keyed: vec![],
            dps: vec![],
            rhos: vec![],
            rhoms: vec![],
            vs: vec![],
        }
    }
}

impl Kernel<'_> {
    /// One traverse's reduction. `span` is its rows `lo..hi` when they are stored together
    /// (sorted keys), which lets the rows pass run over column slices
    /// ([`Kernel::rows_in_place`]); `rows` lists them either way.
    fn traverse(
        &self,
        rows: impl Iterator<Item = usize> + Clone,
        span: Option<(usize, usize)>,
        first: usize,
        sc: &mut Scratch,
        cond: &Cond,
    ) -> Result<TraverseOut> {
        let spec = self.phys.spec;
        let d = self.dia.at(first);
        if !(d.is_finite() && d > 0.0) {
            return Err(Error::Inconsistent {
                context: "traverse",
                message: format!("diameter or width {} is not a positive number", self.dia.raw(first)),
            });
        }
        // Round: depth = D, area πD²/4. Rectangular: width d, depth = height, area d·h.
        let (depth, area) = match &self.height {
            None => (d, std::f64::consts::PI * d * d / 4.0),
            Some(hc) => {
                let h = hc.at(first);
                if !(h.is_finite() && h > 0.0) {
                    return Err(Error::Inconsistent {
                        context: "traverse",
                        message: format!("height {} is not a positive number", hc.raw(first)),
                    });
                }
                (h, d * h)
            }
        };
        let (mut n, mut sum_rho, mut reversed, mut sum_t) = (0u32, 0.0, 0u32, 0.0);
        let mut sum_sqrt_dp_mm = 0.0;
        let (mut ordered, mut last_line, mut last_s) = (true, f64::MIN, f64::MIN);
        if spec.conditions.is_some() {
            // The density memos are keyed by temperature alone: another traverse's fluid or
            // pressure must not answer from them.
            sc.memos.clear();
        }
        // Lines, positions, Δp and densities are cleared by whichever rows pass runs.
        sc.v.clear();
        sc.keyed.clear();
        let in_place = span.and_then(|(lo, hi)| self.rows_in_place(lo, hi, d, depth, sc, cond));
        if let Some((k, rho, back, t, o)) = in_place {
            (n, sum_rho, reversed, sum_t, ordered) = (k, rho, back, t, o);
        } else {
            // Row by row: every case, and the one that names a bad row (the in-place pass
            // leaves any row it cannot take to it, from the start).
            sc.lines.clear();
            sc.pos.clear();
            sc.dps.clear();
            sc.rhos.clear();
            for (k, row) in rows.clone().enumerate() {
                let at = |e: Error| Error::Inconsistent {
                    context: "traverse",
                    message: format!("point {} (row {}): {e}", k + 1, row + 1 + self.row_base),
                };
                if self.dia.at(row) != d || self.height.as_ref().is_some_and(|hc| hc.at(row) != depth) {
                    return Err(at(Error::Inconsistent {
                        context: "traverse",
                        message: "the conduit size changes within the traverse".into(),
                    }));
                }
                let (dp, rho_f, t) = self.phys.dp_density(row, cond, &mut sc.memos).map_err(at)?;
                sc.dps.push(dp);
                sc.rhos.push(rho_f);
                if spec.method2.is_some() {
                    if dp < 0.0 {
                        return Err(at(Error::Inconsistent {
                            context: "US EPA Method 2 route",
                            message: "negative velocity head (reverse flow); Method 2 does not apply".into(),
                        }));
                    }
                    sum_sqrt_dp_mm += (dp / crate::methods::us_epa::PA_PER_MM_H2O).sqrt();
                }
                n += 1;
                sum_rho += rho_f;
                sum_t += t;
                reversed += u32::from(dp < 0.0);
                if let Some(pc) = &self.pos {
                    let s = pc.at(row);
                    if !(s > 0.0 && s < depth) {
                        return Err(at(Error::Inconsistent {
                            context: "position",
                            message: format!(
                                "{} m from the wall lies outside the section (depth {depth} m)",
                                crate::units::quantity::format_number(s)
                            ),
                        }));
                    }
                    let x = match &self.across {
                        None => 0.0,
                        Some(ac) => {
                            let x = ac.at(row);
                            if !(x > 0.0 && x < d) {
                                return Err(at(Error::Inconsistent {
                                    context: "position",
                                    message: format!(
                                        "{} m across lies outside the width {d} m",
                                        crate::units::quantity::format_number(x)
                                    ),
                                }));
                            }
                            x
                        }
                    };
                    let line = match &self.line {
                        None => 0,
                        Some(l) => {
                            let x = l.at(row);
                            let whole = x as usize;
                            if !(x >= 0.0 && whole as f64 == x) {
                                return Err(at(Error::Inconsistent {
                                    context: "line",
                                    message: format!("line number {x} is not a whole number ≥ 0"),
                                }));
                            }
                            whole
                        }
                    };
                    let key = if self.across.is_some() { x } else { line as f64 };
                    ordered &= key > last_line || (key == last_line && s > last_s);
                    last_line = key;
                    last_s = s;
                    if self.integrate {
                        sc.lines.push(line);
                        sc.pos.push(match self.across {
                            None => Position::Radial { r_over_r: 2.0 * s / d - 1.0, angle_deg: 0.0 },
                            Some(_) => Position::Grid { x_over_w: x / d, y_over_h: s / depth },
                        });
                    }
                }
            }
        }
        // The velocities a column at a time (the same values as row by row), then their sum
        // and maximum in row order.
        cond.velocities(spec.probe.coefficient, &sc.dps, &sc.rhos, &mut sc.vs);
        let (mut sum_v, mut vmax) = (0.0, f64::MIN);
        for &v in &sc.vs {
            sum_v += v;
            vmax = vmax.max(v);
        }
        if self.integrate && self.pos.is_some() {
            sc.v.extend_from_slice(&sc.vs);
        }
        if (n as usize) < spec.min_points.max(1) {
            return Err(Error::Inconsistent {
                context: "traverse",
                message: format!("{n} points, fewer than the {} the layout needs", spec.min_points),
            });
        }
        if let (Some(pc), false) = (&self.pos, ordered) {
            // Positions not strictly increasing along each line: look for duplicates
            // (rows re-read; the ordered case, the usual one, needs no buffer).
            sc.keyed.clear();
            sc.keyed.extend(rows.map(|row| {
                let key = match (&self.across, &self.line) {
                    (Some(ac), _) => ac.at(row),
                    (None, Some(l)) => l.at(row),
                    (None, None) => 0.0,
                };
                (key, pc.at(row))
            }));
            sc.keyed.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.total_cmp(&b.1)));
            if let Some(w) = sc.keyed.windows(2).find(|w| w[0].0 == w[1].0 && (w[0].1 - w[1].1).abs() < 1e-12) {
                return Err(Error::Inconsistent {
                    context: "traverse",
                    message: format!(
                        "duplicate position: {} m from the wall twice on {}",
                        crate::units::quantity::format_number(w[0].1),
                        if self.across.is_some() {
                            format!("the line {} m across", crate::units::quantity::format_number(w[0].0))
                        } else {
                            format!("line {}", w[0].0 + 1.0)
                        }
                    ),
                });
            }
        }
        if self.integrate && self.across.is_some() {
            // Rectangular lines are numbered by their position across the width.
            let mut xs: Vec<f64> =
                sc.pos.iter().map(|p| if let Position::Grid { x_over_w, .. } = p { *x_over_w } else { 0.0 }).collect();
            xs.sort_by(f64::total_cmp);
            xs.dedup();
            for (line, p) in sc.lines.iter_mut().zip(&sc.pos) {
                if let Position::Grid { x_over_w, .. } = p {
                    *line = xs.partition_point(|x| x < x_over_w);
                }
            }
        }
        let mean_v = self.wall_factor
            * match spec.averaging {
                Averaging::Arithmetic => sum_v / f64::from(n),
                integ => section_mean(&sc.lines, &sc.pos, &sc.v, integ)?.mean.si(),
            };
        let rho = sum_rho / f64::from(n);
        let t_mean = sum_t / f64::from(n);
        let m2 = match &spec.method2 {
            None => None,
            Some(route) => {
                use crate::methods::us_epa as m;
                let md = cond.md.or(route.dry_molecular_weight).ok_or_else(|| Error::Inconsistent {
                    context: "US EPA Method 2 route",
                    message: "no dry molecular weight M_d for this traverse: give the stack-gas analysis (CO₂, O₂) or \
                              M_d for the run, or one M_d for the campaign"
                        .into(),
                })?;
                let b_ws = cond.dry.map_or(0.0, |k| 1.0 - k);
                let m_s = m::wet_molecular_weight(md, b_ws)?;
                let t_s_c = t_mean - 273.15;
                let p_s = cond.p / m::PA_PER_MM_HG;
                let v = self.wall_factor
                    * m::velocity_from_mean_sqrt(
                        spec.probe.coefficient,
                        sum_sqrt_dp_mm / f64::from(n),
                        t_s_c,
                        p_s,
                        m_s,
                        m::MethodUnits::Metric,
                    )?;
                let q_sd = m::dry_standard_flow_metric(b_ws, v, area, t_s_c, p_s)?;
                Some([v, q_sd, mean_v])
            }
        };
        let mean_v = match (&spec.method2, m2) {
            (Some(r), Some([v, ..])) if r.report => v,
            _ => mean_v,
        };
        let q = mean_v * area;
        // Rectangular: the equivalent size √(W·H) with A = size², and u(size)/size = r/√2 when
        // width and height each have relative uncertainty r (derived).
        let (size, shape, rel_scale) = if self.height.is_some() {
            (area.sqrt(), 1.0, std::f64::consts::FRAC_1_SQRT_2)
        } else {
            (d, std::f64::consts::FRAC_PI_4, 1.0)
        };
        let unc = spec
            .uncertainty
            .as_ref()
            .map(|u| traverse_uncertainty(u, spec.probe.coefficient, rho, size, shape, rel_scale, &sc.dps));
        Ok(TraverseOut {
            first_row: first,
            points: n,
            mean_v,
            q,
            m: q * rho,
            rho,
            vmax,
            reversed,
            t_mean,
            p: cond.p,
            dry: cond.dry,
            unc,
            m2,
        })
    }
}

impl Kernel<'_> {
    /// The rows pass of [`Kernel::traverse`] over rows `lo..hi` as column slices: the same
    /// values, sums in the same order, and the same scratch (Δp and densities, lines and
    /// positions), in passes that need no per-row dispatch (Δp a column at a time).
    ///
    /// Returns (points, Σρ, reversed points, ΣT, positions ordered), or `None` for any
    /// case it does not cover (the Method 2 route, a rectangular duct, a two-liquid gauge,
    /// columns not held as f64) and at the first row it cannot take (a size change, a bad
    /// reading, density or position): the row-by-row pass then runs from the start and
    /// names the row, with the messages it always gave.
    fn rows_in_place(
        &self,
        lo: usize,
        hi: usize,
        d: f64,
        depth: f64,
        sc: &mut Scratch,
        cond: &Cond,
    ) -> Option<(u32, f64, u32, f64, bool)> {
        let ph = &self.phys;
        let spec = ph.spec;
        if spec.method2.is_some() || self.height.is_some() || self.across.is_some() || ph.two_liquid {
            return None;
        }
        let n = hi - lo;
        let same = |c: &SiColumn, v: f64| -> Option<bool> {
            let (f, o) = (c.factor, c.offset);
            Some(c.f64s(lo, hi)?.iter().fold(true, |all, &x| all & (x * f + o == v)))
        };
        if !same(&self.dia, d)? {
            return None;
        }
        let (defl, temp) = (ph.defl.f64s(lo, hi)?, ph.temp.f64s(lo, hi)?);
        let gauge = match &ph.gauge_t {
            None => None,
            Some(g) => Some((g.f64s(lo, hi)?, g.factor, g.offset)),
        };
        let (fa, oa, ft, ot) = (ph.defl.factor, ph.defl.offset, ph.temp.factor, ph.temp.offset);
        sc.dps.clear();
        sc.rhos.clear();
        sc.rhoms.clear();
        let (mut sum_rho, mut sum_t) = (0.0, 0.0);
        for i in 0..n {
            let h = defl[i] * fa + oa;
            if !h.is_finite() {
                return None;
            }
            let t = temp[i] * ft + ot;
            let rho_f = sc.memos.rho_f.get(t, |t| cond.fluid.density_si(cond.p, t)).ok()?;
            if !ph.dp_reading {
                let tg = gauge.map_or(t, |(g, f, o)| g[i] * f + o);
                let rho_m = sc
                    .memos
                    .rho_m
                    .get(tg, |t| Ok(spec.manometer.liquid().density(crate::Temperature::kelvin(t))?.si()))
                    .ok()?;
                sc.rhoms.push(rho_m);
            }
            sc.dps.push(h);
            sc.rhos.push(rho_f);
            sum_rho += rho_f;
            sum_t += t;
        }
        if !ph.dp_reading && !spec.manometer.dp_from_density_columns(&mut sc.dps, &sc.rhoms, &sc.rhos) {
            return None;
        }
        let reversed = sc.dps.iter().map(|&dp| u32::from(dp < 0.0)).sum();
        let mut ordered = true;
        sc.lines.clear();
        sc.pos.clear();
        if let Some(pc) = &self.pos {
            let (ps, fp, op) = (pc.f64s(lo, hi)?, pc.factor, pc.offset);
            match &self.line {
                None => sc.lines.resize(n, 0),
                // Integers as stored (the usual case): whole by construction, and exact as f64
                // below 2⁵³, so the same as the check below.
                Some(SiColumn { data: ColumnData::I64(v), factor, offset }) if *factor == 1.0 && *offset == 0.0 => {
                    for &x in &v[lo..hi] {
                        if !(0..1 << 53).contains(&x) {
                            return None;
                        }
                        sc.lines.push(x as usize);
                    }
                }
                Some(l) => {
                    for row in lo..hi {
                        let x = l.at(row);
                        let whole = x as usize;
                        if !(x >= 0.0 && whole as f64 == x) {
                            return None;
                        }
                        sc.lines.push(whole);
                    }
                }
            }
            let (mut last_line, mut last_s) = (f64::MIN, f64::MIN);
            for (&p, &line) in ps.iter().zip(&sc.lines) {
                let s = p * fp + op;
                if !(s > 0.0 && s < depth) {
                    return None;
                }
                let key = line as f64;
                ordered &= key > last_line || (key == last_line && s > last_s);
                last_line = key;
                last_s = s;
                if self.integrate {
                    sc.pos.push(Position::Radial { r_over_r: 2.0 * s / d - 1.0, angle_deg: 0.0 });
                }
            }
            if !self.integrate {
                sc.lines.clear();
            }
        }
        Some((n as u32, sum_rho, reversed, sum_t, ordered))
    }
}

/// GUM budget of one traverse's flow; NaNs when the model cannot take the readings.
fn traverse_uncertainty(
    u: &CampaignUncertainty,
    c: f64,
    rho: f64,
    d: f64,
    shape: f64,
    rel_scale: f64,
    dps: &[f64],
) -> [f64; 5] {
    use crate::uncertainty::Input;
    use crate::uncertainty::flow_models::TraverseUncertainty;
    let build = || -> Result<[f64; 5]> {
        let points = crate::uncertainty::flow_models::dp_inputs(dps, u.dp_rel, u.dp_abs_pa)?;
        let t = TraverseUncertainty::new(
            Input::normal("probe coefficient", "1", c, u.coefficient_rel * c)?,
            Input::normal("density", "kg/m³", rho, u.density_rel * rho)?,
            Input::normal("diameter or equivalent size", "m", d, u.diameter_rel * rel_scale * d)?,
            &u.terms,
            points,
        )?;
        let g = t.with_area_factor(shape).gum(u.coverage)?;
        Ok([g.u, g.u / g.value * 100.0, g.k, g.expanded, g.dof])
    };
    build().unwrap_or([f64::NAN; 5])
}

/// Traverses per parallel work item.
const CHUNK: usize = 2048;

/// Reduces every traverse of a campaign (see the module doc).
pub fn reduce_campaign(df: &DataFrame, spec: &CampaignSpec) -> Result<CampaignResult> {
    reduce_campaign_with(df, spec, spec.progress.as_ref(), 0)
}

/// [`reduce_campaign`] reporting progress (traverses done of the table's) to `progress`
/// rather than the spec's: a scan reports its own progress over the whole stream.
pub(crate) fn reduce_campaign_with(
    df: &DataFrame,
    spec: &CampaignSpec,
    progress: Option<&crate::progress::Progress>,
    row_base: usize,
) -> Result<CampaignResult> {
    use rayon::prelude::*;
    let cols = &spec.columns;
    let gamma = spec.fluid.isentropic_exponent();
    let kernel = Kernel::new(df, spec, row_base)?;
    if spec.flow.wall_factor.is_some() && !matches!(spec.averaging, Averaging::Arithmetic) {
        return Err(Error::Inconsistent {
            context: "campaign",
            message:
                "a wall adjustment factor (US EPA Method 2H) corrects the arithmetic mean of equal-area points for \
                      the wall; with an integration that has its own wall zone the wall would be corrected twice. Use \
                      averaging: \"arithmetic\" with the factor, or the integration without it"
                    .into(),
        });
    }
    if !matches!(spec.averaging, Averaging::Arithmetic) && kernel.pos.is_none() {
        return Err(Error::Inconsistent { context: "campaign", message: "integration needs a position column".into() });
    }
    let reference = match spec.flow.reference {
        Some(r) => {
            if gamma.is_none() {
                return Err(Error::Inconsistent {
                    context: "campaign",
                    message: "a flow at reference conditions is for gases".into(),
                });
            }
            Some(r.state())
        }
        None => {
            if spec.flow.moisture.is_some() {
                return Err(Error::Inconsistent {
                    context: "campaign",
                    message: "a dry-basis flow needs a reference condition".into(),
                });
            }
            None
        }
    };
    let dry = spec
        .flow
        .moisture
        .map(|b| crate::error::within("campaign", "moisture fraction B_ws", b, "", 0.0, 1.0))
        .transpose()?
        .map(|b| 1.0 - b);
    let key_series = df.column(&cols.traverse).map_err(table_err)?.as_materialized_series().clone();
    let groups = groups(df, &cols.traverse)?;
    let base = Cond::new(spec.static_pressure.si(), &spec.fluid, dry, None, spec.probe.coefficient);
    if let Some(c) = &spec.conditions
        && c.fluid.iter().any(|f| f.isentropic_exponent().is_some() != gamma.is_some())
    {
        return Err(Error::Inconsistent {
            context: "campaign",
            message: "per-traverse fluids must all be gases, or all liquids, like the campaign's fluid".into(),
        });
    }
    // The conditions of the traverse whose first row is `first` (the campaign's own
    // when no per-traverse conditions are given).
    let lookup = CondLookup::new(df, spec, base)?;
    let cond_of = |first: usize| lookup.at(first);

    // One result per traverse, in group order, computed in parallel chunks.
    let counter = crate::progress::Counter::new(progress, groups.len() as u64);
    // Enough work items for every thread several times over (a scan's batch holds a few
    // thousand traverses), at most CHUNK traverses each.
    let chunk = (groups.len() / (rayon::current_num_threads() * 8)).clamp(16, CHUNK);
    let results: Vec<(usize, Result<TraverseOut>)> = match &*groups {
        GroupsType::Slice { groups, .. } => groups
            .par_chunks(chunk)
            .flat_map_iter(|chunk| {
                let mut sc = Scratch::new();
                let out = chunk
                    .iter()
                    .map(|&[off, len]| {
                        let (off, len) = (off as usize, len as usize);
                        (
                            off,
                            cond_of(off).and_then(|c| {
                                kernel.traverse(off..off + len, Some((off, off + len)), off, &mut sc, &c)
                            }),
                        )
                    })
                    .collect::<Vec<_>>();
                counter.add(chunk.len() as u64);
                out
            })
            .collect(),
        GroupsType::Idx(idx) => idx
            .first()
            .par_chunks(chunk)
            .zip(idx.all().par_chunks(chunk))
            .flat_map_iter(|(firsts, alls)| {
                let mut sc = Scratch::new();
                let out = firsts
                    .iter()
                    .zip(alls)
                    .map(|(&first, rows)| {
                        let first = first as usize;
                        let out = cond_of(first)
                            .and_then(|c| kernel.traverse(rows.iter().map(|i| *i as usize), None, first, &mut sc, &c));
                        (first, out)
                    })
                    .collect::<Vec<_>>();
                counter.add(firsts.len() as u64);
                out
            })
            .collect(),
    };
    let mut outs = Vec::with_capacity(results.len());
    let mut failures = Vec::new();
    for (first, r) in results {
        match r {
            Ok(o) => outs.push(o),
            Err(e) => failures.push(TraverseFailure {
                traverse: key_series
                    .get(first)
                    .map(|v| v.to_string().trim_matches('"').to_string())
                    .unwrap_or_default(),
                message: e.to_string(),
            }),
        }
    }

    let idx: Vec<IdxSize> = outs.iter().map(|o| o.first_row as IdxSize).collect();
    let keys = key_series.take_slice(&idx).map_err(table_err)?;
    let f = |name: &str, v: Vec<f64>| Column::new(name.into(), v);
    let mut traverses = DataFrame::new_infer_height(vec![
        keys.into(),
        Column::new("points".into(), outs.iter().map(|o| o.points).collect::<Vec<u32>>()),
        f("mean_velocity_m_s", outs.iter().map(|o| o.mean_v).collect()),
        f("volume_flow_m3_s", outs.iter().map(|o| o.q).collect()),
        f("mass_flow_kg_s", outs.iter().map(|o| o.m).collect()),
        f("mean_density_kg_m3", outs.iter().map(|o| o.rho).collect()),
        f("max_velocity_m_s", outs.iter().map(|o| o.vmax).collect()),
        f("flatness", outs.iter().map(|o| if o.vmax > 0.0 { o.mean_v / o.vmax } else { f64::NAN }).collect()),
        Column::new("reversed_points".into(), outs.iter().map(|o| o.reversed).collect::<Vec<u32>>()),
    ])
    .map_err(table_err)?;
    if spec.uncertainty.is_some() {
        let col = |k: usize| outs.iter().map(|o| o.unc.map_or(f64::NAN, |u| u[k])).collect::<Vec<f64>>();
        for (k, name) in ["u_flow_m3_s", "u_rel_flow_pct", "k", "U_flow_m3_s", "effective_dof"].iter().enumerate() {
            traverses.with_column(f(name, col(k))).map_err(table_err)?;
        }
    }
    if let (Some((t_ref, p_ref)), Some(cond)) = (reference, spec.flow.reference) {
        let tag = cond.tag();
        let q_ref: Vec<f64> = outs.iter().map(|o| o.q * (o.p / p_ref.si()) * (t_ref.k() / o.t_mean)).collect();
        if outs.iter().any(|o| o.dry.is_some()) {
            let dry_q = q_ref.iter().zip(&outs).map(|(q, o)| o.dry.map_or(f64::NAN, |k| q * k)).collect();
            traverses.with_column(f(&format!("dry_flow_{tag}_m3_s"), dry_q)).map_err(table_err)?;
        }
        traverses.with_column(f(&format!("flow_{tag}_m3_s"), q_ref)).map_err(table_err)?;
    }
    if let Some(route) = &spec.method2 {
        if gamma.is_none() {
            return Err(Error::Inconsistent {
                context: "US EPA Method 2 route",
                message: "the method is for gases".into(),
            });
        }
        let m2 = |k: usize| outs.iter().map(|o| o.m2.map_or(f64::NAN, |m| m[k])).collect::<Vec<f64>>();
        let diff =
            outs.iter().map(|o| o.m2.map_or(f64::NAN, |[v, _, phys]| (v - phys) / phys * 100.0)).collect::<Vec<f64>>();
        traverses.with_column(f("epa_m2_velocity_m_s", m2(0))).map_err(table_err)?;
        traverses.with_column(f("epa_m2_dry_flow_20C_760mmHg_m3_h", m2(1))).map_err(table_err)?;
        traverses.with_column(f("physics_velocity_m_s", m2(2))).map_err(table_err)?;
        traverses.with_column(f("epa_m2_minus_physics_pct", diff)).map_err(table_err)?;
        let name = if route.report { "US EPA Method 2 (eq. 2-7, 2-10)" } else { "physics" };
        traverses.with_column(Column::new("reported_route".into(), vec![name; outs.len()])).map_err(table_err)?;
    }
    Ok(CampaignResult { traverses, failures, warnings: spec.probe.notes.clone() })
}

/// Finds each traverse's conditions: the traverse column as text, and the conditions'
/// keys indexed once (a campaign can hold hundreds of thousands of traverses).
struct CondLookup<'a> {
    base: Cond<'a>,
    /// The probe coefficient (for each traverse's velocity constants).
    coefficient: f64,
    /// The traverse column cast to text, when per-traverse conditions are given.
    keys: Option<(StringChunked, &'a TraverseConditions, std::collections::HashMap<&'a str, usize>)>,
}

impl<'a> CondLookup<'a> {
    fn new(df: &DataFrame, spec: &'a CampaignSpec, base: Cond<'a>) -> Result<Self> {
        let keys = match &spec.conditions {
            None => None,
            Some(c) => {
                let col =
                    df.column(&spec.columns.traverse).map_err(table_err)?.cast(&DataType::String).map_err(table_err)?;
                let text = col.str().map_err(table_err)?.clone();
                let index = c.keys.iter().enumerate().map(|(i, k)| (k.as_str(), i)).collect();
                Some((text, c, index))
            }
        };
        Ok(Self { base, coefficient: spec.probe.coefficient, keys })
    }

    /// The key of row `row` as text (None without per-traverse conditions).
    fn key(&self, row: usize) -> Option<&str> {
        self.keys.as_ref().map(|(t, ..)| t.get(row).unwrap_or(""))
    }

    /// The conditions of the traverse holding row `row`.
    fn at(&self, row: usize) -> Result<Cond<'a>> {
        let Some((text, c, index)) = &self.keys else { return Ok(self.base) };
        let key = text.get(row).unwrap_or("");
        let Some(&i) = index.get(key) else {
            return Err(Error::Inconsistent {
                context: "traverse",
                message: format!("no conditions (static pressure, fluid, moisture) are given for traverse {key}"),
            });
        };
        Ok(Cond::new(
            c.static_pressure_pa[i],
            &c.fluid[i],
            c.moisture[i].map(|b| 1.0 - b).or(self.base.dry),
            c.dry_molecular_weight.get(i).copied().flatten(),
            self.coefficient,
        ))
    }
}

/// Per-row Δp, density and velocity as new columns `dp_pa`, `density_kg_m3`,
/// `velocity_m_s` (a copy of `df` with them appended). Stops at the first bad row.
pub fn point_velocities(df: &DataFrame, spec: &CampaignSpec) -> Result<DataFrame> {
    let phys = RowPhysics::new(df, spec)?;
    let n = df.height();
    let (mut dps, mut rhos, mut vs) = (Vec::with_capacity(n), Vec::with_capacity(n), Vec::with_capacity(n));
    let mut memos = Memos::new();
    let base = Cond::new(spec.static_pressure.si(), &spec.fluid, None, None, spec.probe.coefficient);
    let lookup = CondLookup::new(df, spec, base)?;
    let mut last_key: Option<&str> = None;
    let mut cond = base;
    for row in 0..n {
        if let Some(key) = lookup.key(row)
            && last_key != Some(key)
        {
            cond = lookup.at(row).map_err(|e| e.at_row(row))?;
            memos.clear();
            last_key = Some(key);
        }
        let (dp, rho_f, v, _) = phys.point(row, &cond, &mut memos).map_err(|e| e.at_row(row))?;
        dps.push(dp);
        rhos.push(rho_f);
        vs.push(v);
    }
    let mut out = df.clone();
    for (name, v) in [("dp_pa", dps), ("density_kg_m3", rhos), ("velocity_m_s", vs)] {
        out.with_column(Column::new(name.into(), v)).map_err(table_err)?;
    }
    Ok(out)
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::fluids::gauge_liquid::GaugeLiquid;
    use crate::fluids::gravity;
    use crate::fluids::water::Water;
    use crate::instruments::manometer::{ManometerKind, Reading};
    use crate::instruments::probe::{ProbeKind, VelocityMethod};
    use crate::units::quantity::{Length, Temperature};
    use crate::{HumidAir, UserLiquid};

    #[test]
    fn the_memo_answers_with_the_functions_own_values_and_forgets_on_clear() {
        // 5000 temperatures read to 0.1 K (more than the slots, so slots are shared and
        // overwritten), asked in a scrambled order three times: every answer is f's own value.
        let f = |t: f64| -> Result<f64> { Ok(101_325.0 / (287.05 * t)) };
        let keys: Vec<f64> = (0..5000).map(|i| (2731 + i * 7919 % 5000) as f64 / 10.0).collect();
        let mut m = Memo::new();
        for _ in 0..3 {
            for &t in &keys {
                assert_eq!(m.get(t, f).unwrap().to_bits(), f(t).unwrap().to_bits(), "{t} K");
            }
        }
        // One key asked again and again is computed once; after clear() it is computed anew.
        let mut once = 0;
        for _ in 0..10 {
            m.get(293.2, |t| {
                once += 1;
                f(t)
            })
            .unwrap();
        }
        m.clear();
        m.get(293.2, |t| {
            once += 1;
            f(t)
        })
        .unwrap();
        assert_eq!(once, 2);
        // A non-finite key is never stored: its error comes back every time.
        for _ in 0..2 {
            assert!(m.get(f64::NAN, |_| Err(Error::NotFinite { context: "t", param: "t", value: f64::NAN })).is_err());
        }
    }

    pub(crate) fn air_spec() -> CampaignSpec {
        let oil =
            UserLiquid::new("oil", crate::Density::kg_m3(826.0), Temperature::celsius(20.0), Some(7.5e-4)).unwrap();
        CampaignSpec {
            columns: CampaignColumns::standard().unwrap(),
            fluid: Fluid::HumidAir(HumidAir::relative(0.5).unwrap()),
            static_pressure: Pressure::pa(101_000.0),
            manometer: Manometer::new(
                ManometerKind::Inclined { angle_deg: 30.0, area_ratio: 0.002 },
                GaugeLiquid::User(oil),
                gravity::standard(),
            )
            .unwrap(),
            probe: Probe::new(ProbeKind::PitotStatic, 0.998).unwrap(),
            averaging: Averaging::Arithmetic,
            min_points: 4,
            flow: Default::default(),
            uncertainty: None,
            conditions: None,
            progress: None,
            method2: None,
        }
    }

    fn frame(ids: Vec<i64>, defl: Vec<f64>, temp: Vec<f64>, pos: Vec<f64>) -> DataFrame {
        let n = ids.len();
        DataFrame::new_infer_height(vec![
            Column::new("traverse".into(), ids),
            Column::new("deflection_mm".into(), defl),
            Column::new("fluid_temp_c".into(), temp),
            Column::new("diameter_mm".into(), vec![500.0; n]),
            Column::new("position_mm".into(), pos),
        ])
        .unwrap()
    }

    const EA4: [f64; 4] = [33.5, 125.0, 375.0, 466.5]; // EPA Table 1-1, 4 points: 6.7/25/75/93.3 % of 500 mm

    // The campaign path must agree with the scalar path (Manometer + Fluid + Probe), which is
    // tested against published values in its own modules.
    #[test]
    fn matches_scalar_path_and_isolates_bad_traverses() {
        let spec = air_spec();
        let defl = vec![20.0, 30.0, 31.0, 21.0, 22.0, 33.0, f64::NAN, 23.0, 18.0, 25.0, 26.0, 19.0];
        let df = frame(vec![1, 1, 1, 1, 2, 2, 2, 2, 3, 3, 3, 3], defl.clone(), vec![18.0; 12], [EA4; 3].concat());
        let r = reduce_campaign(&df, &spec).unwrap();
        assert_eq!(r.traverses.height(), 2);
        assert_eq!(r.failures.len(), 1);
        assert_eq!(r.failures[0].traverse, "2");
        assert!(
            r.failures[0].message.contains("point 3 (row 7)") && r.failures[0].message.contains("NaN"),
            "{}",
            r.failures[0].message
        );
        let state = spec.fluid.state(spec.static_pressure, Temperature::celsius(18.0)).unwrap();
        let scalar: Vec<f64> = defl[..4]
            .iter()
            .map(|h| {
                let dp = spec
                    .manometer
                    .differential_pressure(
                        Reading::Deflection(Length::mm(*h)),
                        Temperature::celsius(18.0),
                        state.density,
                    )
                    .unwrap();
                spec.probe.velocity(dp.dp, &state, VelocityMethod::Auto).unwrap().velocity.si()
            })
            .collect();
        let mean = scalar.iter().sum::<f64>() / 4.0;
        let got = r.traverses.column("mean_velocity_m_s").unwrap().f64().unwrap().get(0).unwrap();
        assert!((got - mean).abs() < 1e-12, "{got} vs {mean}");
        let q = r.traverses.column("volume_flow_m3_s").unwrap().f64().unwrap().get(0).unwrap();
        assert!((q - mean * std::f64::consts::PI * 0.0625).abs() < 1e-12);
        let per_row = point_velocities(&df.slice(0, 4), &spec).unwrap();
        let v = per_row.column("velocity_m_s").unwrap().f64().unwrap();
        for (i, s) in scalar.iter().enumerate() {
            assert!((v.get(i).unwrap() - s).abs() < 1e-12);
        }
    }

    /// A table read in several chunks (row groups, CSV batches) reduces exactly as the same
    /// table in one chunk; the chunked columns are copied chunk by chunk.
    #[test]
    fn chunked_tables_reduce_as_single_chunk_ones() {
        let spec = air_spec();
        let defl: Vec<f64> = (0..24).map(|i| 18.0 + (i % 5) as f64).collect();
        let ids: Vec<i64> = (0..24).map(|i| 1 + i / 4).collect();
        let whole = frame(ids, defl, vec![18.0; 24], [EA4; 6].concat());
        let mut chunked = whole.slice(0, 8);
        chunked.vstack_mut(&whole.slice(8, 10)).unwrap();
        chunked.vstack_mut(&whole.slice(18, 6)).unwrap();
        assert!(chunked.column("deflection_mm").unwrap().as_materialized_series().n_chunks() > 1);
        let a = reduce_campaign(&whole, &spec).unwrap().traverses;
        let b = reduce_campaign(&chunked, &spec).unwrap().traverses;
        assert!(a.equals(&b), "{a}\n{b}");
    }

    // The Method 2 route in a campaign is the method's eq. 2-7/2-10 (tested against the
    // worked example in `methods::us_epa`) over the same per-point Δp the physics route
    // reads: here it is recomputed from `point_velocities` and `us_epa::velocity`.
    #[test]
    fn method2_route_beside_and_instead_of_physics() {
        use crate::methods::us_epa as m;
        let gas = Fluid::Gas(crate::GasMixture::flue_gas(12.0, 6.0, 0.0, 0.10).unwrap());
        let mut spec = air_spec();
        spec.fluid = gas;
        spec.static_pressure = Pressure::pa(99_500.0);
        spec.flow = crate::section::flow::FlowOptions {
            reference: Some(crate::ReferenceCondition::Normal0C),
            moisture: Some(0.10),
            wall_factor: None,
        };
        spec.method2 = Some(Method2Route { dry_molecular_weight: Some(30.16), report: false });
        let temps = vec![150.0, 151.0, 149.0, 150.5, 150.0, 150.0, 150.0, 150.0];
        let df = frame(
            vec![1, 1, 1, 1, 2, 2, 2, 2],
            vec![20.0, 30.0, 31.0, 21.0, 22.0, 33.0, 24.0, 23.0],
            temps.clone(),
            [EA4; 2].concat(),
        );
        let r = reduce_campaign(&df, &spec).unwrap();
        assert!(r.failures.is_empty(), "{:?}", r.failures);
        let pts = point_velocities(&df.slice(0, 4), &spec).unwrap();
        let dp_mm: Vec<f64> =
            pts.column("dp_pa").unwrap().f64().unwrap().into_no_null_iter().map(|d| d / m::PA_PER_MM_H2O).collect();
        let t_s = temps[..4].iter().sum::<f64>() / 4.0;
        let p_s = 99_500.0 / m::PA_PER_MM_HG;
        let m_s = m::wet_molecular_weight(30.16, 0.10).unwrap();
        let v = m::velocity(0.998, &dp_mm, t_s, p_s, m_s, m::MethodUnits::Metric).unwrap();
        let area = std::f64::consts::PI * 0.25 / 4.0;
        let q_sd = m::dry_standard_flow_metric(0.10, v, area, t_s, p_s).unwrap();
        let get = |c: &str| r.traverses.column(c).unwrap().f64().unwrap().get(0).unwrap();
        assert!((get("epa_m2_velocity_m_s") - v).abs() < 1e-9 * v);
        assert!((get("epa_m2_dry_flow_20C_760mmHg_m3_h") - q_sd).abs() < 1e-9 * q_sd);
        let phys = get("mean_velocity_m_s");
        assert_eq!(get("physics_velocity_m_s"), phys);
        let diff = get("epa_m2_minus_physics_pct");
        assert!((diff - (v - phys) / phys * 100.0).abs() < 1e-9);
        // Same gas, same readings: the two routes differ by the rounded constants and the
        // averaging of √Δp against the mean of point velocities, a fraction of a percent.
        assert!(diff.abs() < 0.5, "{diff}");
        assert_eq!(r.traverses.column("reported_route").unwrap().str().unwrap().get(0), Some("physics"));
        // Reported by the method: the main columns carry the method's velocity.
        spec.method2 = Some(Method2Route { dry_molecular_weight: Some(30.16), report: true });
        let r2 = reduce_campaign(&df, &spec).unwrap();
        let get2 = |c: &str| r2.traverses.column(c).unwrap().f64().unwrap().get(0).unwrap();
        assert!((get2("mean_velocity_m_s") - v).abs() < 1e-9 * v);
        assert!((get2("volume_flow_m3_s") - v * area).abs() < 1e-9);
        assert_eq!(get2("physics_velocity_m_s"), phys);
        assert!(r2.traverses.column("reported_route").unwrap().str().unwrap().get(0).unwrap().contains("Method 2"));
        // Per-run M_d wins over the campaign's; a traverse with none fails alone, named.
        spec.method2 = Some(Method2Route { dry_molecular_weight: None, report: false });
        let fl = spec.fluid.clone();
        spec.conditions = Some(
            TraverseConditions::new(
                vec!["1".into(), "2".into()],
                vec![99_500.0; 2],
                vec![fl.clone(), fl],
                vec![Some(0.10); 2],
            )
            .unwrap()
            .with_dry_molecular_weight(vec![Some(30.16), None])
            .unwrap(),
        );
        let r3 = reduce_campaign(&df, &spec).unwrap();
        assert_eq!(r3.traverses.height(), 1);
        assert!(
            (r3.traverses.column("epa_m2_velocity_m_s").unwrap().f64().unwrap().get(0).unwrap() - v).abs() < 1e-9 * v
        );
        assert!(r3.failures[0].message.contains("no dry molecular weight"), "{:?}", r3.failures);
        // Reverse flow: Method 2 does not apply; the traverse fails, named.
        spec.conditions = None;
        spec.method2 = Some(Method2Route { dry_molecular_weight: Some(30.16), report: false });
        let rev = frame(vec![1, 1, 1, 1], vec![20.0, -3.0, 31.0, 21.0], vec![150.0; 4], EA4.to_vec());
        let r4 = reduce_campaign(&rev, &spec).unwrap();
        assert!(
            r4.failures[0].message.contains("point 2") && r4.failures[0].message.contains("reverse flow"),
            "{:?}",
            r4.failures
        );
        // Water is not a stack gas.
        assert!(
            TraverseConditions::new(vec!["1".into()], vec![1e5], vec![spec.fluid.clone()], vec![None])
                .unwrap()
                .with_dry_molecular_weight(vec![Some(1.0)])
                .is_err()
        );
    }

    #[test]
    fn unsorted_text_keys_and_integration() {
        let mut spec = air_spec();
        spec.averaging = Averaging::Integrate { wall_exponent: 7.0 };
        let df = DataFrame::new_infer_height(vec![
            Column::new("traverse".into(), vec!["B", "A", "B", "A", "B", "A", "B", "A"]),
            Column::new("deflection_mm".into(), vec![20.0, 20.0, 30.0, 30.0, 30.0, 30.0, 20.0, 20.0]),
            Column::new("fluid_temp_c".into(), vec![18.0; 8]),
            Column::new("diameter_mm".into(), vec![500.0; 8]),
            Column::new("position_mm".into(), vec![33.5, 33.5, 125.0, 125.0, 375.0, 375.0, 466.5, 466.5]),
        ])
        .unwrap();
        let r = reduce_campaign(&df, &spec).unwrap();
        assert!(r.failures.is_empty(), "{:?}", r.failures);
        assert_eq!(r.traverses.column("traverse").unwrap().str().unwrap().get(0), Some("B"));
        let v = r.traverses.column("mean_velocity_m_s").unwrap().f64().unwrap();
        assert!((v.get(0).unwrap() - v.get(1).unwrap()).abs() < 1e-12);
    }

    #[test]
    fn bad_traverses_are_named_and_listed() {
        let spec = air_spec();
        let ids = vec![1, 1, 1, 1, 2, 2, 2, 3, 3, 3, 3];
        let mut pos = [EA4; 3].concat();
        pos.remove(4); // traverse 2 keeps 3 points
        pos[8] = 600.0; // traverse 3: outside
        let df = frame(ids, vec![20.0; 11], vec![18.0; 11], pos);
        let r = reduce_campaign(&df, &spec).unwrap();
        assert_eq!(r.traverses.height(), 1);
        let msgs: Vec<&str> = r.failures.iter().map(|f| f.message.as_str()).collect();
        assert!(msgs[0].contains("3 points, fewer than the 4"), "{msgs:?}");
        assert!(msgs[1].contains("outside the section"), "{msgs:?}");
        let dup = frame(vec![1, 1, 1, 1], vec![20.0; 4], vec![18.0; 4], vec![33.5, 125.0, 125.0, 466.5]);
        assert!(reduce_campaign(&dup, &spec).unwrap().failures[0].message.contains("duplicate position"));
        let e = reduce_campaign(&df.drop("fluid_temp_c").unwrap(), &spec).unwrap_err();
        assert!(
            e.to_string().contains("missing column 'fluid_temp_c' (fluid temperature); columns present: traverse"),
            "{e}"
        );
    }

    // Per-traverse conditions: each traverse equals a separate reduction under its own
    // static pressure, fluid and moisture (the single-condition path is tested against the
    // scalar physics above); a traverse without conditions fails alone, named.
    #[test]
    fn per_traverse_conditions_match_separate_reductions() {
        let gas = |co2: f64, bws: f64| Fluid::Gas(crate::GasMixture::flue_gas(co2, 7.0, 0.0, bws).unwrap());
        let mut spec = air_spec();
        spec.fluid = gas(10.0, 0.10);
        spec.flow = crate::section::flow::FlowOptions {
            reference: Some(crate::ReferenceCondition::Normal0C),
            moisture: Some(0.10),
            wall_factor: None,
        };
        let df = frame(
            vec![1, 1, 1, 1, 2, 2, 2, 2, 3, 3, 3, 3],
            vec![20.0, 30.0, 31.0, 21.0, 22.0, 33.0, 30.0, 20.0, 25.0, 25.0, 25.0, 25.0],
            vec![150.0; 12],
            [EA4, EA4, EA4].concat(),
        );
        spec.conditions = Some(
            TraverseConditions::new(
                vec!["1".into(), "2".into()],
                vec![99_000.0, 97_500.0],
                vec![gas(10.0, 0.10), gas(12.0, 0.14)],
                vec![Some(0.10), Some(0.14)],
            )
            .unwrap(),
        );
        let r = reduce_campaign(&df, &spec).unwrap();
        assert_eq!(r.failures.len(), 1);
        assert!(r.failures[0].traverse == "3" && r.failures[0].message.contains("no conditions"), "{:?}", r.failures);
        let one = |rows: std::ops::Range<usize>, p: f64, f: Fluid, b: f64| {
            let mut s = air_spec();
            s.fluid = f;
            s.static_pressure = Pressure::pa(p);
            s.flow = crate::section::flow::FlowOptions { moisture: Some(b), ..spec.flow };
            reduce_campaign(&df.slice(rows.start as i64, rows.len()), &s).unwrap().traverses
        };
        for (k, (rows, p, f, b)) in
            [(0..4, 99_000.0, gas(10.0, 0.10), 0.10), (4..8, 97_500.0, gas(12.0, 0.14), 0.14)].into_iter().enumerate()
        {
            let alone = one(rows, p, f, b);
            for c in
                ["mean_velocity_m_s", "mean_density_kg_m3", "flow_0C_101.325kPa_m3_s", "dry_flow_0C_101.325kPa_m3_s"]
            {
                let a = r.traverses.column(c).unwrap().f64().unwrap().get(k).unwrap();
                let b = alone.column(c).unwrap().f64().unwrap().get(0).unwrap();
                assert!((a - b).abs() <= 1e-12 * b.abs(), "traverse {}: {c} {a} vs {b}", k + 1);
            }
        }
        // The per-point table follows the same conditions.
        spec.conditions.as_mut().unwrap().keys.push("3".into());
        spec.conditions.as_mut().unwrap().static_pressure_pa.push(101_000.0);
        spec.conditions.as_mut().unwrap().fluid.push(gas(10.0, 0.10));
        spec.conditions.as_mut().unwrap().moisture.push(None);
        spec.conditions.as_mut().unwrap().dry_molecular_weight.push(None);
        let pts = point_velocities(&df, &spec).unwrap();
        let rho = pts.column("density_kg_m3").unwrap().f64().unwrap();
        let alone = gas(12.0, 0.14).density_si(97_500.0, 423.15).unwrap();
        assert!((rho.get(4).unwrap() - alone).abs() < 1e-12 * alone);
        assert!(
            TraverseConditions::new(
                vec!["1".into(), "1".into()],
                vec![1e5; 2],
                vec![gas(10.0, 0.1), gas(10.0, 0.1)],
                vec![None; 2]
            )
            .is_err()
        );
    }

    // A probe from a calibration record that fails its Method 2 checks: the campaign says so.
    #[test]
    fn calibration_warnings_reach_the_campaign() {
        use crate::methods::us_epa::calibration::{CalibrationPair, CalibrationRecord, STypeCalibration};
        let p = |a, b| CalibrationPair { dp_std: a, dp_s: b };
        let cal = STypeCalibration::new(0.99, vec![p(12.0, 16.8); 3], vec![p(12.0, 17.3); 3]).unwrap();
        let rec = CalibrationRecord::new("SP-09", "2026-01-10", &cal).unwrap();
        let mut spec = air_spec();
        spec.probe = Probe::from_calibration(&rec, 20_790, None).unwrap();
        let df = frame(vec![1; 4], vec![20.0, 30.0, 31.0, 21.0], vec![18.0; 4], EA4.to_vec());
        let r = reduce_campaign(&df, &spec).unwrap();
        assert!(
            r.warnings.iter().any(|w| w.kind == "calibration-check" && w.message.contains("SP-09")),
            "{:?}",
            r.warnings
        );
    }

    // US EPA Method 2H corrects the arithmetic equal-area mean; refused on top of a wall-zone integration.
    #[test]
    fn wall_factor_with_a_wall_zone_integration_is_refused() {
        let mut spec = air_spec();
        spec.averaging = Averaging::Integrate { wall_exponent: 7.0 };
        spec.flow.wall_factor = Some(crate::section::flow::WallFactor::EpaOtherStacks);
        let df = frame(vec![1; 4], vec![20.0, 30.0, 31.0, 21.0], vec![18.0; 4], EA4.to_vec());
        let e = reduce_campaign(&df, &spec).unwrap_err();
        assert!(e.to_string().contains("corrected twice"), "{e}");
    }

    // Reference and dry-basis flows follow crate::section::flow::flow (tested against the EPA worked
    // example there) for the traverse's mean temperature.
    #[test]
    fn reference_and_dry_flows_match_the_scalar_flow() {
        let mut spec = air_spec();
        spec.flow = crate::section::flow::FlowOptions {
            reference: Some(crate::ReferenceCondition::Normal0C),
            moisture: Some(0.02),
            wall_factor: Some(crate::section::flow::WallFactor::EpaOtherStacks),
        };
        let df = frame(vec![1; 4], vec![20.0, 30.0, 31.0, 21.0], vec![18.0; 4], EA4.to_vec());
        let r = reduce_campaign(&df, &spec).unwrap();
        let col = |n: &str| r.traverses.column(n).unwrap().f64().unwrap().get(0).unwrap();
        let state = spec.fluid.state(spec.static_pressure, Temperature::celsius(18.0)).unwrap();
        let conduit = crate::Conduit::circular(Length::mm(500.0)).unwrap();
        let unscaled = col("mean_velocity_m_s") / 0.995;
        let s = crate::section::flow::flow(crate::Velocity::m_s(unscaled), &conduit, &state, &spec.flow).unwrap();
        assert!((col("mean_velocity_m_s") - s.mean_velocity.si()).abs() < 1e-12);
        assert!((col("flow_0C_101.325kPa_m3_s") - s.reference_flow.unwrap().si()).abs() < 1e-12);
        assert!((col("dry_flow_0C_101.325kPa_m3_s") - s.dry_reference_flow.unwrap().si()).abs() < 1e-12);
    }

    // The per-traverse columns equal a direct GUM budget of the same traverse
    // (crate::uncertainty::flow_models, tested against JCGM 100/101 examples).
    #[test]
    fn per_traverse_uncertainty_columns() {
        use crate::uncertainty::Input;
        use crate::uncertainty::flow_models::{MethodTerm, TraverseUncertainty};
        let mut spec = air_spec();
        spec.fluid = Fluid::IdealGas {
            name: "air".into(),
            molar_mass: crate::MolarMass::g_mol(28.96),
            isentropic_exponent: 1.4,
            viscosity: None,
        };
        let terms = MethodTerm::typical(crate::LayoutRule::EqualArea);
        spec.uncertainty = Some(CampaignUncertainty {
            coefficient_rel: 0.0025,
            density_rel: 0.002,
            diameter_rel: 0.001,
            dp_rel: 0.01,
            dp_abs_pa: 0.5,
            terms: terms.clone(),
            coverage: 0.95,
        });
        let df = frame(vec![1; 4], vec![20.0, 30.0, 31.0, 21.0], vec![18.0; 4], EA4.to_vec());
        let r = reduce_campaign(&df, &spec).unwrap();
        let col = |n: &str| r.traverses.column(n).unwrap().f64().unwrap().get(0).unwrap();
        let per_row = point_velocities(&df, &spec).unwrap();
        let dps: Vec<f64> = per_row.column("dp_pa").unwrap().f64().unwrap().into_no_null_iter().collect();
        let rho = col("mean_density_kg_m3");
        let t = TraverseUncertainty::new(
            Input::normal("C", "1", 0.998, 0.0025 * 0.998).unwrap(),
            Input::normal("ρ", "kg/m³", rho, 0.002 * rho).unwrap(),
            Input::normal("D", "m", 0.5, 0.0005).unwrap(),
            &terms,
            dps.iter()
                .map(|dp| Input::normal("Δp", "Pa", *dp, ((0.01 * dp).powi(2) + 0.25f64).sqrt()).unwrap())
                .collect(),
        )
        .unwrap();
        let g = t.gum(0.95).unwrap();
        assert!((col("u_flow_m3_s") - g.u).abs() < 1e-15 && (col("U_flow_m3_s") - g.expanded).abs() < 1e-15);
        assert!((col("u_rel_flow_pct") - g.u / g.value * 100.0).abs() < 1e-12);
        assert!(col("u_rel_flow_pct") > 0.8 && col("u_rel_flow_pct") < 2.0, "{}", col("u_rel_flow_pct"));
    }

    // A 1000 × 500 mm duct on the US EPA Method 1 Table 1-2 12-point grid (4 lines × 3 points,
    // centroids (2i − 1)/(2n)): equal readings give the point velocity as the mean, and the
    // flow is mean × W·H (definition).
    #[test]
    fn rectangular_campaign() {
        let mut spec = air_spec();
        spec.columns.rectangular = Some(RectangularColumns {
            height: ("height_mm".into(), Unit::parse("mm").unwrap()),
            across: ("across_mm".into(), Unit::parse("mm").unwrap()),
        });
        spec.averaging = Averaging::Integrate { wall_exponent: 7.0 };
        let (mut across, mut depth) = (vec![], vec![]);
        for i in 0..4 {
            for j in 0..3 {
                across.push((2 * i + 1) as f64 / 8.0 * 1000.0);
                depth.push((2 * j + 1) as f64 / 6.0 * 500.0);
            }
        }
        let df = DataFrame::new_infer_height(vec![
            Column::new("traverse".into(), vec![1i64; 12]),
            Column::new("deflection_mm".into(), vec![25.0; 12]),
            Column::new("fluid_temp_c".into(), vec![18.0; 12]),
            Column::new("diameter_mm".into(), vec![1000.0; 12]),
            Column::new("height_mm".into(), vec![500.0; 12]),
            Column::new("across_mm".into(), across.clone()),
            Column::new("position_mm".into(), depth.clone()),
        ])
        .unwrap();
        let r = reduce_campaign(&df, &spec).unwrap();
        assert!(r.failures.is_empty(), "{:?}", r.failures);
        let col = |n: &str| r.traverses.column(n).unwrap().f64().unwrap().get(0).unwrap();
        let v = point_velocities(&df.slice(0, 1), &spec)
            .unwrap()
            .column("velocity_m_s")
            .unwrap()
            .f64()
            .unwrap()
            .get(0)
            .unwrap();
        // integration of a flat profile with m = 7 wall zones: each 1-D mean is
        // (1 − 2·(1/2n)) + 2·(1/2n)·7/8 of the point value (derived)
        let line = |n: f64| 1.0 - 1.0 / n + (1.0 / n) * 0.875;
        assert!((col("mean_velocity_m_s") - v * line(4.0) * line(3.0)).abs() < 1e-12);
        assert!((col("volume_flow_m3_s") - col("mean_velocity_m_s") * 0.5).abs() < 1e-12);
        let mut bad = across.clone();
        bad[5] = 1200.0;
        let df2 = df.clone().with_column(Column::new("across_mm".into(), bad)).unwrap().clone();
        let r2 = reduce_campaign(&df2, &spec).unwrap();
        assert!(r2.failures[0].message.contains("outside the width"), "{:?}", r2.failures);
    }

    #[test]
    fn water_campaign_with_mercury() {
        let spec = CampaignSpec {
            fluid: Fluid::Water(Water::default()),
            static_pressure: Pressure::pa(101_325.0),
            manometer: Manometer::new(ManometerKind::UTube, GaugeLiquid::Mercury, gravity::standard()).unwrap(),
            probe: Probe::new(ProbeKind::WallTapPitot, 1.0).unwrap(),
            ..air_spec()
        };
        // 50 mm Hg under 20 °C water → 3.511 m/s (check-values.md §4.1, with g_n)
        let df = frame(vec![7; 4], vec![50.0; 4], vec![20.0; 4], EA4.to_vec());
        let r = reduce_campaign(&df, &spec).unwrap();
        let v = r.traverses.column("mean_velocity_m_s").unwrap().f64().unwrap().get(0).unwrap();
        assert!((v - 3.5110).abs() < 2e-4, "{v}");
    }

    /// Every traverse of `df` through the in-place rows pass and through the row-by-row
    /// one: the same bits, or the same error. Returns how many the in-place pass took.
    fn both_rows_passes_agree(df: &DataFrame, spec: &CampaignSpec) -> usize {
        let kernel = Kernel::new(df, spec, 0).unwrap();
        let cond = Cond::new(spec.static_pressure.si(), &spec.fluid, None, None, spec.probe.coefficient);
        let groups = groups(df, &spec.columns.traverse).unwrap();
        let GroupsType::Slice { groups, .. } = &*groups else { panic!("sorted keys make slices") };
        let (mut a, mut b, mut c) = (Scratch::new(), Scratch::new(), Scratch::new());
        let mut in_place = 0;
        for &[off, len] in groups {
            let (lo, hi) = (off as usize, (off + len) as usize);
            let fast = kernel.traverse(lo..hi, Some((lo, hi)), lo, &mut a, &cond);
            let rows = kernel.traverse(lo..hi, None, lo, &mut b, &cond);
            let d = kernel.dia.at(lo);
            in_place += usize::from(d > 0.0 && kernel.rows_in_place(lo, hi, d, d, &mut c, &cond).is_some());
            match (fast, rows) {
                (Ok(x), Ok(y)) => {
                    let bits = |o: &TraverseOut| {
                        let f = [o.mean_v, o.q, o.m, o.rho, o.vmax, o.t_mean, o.p];
                        (o.first_row, o.points, o.reversed, f.map(f64::to_bits), o.unc.map(|u| u.map(f64::to_bits)))
                    };
                    assert_eq!(bits(&x), bits(&y), "traverse at row {lo}");
                }
                (Err(x), Err(y)) => assert_eq!(x.to_string(), y.to_string(), "traverse at row {lo}"),
                (x, y) => panic!("traverse at row {lo}: in place {:?}, row by row {:?}", x.err(), y.err()),
            }
        }
        in_place
    }

    #[test]
    fn the_in_place_rows_pass_gives_the_row_by_row_bits_and_errors() {
        // 60 traverses of 8 points on 2 lines, with a bad row in some of them: each kind of
        // check the rows pass makes, at a row inside the traverse.
        let (mut ids, mut defl, mut temp, mut pos, mut line, mut dia, mut tg, mut dp) =
            (vec![], vec![], vec![], vec![], vec![], vec![], vec![], vec![]);
        let ea = [33.5, 125.0, 375.0, 466.5];
        for t in 0..60i64 {
            for k in 0..8usize {
                let row = (t as usize) * 8 + k;
                ids.push(t);
                line.push((k / 4) as f64);
                pos.push(ea[k % 4]);
                dia.push(500.0);
                defl.push(5.0 + 3.0 * ((row as f64) * 0.7).sin());
                temp.push(15.0 + (row % 7) as f64 * 0.1 + (t % 5) as f64);
                tg.push(18.0 + (row % 3) as f64 * 0.5);
                dp.push(40.0 + 25.0 * ((row as f64) * 0.3).cos());
            }
        }
        let at = |t: usize, k: usize| t * 8 + k;
        defl[at(3, 5)] = f64::NAN; // a reading that is not a number
        defl[at(4, 2)] = -0.4; // reverse flow at one point (kept, counted)
        pos[at(5, 6)] = 520.0; // a position outside the duct
        dia[at(6, 3)] = 600.0; // the size changes within the traverse
        pos[at(7, 5)] = pos[at(7, 4)]; // a position read twice (the duplicate search)
        pos.swap(at(8, 0), at(8, 1)); // positions out of order, none twice
        line[at(9, 7)] = 1.5; // a line number that is not whole
        temp[at(10, 4)] = 900.0; // outside the humid-air formulation's range
        dp[at(11, 1)] = f64::INFINITY;
        let df = DataFrame::new_infer_height(vec![
            Column::new("traverse".into(), ids),
            Column::new("deflection_mm".into(), defl),
            Column::new("fluid_temp_c".into(), temp),
            Column::new("diameter_mm".into(), dia),
            Column::new("position_mm".into(), pos),
            Column::new("line".into(), line.clone()),
            Column::new(
                "line_i64".into(),
                // A negative line number in one traverse.
                line.iter().enumerate().map(|(i, &x)| if i == at(12, 3) { -1 } else { x as i64 }).collect::<Vec<i64>>(),
            ),
            Column::new("gauge_temp_c".into(), tg),
            Column::new("dp_pa".into(), dp),
        ])
        .unwrap();
        let with_line = |name: &str| CampaignSpec {
            columns: CampaignColumns { line: Some(name.into()), ..CampaignColumns::standard().unwrap() },
            min_points: 8,
            ..air_spec()
        };
        let gauge_t = CampaignSpec {
            columns: CampaignColumns {
                gauge_temperature: Some(("gauge_temp_c".into(), Unit::parse("degC").unwrap())),
                ..with_line("line").columns
            },
            ..with_line("line")
        };
        let transducer = CampaignSpec {
            columns: CampaignColumns {
                reading: ("dp_pa".into(), Unit::parse("Pa").unwrap()),
                ..with_line("line").columns
            },
            ..with_line("line")
        };
        let integrated = CampaignSpec { averaging: Averaging::Integrate { wall_exponent: 7.0 }, ..with_line("line") };
        let water = CampaignSpec {
            fluid: Fluid::Water(Water::default()),
            manometer: Manometer::new(ManometerKind::UTube, GaugeLiquid::Mercury, gravity::standard()).unwrap(),
            ..with_line("line")
        };
        let inverted = CampaignSpec {
            fluid: Fluid::Water(Water::default()),
            manometer: Manometer::new(
                ManometerKind::InvertedUTube,
                GaugeLiquid::User(
                    UserLiquid::new("air", crate::Density::kg_m3(1.2), Temperature::celsius(20.0), None).unwrap(),
                ),
                gravity::standard(),
            )
            .unwrap(),
            ..with_line("line")
        };
        let no_line = CampaignSpec { min_points: 8, ..air_spec() };
        let no_position = CampaignSpec {
            columns: CampaignColumns { position: None, ..CampaignColumns::standard().unwrap() },
            ..no_line.clone()
        };
        for (what, spec) in [
            ("air, f64 lines", with_line("line")),
            ("air, i64 lines", with_line("line_i64")),
            ("gauge temperature", gauge_t),
            ("transducer Δp", transducer),
            ("integration", integrated),
            ("water over mercury", water),
            ("inverted U-tube", inverted),
            ("no line column", no_line),
            ("no positions", no_position),
        ] {
            let taken = both_rows_passes_agree(&df, &spec);
            // The traverses without a bad row (about 50 of 60) go the in-place way.
            assert!(taken >= 45, "{what}: {taken} of 60 in place");
        }
        // Cases it leaves to the rows: the Method 2 route, and a reading column of integers.
        let m2 = CampaignSpec {
            method2: Some(Method2Route { dry_molecular_weight: Some(29.0), report: false }),
            ..with_line("line")
        };
        assert_eq!(both_rows_passes_agree(&df, &m2), 0);
        let mut ints = df.clone();
        ints.with_column(Column::new("deflection_mm".into(), vec![5i64; 480])).unwrap();
        assert_eq!(both_rows_passes_agree(&ints, &with_line("line")), 0);
    }
}
