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
pub mod cycles;
pub mod overrides;
pub mod schedules;
pub mod solutes;
pub mod summary;
pub mod tree;
pub mod vegetation;

pub use overrides::Override;

use crate::error::{Error, Result};
use crate::model::Model;
use std::path::Path;

/// Largest case file read: 1 MiB (the largest demo case is under 4 kB; tables belong in
/// CSV files).
pub const MAX_CASE_BYTES: u64 = 1 << 20;
/// Largest CSV table read: 64 MiB (a million rows of two numbers is about 30 MB).
pub const MAX_CSV_BYTES: u64 = 64 << 20;

/// Why [`read_capped`] did not return the bytes.
pub enum Capped {
    /// Not a regular file, or larger than the cap: the one-line message.
    Refused(String),
    /// The file could not be read.
    Io(std::io::Error),
}

/// Reads the regular file at `path`, refusing anything else (a FIFO would block, a
/// device such as /dev/zero would never end) and files larger than `cap` bytes (also if
/// the file grows past it while being read).
pub fn read_capped(path: &Path, cap: u64, what: &str) -> std::result::Result<Vec<u8>, Capped> {
    use std::io::Read;
    let meta = std::fs::metadata(path).map_err(Capped::Io)?;
    if meta.is_dir() {
        return Err(Capped::Io(std::io::Error::new(
            std::io::ErrorKind::IsADirectory,
            "is a folder",
        )));
    }
    if !meta.is_file() {
        return Err(Capped::Refused(format!(
            "{}: not a regular file (a FIFO, socket or device); a {what} must be a regular file",
            path.display()
        )));
    }
    let too_big = |n: u64| {
        Capped::Refused(format!(
            "{}: {n} bytes or more; a {what} may have at most {cap} bytes ({} MiB, see docs/limits.md)",
            path.display(),
            cap >> 20
        ))
    };
    if meta.len() > cap {
        return Err(too_big(meta.len()));
    }
    let mut bytes = Vec::with_capacity(meta.len() as usize);
    std::fs::File::open(path)
        .and_then(|f| f.take(cap + 1).read_to_end(&mut bytes))
        .map_err(Capped::Io)?;
    if bytes.len() as u64 > cap {
        return Err(too_big(cap + 1));
    }
    Ok(bytes)
}

/// Reads, parses and validates the case file at `path`.
pub fn load(path: &Path) -> Result<Model> {
    load_with_overrides(path, &[])
}

/// Reads the case file at `path`, applies `overrides` (in order) and validates the
/// result: an override passes the same checks as the file, and an error about it names it.
pub fn load_with_overrides(path: &Path, overrides: &[Override]) -> Result<Model> {
    let bytes = read_capped(path, MAX_CASE_BYTES, "case file").map_err(|e| {
        let e = match e {
            Capped::Refused(msg) => return Error::input(msg),
            Capped::Io(e) => e,
        };
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
