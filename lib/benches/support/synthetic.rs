//! The synthetic campaign shared by the benchmarks (`lib/benches/campaign.rs` and
//! `kernel/benches/session.rs`, included by path): ducts of 400–1600 mm, equal-area positions (10 per
//! diameter, 2 diameters), a power-law-like deflection pattern and a temperature per traverse.

use polars::prelude::*;
use stagna::campaign::{CampaignColumns, CampaignSpec};
use stagna::*;

/// `traverses` × 20 readings in the standard campaign columns plus `line`.
pub fn campaign(traverses: usize) -> PolarsResult<DataFrame> {
    let per = 20usize;
    let n = traverses * per;
    let ea: Vec<f64> = (1..=5).map(|i| (1.0 - ((2 * i - 1) as f64 / 10.0).sqrt()) / 2.0).rev().collect();
    let mut frac: Vec<f64> = ea.clone();
    frac.extend(ea.iter().rev().map(|y| 1.0 - y));
    let (mut id, mut line, mut pos, mut defl, mut temp, mut dia) = (
        Vec::with_capacity(n),
        Vec::with_capacity(n),
        Vec::with_capacity(n),
        Vec::with_capacity(n),
        Vec::with_capacity(n),
        Vec::with_capacity(n),
    );
    for t in 0..traverses {
        let d = 400.0 + (t % 13) as f64 * 100.0;
        let tc = 15.0 + (t % 17) as f64;
        let level = 20.0 + (t % 29) as f64;
        for k in 0..per {
            let y = frac[k % 10];
            id.push(t as i64);
            line.push((k / 10) as i64);
            pos.push(y * d);
            defl.push(level * (2.0 * y.min(1.0 - y)).powf(2.0 / 7.0));
            temp.push(tc);
            dia.push(d);
        }
    }
    DataFrame::new_infer_height(vec![
        Column::new("traverse".into(), id),
        Column::new("line".into(), line),
        Column::new("position_mm".into(), pos),
        Column::new("deflection_mm".into(), defl),
        Column::new("fluid_temp_c".into(), temp),
        Column::new("diameter_mm".into(), dia),
    ])
}

/// The measurement spec of the synthetic campaign: humid air (RH 50 %) at 101 kPa, an inclined
/// oil gauge, a pitot-static tube, arithmetic means over `min_points` points per traverse.
pub fn spec(min_points: usize) -> stagna::Result<CampaignSpec> {
    let oil = UserLiquid::new("oil", Density::kg_m3(826.0), Temperature::celsius(20.0), Some(7.5e-4))?;
    Ok(CampaignSpec {
        columns: CampaignColumns { line: Some("line".into()), ..CampaignColumns::standard()? },
        fluid: Fluid::HumidAir(HumidAir::relative(0.5)?),
        static_pressure: Pressure::pa(101_000.0),
        manometer: Manometer::new(
            ManometerKind::Inclined { angle_deg: 30.0, area_ratio: 0.002 },
            GaugeLiquid::User(oil),
            gravity::standard(),
        )?,
        probe: Probe::new(ProbeKind::PitotStatic, 0.998)?,
        averaging: Averaging::Arithmetic,
        min_points,
        flow: Default::default(),
        uncertainty: None,
        conditions: None,
        progress: None,
        method2: None,
    })
}
