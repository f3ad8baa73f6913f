//! `deepdry bench --accuracy`: how far a case run at its own settings lies from two
//! reference runs of the same case made here, one at a tight tolerance on the same mesh
//! (the time-integration error) and one at a tight tolerance on a mesh refined twice
//! (time and space together). Compared at 1, 100, 10⁴ and 10⁶ years (those within the
//! run and among its snapshots): the surface water flux, the water lost from the column,
//! and the liquid-content and relative-humidity profiles.
//!
//! Where the meshes differ, the reference is interpolated linearly in depth to the cell
//! centres of the compared run. The liquid content is not interpolated itself: near the
//! water table it bends sharply with depth (0.41 to 0.39 within 4 cm for the benchmark's
//! sandy loam), and linear interpolation between the refined cells alone would show a
//! difference of 3e-3 of its largest value in a hydrostatic column where both runs hold
//! the same head. The reference head, which is linear in depth there, is interpolated
//! instead, and mapped through the retention law of the compared cell's soil.

use crate::case::Override;
use crate::error::{Error, Result};
use crate::model::Model;
use crate::plot::data::{read, Results};
use std::fmt::Write;
use std::path::Path;

/// Relative tolerance of the reference runs.
pub const REFERENCE_RTOL: f64 = 1e-8;
/// Newton tolerance of the reference runs (100× below the default), so that they are
/// solved more tightly than the run they judge.
pub const REFERENCE_NEWTON_TOL: f64 = 1e-11;
/// Comparison times [yr].
pub const TIMES_YEAR: [f64; 4] = [1.0, 1e2, 1e4, 1e6];

/// `b`, given on its depths `zb` (increasing), interpolated linearly to the depths `za`
/// (increasing); beyond the end points `b` is held constant. A copy when the depths agree.
pub fn interpolate(zb: &[f64], b: &[f64], za: &[f64]) -> Vec<f64> {
    if za == zb {
        return b.to_vec();
    }
    let mut j = 0;
    za.iter()
        .map(|&z| {
            if z <= zb[0] {
                b[0]
            } else if z >= zb[zb.len() - 1] {
                b[b.len() - 1]
            } else {
                while j + 1 < zb.len() && zb[j + 1] < z {
                    j += 1;
                }
                let f = (z - zb[j]) / (zb[j + 1] - zb[j]);
                b[j] + f * (b[j + 1] - b[j])
            }
        })
        .collect()
}

/// Largest |a − b| over a profile relative to the largest |b|, with `b` given on its own
/// depths `zb` and interpolated linearly to `za` (depths increasing) when the meshes
/// differ ([`interpolate`]). `None` for an empty or all-zero reference.
pub fn profile_difference(za: &[f64], a: &[f64], zb: &[f64], b: &[f64]) -> Option<f64> {
    if a.is_empty() || b.is_empty() || za.len() != a.len() || zb.len() != b.len() {
        return None;
    }
    let scale = b.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    if scale == 0.0 || !scale.is_finite() {
        return None;
    }
    let b = interpolate(zb, b, za);
    let worst = a
        .iter()
        .zip(b.iter())
        .fold(0.0f64, |m, (va, vb)| m.max((va - vb).abs()));
    Some(worst / scale)
}

/// The reference liquid content at the cell centres of `model` (the compared run's case):
/// the reference head interpolated in depth and mapped through each cell's retention law.
fn liquid_content_via_head(model: &Model, zb: &[f64], head: &[f64]) -> Vec<f64> {
    interpolate(zb, head, &model.mesh.centers)
        .iter()
        .enumerate()
        .map(|(i, &h)| model.soils[model.cell_soil[i]].retention.theta(h).0)
        .collect()
}

/// |a − b|/|b|; `None` when b is 0.
fn relative(a: f64, b: f64) -> Option<f64> {
    (b != 0.0 && b.is_finite()).then(|| (a - b).abs() / b.abs())
}

/// Index of the entry of `times` [yr] at `year` (within 1e-9 relative), if there is one.
fn at_year(times: &[f64], year: f64) -> Option<usize> {
    times
        .iter()
        .position(|&t| (t - year).abs() <= 1e-9 * year.abs().max(1.0))
}

