//! Isothermal vapour diffusion through a dry layer (Fick).

use super::*;

const FILES: Files = files!("fick-vapour-diffusion");

pub(super) fn fick_vapour_diffusion(v: Variant) -> Result<CaseResult> {
    let (model, _scratch) = load_variant(&FILES, v, &[("mesh.cells", "10")])?;
    let (sys, _) = steady_system(&model)?;
    // Case values: 20 °C throughout, RH 0.2 at the surface, h = −1e4 m at the bottom.
    let t = kelvin_of(20.0);
    let rvs = saturated_vapor_density(t).0;
    let rv_top = 0.2 * rvs;
    let rv_bot = relative_humidity(-1.0e4, t).0 * rvs;
    let l = model.mesh.depth();
    let dv = dry_diffusivity(&model, t);
    let j = r::fick_flux(dv, rv_top, rv_bot, l);
    let lin = |z: f64| rv_top + (rv_bot - rv_top) * z / l;
    let rv: Vec<f64> = sys.cells.iter().map(|c| c.rv.v).collect();
    let rv_err = max_abs(
        sys.centers
            .iter()
            .zip(&rv)
            .map(|(z, x)| (x - lin(*z)) / (rv_bot - rv_top)),
    );
    let jv: Vec<f64> = sys.faces.iter().map(|f| f.vapor().v).collect();
    let j_err = max_abs(jv.iter().map(|x| (x - j) / j));
    let ql = max_abs(sys.faces.iter().map(|f| f.liquid().v * WATER_DENSITY / j));
    let fig = Figure::profile(
        "Vapour diffusion through a dry layer",
        "vapour density [kg m-3]",
    )
    .with(Series::line(
        "Fick: linear",
        vec![(rv_top, 0.0), (rv_bot, l)],
    ))
    .with(Series::points("deepdry", prof(&rv, &sys.centers)));
    let fig_j = Figure::profile("Vapour flux (positive downward)", "flux [mm/yr]")
        .with(Series::line(
            "−Dv Δrv/L",
            vec![(j * SECONDS_PER_YEAR, 0.0), (j * SECONDS_PER_YEAR, l)],
        ))
        .with(Series::points(
            "deepdry",
            jv.iter()
                .map(|x| x * SECONDS_PER_YEAR)
                .zip(sys.faces_z.iter().cloned())
                .collect(),
        ));
    Ok(CaseResult {
        checks: vec![
            Check::new(
                "vapour density, max |Δrv|/(rv_b − rv_t)",
                "Fick's first law (Fick 1855)",
                rv_err,
                1e-6,
            ),
            Check::new(
                "vapour flux −Dv Δrv/L, relative",
                "Fick 1855; Millington & Quirk 1961",
                j_err,
                1e-6,
            ),
            Check::new(
                "liquid flux / vapour flux",
                "immobile liquid (K = 0 when dry)",
                ql,
                1e-6,
            ),
        ],
        figures: vec![fig, fig_j],
        notes: vec![format!(
            "{} cells; Dv = {dv:.4e} m² s⁻¹; flux {:.4e} mm/yr",
            sys.n,
            j * SECONDS_PER_YEAR
        )],
    })
}
