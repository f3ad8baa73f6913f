//! Root water uptake: the steady flux profile under a fixed root distribution (exact,
//! mass conservation), unstressed uptake equal to the potential, the four-head stress
//! reduction of Feddes et al. (1978), and the water balance with the sink.

use super::*;
use crate::model::SurfaceWater;

const FILES: Files = files!("root-uptake");

pub(super) fn root_uptake(v: Variant) -> Result<CaseResult> {
    let (model, scratch) = load_variant(&FILES, v, &[("mesh.cells", "40")])?;
    let t0 = model.time.start;
    let veg = model
        .vegetation
        .at(t0)
        .clone()
        .ok_or_else(|| Error::Internal("root-uptake needs plants at the start".into()))?;
    let q0 = match &model.surface.at(t0).water {
        SurfaceWater::Flux { flux, .. } => flux.value(t0),
        _ => return Err(Error::Internal("root-uptake needs a surface flux".into())),
    };
    let tp = veg.transpiration.value(t0);
    // 1. Steady flux profile of the initial state.
    let (sys, _) = steady_system(&model)?;
    let mut above = 0.0;
    let mut flux_err: f64 = 0.0;
    let mut model_pts = Vec::new();
    let mut ref_pts = Vec::new();
    for (j, tot) in sys.face_totals.iter().enumerate() {
        if j > 0 {
            above += veg.root_fraction[j - 1];
        }
        let q = tot[crate::physics::WATER].v / WATER_DENSITY;
        let expected = q0 - tp * above;
        flux_err = flux_err.max((q - expected).abs() / q0);
        let z = sys.faces_z[j];
        model_pts.push((q * 1e3 * SECONDS_PER_YEAR, z));
        ref_pts.push((expected * 1e3 * SECONDS_PER_YEAR, z));
    }
    // 2. Unstressed uptake against the potential, from the run.
    let (summary, res) = simulate(&model, &scratch)?;
    let path = scratch.dir.join("out/results.h5");
    let r = H5Reader::open(&path)?;
    let d1 = |n: &str| r.d1(n);
    let uptake = d1("series/root_water_uptake")?;
    let potential = d1("series/potential_transpiration")?;
    let uptake_cum = d1("series/root_water_uptake_cumulative")?;
    let potential_cum = d1("series/potential_transpiration_cumulative")?;
    // From the first step on (the first record is the start, before any step).
    let rate_err = max_abs(
        uptake
            .iter()
            .zip(&potential)
            .skip(1)
            .map(|(u, p)| u / p - 1.0),
    );
    let last = uptake_cum.len() - 1;
    let exact_cum = WATER_DENSITY * tp * (model.time.end - t0);
    let cum_err = ((uptake_cum[last] - exact_cum) / exact_cum)
        .abs()
        .max(((potential_cum[last] - exact_cum) / exact_cum).abs());
    // 3. The four-head shape.
    let [h1, h2, h3, h4] = veg.stress_heads;
    let shape = [
        (h1 + 1.0, 0.0),
        (h1, 0.0),
        (0.5 * (h1 + h2), 0.5),
        (h2, 1.0),
        (h3, 1.0),
        (0.5 * (h3 + h4), 0.5),
        (h4, 0.0),
        (h4 - 1.0, 0.0),
    ];
    let shape_err = max_abs(shape.iter().map(|(h, a)| veg.stress(*h).0 - a));
    // 4. Balance.
    let balance = summary.balance_rel[1];
    let mut fig = Figure::profile(
        "Steady water flux with root uptake: q(z) = q0 − Tp F(z)",
        "water flux [mm/yr], + downward",
    );
    fig.series
        .push(Series::line("q0 − Tp F(z) (exact)", ref_pts));
    fig.series.push(Series::points("deepdry", model_pts));
    Ok(CaseResult {
        checks: vec![
            Check::new(
                "steady flux through every face: max |q − (q0 − Tp F(z))| / q0",
                "mass conservation (derived, README)",
                flux_err,
                1e-8,
            ),
            Check::new(
                "unstressed uptake against the potential, every record: max |U/Tp − 1|",
                "Σ β_i Tp = Tp (exact)",
                rate_err,
                1e-14,
            ),
            Check::new(
                "cumulative uptake and potential against Tp·(t1 − t0): max relative error",
                "exact integral of a constant",
                cum_err,
                1e-12,
            ),
            Check::new(
                "stress reduction at the four heads and half-way: max |α − α_def|",
                "Feddes et al. 1978",
                shape_err,
                0.0,
            ),
            Check::new(
                "water balance with the sink: relative error at the end",
                "conservation",
                balance,
                1e-10,
            ),
        ],
        figures: vec![fig],
        notes: vec![format!(
            "{} cells; q0 = {:.1} mm/yr, Tp = {:.1} mm/yr; {} records; uptake at the end {:.6} kg m-2 (exact {exact_cum:.6})",
            res.depth.len(),
            q0 * 1e3 * SECONDS_PER_YEAR,
            tp * 1e3 * SECONDS_PER_YEAR,
            uptake.len(),
            uptake_cum[last]
        )],
    })
}