/// Surface water flux [kg m⁻² s⁻¹] of snapshot `k`: the four parts at the top face.
fn surface_flux(r: &Results, k: usize) -> f64 {
    let p = &r.profiles;
    p.liquid_flux_isothermal[k][0]
        + p.liquid_flux_thermal[k][0]
        + p.vapor_flux_isothermal[k][0]
        + p.vapor_flux_thermal[k][0]
}

/// The four compared quantities of `a` (a run of `model`) against `b` at `year` (None
/// where either run lacks the time or the reference value is zero).
fn differences(model: &Model, a: &Results, b: &Results, year: f64) -> [Option<f64>; 4] {
    let (sa, sb) = (
        at_year(&a.profiles.time, year),
        at_year(&b.profiles.time, year),
    );
    let (ra, rb) = (at_year(&a.series.time, year), at_year(&b.series.time, year));
    let flux = sa
        .zip(sb)
        .and_then(|(i, j)| relative(surface_flux(a, i), surface_flux(b, j)));
    let lost = ra.zip(rb).and_then(|(i, j)| {
        let la = a.series.water_storage.first()? - a.series.water_storage[i];
        let lb = b.series.water_storage.first()? - b.series.water_storage[j];
        relative(la, lb)
    });
    let prof = |pa: &[Vec<f64>], pb: &[Vec<f64>]| {
        sa.zip(sb)
            .and_then(|(i, j)| profile_difference(&a.depth, &pa[i], &b.depth, &pb[j]))
    };
    let theta = sa.zip(sb).and_then(|(i, j)| {
        let ref_theta = if a.depth == b.depth {
            b.profiles.liquid_content[j].clone()
        } else {
            liquid_content_via_head(model, &b.depth, &b.profiles.head[j])
        };
        profile_difference(
            &a.depth,
            &a.profiles.liquid_content[i],
            &a.depth,
            &ref_theta,
        )
    });
    [
        flux,
        lost,
        theta,
        prof(&a.profiles.relative_humidity, &b.profiles.relative_humidity),
    ]
}

/// A float as TOML text that reads back to the same value.
fn toml_float(x: f64) -> String {
    format!("{x:?}")
}

/// The overrides that make the reference runs of the case `text`: `time.rtol` and
/// `time.newton_tolerance` at the reference tolerances, `time.method` = "bdf" and, when
/// `refine`, the mesh refined twice: twice the cells, √growth, half the end cells (graded
/// meshes given by `cells`; `max_cell_m` is halved instead). The mesh keys are read from
/// the text.
fn reference_overrides(text: &str, refine: bool) -> std::result::Result<Vec<Override>, String> {
    let mut list = vec![
        Override::set("time.rtol", &toml_float(REFERENCE_RTOL)),
        Override::set("time.newton_tolerance", &toml_float(REFERENCE_NEWTON_TOL)),
        Override::set("time.method", "\"bdf\""),
    ];
    if refine {
        let root: toml::Table = text.parse().map_err(|e| format!("{e}"))?;
        let mesh = root
            .get("mesh")
            .and_then(|m| m.as_table())
            .ok_or("no [mesh] table")?;
        if let Some(n) = mesh.get("cells").and_then(|v| v.as_integer()) {
            list.push(Override::set("mesh.cells", &(2 * n).to_string()));
        }
        let float = |v: &toml::Value| v.as_float().or(v.as_integer().map(|i| i as f64));
        for key in [
            "max_cell_m",
            "surface_cell_m",
            "bottom_cell_m",
            "interface_cell_m",
        ] {
            if let Some(x) = mesh.get(key).and_then(float) {
                list.push(Override::set(&format!("mesh.{key}"), &toml_float(0.5 * x)));
            }
        }
        if let Some(g) = mesh.get("growth").and_then(float) {
            list.push(Override::set("mesh.growth", &toml_float(g.sqrt())));
        }
    }
    list.into_iter()
        .map(|o| o.map_err(|e| e.to_string()))
        .collect()
}

/// Runs `text` (origin and base folder as for `case::parse`) with `overrides` into `out`
/// and reads back its results; returns them with the step count and wall time [s].
fn run_text(
    text: &str,
    origin: &str,
    base: &Path,
    overrides: &[Override],
    out: &Path,
) -> Result<(Results, u64, f64)> {
    let (_, summary) = crate::batch::run_into(text, origin, base, overrides, out)?;
    let r = read(&out.join("results.h5"))?;
    Ok((r, summary.counters.steps, summary.wall_seconds))
}

