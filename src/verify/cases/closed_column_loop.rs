//! Closed column under a geothermal gradient: liquid flux = -vapour flux.

use super::*;

const FILES: Files = files!("closed-column-loop", "initial.csv");

pub(super) fn closed_column_loop(v: Variant) -> Result<CaseResult> {
    let (model, _scratch) =
        load_variant(&FILES, v, &[("mesh.cells", "40"), ("mesh.growth", "1.3")])?;
    // The closed column's steady state holds the water of its initial (uniform head)
    // profile: pseudo-transient continuation from it (backward-Euler steps conserve mass).
    let guess = run::initial_unknowns(&model, SolverKind::BlockThomas)?;
    let u = run::steady_state(&model, guess, SolverKind::BlockThomas)?;
    let mut sys = System::new(&model);
    sys.evaluate(model.time.start, &u);
    let n = sys.n;
    let mut worst: f64 = 0.0;
    let (mut liq, mut vap) = (Vec::new(), Vec::new());
    for j in 1..n {
        let f = &sys.faces[j];
        let ql = f.liquid().v * WATER_DENSITY;
        let jv = f.vapor().v;
        worst = worst.max((ql + jv).abs() / jv.abs());
        liq.push((-ql * SECONDS_PER_YEAR, sys.faces_z[j]));
        vap.push((jv * SECONDS_PER_YEAR, sys.faces_z[j]));
    }
    let fig = Figure::profile("Closed column: vapour up, liquid down", "flux [mm/yr]")
        .with(Series::line("vapour flux jv", vap))
        .with(Series::points("−liquid flux −ρw ql", liq));
    Ok(CaseResult {
        checks: vec![Check::new(
            "max over faces |ρw ql + jv|/|jv|",
            "water balance (design note §2, eq. 1)",
            worst,
            1e-6,
        )],
        figures: vec![fig],
        notes: vec![format!("{n} cells")],
    })
}
