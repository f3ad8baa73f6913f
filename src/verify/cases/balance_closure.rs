//! Water and energy balance closure over a 100 kyr climate-shift run.

use super::*;

const FILES: Files = files!("balance-closure", "climate-shift-rh.csv");

pub(super) fn balance_closure(v: Variant) -> Result<CaseResult> {
    let (model, scratch) =
        load_variant(&FILES, v, &[("mesh.cells", "150"), ("mesh.growth", "1.15")])?;
    let (summary, res) = simulate(&model, &scratch)?;
    // The run's own relative errors at every record: |storage change − net inflow| over
    // max(|storage change|, cumulative |boundary fluxes|).
    let w_rec = max_abs(res.series_water_rel.iter().cloned());
    let e_rec = max_abs(res.series_energy_rel.iter().cloned());
    let argmax = |v: &[f64]| {
        let k = (0..v.len())
            .max_by(|a, b| v[*a].abs().total_cmp(&v[*b].abs()))
            .unwrap_or(0);
        res.series_time[k]
    };
    // The whole run's throughput, from the final absolute and relative errors.
    let throughput = |k: usize| {
        if summary.balance_rel[k] > 0.0 {
            summary.balance_abs[k].abs() / summary.balance_rel[k]
        } else {
            f64::NAN
        }
    };
    let w_all = max_abs(res.series_water_err.iter().cloned()) / throughput(1);
    let e_all = max_abs(res.series_energy_err.iter().cloned()) / throughput(0);
    let mut fig = Figure::new(
        "Cumulative balance error (relative)",
        "time [yr]",
        "relative error",
    );
    fig.log_y = true;
    // Records with an error of exactly 0 have no place on the log axis and are left out.
    let floor = |x: f64| x.abs();
    fig.series.push(Series::points(
        "water",
        res.series_time
            .iter()
            .zip(&res.series_water_rel)
            .map(|(t, x)| (*t, floor(*x)))
            .step_by((res.series_time.len() / 100).max(1))
            .collect(),
    ));
    fig.series.push(Series::points(
        "energy",
        res.series_time
            .iter()
            .zip(&res.series_energy_rel)
            .map(|(t, x)| (*t, floor(*x)))
            .step_by((res.series_time.len() / 100).max(1))
            .collect(),
    ));
    fig.series.push(Series::line(
        "bound 1e-8",
        vec![
            (model.time.year(model.time.start), 1e-8),
            (model.time.year(model.time.end), 1e-8),
        ],
    ));
    Ok(CaseResult {
        checks: vec![
            Check::new(
                "water: cumulative relative error at the end",
                "conservation (design note §7)",
                summary.balance_rel[1],
                1e-8,
            ),
            Check::new(
                "energy: cumulative relative error at the end",
                "conservation (design note §7)",
                summary.balance_rel[0],
                1e-8,
            ),
            Check::new(
                "water: max |cumulative error| / run throughput",
                "conservation (design note §7)",
                w_all,
                1e-8,
            ),
            Check::new(
                "energy: max |cumulative error| / run throughput",
                "conservation (design note §7)",
                e_all,
                1e-8,
            ),
        ],
        figures: vec![fig],
        notes: vec![
            format!(
                "{} cells, {:.0} yr; steps {} (rejected {}); final water error {:.3e} kg m-2, energy {:.3e} J m-2",
                res.depth.len(),
                (model.time.end - model.time.start) / SECONDS_PER_YEAR,
                summary.counters.steps,
                summary.counters.rejected,
                summary.balance_abs[1],
                summary.balance_abs[0]
            ),
            format!(
                "largest per-record relative error: water {w_rec:.2e} at {:.6e} yr, energy {e_rec:.2e} at {:.6e} yr (the first steps after the start, where the cumulative throughput is still tiny; see README)",
                argmax(&res.series_water_rel),
                argmax(&res.series_energy_rel)
            ),
        ],
    })
}
