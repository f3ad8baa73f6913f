//! Transient infiltration toward a water table (Srivastava & Yeh 1991).

use super::*;

const FILES: Files = files!("srivastava-yeh-infiltration");

pub(super) fn srivastava_yeh_infiltration(v: Variant) -> Result<CaseResult> {
    let (model, scratch) = load_variant(
        &FILES,
        v,
        &[("mesh.cells", "100"), ("time.max_step_year", "1.0e-4")],
    )?;
    let s = &model.soils[0];
    let alpha = exponential_alpha(&s.retention).expect("exponential soil");
    let (theta_r, theta_s) = (s.retention.theta_r(), s.retention.theta_s());
    // Case values: qA before t = 0 (the steady spin-up), qB after (mm/yr → m/s).
    let q_a = 315.576 / 1000.0 / SECONDS_PER_YEAR;
    let q_b = 15_778.8 / 1000.0 / SECONDS_PER_YEAR;
    let p = sy::Problem {
        ks: s.saturated_conductivity,
        alpha,
        theta_r,
        theta_s,
        height: model.mesh.depth(),
        psi0: 0.0,
        q_a,
        q_b,
    };
    let (_, res) = simulate(&model, &scratch)?;
    let check_years: Vec<f64> = vec![0.0025, 0.01, 0.04];
    let t_min = check_years[0] * SECONDS_PER_YEAR;
    let sol = sy::Solution::new(p, sol_tstar(&p, t_min) * 0.5);
    let mut th_err: f64 = 0.0;
    let mut fig = Figure::profile(
        "Infiltration toward a water table: head",
        "pressure head [m]",
    );
    for &ty in &check_years {
        let k = res.at(ty);
        let t = ty * SECONDS_PER_YEAR;
        for (z, th) in res.depth.iter().zip(&res.theta[k]) {
            let ex = sol.theta(p.height - z, t);
            th_err = th_err.max((th - ex).abs() / (theta_s - theta_r));
        }
        fig.series.push(Series::line(
            format!("Srivastava & Yeh, {ty} yr"),
            line_of(|z| sol.head(p.height - z, t), 0.0, p.height, 200),
        ));
        fig.series.push(Series::points(
            format!("deepdry, {ty} yr"),
            prof(&res.head[k], &res.depth)
                .into_iter()
                .step_by(4)
                .collect(),
        ));
    }
    // Water-table flux (series), downward, against the exact one over (0, end].
    let mut q_err: f64 = 0.0;
    let mut q_model = Vec::new();
    let mut q_exact = Vec::new();
    for (ty, qb) in res.series_time.iter().zip(&res.series_bottom_flux) {
        if *ty < check_years[0] {
            continue;
        }
        let t = ty * SECONDS_PER_YEAR;
        let ex = sol.flux(0.0, t);
        q_err = q_err.max((qb / WATER_DENSITY - ex).abs() / (q_b - q_a));
        q_model.push((*ty, qb / WATER_DENSITY * 1000.0 * SECONDS_PER_YEAR));
        q_exact.push((*ty, ex * 1000.0 * SECONDS_PER_YEAR));
    }
    let fig_q = Figure::new(
        "Flux at the water table",
        "time [yr]",
        "downward flux [mm/yr]",
    )
    .with(Series::line("Srivastava & Yeh 1991", q_exact))
    .with(Series::points(
        "deepdry",
        q_model
            .iter()
            .cloned()
            .step_by((q_model.len() / 60).max(1))
            .collect(),
    ));
    let tol = match v {
        Variant::Full => 1e-2,
        Variant::Fast => 2e-2,
    };
    Ok(CaseResult {
        checks: vec![
            Check::new(
                "liquid content, max |Δθ|/(θs − θr)",
                "Srivastava & Yeh 1991, homogeneous soil",
                th_err,
                tol,
            ),
            Check::new(
                "water-table flux, max |Δq|/(qB − qA)",
                "Srivastava & Yeh 1991, homogeneous soil",
                q_err,
                tol,
            ),
        ],
        figures: vec![fig, fig_q],
        notes: vec![format!(
            "{} cells; t* at the checks: {}",
            res.depth.len(),
            check_years
                .iter()
                .map(|y| format!("{:.3}", sol_tstar(&p, y * SECONDS_PER_YEAR)))
                .collect::<Vec<_>>()
                .join(", ")
        )],
    })
}

fn sol_tstar(p: &sy::Problem, t: f64) -> f64 {
    p.alpha * p.ks * t / (p.theta_s - p.theta_r)
}
