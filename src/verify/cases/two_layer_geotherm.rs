//! Steady geotherm through two layers: piecewise-linear T, continuous heat flux.

use super::*;

const FILES: Files = files!("two-layer-geotherm");

pub(super) fn two_layer_geotherm(v: Variant) -> Result<CaseResult> {
    let (model, _scratch) = load_variant(
        &FILES,
        v,
        &[
            ("mesh.cells", "40"),
            ("mesh.growth", "1.3"),
            ("mesh.surface_cell_m", "0.5"),
            ("mesh.interface_cell_m", "0.5"),
        ],
    )?;
    let (sys, _) = steady_system(&model)?;
    // Case values (validation/two-layer-geotherm/case.toml).
    let (ts, q, z1, l1, l2) = (15.0, 0.065, 40.0, 0.6, 2.4);
    let exact = |z: f64| {
        if z <= z1 {
            ts + q * z / l1
        } else {
            ts + q * z1 / l1 + q * (z - z1) / l2
        }
    };
    let t_model: Vec<f64> = sys.cells.iter().map(|c| c.t.v - CELSIUS_ZERO).collect();
    let t_err = max_abs(sys.centers.iter().zip(&t_model).map(|(z, t)| t - exact(*z)));
    let flux: Vec<f64> = sys.faces.iter().map(|f| f.energy().v).collect();
    // Geothermal flux q enters from below: the downward heat flux is −q at every face.
    let f_err = max_abs(flux.iter().map(|f| (f + q) / q));
    let depth = sys.faces_z[sys.n];
    let fig_t = Figure::profile("Two-layer steady geotherm", "temperature [°C]")
        .with(Series::line(
            "Fourier, piecewise linear",
            line_of(exact, 0.0, depth, 200),
        ))
        .with(Series::points("deepdry", prof(&t_model, &sys.centers)));
    let fig_q = Figure::profile("Heat flux (positive downward)", "heat flux [W m-2]")
        .with(Series::line(
            "−q (continuous)",
            vec![(-q, 0.0), (-q, depth)],
        ))
        .with(Series::points("deepdry", prof(&flux, &sys.faces_z)));
    Ok(CaseResult {
        checks: vec![
            Check::new(
                "temperature, max |T − T_exact| [K]",
                "Fourier's law, two-layer steady solution",
                t_err,
                1e-6,
            ),
            Check::new(
                "heat flux, max |je + q|/q",
                "Fourier's law: continuous flux q",
                f_err,
                1e-6,
            ),
        ],
        figures: vec![fig_t, fig_q],
        notes: vec![format!("{} cells", sys.n)],
    })
}
