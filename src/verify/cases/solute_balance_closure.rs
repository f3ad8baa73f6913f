//! Solute balance closure over variable-order BDF steps with a stepped deposition, a
//! solute inflow from salty groundwater, and precipitation above a solubility limit.

use super::*;
use crate::model::SoluteSurface;
use crate::schedule::Schedule;

const FILES: Files = files!("solute-balance-closure");

pub(super) fn solute_balance_closure(v: Variant) -> Result<CaseResult> {
    let (model, scratch) =
        load_variant(&FILES, v, &[("mesh.cells", "40"), ("mesh.growth", "1.15")])?;
    let s = only_solute(&model)?;
    let cs = s
        .solubility
        .ok_or_else(|| Error::Internal("the case needs a solubility".into()))?;
    let (times, values) = match &s.surface {
        SoluteSurface::Deposition(Schedule::Steps { times, values }) => (times, values),
        _ => {
            return Err(Error::Internal(
                "the case needs a stepped deposition".into(),
            ))
        }
    };
    let (summary, res) = simulate(&model, &scratch)?;
    let sol = read_solute_results(&scratch.dir.join("out/results.h5"), &s.name)?;
    // The balance from the cumulative series: storage change − (surface − bottom).
    let m0 = sol.storage[0];
    let err: Vec<f64> = sol
        .storage
        .iter()
        .zip(&sol.surface_cumulative)
        .zip(&sol.bottom_cumulative)
        .map(|((m, a), b)| (m - m0) - (a - b))
        .collect();
    let last = err.len() - 1;
    let change_end = sol.storage[last] - m0;
    let flows_end = sol.surface_cumulative[last].abs() + sol.bottom_cumulative[last].abs();
    let scale_end = change_end.abs().max(flows_end);
    let end_rel = err[last].abs() / scale_end;
    let all_rel = max_abs(err.iter().cloned()) / scale_end;
    // The run's own relative series: the largest record, and where.
    let (k_worst, rel_worst) =
        sol.balance_relative_error
            .iter()
            .enumerate()
            .fold(
                (0, 0.0f64),
                |a, (k, x)| if x.abs() > a.1 { (k, x.abs()) } else { a },
            );
    // Solubility: reached (max c = cs) and never exceeded.
    let c_max = sol
        .concentration
        .iter()
        .flatten()
        .cloned()
        .fold(f64::NEG_INFINITY, f64::max);
    let w = widths_of(&res.face_depth);
    let precipitated: Vec<f64> = sol
        .precipitate
        .iter()
        .map(|p| p.iter().zip(&w).map(|(p, w)| p * w).sum())
        .collect();
    // Deposition: the exact integral of the stepped schedule over the run, against the
    // surface cumulative series; each step that ends on a jump applies the value after
    // the jump (README), so the two differ by at most Σ |jump| × (that step).
    let (t0, t1) = (model.time.start, model.time.end);
    let mut exact = 0.0;
    let mut bound = 0.0;
    for (j, &v) in values.iter().enumerate() {
        let a = if j == 0 { t0 } else { times[j].max(t0) };
        let b = if j + 1 < times.len() {
            times[j + 1].min(t1)
        } else {
            t1
        };
        if b > a {
            exact += v * (b - a);
        }
        if j > 0 && times[j] > t0 && times[j] < t1 {
            let jump = (v - values[j - 1]).abs();
            let k = res
                .series_time
                .iter()
                .position(|t| (t - model.time.year(times[j])).abs() <= 1e-9)
                .ok_or_else(|| Error::Internal("no record at a deposition jump".into()))?;
            bound += jump * sol.dt[k];
        }
    }
    let deposited = sol.surface_cumulative[last];
    let dep_gap = (deposited - exact).abs();
    let mut fig = Figure::new(
        "Solute balance: cumulative error relative to the run's flows",
        "time [yr]",
        "|error| / end throughput",
    );
    fig.log_y = true;
    let step = (res.series_time.len() / 200).max(1);
    fig.series.push(Series::points(
        "deepdry",
        res.series_time
            .iter()
            .zip(&err)
            .map(|(t, e)| (*t, e.abs() / scale_end))
            .filter(|p| p.1 > 0.0)
            .step_by(step)
            .collect(),
    ));
    fig.series.push(Series::line(
        "bound 1e-12",
        vec![(model.time.year(t0), 1e-12), (model.time.year(t1), 1e-12)],
    ));
    let mut prof_fig = Figure::profile("Salt near the surface", "g m⁻³");
    let k_end = res.times.len() - 1;
    let near = |v: &[f64]| -> Vec<(f64, f64)> {
        prof(v, &res.depth)
            .into_iter()
            .filter(|p| p.1 <= 0.3)
            .collect()
    };
    prof_fig.series.push(Series::points(
        "concentration in the liquid, end",
        near(&sol.concentration[k_end]),
    ));
    if let Some(p) = sol.precipitate.get(k_end) {
        prof_fig.series.push(Series::points(
            "precipitate (per bulk volume), end",
            near(p),
        ));
    }
    prof_fig
        .series
        .push(Series::line("solubility", vec![(cs, 0.0), (cs, 0.3)]));
    Ok(CaseResult {
        checks: vec![
            Check::new(
                "cumulative balance at the end: |ΔM − (in − out)| / max(|ΔM|, |in| + |out|)",
                "conservation (design note §6)",
                end_rel,
                1e-12,
            ),
            Check::new(
                "every record: max |ΔM − (in − out)| / end throughput",
                "conservation (design note §6)",
                all_rel,
                1e-12,
            ),
            Check::new(
                "largest concentration in the liquid: |max c / cs − 1| (limit reached, never exceeded)",
                "solubility limit (design note §5)",
                (c_max / cs - 1.0).abs(),
                1e-12,
            ),
            Check::new(
                "deposited: |surface cumulative − ∫Fd dt| / ∫Fd dt",
                "exact integral of the stepped schedule",
                dep_gap / exact,
                1e-9,
            ),
        ],
        figures: vec![fig, prof_fig],
        notes: vec![
            format!(
                "{} cells; steps {} (rejected {}); stored {m0:.4} → {:.4} g m-2, in at the surface {:.4}, out at the bottom {:.4} g m-2; precipitated at the end {:.4} g m-2",
                res.depth.len(),
                summary.counters.steps,
                summary.counters.rejected,
                sol.storage[last],
                sol.surface_cumulative[last],
                sol.bottom_cumulative[last],
                precipitated.last().cloned().unwrap_or(0.0)
            ),
            format!(
                "end error {:.3e} g m-2; the run's relative series peaks at {rel_worst:.2e} at {:.3e} yr (first records, tiny throughput)",
                err[last],
                res.series_time[k_worst]
            ),
            format!(
                "deposition: ∫Fd dt = {exact:.6} g m-2, surface cumulative {deposited:.6} g m-2 (gap {dep_gap:.3e}, bound {bound:.3e})"
            ),
        ],
    })
}
