//! `deepdry inspect`: a summary of a results or checkpoint file.

use crate::checkpoint::{file_kind, CHECKPOINT_KIND};
use crate::error::Result;
use crate::output::h5util::read_attr_str;
use crate::output::human;
use std::fmt::Write;
use std::path::Path;

/// Summary text of the deepdry file at `path`; other files are refused.
pub fn summary(path: &Path) -> Result<String> {
    let kind = file_kind(path)?;
    let mut out = String::new();
    if kind == CHECKPOINT_KIND {
        let ck = crate::checkpoint::read(path)?;
        let c = &ck.state.counters;
        let _ = writeln!(out, "file: {}", path.display());
        let _ = writeln!(out, "kind: checkpoint");
        let _ = writeln!(
            out,
            "case title: {}",
            crate::case::summary::printable(&ck.title)
        );
        let _ = writeln!(out, "software version: {}", ck.software_version);
        let _ = writeln!(out, "checkpoint format: {}", ck.format);
        let _ = writeln!(out, "written: {}", ck.created);
        let year = crate::props::constants::SECONDS_PER_YEAR;
        let _ = writeln!(
            out,
            "time: {} yr, next step {} yr",
            crate::output::years(ck.year()),
            crate::output::human(ck.state.dt / year, 4)
        );
        let _ = writeln!(out, "cells: {}", ck.state.u.len() / 3);
        let _ = writeln!(
            out,
            "steps {} (rejected {}), Newton iterations {}, Jacobian evaluations {}, factorisations {}",
            c.steps, c.rejected, c.newton_iterations, c.jacobians, c.factorizations
        );
        let _ = writeln!(
            out,
            "results file: {} ({} snapshots, {} series rows at this point)",
            ck.results_file, ck.position.snapshots, ck.position.series_rows
        );
        match (ck.info.balance_abs, ck.info.balance_rel) {
            (Some(a), Some(r)) => {
                let _ = writeln!(
                    out,
                    "last relative balance errors: water {}, energy {} (absolute {} kg m-2, {} J m-2)",
                    human(r[1], 3),
                    human(r[0], 3),
                    human(a[1], 4),
                    human(a[0], 4)
                );
            }
            _ => {
                let _ = writeln!(out, "last relative balance errors: not recorded");
            }
        }
        if let Some((p, t)) = &ck.info.parent {
            let _ = writeln!(out, "branch of: {p} at {t:e} yr");
        }
        let _ = writeln!(out, "physics hash: {}", ck.physics_hash);
        if let Some(sol) = &ck.solutes {
            let widths: Vec<f64> = ck.faces.windows(2).map(|w| w[1] - w[0]).collect();
            let n = widths.len();
            for (k, name) in sol.names.iter().enumerate() {
                let Some(mass) = sol.now.mass.get(k * n..(k + 1) * n) else {
                    continue;
                };
                let stored: f64 = mass.iter().zip(&widths).map(|(m, w)| m * w).sum();
                let per = crate::solute::CUMULATIVE;
                let cum = &sol.now.cumulative[per * k..per * (k + 1)];
                let _ = writeln!(
                    out,
                    "solute {name}: stored {} g m-2, in at the surface {} g m-2, out at the bottom {} g m-2 since the run's start",
                    human(stored, 4),
                    human(cum[0], 4),
                    human(cum[1], 4)
                );
            }
        }
        return Ok(out);
    }
    let e = |err: hdf5::Error| crate::output::h5util::io_error(path, err);
    let file = hdf5::File::open(path).map_err(e)?;
    let root = file.as_group().map_err(e)?;
    let attr = |n: &str| read_attr_str(&root, n).unwrap_or_else(|_| "?".into());
    let read = |n: &str| -> Vec<f64> {
        file.dataset(n)
            .and_then(|d| d.read_1d::<f64>())
            .map(|a| a.to_vec())
            .unwrap_or_default()
    };
    let times = read("profiles/time");
    let series = read("series/time");
    let _ = writeln!(out, "file: {}", path.display());
    let _ = writeln!(out, "kind: results");
    let _ = writeln!(
        out,
        "case title: {}",
        crate::case::summary::printable(&attr("title"))
    );
    if let Ok(o) = read_attr_str(&root, "overrides") {
        if !o.is_empty() {
            let _ = writeln!(out, "overrides: {}", o.replace('\n', ", "));
        }
    }
    let _ = writeln!(out, "software version: {}", attr("software_version"));
    let _ = writeln!(out, "created: {}", attr("created"));
    let cells = read("mesh/depth").len();
    let _ = writeln!(out, "cells: {cells}");
    match (series.first(), series.last()) {
        (Some(a), Some(b)) => {
            let _ = writeln!(
                out,
                "times covered: {} to {} yr ({} series rows)",
                crate::output::years(*a),
                crate::output::years(*b),
                series.len()
            );
        }
        _ => {
            let _ = writeln!(out, "times covered: none yet");
        }
    }
    let _ = writeln!(out, "snapshots: {}", times.len());
    // Solutes: the last series row of each (datasets `<field>_<name>`).
    let mut names: Vec<String> = file
        .group("series")
        .and_then(|g| g.member_names())
        .unwrap_or_default()
        .into_iter()
        .filter_map(|n| n.strip_prefix("storage_").map(str::to_string))
        .collect();
    names.sort();
    let last = |n: &str| read(n).last().copied().unwrap_or(f64::NAN);
    let solutes: Vec<(String, Vec<f64>)> = names
        .into_iter()
        .map(|name| {
            let v = crate::solute::SERIES_FIELDS
                .iter()
                .map(|(prefix, _, _)| last(&format!("series/{prefix}_{name}")))
                .collect();
            (name, v)
        })
        .collect();
    out.push_str(&crate::run::solute_lines(&solutes));
    let wb = read("series/water_balance_relative_error");
    let eb = read("series/energy_balance_relative_error");
    if let (Some(w), Some(en)) = (wb.last(), eb.last()) {
        let _ = writeln!(
            out,
            "last relative balance errors: water {}, energy {}",
            human(*w, 3),
            human(*en, 3)
        );
    }
    if let Ok(p) = read_attr_str(&root, "parent_checkpoint") {
        let _ = writeln!(
            out,
            "branch of: {p} at {} yr (hash {})",
            parent_time_year(&root),
            attr("parent_physics_hash")
        );
    }
    if let Ok(y) = root
        .attr("extended_to_year")
        .and_then(|a| a.read_scalar::<f64>())
    {
        let _ = writeln!(
            out,
            "extended past the case's end to year {} (deepdry run --extend-to)",
            crate::output::years(y)
        );
    }
    Ok(out)
}

/// A branch's `parent_time_year` for the summary: a number attribute, or the string that
/// results files written before it was a number hold ("4e0"); "?" when neither.
fn parent_time_year(root: &hdf5::Group) -> String {
    let number = root
        .attr("parent_time_year")
        .and_then(|a| a.read_scalar::<f64>())
        .ok()
        .or_else(|| {
            read_attr_str(root, "parent_time_year")
                .ok()
                .and_then(|s| s.trim().parse::<f64>().ok())
        });
    match number {
        Some(y) if y.is_finite() => crate::output::years(y),
        _ => "?".into(),
    }
}
