//! Observation files: measured profiles against depth, one observation a row.
//!
//! ```text
//! time_year,depth_m,quantity,value,sigma
//! 15000,2.5,log10_suction_m,2.9,0.1
//! 15000,2.5,temperature_C,18.4,0.2
//! ```
//!
//! `time_year` [year, the case's time axis], `depth_m` [m, positive downward], `value` in
//! the quantity's unit, `sigma` its standard error (> 0, same unit). Quantities:
//! `temperature_C` [°C], `head_m` [m], `log10_suction_m` [log10 of m of suction, i.e. of
//! −h], `liquid_content` [m³ m⁻³], `concentration_<solute>` [g m⁻³] (for runs with
//! solutes). Lines starting with `#` are comments. Errors name the file and the line.

use crate::error::Error;
use std::path::{Path, PathBuf};

/// The header an observation file must have.
pub const HEADER: [&str; 5] = ["time_year", "depth_m", "quantity", "value", "sigma"];

/// Largest observation file read [bytes] (a larger one is refused, not read).
pub const MAX_FILE_BYTES: u64 = 64 * 1024 * 1024;

/// What was measured.
#[derive(Debug, Clone, PartialEq)]
pub enum Quantity {
    TemperatureC,
    HeadM,
    Log10SuctionM,
    LiquidContent,
    Concentration(String),
}

impl Quantity {
    /// Parses a quantity name; None when unknown.
    pub fn parse(s: &str) -> Option<Quantity> {
        Some(match s {
            "temperature_C" => Quantity::TemperatureC,
            "head_m" => Quantity::HeadM,
            "log10_suction_m" => Quantity::Log10SuctionM,
            "liquid_content" => Quantity::LiquidContent,
            _ => {
                let solute = s.strip_prefix("concentration_")?;
                if solute.is_empty()
                    || !solute
                        .chars()
                        .all(|c| c.is_ascii_alphanumeric() || c == '_')
                {
                    return None;
                }
                Quantity::Concentration(solute.to_string())
            }
        })
    }

    /// The name as written in observation files.
    pub fn name(&self) -> String {
        match self {
            Quantity::TemperatureC => "temperature_C".into(),
            Quantity::HeadM => "head_m".into(),
            Quantity::Log10SuctionM => "log10_suction_m".into(),
            Quantity::LiquidContent => "liquid_content".into(),
            Quantity::Concentration(s) => format!("concentration_{s}"),
        }
    }

    /// Unit of values and sigmas.
    pub fn unit(&self) -> &'static str {
        match self {
            Quantity::TemperatureC => "degC",
            Quantity::HeadM => "m",
            Quantity::Log10SuctionM => "log10(m)",
            Quantity::LiquidContent => "m3 m-3",
            Quantity::Concentration(_) => "g m-3",
        }
    }
}

/// One observation.
#[derive(Debug, Clone, PartialEq)]
pub struct Observation {
    pub time_year: f64,
    pub depth_m: f64,
    pub quantity: Quantity,
    pub value: f64,
    pub sigma: f64,
    /// Line in the file (for messages).
    pub line: u64,
}

/// The observations of one file.
#[derive(Debug, Clone)]
pub struct Observations {
    pub path: PathBuf,
    pub rows: Vec<Observation>,
}

impl Observations {
    /// The distinct observation times, sorted [year].
    pub fn times(&self) -> Vec<f64> {
        let mut t: Vec<f64> = self.rows.iter().map(|o| o.time_year).collect();
        t.sort_by(|a, b| a.total_cmp(b));
        t.dedup();
        t
    }
}

fn clean(s: &str) -> String {
    s.chars()
        .map(|c| if c.is_control() { '?' } else { c })
        .collect()
}

/// Reads an observation file.
pub fn read(path: &Path) -> Result<Observations, Error> {
    let p = path.display();
    let meta = std::fs::metadata(path)
        .map_err(|e| Error::input(format!("{p}: cannot read the observation file: {e}")))?;
    if !meta.is_file() {
        return Err(Error::input(format!(
            "{p}: not a regular file; an observation file is a CSV file"
        )));
    }
    if meta.len() > MAX_FILE_BYTES {
        return Err(Error::input(format!(
            "{p}: {} bytes; observation files are limited to {MAX_FILE_BYTES} bytes",
            meta.len()
        )));
    }
    let bytes = std::fs::read(path)
        .map_err(|e| Error::input(format!("{p}: cannot read the observation file: {e}")))?;
    let text = String::from_utf8(bytes)
        .map_err(|_| Error::input(format!("{p}: not UTF-8 text; an observation file is CSV")))?;
    parse(&text, path)
}

/// Parses the text of an observation file (`path` for messages).
pub fn parse(text: &str, path: &Path) -> Result<Observations, Error> {
    let p = path.display();
    let mut rows = Vec::new();
    let mut header_seen = false;
    for (k, raw) in text.lines().enumerate() {
        let line = k as u64 + 1;
        let l = raw.trim();
        if l.is_empty() || l.starts_with('#') {
            continue;
        }
        let cells: Vec<&str> = l.split(',').map(str::trim).collect();
        if !header_seen {
            if cells != HEADER {
                return Err(Error::input(format!(
                    "{p}:{line}: header `{}`; an observation file starts with `{}`",
                    clean(l),
                    HEADER.join(",")
                )));
            }
            header_seen = true;
            continue;
        }
        if cells.len() != HEADER.len() {
            return Err(Error::input(format!(
                "{p}:{line}: {} cells; each row has the {} cells `{}`",
                cells.len(),
                HEADER.len(),
                HEADER.join(",")
            )));
        }
        let num = |col: usize| -> Result<f64, Error> {
            let c = cells[col];
            match c.parse::<f64>() {
                Ok(v) if v.is_finite() => Ok(v),
                _ => Err(Error::input(format!(
                    "{p}:{line}: {} = `{}`: must be a finite number",
                    HEADER[col],
                    clean(c)
                ))),
            }
        };
        let time_year = num(0)?;
        let depth_m = num(1)?;
        if depth_m < 0.0 {
            return Err(Error::input(format!(
                "{p}:{line}: depth_m = {depth_m}: must be ≥ 0 (depth below the surface)"
            )));
        }
        let quantity = Quantity::parse(cells[2]).ok_or_else(|| {
            Error::input(format!(
                "{p}:{line}: quantity = `{}`: allowed are temperature_C, head_m, log10_suction_m, liquid_content, concentration_<solute>",
                clean(cells[2])
            ))
        })?;
        let value = num(3)?;
        let sigma = num(4)?;
        if sigma <= 0.0 {
            return Err(Error::input(format!(
                "{p}:{line}: sigma = {sigma}: must be > 0 (the observation's standard error)"
            )));
        }
        if quantity == Quantity::LiquidContent && !(0.0..=1.0).contains(&value) {
            return Err(Error::input(format!(
                "{p}:{line}: liquid_content = {value}: must lie in [0, 1]"
            )));
        }
        if matches!(quantity, Quantity::Concentration(_)) && value < 0.0 {
            return Err(Error::input(format!(
                "{p}:{line}: {} = {value}: must be ≥ 0",
                quantity.name()
            )));
        }
        rows.push(Observation {
            time_year,
            depth_m,
            quantity,
            value,
            sigma,
            line,
        });
    }
    if !header_seen {
        return Err(Error::input(format!(
            "{p}: empty; an observation file starts with `{}`",
            HEADER.join(",")
        )));
    }
    if rows.is_empty() {
        return Err(Error::input(format!(
            "{p}: no observations after the header"
        )));
    }
    Ok(Observations {
        path: path.to_path_buf(),
        rows,
    })
}
