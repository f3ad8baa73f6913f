//! Solute and root profiles: the concentration in the liquid (log scale: a bulge spans
//! decades), for solutes with a deposition the accumulation age, and the root water
//! uptake, one line per snapshot.

use super::chart::Figure;
use super::data::Results;
use super::scale::{self, Scale};
use super::{axis_for, depth_figure, time_lines, values};

/// Smallest concentration drawn on the log axis [g m-3]; lower values (and 0) are drawn
/// at it.
pub const CONCENTRATION_FLOOR: f64 = 1e-3;

/// The solute figures (name, figure): `profiles-concentration-<name>` and, with a
/// deposition, `profiles-accumulation-age-<name>`.
pub fn solute_figures(res: &Results, snaps: &[usize]) -> Vec<(String, Figure)> {
    let single = |what: String, x, x_label: String, lines| {
        depth_figure(res, snaps, &what, x, x_label, lines, false)
    };
    let mut figs = Vec::new();
    if let Some(rows) = &res.root_water_uptake {
        // kg m-3 s-1 → mm of water per year per metre of depth.
        let lines = time_lines(res, snaps, &res.depth, rows, |u| u * super::YEAR);
        let x = axis_for(Scale::Linear, values(&lines));
        figs.push((
            "profiles-root-water-uptake".to_string(),
            single(
                "root water uptake profiles".to_string(),
                x,
                "root water uptake [mm yr⁻¹ per m of depth]".into(),
                lines,
            ),
        ));
    }
    for s in &res.solutes {
        let lines = time_lines(res, snaps, &res.depth, &s.concentration, |c| {
            if c.is_finite() {
                c.max(CONCENTRATION_FLOOR)
            } else {
                c
            }
        });
        let x = axis_for(Scale::Log, values(&lines));
        figs.push((
            format!("profiles-concentration-{}", s.name),
            single(
                format!("{} concentration profiles", s.name),
                x,
                format!(
                    "{} in the liquid [g m⁻³ = mg L⁻¹], log scale (below {} drawn at it)",
                    s.name,
                    scale::format_real(CONCENTRATION_FLOOR)
                ),
                lines,
            ),
        ));
        if let Some(age) = &s.accumulation_age {
            let lines = time_lines(res, snaps, &res.depth, age, |a| a);
            let x = axis_for(Scale::Linear, values(&lines));
            figs.push((
                format!("profiles-accumulation-age-{}", s.name),
                single(
                    format!(
                        "{} accumulation age (mass stored above ÷ mean deposition)",
                        s.name
                    ),
                    x,
                    "accumulation age [yr] (assumes a known, steady deposition)".into(),
                    lines,
                ),
            ));
        }
    }
    figs
}
