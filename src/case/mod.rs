//! TOML case files: schema, validation with one-line errors, and conversion to a
//! [`Model`]. The file format is documented in `docs/case-file.md`.
//!
//! - [`tree`]: the parsed document with source spans, and typed readers that report
//!   `file:line:column: key.path = value: what is allowed`
//! - [`schedules`]: schedule forms and unit conversion
//! - [`csvfile`]: CSV tables referenced by the case (schedules, initial profiles)
//! - [`overrides`]: `KEY=VALUE` changes applied to the parsed tree before it is read
//!   (`--set`; benchmarks, verification and, later, ensembles and fits)
//! - [`build`]: every section, its checks, and the assembled model
//! - [`summary`]: the text printed by `deepdry check`

pub mod build;
pub mod csvfile;
pub mod overrides;
pub mod schedules;
pub mod summary;
pub mod tree;

pub use overrides::Override;

use crate::error::{Error, Result};
use crate::model::Model;
use std::path::Path;

/// Reads, parses and validates the case file at `path`.
pub fn load(path: &Path) -> Result<Model> {
    load_with_overrides(path, &[])
}

/// Reads the case file at `path`, applies `overrides` (in order) and validates the
/// result: an override passes the same checks as the file, and an error about it names it.
pub fn load_with_overrides(path: &Path, overrides: &[Override]) -> Result<Model> {
    let bytes = std::fs::read(path).map_err(|e| {
        let reason = e.to_string();
        let reason = reason
            .split(" (os error")
            .next()
            .unwrap_or(&reason)
            .to_string();
        let msg = format!("{}: cannot read the case file: {reason}", path.display());
        if e.kind() == std::io::ErrorKind::NotFound || path.is_dir() {
            Error::input(msg)
        } else {
            Error::Io(msg)
        }
    })?;
    let text = String::from_utf8(bytes).map_err(|e| {
        let (line, col) = tree::line_col(
            &String::from_utf8_lossy(&e.as_bytes()[..e.utf8_error().valid_up_to()]),
            usize::MAX,
        );
        Error::input(format!(
            "{}:{line}:{col}: the case file is not valid UTF-8 text",
            path.display()
        ))
    })?;
    let base_dir = path.parent().unwrap_or(Path::new(""));
    parse_with_overrides(&text, &path.display().to_string(), base_dir, overrides)
}

/// Parses and validates case text. `origin` names the file in messages; relative paths
/// inside the case (CSV schedules, profile tables) are resolved against `base_dir`.
pub fn parse(text: &str, origin: &str, base_dir: &Path) -> Result<Model> {
    parse_with_overrides(text, origin, base_dir, &[])
}

/// [`parse`] with `overrides` applied (in order) to the parsed text before validation.
pub fn parse_with_overrides(
    text: &str,
    origin: &str,
    base_dir: &Path,
    overrides: &[Override],
) -> Result<Model> {
    build::build(&tree::Source {
        origin,
        text,
        base_dir,
        overrides,
    })
}

/// The human-readable summary printed by `deepdry check`.
pub fn summary(model: &Model) -> String {
    summary::summary(model)
}
