//! A closed-bottom column dries into dry air: the solute it holds stays constant (vapour
//! carries none, nothing enters) while the water leaves, and the near-surface liquid is
//! enriched.

use super::*;

const FILES: Files = files!("solute-closed-drying", "initial.csv");

pub(super) fn solute_closed_drying(v: Variant) -> Result<CaseResult> {
    let (model, scratch) = load_variant(
        &FILES,
        v,
        &[
            ("mesh.cells", "50"),
            ("mesh.growth", "1.1"),
            ("time.end_year", "1.0"),
            ("output.times_year", "[0.1, 0.5, 1.0]"),
        ],
    )?;
    let s = only_solute(&model)?;
    let (_, res) = simulate(&model, &scratch)?;
    let sol = read_solute_results(&scratch.dir.join("out/results.h5"), &s.name)?;
    let m0 = sol.storage[0];
    // The stored solute at every series record against the start.
    let storage_err = max_abs(sol.storage.iter().map(|m| m / m0 - 1.0));
    // The balance error series (storage change minus net inflow) against what is stored:
    // the run's relative series divides by the storage change or the throughput, both
    // zero here but for round-off (README).
    let balance_err = max_abs(sol.balance_error.iter().map(|e| e / m0));
    let inflow = max_abs(
        sol.surface_cumulative
            .iter()
            .chain(&sol.bottom_cumulative)
            .cloned(),
    );
    // The dissolved mass from the written profiles: Σ w θ c at every snapshot.
    let w = widths_of(&res.face_depth);
    let profile_err = max_abs(res.times.iter().enumerate().map(|(k, _)| {
        let m: f64 = w
            .iter()
            .zip(&res.theta[k])
            .zip(&sol.concentration[k])
            .map(|((w, th), c)| w * th * c)
            .sum();
        m / m0 - 1.0
    }));
    let w0 = res.series_storage[0];
    let w_end = *res.series_storage.last().unwrap_or(&w0);
    let lost = (w0 - w_end) / w0;
    let c0 = sol.concentration[0][0];
    let peak_end = sol
        .concentration
        .last()
        .map(|c| c.iter().cloned().fold(f64::NEG_INFINITY, f64::max))
        .unwrap_or(f64::NAN);
    let mut fig = Figure::profile(
        "Closed column drying: chloride in the liquid",
        "chloride [g m⁻³]",
    );
    let zmax = 0.5;
    for (k, t) in res.times.iter().enumerate() {
        fig.series.push(Series::points(
            format!("deepdry, {t} yr"),
            prof(&sol.concentration[k], &res.depth)
                .into_iter()
                .filter(|p| p.1 <= zmax)
                .collect(),
        ));
    }
    let mut series = Figure::new(
        "Closed column drying: stored water and chloride (relative to the start)",
        "time [yr]",
        "relative to the start",
    );
    let step = (res.series_time.len() / 100).max(1);
    series.series.push(Series::points(
        "water",
        res.series_time
            .iter()
            .zip(&res.series_storage)
            .map(|(t, m)| (*t, m / w0))
            .step_by(step)
            .collect(),
    ));
    series.series.push(Series::points(
        "chloride",
        res.series_time
            .iter()
            .zip(&sol.storage)
            .map(|(t, m)| (*t, m / m0))
            .step_by(step)
            .collect(),
    ));
    series.series.push(Series::line(
        "chloride constant (no inflow, no outflow)",
        vec![(0.0, 1.0), (model.time.year(model.time.end), 1.0)],
    ));
    Ok(CaseResult {
        checks: vec![
            Check::new(
                "stored chloride, every record: max |M/M0 − 1|",
                "conservation: vapour carries no solute, none enters (design note §1, §6)",
                storage_err,
                1e-12,
            ),
            Check::new(
                "balance error series: max |error|/M0",
                "conservation (design note §6)",
                balance_err,
                1e-12,
            ),
            Check::new(
                "Σ w θ c from the written profiles, every snapshot: max |M/M0 − 1|",
                "conservation (design note §6)",
                profile_err,
                1e-12,
            ),
            Check::new(
                "cumulative surface and bottom solute flows [g m-2]",
                "closed column: no inflow, no outflow",
                inflow,
                0.0,
            ),
            Check::new(
                "5 % / fraction of the water lost (the check needs water to leave)",
                "case design (README)",
                0.05 / lost,
                1.0,
            ),
        ],
        figures: vec![fig, series],
        notes: vec![
            format!(
                "{} cells; water {w0:.3} → {w_end:.3} kg m-2 ({:.1} % lost); chloride {m0:.6} g m-2",
                res.depth.len(),
                100.0 * lost
            ),
            format!(
                "concentration in the liquid: {c0:.1} g m-3 at the start, largest {peak_end:.1} g m-3 at the end; largest relative balance series {:.2e} (undefined here: see README)",
                max_abs(sol.balance_relative_error.iter().cloned())
            ),
        ],
    })
}