fn fmt(x: Option<f64>) -> String {
    x.map(|v| format!("{v:.1e}"))
        .unwrap_or_else(|| "—".to_string())
}

/// Compares `own` (the results of the case `text` run at its settings, with its step
/// count and wall time [s]) with the two reference runs, made in `tmp`; returns the report.
pub fn accuracy(
    text: &str,
    origin: &str,
    base: &Path,
    own: (Results, u64, f64),
    tmp: &Path,
) -> Result<String> {
    let bad = |e: String| Error::input(format!("{origin}: cannot derive the reference case: {e}"));
    let (a, steps_a, wall_a) = own;
    let model = crate::case::parse(text, origin, base)?;
    if model.mesh.centers.len() != a.depth.len() {
        return Err(Error::input(format!(
            "{origin}: the results compared do not belong to this case ({} cells, the case has {})",
            a.depth.len(),
            model.mesh.centers.len()
        )));
    }
    let same = reference_overrides(text, false).map_err(bad)?;
    let (b, steps_b, wall_b) = run_text(text, origin, base, &same, &tmp.join("tight"))?;
    let fine = reference_overrides(text, true).map_err(bad)?;
    let (c, steps_c, wall_c) = run_text(text, origin, base, &fine, &tmp.join("refined"))?;
    let mut out = String::new();
    let _ = writeln!(
        out,
        "accuracy: {origin} at its settings ({} cells, {steps_a} steps, {wall_a:.2} s) against\n  \
         same mesh, rtol {REFERENCE_RTOL:e} ({steps_b} steps, {wall_b:.2} s) and\n  \
         mesh refined twice, rtol {REFERENCE_RTOL:e} ({} cells, {steps_c} steps, {wall_c:.2} s)",
        a.depth.len(),
        c.depth.len()
    );
    let _ = writeln!(
        out,
        "(relative differences; profiles: max over the column relative to the largest value, the refined reference interpolated in depth; its liquid content from its head interpolated in depth)"
    );
    let _ = writeln!(
        out,
        "{:<10} {:<22} {:>10} {:>10}",
        "time [yr]", "quantity", "same mesh", "refined"
    );
    let names = [
        "surface water flux",
        "water lost",
        "liquid content",
        "relative humidity",
    ];
    let mut worst = [0.0f64; 2];
    for year in TIMES_YEAR {
        if at_year(&a.profiles.time, year).is_none() {
            continue;
        }
        let ds = differences(&model, &a, &b, year);
        let dr = differences(&model, &a, &c, year);
        for k in 0..4 {
            let _ = writeln!(
                out,
                "{:<10} {:<22} {:>10} {:>10}",
                format!("{year:e}"),
                names[k],
                fmt(ds[k]),
                fmt(dr[k])
            );
            worst[0] = worst[0].max(ds[k].unwrap_or(0.0));
            worst[1] = worst[1].max(dr[k].unwrap_or(0.0));
        }
    }
    let _ = writeln!(
        out,
        "worst: {:.1e} against the same mesh, {:.1e} against the refined mesh",
        worst[0], worst[1]
    );
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Linear interpolation reproduces a linear profile exactly (common practice), and
    /// a known offset shows as that offset over the largest value.
    #[test]
    fn profile_difference_interpolates_the_reference() {
        let zb: Vec<f64> = (0..=10).map(|i| i as f64).collect();
        let b: Vec<f64> = zb.iter().map(|z| 2.0 + 0.5 * z).collect(); // max 7
        let za = [0.25, 3.5, 9.75];
        let a: Vec<f64> = za.iter().map(|z| 2.0 + 0.5 * z).collect();
        assert!(profile_difference(&za, &a, &zb, &b).unwrap() < 1e-15);
        let shifted: Vec<f64> = a.iter().map(|v| v + 0.07).collect();
        let d = profile_difference(&za, &shifted, &zb, &b).unwrap();
        assert!((d - 0.01).abs() < 1e-12, "{d}");
        // Same mesh: compared point by point.
        assert_eq!(profile_difference(&zb, &b, &zb, &b), Some(0.0));
        // Degenerate references.
        assert_eq!(profile_difference(&za, &a, &zb, &[0.0; 11]), None);
        assert_eq!(profile_difference(&za, &a, &[], &[]), None);
    }

    /// A hydrostatic head (h = z − L, linear in depth) on a refined mesh, mapped to the
    /// coarse cells through the retention law, gives θ(h) at the coarse centres exactly
    /// (to round-off), where interpolating θ itself misses the bend near the water table
    /// (van Genuchten 1980 curve of the benchmark soil; common practice for the
    /// interpolation error of a curved function).
    #[test]
    fn liquid_content_from_the_interpolated_head_is_exact_for_a_hydrostatic_column() {
        let text = std::fs::read_to_string(
            std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("cases/benchmark-300m.toml"),
        )
        .unwrap();
        let base = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("cases");
        let coarse = crate::case::parse(&text, "benchmark", &base).unwrap();
        let fine_overrides = reference_overrides(&text, true).unwrap();
        let fine =
            crate::case::parse_with_overrides(&text, "refined", &base, &fine_overrides).unwrap();
        let depth = 300.0;
        let head = |m: &Model| -> Vec<f64> { m.mesh.centers.iter().map(|z| z - depth).collect() };
        let theta = |m: &Model| -> Vec<f64> {
            head(m)
                .iter()
                .enumerate()
                .map(|(i, &h)| m.soils[m.cell_soil[i]].retention.theta(h).0)
                .collect()
        };
        let exact = theta(&coarse);
        let mapped = liquid_content_via_head(&coarse, &fine.mesh.centers, &head(&fine));
        let d = profile_difference(&coarse.mesh.centers, &exact, &coarse.mesh.centers, &mapped);
        assert!(d.unwrap() < 1e-12, "{d:?}");
        // Interpolating θ itself: about 3e-3 of the largest value at the bottom cell.
        let d = profile_difference(
            &coarse.mesh.centers,
            &exact,
            &fine.mesh.centers,
            &theta(&fine),
        )
        .unwrap();
        assert!(d > 1e-3, "{d}");
    }

    #[test]
    fn reference_overrides_set_rtol_and_refine_the_mesh() {
        let text = "[column]\ndepth_m = 10.0\n[mesh]\ncells = 600\ngrowth = 1.05\nsurface_cell_m = 0.01\n\
            [soils.s]\nvan_genuchten = { theta_r = 0.05, theta_s = 0.4, alpha_per_m = 2.0, n = 2.0 }\n\
            saturated_conductivity_m_per_s = 1e-5\nthermal_conductivity_W_per_m_K = 1.5\n\
            solid_heat_capacity_J_per_m3_K = 2e6\n\
            [[layers]]\nsoil = \"s\"\ntop_m = 0.0\nbottom_m = 10.0\n\
            [surface]\ntemperature_C = 15.0\nno_flow = true\n[bottom]\ntemperature_C = 15.0\nhead_m = 0.0\n\
            [time]\nend_year = 1.0\nmethod = \"backward-euler\"\n";
        let base = std::path::Path::new(".");
        let parse = |refine: bool| {
            let list = reference_overrides(text, refine).unwrap();
            crate::case::parse_with_overrides(text, "x", base, &list).unwrap()
        };
        let plain = crate::case::parse(text, "x", base).unwrap();
        let (same, fine) = (parse(false), parse(true));
        assert_eq!(plain.mesh.n_cells(), 600);
        assert_eq!(same.mesh.n_cells(), 600);
        assert_eq!(fine.mesh.n_cells(), 1200);
        assert!((plain.mesh.width_range().0 - 0.01).abs() < 1e-12);
        assert!((fine.mesh.width_range().0 - 0.005).abs() < 1e-12);
        assert!(fine
            .overrides
            .contains(&format!("mesh.growth={:?}", 1.05f64.sqrt())));
        assert_eq!(plain.time.method, crate::model::Method::BackwardEuler);
        for m in [&same, &fine] {
            assert_eq!(m.time.rtol, REFERENCE_RTOL);
            assert_eq!(m.time.newton_tolerance, REFERENCE_NEWTON_TOL);
            assert!(matches!(m.time.method, crate::model::Method::Bdf { .. }));
        }
    }
}
