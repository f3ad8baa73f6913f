//! Advection–dispersion under uniform steady flow from a flux (third-type) inlet: the
//! profile against the semi-infinite solution (Lindstrom et al. 1967; van Genuchten &
//! Alves 1982), the error against the modified-equation estimate of upwinding, and
//! first-order convergence in Δz. The first-type solution of Ogata & Banks (1961) is
//! shown beside it (README: why it is not the reference here).

use super::*;
use crate::model::{SoluteSurface, SurfaceWater};
use crate::props::retention::RetentionLaw;

const FILES: Files = files!("solute-advection-dispersion");

/// The analytic problem of the case: pore velocity v [m s⁻¹], dispersion D [m² s⁻¹],
/// inflow concentration c0 [g m⁻³], uniform θ.
struct Params {
    v: f64,
    d: f64,
    c0: f64,
    theta: f64,
    /// The molecular part Dm of D [m² s⁻¹].
    dm: f64,
}

/// θ under unit gradient (K(h) = q) of the case's exponential soil, the pore velocity and
/// the dispersion coefficient D = Dm + αL v, from the case's parameters alone.
fn params(model: &Model) -> Result<Params> {
    let t0 = model.time.start;
    let soil = &model.soils[0];
    let q = match &model.surface.at(t0).water {
        SurfaceWater::Flux { flux, .. } => flux.value(t0),
        _ => return Err(Error::Internal("the case needs a surface flux".into())),
    };
    let theta = match soil.retention.law {
        // Kr = Se = e^(αh): K = q at Se = q/Ks.
        RetentionLaw::Exponential {
            theta_r, theta_s, ..
        } => theta_r + (theta_s - theta_r) * q / soil.saturated_conductivity,
        _ => return Err(Error::Internal("the case needs an exponential soil".into())),
    };
    let s = only_solute(model)?;
    let c0 = match &s.surface {
        SoluteSurface::Inflow(c) => c.value(t0),
        SoluteSurface::Deposition(_) => {
            return Err(Error::Internal(
                "the case needs an inflow concentration".into(),
            ))
        }
    };
    // Isothermal: the bottom and the surface at the same temperature (README).
    let temperature = start_surface_temperature(model)?;
    let d0 = r::free_diffusivity_at(s.free_diffusivity, temperature);
    let dm = r::liquid_diffusion_coefficient(d0, theta, soil.retention.theta_s());
    let v = q / theta;
    Ok(Params {
        v,
        d: dm + s.dispersivity * v,
        c0,
        theta,
        dm,
    })
}

/// One run on `cells` uniform cells: the largest |c − c_ref|/c0 over the check times, the
/// modified-equation estimate of that error, the profiles at the last time, and the
/// largest departure of the computed θ from the analytic one.
struct AdRun {
    err: f64,
    estimate: f64,
    depth: Vec<f64>,
    last: Vec<f64>,
    theta_dev: f64,
}

const CHECK_TIMES: [f64; 2] = [0.25, 0.5];

fn ad_run(cells: usize) -> Result<(AdRun, Params)> {
    let (model, scratch) = load(&FILES, &sets(&[("mesh.cells", &cells.to_string())])?)?;
    let p = params(&model)?;
    let (_, res) = simulate(&model, &scratch)?;
    let sol = read_solute_results(
        &scratch.dir.join("out/results.h5"),
        &only_solute(&model)?.name,
    )?;
    let dz = model.mesh.depth() / cells as f64;
    // Upwinding adds v Δz/2 to D (modified equation of the first-order upwind flux,
    // common practice); its effect on the profile is the estimate of the error.
    let d_num = p.d + 0.5 * p.v * dz;
    let (mut err, mut estimate): (f64, f64) = (0.0, 0.0);
    let mut theta_dev: f64 = 0.0;
    for ty in CHECK_TIMES {
        let k = res.at(ty);
        let t = r::years(ty);
        for (i, z) in res.depth.iter().enumerate() {
            let exact = r::flux_inlet_concentration(*z, t, p.v, p.d);
            err = err.max((sol.concentration[k][i] / p.c0 - exact).abs());
            estimate = estimate.max((r::flux_inlet_concentration(*z, t, p.v, d_num) - exact).abs());
        }
        theta_dev = theta_dev.max(max_abs(res.theta[k].iter().map(|th| th - p.theta)));
    }
    let k = res.at(*CHECK_TIMES.last().unwrap_or(&0.5));
    Ok((
        AdRun {
            err,
            estimate,
            depth: res.depth.clone(),
            last: sol.concentration[k].iter().map(|c| c / p.c0).collect(),
            theta_dev,
        },
        p,
    ))
}

