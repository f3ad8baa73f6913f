//! Two floods over a column with a ponding surface store: the pond fills, runs off above
//! its largest depth, drains into the soil and fills again; the water balance (soil, pond
//! and runoff) closes, the water applied is the exact integral of the stepped inflow, and
//! the pond stays within the bound the runoff law gives.

use super::*;
use crate::model::SurfaceWater;
use crate::physics::{RUNOFF_BAND, RUNOFF_TIME};

const FILES: Files = files!("ponding-cycle");

pub(super) fn ponding_cycle(v: Variant) -> Result<CaseResult> {
    let (model, scratch) = load_variant(&FILES, v, &[])?;
    let t0 = model.time.start;
    let (inflow, pmax) = match &model.surface.at(t0).water {
        SurfaceWater::Pond {
            inflow,
            max_depth: Some(d),
            ..
        } => (inflow.clone(), *d),
        _ => {
            return Err(Error::Internal(
                "ponding-cycle needs a ponding surface with a largest depth".into(),
            ))
        }
    };
    let (summary, res) = simulate(&model, &scratch)?;
    let r = H5Reader::open(&summary.results)?;
    let pond = r.d1("series/ponding_depth")?;
    let applied = r.d1("series/surface_water_cumulative")?;
    let runoff = r.d1("series/runoff_cumulative")?;
    let t = &res.series_time;
    // 1. Balance of soil + pond against inflow, bottom outflow and runoff: every
    //    record's cumulative error relative to the water the run puts through.
    // 2. The water applied against the exact integral of the stepped schedule [kg m⁻²].
    let exact = WATER_DENSITY * inflow.integral(t0, model.time.end);
    let last = applied.len() - 1;
    let applied_err = ((applied[last] - exact) / exact).abs();
    let balance = max_abs(res.series_water_err.iter().map(|e| e / applied[last]));
    // 3. Two episodes: the pond reaches its largest depth in each flood and is empty
    //    between the floods and at the end.
    let jumps = inflow.jumps();
    let year = |s: f64| model.time.year(s);
    let window = |a: f64, b: f64| -> Vec<f64> {
        t.iter()
            .zip(&pond)
            .filter(|(x, _)| **x > year(a) && **x <= year(b))
            .map(|(_, p)| *p)
            .collect()
    };
    let mut shape_err: f64 = 0.0;
    let mut episodes = 0;
    for pair in jumps.chunks(2) {
        if let [on, off] = pair {
            let during = window(*on, *off);
            let peak = during.iter().cloned().fold(0.0, f64::max);
            shape_err = shape_err.max((pmax - peak).max(0.0) / pmax);
            episodes += 1;
        }
    }
    // Empty 20 days after each flood and at the end.
    let day = 86_400.0;
    for pair in jumps.chunks(2) {
        if let [_, off] = pair {
            let after = window(off + 20.0 * day, off + 30.0 * day);
            shape_err = shape_err.max(after.iter().cloned().fold(0.0, f64::max) / pmax);
        }
    }
    shape_err = shape_err.max(pond[last] / pmax);
    // 4. The runoff law (P − Pmax − δ/2)/τ = R ≤ q: the pond stays below
    //    Pmax + δ/2 + τ q_max (derived from the law).
    let q_max = inflow.bounds().1;
    let bound = pmax + 0.5 * RUNOFF_BAND + RUNOFF_TIME * q_max;
    let peak = pond.iter().cloned().fold(0.0, f64::max);
    let over = ((peak - bound) / pmax).max(0.0);
    let mut fig = Figure::new(
        "Ponding depth and runoff under two floods",
        "time [day]",
        "ponding depth [mm], runoff [m]",
    );
    let days: Vec<f64> = t.iter().map(|x| x * 365.25).collect();
    fig.series.push(Series::line(
        "ponding depth [mm]",
        zip_pts(&days, &pond.iter().map(|p| p * 1e3).collect::<Vec<_>>()),
    ));
    fig.series.push(Series::line(
        "cumulative runoff [m]",
        zip_pts(
            &days,
            &runoff.iter().map(|r| r / WATER_DENSITY).collect::<Vec<_>>(),
        ),
    ));
    Ok(CaseResult {
        checks: vec![
            Check::new(
                "water balance (soil + pond, inflow, outflow, runoff): max |cumulative error| / water applied",
                "conservation",
                balance,
                1e-10,
            ),
            Check::new(
                "water applied against the exact integral of the stepped inflow",
                "exact integral (left-limit forcing at jumps)",
                applied_err,
                1e-12,
            ),
            Check::new(
                "pond at its largest depth in each flood, empty 20 days after and at the end",
                "case design (README)",
                shape_err,
                1e-3,
            ),
            Check::new(
                "peak ponding depth above Pmax + δ/2 + τ q_max, relative to Pmax",
                "runoff law (derived, README)",
                over,
                0.0,
            ),
        ],
        figures: vec![fig],
        notes: vec![format!(
            "{episodes} floods; applied {:.3} kg m-2 (exact {exact:.3}); runoff {:.3} kg m-2; \
             peak pond {:.5} m (largest depth {pmax} m, bound {bound:.5} m); {} steps",
            applied[last],
            runoff[last],
            peak,
            summary.counters.steps
        )],
    })
}
