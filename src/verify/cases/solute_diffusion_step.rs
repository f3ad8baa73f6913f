//! Solute diffusion from a fixed bottom concentration into a solute-free saturated column
//! at rest: the erfc solution with its images (Crank 1975), the error against the
//! truncation-error estimate of the three-point scheme, and second-order convergence in
//! space.

use super::*;
use crate::model::SoluteBottom;

const FILES: Files = files!("solute-diffusion-step");

const CHECK_TIMES: [f64; 3] = [2.0, 5.0, 10.0];

struct DiffRun {
    /// Largest |c − c_ref|/cb over the check times.
    err: f64,
    /// The a-priori estimate of that error (README): (Δz²/(12 D t)) max_s |s(3/2 − s²) e^(−s²)|/√π.
    estimate: f64,
    depth: Vec<f64>,
    /// c/cb at each check time.
    profiles: Vec<Vec<f64>>,
    d: f64,
    length: f64,
    theta_dev: f64,
}

fn diffusion_run(cells: usize) -> Result<DiffRun> {
    let (model, scratch) = load(&FILES, &sets(&[("mesh.cells", &cells.to_string())])?)?;
    let s = only_solute(&model)?;
    let cb = match s.bottom {
        SoluteBottom::Concentration(c) => c,
        SoluteBottom::ZeroGradient => {
            return Err(Error::Internal(
                "the case needs a bottom concentration".into(),
            ))
        }
    };
    let phi = model.soils[0].retention.theta_s();
    // θ = θs everywhere: Dm = D0(T) θs^(7/3)/φ².
    let d = r::liquid_diffusion_coefficient(
        r::free_diffusivity_at(s.free_diffusivity, start_surface_temperature(&model)?),
        phi,
        phi,
    );
    let length = model.mesh.depth();
    let (_, res) = simulate(&model, &scratch)?;
    let sol = read_solute_results(&scratch.dir.join("out/results.h5"), &s.name)?;
    let dz = length / cells as f64;
    // max over s ≥ 0 of |s (3/2 − s²) e^(−s²)|, on a fine grid.
    let shape = (0..=4000)
        .map(|k| {
            let s = k as f64 * 1e-3;
            (s * (1.5 - s * s) * (-s * s).exp()).abs()
        })
        .fold(0.0, f64::max)
        / std::f64::consts::PI.sqrt();
    let (mut err, mut estimate): (f64, f64) = (0.0, 0.0);
    let mut profiles = Vec::new();
    let mut theta_dev: f64 = 0.0;
    for ty in CHECK_TIMES {
        let k = res.at(ty);
        let t = r::years(ty);
        let c: Vec<f64> = sol.concentration[k].iter().map(|c| c / cb).collect();
        err =
            err.max(max_abs(res.depth.iter().zip(&c).map(|(z, c)| {
                c - r::diffusion_from_face(length - z, t, d, length)
            })));
        estimate = estimate.max(dz * dz / (12.0 * d * t) * shape);
        theta_dev = theta_dev.max(max_abs(res.theta[k].iter().map(|th| th - phi)));
        profiles.push(c);
    }
    Ok(DiffRun {
        err,
        estimate,
        depth: res.depth.clone(),
        profiles,
        d,
        length,
        theta_dev,
    })
}

pub(super) fn solute_diffusion_step(v: Variant) -> Result<CaseResult> {
    let levels: Vec<usize> = match v {
        Variant::Full => vec![25, 50, 100, 200],
        Variant::Fast => vec![25, 50, 100],
    };
    let runs = levels
        .iter()
        .map(|n| diffusion_run(*n))
        .collect::<Result<Vec<_>>>()?;
    let errors: Vec<f64> = runs.iter().map(|r| r.err).collect();
    let orders = r::observed_orders(&errors, 2.0);
    let worst_order = orders.iter().map(|o| (o - 2.0).abs()).fold(0.0, f64::max);
    let finest = runs
        .last()
        .ok_or_else(|| Error::Internal("no runs".into()))?;
    let (d, length) = (finest.d, finest.length);
    let mut fig = Figure::profile("Diffusion from the bottom face", "c/cb");
    for (j, ty) in CHECK_TIMES.iter().enumerate() {
        let t = r::years(*ty);
        fig.series.push(Series::line(
            format!("erfc with images (Crank 1975), {ty} yr"),
            line_of(
                |z| r::diffusion_from_face(length - z, t, d, length),
                0.0,
                length,
                300,
            ),
        ));
        fig.series.push(Series::points(
            format!("deepdry, {} cells, {ty} yr", levels[0]),
            prof(&runs[0].profiles[j], &runs[0].depth),
        ));
    }
    let dz: Vec<f64> = levels.iter().map(|n| length / *n as f64).collect();
    let mut conv = Figure::new(
        "Mesh refinement (diffusion)",
        "cell size [m]",
        "max |Δc|/cb",
    );
    conv.log_x = true;
    conv.log_y = true;
    conv.series
        .push(Series::points("deepdry", zip_pts(&dz, &errors)));
    conv.series.push(Series::line(
        "estimate Δz²/(12 D t)·0.275",
        zip_pts(&dz, &runs.iter().map(|r| r.estimate).collect::<Vec<_>>()),
    ));
    Ok(CaseResult {
        checks: vec![
            Check::new(
                format!(
                    "c/cb at 2, 5, 10 yr, {} cells: max error / truncation estimate",
                    levels[levels.len() - 1]
                ),
                "erfc solution with images, Crank 1975 §3.3; three-point truncation error",
                finest.err / finest.estimate,
                2.5,
            ),
            Check::new(
                format!("|observed order in Δz − 2| ({} meshes)", levels.len()),
                "second-order finite volumes (common practice)",
                worst_order,
                0.2,
            ),
        ],
        figures: vec![fig, conv],
        notes: vec![
            format!(
                "D = Dm = {d:.6e} m2 s-1 (θ = θs; largest |θ − θs| {:.1e}); √(D·10 yr) = {:.3} m",
                finest.theta_dev,
                (d * r::years(10.0)).sqrt()
            ),
            format!(
                "cells {:?}: errors {} (estimates {}) → orders {}",
                levels,
                fmt_list(&errors),
                fmt_list(&runs.iter().map(|r| r.estimate).collect::<Vec<_>>()),
                orders
                    .iter()
                    .map(|o| format!("{o:.3}"))
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
        ],
    })
}
