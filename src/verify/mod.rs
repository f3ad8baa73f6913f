//! Verification suite: reference solutions, the case registry and the comparison runner
//! behind `deepdry verify` and `tests/verification.rs`.
//!
//! - [`reference`]: closed-form reference solutions (erfc step, periodic, Gardner, Fick,
//!   pseudo-steady drying front, observed order)
//! - [`srivastava_yeh`]: the series solution of Srivastava & Yeh (1991)
//! - [`water_tables`]: water-property reference values (IAPWS releases, steam tables)
//! - [`cases`]: one function per case; the case files live in `validation/<case>/` and are
//!   embedded, so `deepdry verify` runs from any folder
//! - [`figures`]: SVG figures (model against reference)
//! - [`report`]: the printed table and `verification.md`
//!
//! Every case has a `Full` variant (`deepdry verify`) and a `Fast` variant (coarser or
//! shorter, with its own justified tolerance) run by `cargo test`.

pub mod cases;
pub mod figures;
pub mod reference;
pub mod report;
pub mod srivastava_yeh;
pub mod water_tables;

use crate::error::{Error, Result};
use std::path::PathBuf;
use std::time::Instant;

/// Which variant of a case to run.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Variant {
    /// Coarser or shorter, for `cargo test`.
    Fast,
    /// The full check of `deepdry verify`.
    Full,
}

/// One compared quantity: the largest error found and its bound.
#[derive(Debug, Clone)]
pub struct Check {
    pub quantity: String,
    /// The published source of the reference value.
    pub source: String,
    /// Largest error (in the unit or measure named by `quantity`).
    pub error: f64,
    pub tolerance: f64,
}

impl Check {
    pub fn new(
        quantity: impl Into<String>,
        source: impl Into<String>,
        error: f64,
        tol: f64,
    ) -> Check {
        Check {
            quantity: quantity.into(),
            source: source.into(),
            error,
            tolerance: tol,
        }
    }
    /// Passes when the error is a number not above the tolerance.
    pub fn passed(&self) -> bool {
        self.error.is_finite() && self.error <= self.tolerance
    }
}

/// How a series is drawn.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Style {
    /// A line (references).
    Line,
    /// Markers (model values).
    Points,
}

/// One data series of a figure.
#[derive(Debug, Clone)]
pub struct Series {
    pub label: String,
    pub style: Style,
    pub points: Vec<(f64, f64)>,
}

impl Series {
    pub fn line(label: impl Into<String>, points: Vec<(f64, f64)>) -> Series {
        Series {
            label: label.into(),
            style: Style::Line,
            points,
        }
    }
    pub fn points(label: impl Into<String>, points: Vec<(f64, f64)>) -> Series {
        Series {
            label: label.into(),
            style: Style::Points,
            points,
        }
    }
}

/// Data for one figure (model against reference).
#[derive(Debug, Clone)]
pub struct Figure {
    pub title: String,
    pub x_label: String,
    pub y_label: String,
    pub series: Vec<Series>,
    pub log_x: bool,
    pub log_y: bool,
    /// Draw the y axis downward (depth profiles).
    pub y_down: bool,
}

impl Figure {
    pub fn new(title: impl Into<String>, x: impl Into<String>, y: impl Into<String>) -> Figure {
        Figure {
            title: title.into(),
            x_label: x.into(),
            y_label: y.into(),
            series: Vec::new(),
            log_x: false,
            log_y: false,
            y_down: false,
        }
    }
    /// A depth profile: quantity on x, depth on y (downward).
    pub fn profile(title: impl Into<String>, x: impl Into<String>) -> Figure {
        let mut f = Figure::new(title, x, "depth [m]");
        f.y_down = true;
        f
    }
    pub fn with(mut self, s: Series) -> Figure {
        self.series.push(s);
        self
    }
}

/// What one case produced.
#[derive(Debug, Clone, Default)]
pub struct CaseResult {
    pub checks: Vec<Check>,
    pub figures: Vec<Figure>,
    /// Extra lines for the report (measured orders, run statistics).
    pub notes: Vec<String>,
}

/// A case and what it produced.
#[derive(Debug, Clone)]
pub struct Outcome {
    pub name: &'static str,
    pub title: &'static str,
    pub result: CaseResult,
    /// A run that could not be completed (the case fails).
    pub error: Option<String>,
    pub wall_seconds: f64,
}

impl Outcome {
    pub fn passed(&self) -> bool {
        self.error.is_none()
            && !self.result.checks.is_empty()
            && self.result.checks.iter().all(Check::passed)
    }
}

/// A registered verification case.
#[derive(Clone, Copy)]
pub struct Case {
    /// Name used by `--only` and the folder `validation/<name>/`.
    pub name: &'static str,
    /// One-line claim.
    pub title: &'static str,
    /// The case's README (what it checks, PDE, conditions, source, tolerance).
    pub readme: &'static str,
    pub run: fn(Variant) -> Result<CaseResult>,
}

/// All cases, in report order.
pub fn registry() -> Vec<Case> {
    cases::all()
}

/// The case called `name`.
pub fn find(name: &str) -> Option<Case> {
    registry().into_iter().find(|c| c.name == name)
}

/// Runs one case; a failed run becomes a failing outcome with its message.
pub fn run_case(case: &Case, variant: Variant) -> Outcome {
    let t0 = Instant::now();
    let (result, error) = match (case.run)(variant) {
        Ok(r) => (r, None),
        Err(e) => (CaseResult::default(), Some(e.to_string())),
    };
    Outcome {
        name: case.name,
        title: case.title,
        result,
        error,
        wall_seconds: t0.elapsed().as_secs_f64(),
    }
}

/// `deepdry verify [--only NAME] [--report DIR]`: runs the full variants, prints the
/// table, writes the report, and fails with `Error::VerifyFailed` if any case fails.
pub fn command(only: Option<String>, report_dir: Option<PathBuf>) -> Result<()> {
    let cases: Vec<Case> = match &only {
        Some(name) => match find(name) {
            Some(c) => vec![c],
            None => {
                let names: Vec<&str> = registry().iter().map(|c| c.name).collect();
                return Err(Error::input(format!(
                    "verify --only {name}: no such case; the cases are: {}",
                    names.join(", ")
                )));
            }
        },
        None => registry(),
    };
    // Check the report folder before spending minutes on the runs.
    if let Some(dir) = &report_dir {
        report::prepare_dir(dir)?;
    }
    let t0 = Instant::now();
    let mut outcomes = Vec::new();
    for c in &cases {
        let o = run_case(c, Variant::Full);
        eprintln!(
            "{:<28} {} ({:.1} s)",
            o.name,
            if o.passed() { "pass" } else { "FAIL" },
            o.wall_seconds
        );
        outcomes.push(o);
    }
    let total = t0.elapsed().as_secs_f64();
    print!("{}", report::table(&outcomes, true));
    let failed: Vec<&str> = outcomes
        .iter()
        .filter(|o| !o.passed())
        .map(|o| o.name)
        .collect();
    println!(
        "{} of {} cases passed in {:.1} s",
        outcomes.len() - failed.len(),
        outcomes.len(),
        total
    );
    if let Some(dir) = &report_dir {
        let path = report::write(dir, &cases, &outcomes, total)?;
        println!("report: {}", path.display());
    }
    if failed.is_empty() {
        Ok(())
    } else {
        Err(Error::VerifyFailed(format!(
            "verification failed: {}",
            failed.join(", ")
        )))
    }
}
