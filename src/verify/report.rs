//! The printed verification table and the Markdown report with its SVG figures.

use super::{figures, Case, Outcome};
use crate::error::{Error, Result};
use std::fmt::Write;
use std::path::{Path, PathBuf};

fn verdict(ok: bool) -> &'static str {
    if ok {
        "pass"
    } else {
        "FAIL"
    }
}

/// The table of checks: case, quantity, source, max error, tolerance, verdict.
/// With `header` a heading line is printed first.
pub fn table(outcomes: &[Outcome], header: bool) -> String {
    let mut s = String::new();
    if header {
        let _ = writeln!(
            s,
            "{:<28} {:<44} {:<44} {:>10} {:>10}  verdict",
            "case", "quantity", "source", "max error", "tolerance"
        );
    }
    for o in outcomes {
        if let Some(e) = &o.error {
            let _ = writeln!(s, "{:<28} run failed: {e}", o.name);
            continue;
        }
        for c in &o.result.checks {
            let _ = writeln!(
                s,
                "{:<28} {:<44} {:<44} {:>10.3e} {:>10.3e}  {}",
                o.name,
                clip(&c.quantity, 44),
                clip(&c.source, 44),
                c.error,
                c.tolerance,
                verdict(c.passed())
            );
        }
    }
    s
}

fn clip(s: &str, n: usize) -> String {
    if s.chars().count() <= n {
        s.to_string()
    } else {
        let mut t: String = s.chars().take(n - 1).collect();
        t.push('…');
        t
    }
}

/// Creates the report folder (and checks that it can be written) before the runs.
pub fn prepare_dir(dir: &Path) -> Result<()> {
    let fail = |what: &str, e: std::io::Error| {
        let reason = e.to_string();
        let reason = reason
            .split(" (os error")
            .next()
            .unwrap_or(&reason)
            .to_string();
        Error::Io(format!("{}: {what}: {reason}", dir.display()))
    };
    if dir.exists() && !dir.is_dir() {
        return Err(Error::Io(format!(
            "{}: the report folder is a file, not a folder",
            dir.display()
        )));
    }
    std::fs::create_dir_all(dir).map_err(|e| fail("cannot create the report folder", e))?;
    let probe = dir.join(".deepdry-write-test");
    std::fs::write(&probe, b"").map_err(|e| fail("cannot write in the report folder", e))?;
    let _ = std::fs::remove_file(&probe);
    Ok(())
}

/// Writes `DIR/verification.md` and one SVG per figure; returns the report's path.
pub fn write(dir: &Path, cases: &[Case], outcomes: &[Outcome], total_s: f64) -> Result<PathBuf> {
    let io = |p: &Path, e: std::io::Error| Error::io(p, e);
    let mut md = String::new();
    let passed = outcomes.iter().filter(|o| o.passed()).count();
    let _ = writeln!(md, "# deepdry verification report\n");
    let _ = writeln!(
        md,
        "deepdry {}; {} of {} cases passed; total wall time {:.1} s (release build).\n",
        env!("CARGO_PKG_VERSION"),
        passed,
        outcomes.len(),
        total_s
    );
    let _ = writeln!(
        md,
        "| case | quantity | source | max error | tolerance | verdict |\n|---|---|---|---:|---:|---|"
    );
    for o in outcomes {
        if let Some(e) = &o.error {
            let _ = writeln!(
                md,
                "| {} | run failed: {} | | | | FAIL |",
                o.name,
                e.replace('|', "\\|")
            );
        }
        for c in &o.result.checks {
            let _ = writeln!(
                md,
                "| {} | {} | {} | {:.3e} | {:.3e} | {} |",
                o.name,
                c.quantity.replace('|', "\\|"),
                c.source.replace('|', "\\|"),
                c.error,
                c.tolerance,
                verdict(c.passed())
            );
        }
    }
    let _ = writeln!(md);
    for (case, o) in cases.iter().zip(outcomes) {
        let _ = writeln!(md, "---\n");
        // The case README starts with its own '# title'; demote its headings one level.
        for line in case.readme.lines() {
            if line.starts_with('#') {
                let _ = writeln!(md, "#{line}");
            } else {
                let _ = writeln!(md, "{line}");
            }
        }
        let _ = writeln!(
            md,
            "\n**Result: {}** ({:.1} s)\n",
            verdict(o.passed()),
            o.wall_seconds
        );
        for n in &o.result.notes {
            let _ = writeln!(md, "- {n}");
        }
        if !o.result.notes.is_empty() {
            let _ = writeln!(md);
        }
        for (k, f) in o.result.figures.iter().enumerate() {
            let name = format!("{}-{}.svg", o.name, k + 1);
            let path = dir.join(&name);
            std::fs::write(&path, figures::svg(f)?).map_err(|e| io(&path, e))?;
            let _ = writeln!(md, "![{}]({name})\n", f.title);
        }
    }
    let path = dir.join("verification.md");
    std::fs::write(&path, md).map_err(|e| io(&path, e))?;
    Ok(path)
}
