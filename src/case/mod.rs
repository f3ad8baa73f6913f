//! TOML case files: schema (serde), validation with one-line errors, and conversion to a
//! [`Model`]. STUB: to be written.

use crate::error::Result;
use crate::model::Model;
use std::path::Path;

/// Reads, parses and validates the case file at `path`.
pub fn load(path: &Path) -> Result<Model> {
    let _ = path;
    todo!()
}

/// Parses and validates case text. `origin` names the file in messages; relative paths
/// inside the case (CSV schedules, profile tables) are resolved against `base_dir`.
pub fn parse(text: &str, origin: &str, base_dir: &Path) -> Result<Model> {
    let _ = (text, origin, base_dir);
    todo!()
}

/// The human-readable summary printed by `deepdry check`.
pub fn summary(model: &Model) -> String {
    let _ = model;
    todo!()
}