pub(super) fn solute_advection_dispersion(v: Variant) -> Result<CaseResult> {
    let levels: Vec<usize> = match v {
        Variant::Full => vec![250, 500, 1000],
        Variant::Fast => vec![125, 250, 500],
    };
    let mut runs = Vec::new();
    let mut par = None;
    for &n in &levels {
        let (run, p) = ad_run(n)?;
        runs.push(run);
        par = Some(p);
    }
    let p = par.ok_or_else(|| Error::Internal("no mesh levels".into()))?;
    let errors: Vec<f64> = runs.iter().map(|r| r.err).collect();
    let orders = r::observed_orders(&errors, 2.0);
    let worst_order = orders.iter().map(|o| (o - 1.0).abs()).fold(0.0, f64::max);
    let finest = runs
        .last()
        .ok_or_else(|| Error::Internal("no runs".into()))?;
    let t_last = r::years(CHECK_TIMES[CHECK_TIMES.len() - 1]);
    // How far the first-type (Ogata–Banks) profile is from the flux-inlet one here.
    let ob_gap = max_abs(finest.depth.iter().map(|z| {
        r::ogata_banks(*z, t_last, p.v, p.d) - r::flux_inlet_concentration(*z, t_last, p.v, p.d)
    }));
    let mut fig = Figure::profile("Advection–dispersion from a flux inlet, 0.5 yr", "c/c0");
    fig.series.push(Series::line(
        "flux inlet (Lindstrom et al. 1967)",
        line_of(
            |z| r::flux_inlet_concentration(z, t_last, p.v, p.d),
            0.0,
            1.0,
            300,
        ),
    ));
    fig.series.push(Series::line(
        "fixed concentration (Ogata & Banks 1961)",
        line_of(|z| r::ogata_banks(z, t_last, p.v, p.d), 0.0, 1.0, 300),
    ));
    let coarse = &runs[0];
    fig.series.push(Series::points(
        format!("deepdry, {} cells", levels[0]),
        prof(&coarse.last, &coarse.depth)
            .into_iter()
            .step_by(5)
            .collect(),
    ));
    fig.series.push(Series::points(
        format!("deepdry, {} cells", levels[levels.len() - 1]),
        prof(&finest.last, &finest.depth)
            .into_iter()
            .step_by(20)
            .collect(),
    ));
    let dz: Vec<f64> = levels.iter().map(|n| 1.0 / *n as f64).collect();
    let mut conv = Figure::new(
        "Mesh refinement (upwind advection)",
        "cell size [m]",
        "max |Δc|/c0",
    );
    conv.log_x = true;
    conv.log_y = true;
    conv.series
        .push(Series::points("deepdry", zip_pts(&dz, &errors)));
    conv.series.push(Series::line(
        "estimate: D + vΔz/2",
        zip_pts(&dz, &runs.iter().map(|r| r.estimate).collect::<Vec<_>>()),
    ));
    let cell_peclet = p.v * dz[dz.len() - 1] / p.d;
    Ok(CaseResult {
        checks: vec![
            Check::new(
                format!(
                    "c/c0 at 0.25 and 0.5 yr, {} cells: max error / upwind estimate",
                    levels[levels.len() - 1]
                ),
                "flux-inlet solution, van Genuchten & Alves 1982; upwind modified equation",
                finest.err / finest.estimate,
                1.1,
            ),
            Check::new(
                "|observed order in Δz − 1| (3 meshes)",
                "first-order upwind advection (common practice)",
                worst_order,
                0.1,
            ),
        ],
        figures: vec![fig, conv],
        notes: vec![
            format!(
                "θ = {:.6}, v = {:.6e} m s-1, D = {:.6e} m2 s-1 (Dm {:.4e} + αL v {:.4e}); cell Péclet v Δz/D on the finest mesh {cell_peclet:.4}",
                p.theta,
                p.v,
                p.d,
                p.dm,
                p.d - p.dm
            ),
            format!(
                "cells {:?}: errors {} (estimates {}) → orders {}",
                levels,
                fmt_list(&errors),
                fmt_list(&runs.iter().map(|r| r.estimate).collect::<Vec<_>>()),
                orders.iter().map(|o| format!("{o:.3}")).collect::<Vec<_>>().join(", ")
            ),
            format!(
                "largest |θ − θ(K = q)| of the flow: {:.2e}; first-type (Ogata–Banks) minus flux-inlet profile at 0.5 yr: up to {ob_gap:.3}",
                finest.theta_dev
            ),
        ],
    })
}
