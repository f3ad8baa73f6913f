//! Kinetic phase change converges to equilibrium as b grows (the drying-front case file,
//! shortened).

use super::drying_front::FILES;
use super::*;

pub(super) fn kinetic_to_equilibrium(v: Variant) -> Result<CaseResult> {
    // The runs take well under a second: the fast variant is the full one.
    let _ = v;
    let rates: Vec<f64> = vec![1e-3, 1e-2, 1e-1, 1.0, 10.0, 100.0];
    // The drying case, shortened: 25 cells, 0.2 yr.
    let base = [
        ("mesh.cells", "25"),
        ("time.end_year", "0.2"),
        ("output.every_year", "0.2"),
    ];
    let lost = |kinetic: &[(&str, &str)]| -> Result<(f64, Vec<f64>)> {
        let (model, scratch) = load(&FILES, &sets(&[&base[..], kinetic].concat())?)?;
        let (_, res) = simulate(&model, &scratch)?;
        let w = &res.series_storage;
        let k = res.at(0.2);
        Ok((w[0] - w[w.len() - 1], res.theta[k].clone()))
    };
    let (w_eq, th_eq) = lost(&[])?;
    let mut diffs = Vec::new();
    let mut dth = Vec::new();
    for &b in &rates {
        let rate = format!("{b:e}");
        let kinetic = [
            ("physics.vapor", "\"kinetic\""),
            ("physics.kinetic_rate_per_s", rate.as_str()),
        ];
        let (w, th) = lost(&kinetic)
            .map_err(|e| Error::Numerical(format!("kinetic run with b = {b:e} s⁻¹: {e}")))?;
        diffs.push(((w - w_eq) / w_eq).abs());
        dth.push(max_abs(th.iter().zip(&th_eq).map(|(a, b)| a - b)));
    }
    let orders = r::observed_orders(&diffs, 10.0);
    // Asymptotically rv − rveq = O(1/b) (first-order relaxation), so the difference falls
    // by 10× per decade; the last decades must show it.
    let k_last = orders.len().saturating_sub(2);
    let worst = orders[k_last..]
        .iter()
        .map(|p| (p - 1.0).abs())
        .fold(0.0, f64::max);
    let monotone = diffs.windows(2).all(|w| w[1] < w[0]);
    let mut fig = Figure::new(
        "Kinetic phase change against equilibrium (drying, 0.2 yr)",
        "rate coefficient b [1/s]",
        "relative difference",
    );
    fig.log_x = true;
    fig.log_y = true;
    fig.series.push(Series::points(
        "water lost, |ΔW|/W_eq",
        zip_pts(&rates, &diffs),
    ));
    fig.series
        .push(Series::points("max |Δθ|", zip_pts(&rates, &dth)));
    fig.series.push(Series::line(
        "slope −1",
        rates
            .iter()
            .map(|b| (*b, diffs[0] * rates[0] / b))
            .collect(),
    ));
    let last = *diffs.last().unwrap_or(&f64::NAN);
    Ok(CaseResult {
        checks: vec![
            Check::new(
                "|observed rate − 1| over the last two decades of b",
                "first-order relaxation m = b (rveq − rv): O(1/b)",
                worst,
                0.1,
            ),
            Check::new(
                "difference decreases with every decade (0 = yes)",
                "convergence to equilibrium (design note §2)",
                if monotone { 0.0 } else { 1.0 },
                0.0,
            ),
            Check::new(
                format!(
                    "water lost at b = {:e} s⁻¹, relative",
                    rates[rates.len() - 1]
                ),
                "equilibrium run (same mesh and steps)",
                last,
                1e-4,
            ),
        ],
        figures: vec![fig],
        notes: vec![
            format!("b = {:?} s⁻¹", rates),
            format!(
                "relative differences {} → rates per decade {}",
                diffs
                    .iter()
                    .map(|d| format!("{d:.3e}"))
                    .collect::<Vec<_>>()
                    .join(", "),
                orders
                    .iter()
                    .map(|p| format!("{p:.3}"))
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
        ],
    })
}
