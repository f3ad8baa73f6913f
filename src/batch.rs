//! Runs of a case text with overrides into a given folder, without a progress bar: the
//! building block of `deepdry bench` ([`crate::bench`]) and `deepdry bench --accuracy`
//! ([`crate::accuracy`]), which both vary a case through [`crate::case::Override`]s.

use crate::case::Override;
use crate::error::Result;
use crate::model::Model;
use crate::run::{run, RunOptions, RunSummary};
use std::path::Path;

/// Parses `text` (origin and base folder as for [`crate::case::parse`]) with `overrides`
/// applied and runs it into the folder `out`, replacing what is there.
pub fn run_into(
    text: &str,
    origin: &str,
    base: &Path,
    overrides: &[Override],
    out: &Path,
) -> Result<(Model, RunSummary)> {
    let model = crate::case::parse_with_overrides(text, origin, base, overrides)?;
    let opts = RunOptions {
        out: Some(out.to_path_buf()),
        overwrite: true,
        progress: false,
        ..Default::default()
    };
    let summary = run(&model, &opts)?;
    Ok((model, summary))
}
