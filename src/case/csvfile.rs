//! CSV tables referenced by a case file (schedules, initial profiles): a header line with
//! the column names, then rows of numbers. Lines starting with `#` are comments; cells
//! may be padded with spaces. Errors name the CSV file and the line.

use super::tree::Value;
use crate::error::Error;
use std::path::PathBuf;

/// A CSV file read into named numeric columns.
#[derive(Debug)]
pub struct Columns {
    /// The file as resolved against the case file's folder (used in messages).
    pub path: PathBuf,
    /// The columns in the order `read` was asked for.
    pub columns: Vec<Vec<f64>>,
    /// The line number of each row (for messages).
    pub lines: Vec<u64>,
}

impl Columns {
    /// `file:line: msg`.
    pub fn err(&self, row: usize, msg: impl std::fmt::Display) -> Error {
        let line = self.lines.get(row).copied().unwrap_or(0);
        Error::input(format!("{}:{line}: {msg}", self.path.display()))
    }

    /// Checks a depth profile: at least two rows, column 0 (`depth_m`) strictly increasing
    /// and inside the column [0, `depth`] m.
    pub fn depth_profile(&self, depth: f64) -> Result<(), Error> {
        if self.lines.len() < 2 {
            return Err(self.err(0, "a profile needs at least two rows"));
        }
        self.strictly_increasing(0, "depth_m")?;
        for (row, &z) in self.columns[0].iter().enumerate() {
            if !(0.0..=depth).contains(&z) {
                return Err(self.err(
                    row,
                    format!(
                        "depth_m = {z}: outside the column [0, {}] m",
                        super::schedules::fmt_g(depth)
                    ),
                ));
            }
        }
        Ok(())
    }

    /// Checks that column `col` (named `name`) increases strictly.
    pub fn strictly_increasing(&self, col: usize, name: &str) -> Result<(), Error> {
        for (i, w) in self.columns[col].windows(2).enumerate() {
            if w[1] <= w[0] {
                return Err(self.err(
                    i + 1,
                    format!(
                        "{name} = {} is not after the previous row's {}; {name} must increase strictly",
                        w[1], w[0]
                    ),
                ));
            }
        }
        Ok(())
    }
}

/// What a header must look like.
pub enum Header<'a> {
    /// Exactly these columns, in this order.
    Exact(&'a [&'a str]),
    /// These required columns plus exactly one of the alternatives, in any order.
    OneOf {
        required: &'a [&'a str],
        alternatives: &'a [&'a str],
    },
}

impl Header<'_> {
    fn describe(&self) -> String {
        match self {
            Header::Exact(cols) => format!("`{}`", cols.join(",")),
            Header::OneOf {
                required,
                alternatives,
            } => format!(
                "`{}` and one of {}",
                required.join(","),
                alternatives
                    .iter()
                    .map(|a| format!("`{a}`"))
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
        }
    }

    /// The column order to read, or `None` when the header does not match.
    fn order(&self, names: &[String]) -> Option<Vec<String>> {
        match self {
            Header::Exact(cols) => (names.len() == cols.len()
                && names.iter().zip(cols.iter()).all(|(a, b)| a == b))
            .then(|| cols.iter().map(|c| c.to_string()).collect()),
            Header::OneOf {
                required,
                alternatives,
            } => {
                let alt: Vec<&str> = alternatives
                    .iter()
                    .copied()
                    .filter(|a| names.iter().any(|n| n == a))
                    .collect();
                let ok = names.len() == required.len() + 1
                    && alt.len() == 1
                    && required.iter().all(|r| names.iter().any(|n| n == r));
                ok.then(|| {
                    required
                        .iter()
                        .map(|c| c.to_string())
                        .chain(std::iter::once(alt[0].to_string()))
                        .collect()
                })
            }
        }
    }
}

/// Reads the CSV file named by the string value `v` (a path relative to the case file's
/// folder). Returns the columns in the order `header` lists them (required columns first,
/// then the alternative that is present).
pub fn read(v: &Value, header: Header, what: &str) -> Result<(Columns, Vec<String>), Error> {
    let rel = v.str()?;
    let path = v.src.resolve(rel);
    let text = super::read_capped(&path, super::MAX_CSV_BYTES, "CSV table").map_err(|e| {
        let e = match e {
            super::Capped::Refused(msg) => return v.err(msg),
            super::Capped::Io(e) => e,
        };
        let reason = e.to_string();
        let reason = reason
            .split(" (os error")
            .next()
            .unwrap_or(&reason)
            .to_string();
        v.err(format!("cannot read {}: {reason}", path.display()))
    })?;
    let at = |line: u64, msg: String| Error::input(format!("{}:{line}: {msg}", path.display()));
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .trim(csv::Trim::All)
        .comment(Some(b'#'))
        .from_reader(text.as_slice());
    let mut records = reader.records();
    let expected = header.describe();
    let first = match records.next() {
        None => {
            return Err(Error::input(format!(
                "{}: empty file; expected a header line {expected} ({what})",
                path.display()
            )))
        }
        Some(r) => r.map_err(|e| csv_error(&path, e))?,
    };
    let header_line = first.position().map_or(1, |p| p.line());
    let names: Vec<String> = first.iter().map(str::to_string).collect();
    let order = header.order(&names).ok_or_else(|| {
        at(
            header_line,
            format!(
                "header `{}` does not match; expected {expected} ({what})",
                names.join(",")
            ),
        )
    })?;
    let index: Vec<usize> = order
        .iter()
        .map(|o| names.iter().position(|n| n == o).unwrap_or(0))
        .collect();
    let mut columns = vec![Vec::new(); order.len()];
    let mut lines = Vec::new();
    for record in records {
        let record = record.map_err(|e| csv_error(&path, e))?;
        let line = record.position().map_or(0, |p| p.line());
        if record.iter().all(str::is_empty) {
            if record.len() <= 1 {
                // A line of blanks.
                continue;
            }
            return Err(at(
                line,
                format!(
                    "a row of {} empty cells; expected numbers in {} (delete the row)",
                    record.len(),
                    names.join(",")
                ),
            ));
        }
        if record.len() != names.len() {
            return Err(at(
                line,
                format!(
                    "{} columns, expected {} ({})",
                    record.len(),
                    names.len(),
                    names.join(",")
                ),
            ));
        }
        for (c, &i) in index.iter().enumerate() {
            let cell = &record[i];
            let x: f64 = cell
                .parse()
                .ok()
                .filter(|x: &f64| x.is_finite())
                .ok_or_else(|| {
                    at(
                        line,
                        format!("{} = \"{}\": not a number", order[c], cell.escape_default()),
                    )
                })?;
            columns[c].push(x);
        }
        lines.push(line);
    }
    if lines.is_empty() {
        return Err(at(
            header_line,
            format!("no data rows after the header ({what})"),
        ));
    }
    Ok((
        Columns {
            path,
            columns,
            lines,
        },
        order,
    ))
}

fn csv_error(path: &std::path::Path, e: csv::Error) -> Error {
    let line = e.position().map_or(0, |p| p.line());
    let msg = match e.kind() {
        csv::ErrorKind::Utf8 { .. } => "not valid UTF-8 text".to_string(),
        _ => super::tree::one_line(&e.to_string()),
    };
    Error::input(format!("{}:{line}: {msg}", path.display()))
}
