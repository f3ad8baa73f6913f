//! Observed order of accuracy in space (mesh refinement): 2, on the gardner-evaporation
//! case file with a moist surface and uniform cells.

use super::gardner_evaporation::{gardner_run, GardnerRun};
use super::*;

pub(super) fn mesh_order(v: Variant) -> Result<CaseResult> {
    let levels: Vec<usize> = match v {
        Variant::Full => vec![25, 50, 100, 200, 400],
        Variant::Fast => vec![20, 40, 80, 160],
    };
    let (mut eh, mut ee) = (Vec::new(), Vec::new());
    for &n in &levels {
        // The smooth problem: a moist surface (h0 = −2 m), uniform cells.
        let overrides = [
            Override::remove("mesh.max_cell_m")?,
            Override::set("mesh.cells", &n.to_string())?,
            Override::set("mesh.growth", "1.0")?,
            Override::remove("mesh.surface_cell_m")?,
            Override::set("surface.head_m", "-2.0")?,
        ];
        let GardnerRun {
            e_model, h_err, p, ..
        } = gardner_run(&overrides)?;
        let e_exact = r::gardner_rate(p.ks, p.alpha, p.depth, p.h0);
        eh.push(h_err);
        ee.push(((e_model - e_exact) / e_exact).abs());
    }
    let oh = r::observed_orders(&eh, 2.0);
    let oe = r::observed_orders(&ee, 2.0);
    let worst = |o: &[f64]| o.iter().map(|p| (p - 2.0).abs()).fold(0.0, f64::max);
    let mut fig = Figure::new(
        "Mesh refinement (Gardner, h0 = −2 m)",
        "cell size [m]",
        "error",
    );
    fig.log_x = true;
    fig.log_y = true;
    let dz: Vec<f64> = levels.iter().map(|n| 5.0 / *n as f64).collect();
    fig.series
        .push(Series::points("max |Δh| [m]", zip_pts(&dz, &eh)));
    fig.series.push(Series::points("|ΔE|/E", zip_pts(&dz, &ee)));
    fig.series.push(Series::line(
        "slope 2",
        dz.iter()
            .map(|d| (*d, eh[0] * (d / dz[0]).powi(2)))
            .collect(),
    ));
    let fmt = |v: &[f64]| {
        v.iter()
            .map(|x| format!("{x:.3}"))
            .collect::<Vec<_>>()
            .join(", ")
    };
    Ok(CaseResult {
        checks: vec![
            Check::new(
                "head: |observed order − 2|",
                "second-order finite volumes (common practice)",
                worst(&oh),
                0.2,
            ),
            Check::new(
                "evaporation rate: |observed order − 2|",
                "second-order finite volumes (common practice)",
                worst(&oe),
                0.2,
            ),
        ],
        figures: vec![fig],
        notes: vec![
            format!("cells {:?}", levels),
            format!(
                "head errors {:?} → orders {}",
                eh.iter().map(|e| format!("{e:.3e}")).collect::<Vec<_>>(),
                fmt(&oh)
            ),
            format!(
                "rate errors {:?} → orders {}",
                ee.iter().map(|e| format!("{e:.3e}")).collect::<Vec<_>>(),
                fmt(&oe)
            ),
        ],
    })
}
