//! A column filled by ponding to its saturated steady state: Darcy's law through a uniform
//! saturated column (exact on any mesh), the saturated storage and the filling run's
//! water balance.

use super::*;
use crate::sim::run_in_memory;

const FILES: Files = files!("ponded-darcy-column");

/// The value of a constant head boundary at the start [m].
fn head_of(model: &Model, surface: bool) -> Result<f64> {
    let t0 = model.time.start;
    let h = if surface {
        match &model.surface.at(t0).water {
            crate::model::SurfaceWater::Head(s) => Some(s.value(t0)),
            _ => None,
        }
    } else {
        match &model.bottom.at(t0).water {
            crate::model::BottomWater::WaterTable(s) => Some(s.value(t0)),
            _ => None,
        }
    };
    h.ok_or_else(|| Error::Internal("the case needs head boundaries".to_string()))
}

pub(super) fn ponded_darcy_column(v: Variant) -> Result<CaseResult> {
    let (model, _scratch) = load_variant(&FILES, v, &[("mesh.cells", "25")])?;
    let s = &model.soils[0];
    let ks = s.saturated_conductivity;
    let theta_s = s.retention.theta_s();
    let length = model.mesh.depth();
    let (h0, hb) = (head_of(&model, true)?, head_of(&model, false)?);
    // Darcy, z downward: q = −Ks (∂h/∂z − 1) with ∂h/∂z = (hb − h0)/L (common practice).
    let q_darcy = ks * ((h0 - hb) / length + 1.0);
    let h_exact = |z: f64| h0 + (hb - h0) * z / length;
    let (rec, finish) = run_in_memory(&model, SolverKind::BlockThomas)?;
    let last = rec
        .snapshots
        .last()
        .ok_or_else(|| Error::Internal("no snapshot".into()))?;
    let pr = &last.profile;
    let centers = &model.mesh.centers;
    let h_err = max_abs(centers.iter().zip(&pr.head).map(|(z, h)| h - h_exact(*z)));
    let q_err = max_abs((0..pr.liquid_iso.len()).map(|k| {
        let q =
            (pr.liquid_iso[k] + pr.liquid_th[k] + pr.vapor_iso[k] + pr.vapor_th[k]) / WATER_DENSITY;
        (q - q_darcy) / q_darcy
    }));
    // Saturated with Ss = 0 and no air: ρw θs L stored (vapour has no room).
    let first = rec.series.first().expect("series");
    let end = rec.series.last().expect("series");
    let stored_exact = WATER_DENSITY * theta_s * length;
    let storage_err = (end.water_storage - stored_exact).abs() / stored_exact;
    // Balance of the filling run: storage change against the net inflow (surface −
    // bottom), relative to the storage change (the water the column took up).
    let gained = end.water_storage - first.water_storage;
    let net_in = end.surface_water_cumulative - end.bottom_water_cumulative;
    let balance = (gained - net_in).abs() / gained;
    let worst_rel = rec
        .series
        .iter()
        .fold(0.0f64, |m, r| m.max(r.water_balance_relative.abs()));
    let mut fig = Figure::profile("Ponded column: head while filling", "pressure head [m]");
    fig.series.push(Series::line(
        "Darcy, steady",
        line_of(h_exact, 0.0, length, 2),
    ));
    for snap in &rec.snapshots {
        if snap.time_year <= 0.0 {
            continue;
        }
        fig.series.push(Series::points(
            format!("deepdry, {} yr", snap.time_year),
            prof(&snap.profile.head, centers)
                .into_iter()
                .step_by((centers.len() / 40).max(1))
                .collect(),
        ));
    }
    let mm_yr = 1000.0 * SECONDS_PER_YEAR / WATER_DENSITY;
    let t_fig = 0.01;
    let series: Vec<_> = rec
        .series
        .iter()
        .filter(|r| r.time_year > 0.0 && r.time_year <= t_fig)
        .collect();
    let fig_q = Figure::new(
        "Ponded column: fluxes while filling",
        "time [yr]",
        "downward flux [mm/yr]",
    )
    .with(Series::points(
        "deepdry, surface",
        series
            .iter()
            .map(|r| (r.time_year, r.surface_water_flux * mm_yr))
            .collect(),
    ))
    .with(Series::points(
        "deepdry, bottom",
        series
            .iter()
            .map(|r| (r.time_year, r.bottom_water_flux * mm_yr))
            .collect(),
    ))
    .with(Series::line(
        "Darcy, Ks (Δh/L + 1)",
        vec![
            (0.0, q_darcy * 1000.0 * SECONDS_PER_YEAR),
            (t_fig, q_darcy * 1000.0 * SECONDS_PER_YEAR),
        ],
    ));
    let tol_steady = 1e-9;
    Ok(CaseResult {
        checks: vec![
            Check::new(
                "steady flux at every face, relative to Ks (Δh/L + 1)",
                "Darcy (1856), uniform saturated column",
                q_err,
                tol_steady,
            ),
            Check::new(
                "steady head profile, max |Δh| [m]",
                "Darcy (1856): linear between the two heads",
                h_err,
                tol_steady,
            ),
            Check::new(
                "water stored at the end, relative to ρw θs L",
                "saturated column, Ss = 0 (exact)",
                storage_err,
                tol_steady,
            ),
            Check::new(
                "water balance of the filling run, relative to the water taken up",
                "conservation (design note §7)",
                balance.max(worst_rel),
                1e-8,
            ),
        ],
        figures: vec![fig, fig_q],
        notes: vec![format!(
            "{} cells; q = {:.6e} m/s (Darcy {q_darcy:.6e}); took up {gained:.3} kg/m2; steps {} (rejected {}); balance {:.2e} (worst record {worst_rel:.2e})",
            centers.len(),
            pr.liquid_iso[0] / WATER_DENSITY,
            finish.counters.steps,
            finish.counters.rejected,
            balance
        )],
    })
}
