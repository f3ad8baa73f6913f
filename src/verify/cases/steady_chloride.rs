//! Steady chloride under steady recharge: c = Fd/q below the surface, and the chloride
//! mass-balance recharge estimate Fd/c = q (Eriksson & Khunakasem 1969; Allison & Hughes
//! 1978).

use super::*;
use crate::model::{SoluteSurface, SurfaceWater};

const FILES: Files = files!("steady-chloride");

pub(super) fn steady_chloride(v: Variant) -> Result<CaseResult> {
    let (model, scratch) = load_variant(&FILES, v, &[("mesh.cells", "40")])?;
    let s = only_solute(&model)?;
    let t0 = model.time.start;
    // The case's forcing: deposition Fd [g m⁻² s⁻¹] and the surface water flux q [m s⁻¹].
    let fd = match &s.surface {
        SoluteSurface::Deposition(d) => d.value(t0),
        SoluteSurface::Inflow(_) => {
            return Err(Error::Internal("steady-chloride needs a deposition".into()))
        }
    };
    let q = match &model.surface.at(t0).water {
        SurfaceWater::Flux { flux, .. } => flux.value(t0),
        _ => {
            return Err(Error::Internal(
                "steady-chloride needs a surface flux".into(),
            ))
        }
    };
    let c_ref = fd / q;
    let q_mm_yr = q * 1.0e3 * SECONDS_PER_YEAR;
    let (_, res) = simulate(&model, &scratch)?;
    let sol = read_solute_results(&scratch.dir.join("out/results.h5"), &s.name)?;
    // Steady from 2000 yr on (README: the transient has decayed below 1e-14 by then).
    let steady_from = 2000.0;
    let mut c_err: f64 = 0.0;
    for (k, t) in res.times.iter().enumerate() {
        if *t >= steady_from {
            c_err = c_err.max(max_abs(
                sol.concentration[k].iter().map(|c| c / c_ref - 1.0),
            ));
        }
    }
    let r_err = max_abs(
        res.series_time
            .iter()
            .zip(&sol.recharge_estimate)
            .filter(|(t, _)| **t >= steady_from)
            .map(|(_, r)| r / q_mm_yr - 1.0),
    );
    // The same column started from `initial_steady` (the steady transport solve under the
    // initial flow): Fd/q from the start, and it stays there.
    let mut o = vec![
        Override::remove("solutes[1].initial_concentration_g_per_m3")?,
        Override::set("solutes[1].initial_steady", "true")?,
        Override::set("time.end_year", "100.0")?,
        Override::set("output.times_year", "[100.0]")?,
    ];
    if v == Variant::Fast {
        o.push(Override::set("mesh.cells", "40")?);
    }
    let (model_s, scratch_s) = load(&FILES, &o)?;
    let (_, res_s) = simulate(&model_s, &scratch_s)?;
    let sol_s = read_solute_results(&scratch_s.dir.join("out/results.h5"), &s.name)?;
    let steady_start_err = max_abs(
        sol_s
            .concentration
            .iter()
            .flatten()
            .map(|c| c / c_ref - 1.0),
    );
    let mut fig = Figure::profile(
        "Chloride under steady recharge: approach to c = Fd/q",
        "chloride [g m⁻³]",
    );
    let zmax = model.mesh.depth();
    fig.series.push(Series::line(
        "Fd/q (Allison & Hughes 1978)",
        vec![(c_ref, 0.0), (c_ref, zmax)],
    ));
    for ty in [100.0, 300.0, 1000.0, 3000.0] {
        let k = res.at(ty);
        fig.series.push(Series::points(
            format!("deepdry, {ty} yr"),
            prof(&sol.concentration[k], &res.depth),
        ));
    }
    let transient: Vec<f64> = res
        .times
        .iter()
        .enumerate()
        .filter(|(_, t)| **t > 0.0)
        .map(|(k, _)| max_abs(sol.concentration[k].iter().map(|c| c / c_ref - 1.0)))
        .collect();
    Ok(CaseResult {
        checks: vec![
            Check::new(
                "concentration at 2000 and 3000 yr, every cell: max |c/(Fd/q) − 1|",
                "c = Fd/q, Allison & Hughes 1978; Eriksson & Khunakasem 1969",
                c_err,
                1e-12,
            ),
            Check::new(
                format!(
                    "started from initial_steady: max |c/(Fd/q) − 1| at 0 and {} yr",
                    res_s.times.last().cloned().unwrap_or(0.0)
                ),
                "c = Fd/q, Allison & Hughes 1978",
                steady_start_err,
                1e-12,
            ),
            Check::new(
                "recharge estimate series from 2000 yr: max |R/q − 1|",
                "R = Fd/c, Eriksson & Khunakasem 1969",
                r_err,
                1e-12,
            ),
        ],
        figures: vec![fig],
        notes: vec![
            format!(
                "{} cells; Fd = {:.3} g m-2 yr-1, q = {q_mm_yr:.3} mm yr-1, Fd/q = {c_ref:.6} g m-3",
                res.depth.len(),
                fd * SECONDS_PER_YEAR
            ),
            format!(
                "max |c/(Fd/q) − 1| at {:?} yr: {}",
                res.times.iter().filter(|t| **t > 0.0).collect::<Vec<_>>(),
                fmt_list(&transient)
            ),
        ],
    })
}
