//! Schedules in a case file. Times are years in the file and seconds in the model; values
//! are in the unit named by the key and converted once to SI.
//!
//! Forms (a plain number is a constant; otherwise an inline table whose keys say the form):
//! - `{ steps = [[from_year, value], …] }` — piecewise constant
//! - `{ table = [[year, value], …] }` — piecewise linear, held at the end values outside
//! - `{ table_csv = "file.csv" }`, `{ steps_csv = "file.csv" }` — the same from a CSV file
//!   with the header `time_year,<key>` (e.g. `time_year,temperature_C`)
//! - `{ from_year, to_year, start, end }` — a linear ramp (held outside)
//! - `{ mean, amplitude, period_year, phase_year }` — a sinusoid
//! - `{ sum = [schedule, …] }` — the sum of schedules of any form

use super::csvfile::{self, Header};
use super::tree::Value;
use crate::error::Error;
use crate::props::constants::{CELSIUS_ZERO, SECONDS_PER_YEAR};
use crate::schedule::Schedule;

/// A scheduled quantity: its unit in the file and the conversion SI = scale·value + offset.
#[derive(Debug, Clone, Copy)]
pub struct Quantity {
    /// Unit shown to users ("°C", "m", …).
    pub unit: &'static str,
    pub scale: f64,
    pub offset: f64,
    /// Valid range in file units (inclusive unless `lo_open`).
    pub lo: f64,
    pub hi: f64,
    pub lo_open: bool,
    /// Why the range is what it is (appended to range errors), may be empty.
    pub note: &'static str,
}

impl Quantity {
    fn contains(&self, v: f64) -> bool {
        (if self.lo_open {
            v > self.lo
        } else {
            v >= self.lo
        }) && v <= self.hi
    }
    fn allowed(&self) -> String {
        let unit = if self.unit.is_empty() {
            String::new()
        } else {
            format!(" {}", self.unit)
        };
        let open = if self.lo_open { "(" } else { "[" };
        format!(
            "must be in {open}{}, {}]{unit}{}",
            fmt_g(self.lo),
            fmt_g(self.hi),
            self.note
        )
    }
    /// File units → SI.
    pub fn to_si(&self, s: &Schedule) -> Schedule {
        s.affine(self.scale, self.offset)
    }
    /// SI → file units (for the summary).
    pub fn from_si(&self, s: &Schedule) -> Schedule {
        s.affine(1.0 / self.scale, -self.offset / self.scale)
    }
}

/// The valid temperature range of the whole program [°C].
pub const T_MIN_C: f64 = 0.1;
pub const T_MAX_C: f64 = 99.0;
pub const T_NOTE: &str = " (the water properties hold from 0.01 to 100 °C)";

pub const TEMPERATURE: Quantity = Quantity {
    unit: "°C",
    scale: 1.0,
    offset: CELSIUS_ZERO,
    lo: T_MIN_C,
    hi: T_MAX_C,
    lo_open: false,
    note: T_NOTE,
};
pub const HEAD: Quantity = Quantity {
    unit: "m",
    scale: 1.0,
    offset: 0.0,
    lo: -1.0e6,
    hi: 1.0e3,
    lo_open: false,
    note: "",
};
pub const WATER_FLUX: Quantity = Quantity {
    unit: "mm/yr",
    scale: 1.0e-3 / SECONDS_PER_YEAR,
    offset: 0.0,
    lo: -1.0e6,
    hi: 1.0e6,
    lo_open: false,
    note: " (positive downward)",
};
pub const RELATIVE_HUMIDITY: Quantity = Quantity {
    unit: "",
    scale: 1.0,
    offset: 0.0,
    lo: 0.0,
    hi: 1.0,
    lo_open: true,
    note: " (a fraction, not per cent)",
};
pub const RESISTANCE: Quantity = Quantity {
    unit: "s/m",
    scale: 1.0,
    offset: 0.0,
    lo: 0.0,
    hi: 1.0e6,
    lo_open: true,
    note: " (omit the key for a surface held at the air humidity)",
};
pub const HEAT_FLUX: Quantity = Quantity {
    unit: "W/m²",
    scale: 1.0,
    offset: 0.0,
    lo: -1.0e3,
    hi: 1.0e3,
    lo_open: false,
    note: " (positive downward)",
};
pub const GEOTHERMAL_FLUX: Quantity = Quantity {
    unit: "W/m²",
    scale: 1.0,
    offset: 0.0,
    lo: -10.0,
    hi: 10.0,
    lo_open: false,
    note: " (positive upward; a typical continental value is 0.065 W/m²)",
};

pub const DEPOSITION: Quantity = Quantity {
    unit: "g/m²/yr",
    scale: 1.0 / SECONDS_PER_YEAR,
    offset: 0.0,
    lo: 0.0,
    hi: 1.0e6,
    lo_open: false,
    note: " (solute deposited on the surface, wet and dry)",
};
pub const CONCENTRATION: Quantity = Quantity {
    unit: "g/m³",
    scale: 1.0,
    offset: 0.0,
    lo: 0.0,
    hi: 1.0e6,
    lo_open: false,
    note: " (per m³ of liquid water; 1 g/m³ = 1 mg/L)",
};

/// Number formatting for messages and summaries: up to 6 significant digits, exponent
/// form for very large or small magnitudes.
pub fn fmt_g(x: f64) -> String {
    if x == 0.0 || !x.is_finite() {
        return format!("{x}");
    }
    let a = x.abs();
    if !(1e-4..1e6).contains(&a) {
        let s = format!("{x:.5e}");
        let (m, e) = s.split_once('e').unwrap_or((&s, "0"));
        let m = m.trim_end_matches('0').trim_end_matches('.');
        return format!("{m}e{e}");
    }
    let digits = (5 - a.log10().floor() as i32).max(0) as usize;
    let s = format!("{x:.digits$}");
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

const FORMS: &[(&str, &[&str])] = &[
    ("steps", &["steps"]),
    ("table", &["table"]),
    ("table_csv", &["table_csv"]),
    ("steps_csv", &["steps_csv"]),
    ("ramp", &["from_year", "to_year", "start", "end"]),
    ("sine", &["mean", "amplitude", "period_year", "phase_year"]),
    ("sum", &["sum"]),
];

const ALL_KEYS: &[&str] = &[
    "steps",
    "table",
    "table_csv",
    "steps_csv",
    "from_year",
    "to_year",
    "start",
    "end",
    "mean",
    "amplitude",
    "period_year",
    "phase_year",
    "sum",
];

thread_local! {
    /// The time origin of the case being read: schedule times are stored as seconds since
    /// it (see [`crate::model::TimeControl::epoch_year`]).
    static EPOCH_YEAR: std::cell::Cell<f64> = const { std::cell::Cell::new(0.0) };
}

/// Sets the time origin year that schedule times are read against, for as long as the guard
/// lives (on this thread); the year before is restored when it is dropped.
pub struct EpochGuard(f64);

impl EpochGuard {
    pub fn set(year: f64) -> EpochGuard {
        EpochGuard(EPOCH_YEAR.with(|e| e.replace(year)))
    }
}

impl Drop for EpochGuard {
    fn drop(&mut self) {
        EPOCH_YEAR.with(|e| e.set(self.0));
    }
}

/// The time origin year set by the innermost live [`EpochGuard`] on this thread (0 when none).
pub fn epoch() -> f64 {
    EPOCH_YEAR.with(|e| e.get())
}

/// Seconds since the time origin of the case being read, of `year`.
fn seconds_of(year: f64) -> f64 {
    (year - epoch()) * SECONDS_PER_YEAR
}

/// Reads the schedule at `v` (key `key`, e.g. `temperature_C`) and converts it to SI.
pub fn read(v: &Value, key: &str, q: &Quantity) -> Result<Schedule, Error> {
    let s = read_user(v, key, q, true)?;
    Ok(q.to_si(&s))
}

/// Reads a schedule in file units (times already in seconds). `check` checks each value
/// against the quantity's range (off inside sums, whose parts may be offsets).
fn read_user(v: &Value, key: &str, q: &Quantity, check: bool) -> Result<Schedule, Error> {
    let check_value = |item: &Value, x: f64| -> Result<(), Error> {
        if check && !q.contains(x) {
            return Err(item.err(q.allowed()));
        }
        Ok(())
    };
    if v.is_number() {
        let x = v.f64()?;
        check_value(v, x)?;
        return Ok(Schedule::Constant(x));
    }
    if !v.is_table() {
        return Err(v.err(format!(
            "expected a number or a schedule table, found {}",
            v.node.kind.type_name()
        )));
    }
    let t = v.table(ALL_KEYS)?;
    let present: Vec<&str> = FORMS
        .iter()
        .filter(|(_, keys)| keys.iter().any(|k| t.has(k)))
        .map(|(name, _)| *name)
        .collect();
    let form = match present.as_slice() {
        [one] => *one,
        [] => {
            return Err(t.err(
                "empty schedule: give a number or a table with steps, table, table_csv, \
                 steps_csv, a ramp (from_year, to_year, start, end), a sinusoid (mean, \
                 amplitude, period_year, phase_year) or sum",
            ))
        }
        [a, b, ..] => {
            return Err(t.err(format!(
                "mixes the {a} and {b} forms; one form per table (add forms with sum = [...])"
            )))
        }
    };
    let year = |item: &Value| -> Result<f64, Error> {
        let y = item.f64()?;
        if !(y.is_finite() && y.abs() <= crate::case::build::MAX_ABS_YEAR) {
            return Err(item.err(format!(
                "must be a finite year within ±{} (the time keeping's range)",
                fmt_g(crate::case::build::MAX_ABS_YEAR)
            )));
        }
        Ok(seconds_of(y))
    };
    let s = match form {
        "steps" | "table" => {
            let list = t.req(form, "")?;
            let pairs = list.array()?;
            if pairs.is_empty() {
                return Err(list.err("needs at least one [year, value] pair"));
            }
            let (mut times, mut values) = (Vec::new(), Vec::new());
            for p in &pairs {
                let xs = p.array()?;
                if xs.len() != 2 {
                    return Err(p.err("expected a pair [year, value]"));
                }
                let time = year(&xs[0])?;
                if let Some(&prev) = times.last() {
                    if time <= prev {
                        return Err(xs[0].err(format!(
                            "not after the previous time ({} yr); times must increase strictly",
                            fmt_g(epoch() + prev / SECONDS_PER_YEAR)
                        )));
                    }
                }
                let x = xs[1].f64()?;
                check_value(&xs[1], x)?;
                times.push(time);
                values.push(x);
            }
            if form == "steps" {
                Schedule::Steps { times, values }
            } else {
                Schedule::Table { times, values }
            }
        }
        "table_csv" | "steps_csv" => {
            let file = t.req(form, "")?;
            let header = ["time_year", key];
            let what = format!("schedule {}", v.path);
            let (cols, _) = csvfile::read(&file, Header::Exact(&header), &what)?;
            cols.strictly_increasing(0, "time_year")?;
            if let Some(row) = cols.columns[0]
                .iter()
                .position(|y| !(y.is_finite() && y.abs() <= crate::case::build::MAX_ABS_YEAR))
            {
                return Err(cols.err(
                    row,
                    format!(
                        "time_year = {}: must be a finite year within ±{}",
                        cols.columns[0][row],
                        fmt_g(crate::case::build::MAX_ABS_YEAR)
                    ),
                ));
            }
            if check {
                for (row, &x) in cols.columns[1].iter().enumerate() {
                    if !q.contains(x) {
                        return Err(cols.err(row, format!("{key} = {x}: {}", q.allowed())));
                    }
                }
            }
            let times = cols.columns[0].iter().map(|y| seconds_of(*y)).collect();
            let values = cols.columns[1].clone();
            if form == "steps_csv" {
                Schedule::Steps { times, values }
            } else {
                Schedule::Table { times, values }
            }
        }
        "ramp" => {
            let from = t.req("from_year", "the ramp's start time")?;
            let to = t.req("to_year", "the ramp's end time")?;
            let start = t.req("start", "the value up to from_year")?;
            let end = t.req("end", "the value from to_year on")?;
            let (t0, t1) = (year(&from)?, year(&to)?);
            if t1 <= t0 {
                return Err(to.err("must be after from_year"));
            }
            let (a, b) = (start.f64()?, end.f64()?);
            check_value(&start, a)?;
            check_value(&end, b)?;
            Schedule::Table {
                times: vec![t0, t1],
                values: vec![a, b],
            }
        }
        "sine" => {
            let period = t.req("period_year", "the period of the sinusoid")?;
            let p = period.f64()? * SECONDS_PER_YEAR;
            if !(p > 0.0 && p / SECONDS_PER_YEAR <= crate::case::build::MAX_ABS_YEAR) {
                return Err(period.err(format!(
                    "must be > 0 and at most {} years",
                    fmt_g(crate::case::build::MAX_ABS_YEAR)
                )));
            }
            let s = Schedule::Sine {
                mean: t.f64_or("mean", 0.0)?,
                amplitude: t.req("amplitude", "the amplitude of the sinusoid")?.f64()?,
                period: p,
                phase: {
                    // Reduced by whole periods at a far epoch, so the sine's argument
                    // stays small (its value is the same).
                    let phase = t.f64_or("phase_year", 0.0)? - epoch();
                    let period_year = p / SECONDS_PER_YEAR;
                    if epoch() != 0.0 && period_year.is_finite() && period_year > 0.0 {
                        phase.rem_euclid(period_year) * SECONDS_PER_YEAR
                    } else {
                        phase * SECONDS_PER_YEAR
                    }
                },
            };
            check_bounds(v, &s, q, check)?;
            s
        }
        _ => {
            let list = t.req("sum", "")?;
            let parts = list.array()?;
            if parts.is_empty() {
                return Err(list.err("needs at least one schedule"));
            }
            let parts = parts
                .iter()
                .map(|p| read_user(p, key, q, false))
                .collect::<Result<Vec<_>, _>>()?;
            let s = Schedule::Sum(parts);
            check_bounds(v, &s, q, check)?;
            s
        }
    };
    Ok(s)
}

fn check_bounds(v: &Value, s: &Schedule, q: &Quantity, check: bool) -> Result<(), Error> {
    let (lo, hi) = s.bounds();
    if check && !(q.contains(lo) && q.contains(hi)) {
        return Err(v.err_at(format!(
            "the schedule ranges over {}..{}{}; it {}",
            fmt_g(lo),
            fmt_g(hi),
            if q.unit.is_empty() {
                String::new()
            } else {
                format!(" {}", q.unit)
            },
            q.allowed()
        )));
    }
    Ok(())
}

/// A schedule in file units, described on one line (for the summary).
pub fn describe(s: &Schedule, unit: &str) -> String {
    let epoch_year = epoch();
    let u = |x: f64| {
        if unit.is_empty() {
            fmt_g(x)
        } else {
            format!("{} {unit}", fmt_g(x))
        }
    };
    let yr = |t: f64| fmt_g(epoch_year + t / SECONDS_PER_YEAR);
    let pairs = |times: &[f64], values: &[f64], max: usize| {
        let mut parts: Vec<String> = times
            .iter()
            .zip(values)
            .take(max)
            .map(|(t, v)| format!("{} at year {}", u(*v), yr(*t)))
            .collect();
        if times.len() > max {
            parts.push(format!("… ({} points)", times.len()));
        }
        parts.join(", ")
    };
    match s {
        Schedule::Constant(c) => u(*c),
        Schedule::Steps { values, .. } | Schedule::Table { values, .. } if values.is_empty() => {
            "empty".to_string()
        }
        Schedule::Steps { times, values } => {
            let mut parts = vec![u(values[0])];
            for (t, v) in times.iter().zip(values).skip(1).take(5) {
                parts.push(format!("{} from year {}", u(*v), yr(*t)));
            }
            if times.len() > 6 {
                parts.push(format!("… ({} steps)", times.len()));
            }
            format!("steps: {}", parts.join(", "))
        }
        Schedule::Table { times, values } => {
            format!("linear table: {}", pairs(times, values, 6))
        }
        Schedule::Sine {
            mean,
            amplitude,
            period,
            phase,
        } => format!(
            "sinusoid: mean {}, amplitude {}, period {} yr, phase {} yr",
            u(*mean),
            u(*amplitude),
            fmt_g(period / SECONDS_PER_YEAR),
            yr(*phase)
        ),
        Schedule::Sum(parts) => format!(
            "sum of [{}]",
            parts
                .iter()
                .map(|p| describe(p, unit))
                .collect::<Vec<_>>()
                .join("; ")
        ),
    }
}

#[cfg(test)]
mod tests {
    use super::fmt_g;

    #[test]
    fn number_format() {
        assert_eq!(fmt_g(18.000000000000025), "18");
        assert_eq!(fmt_g(1.0e6), "1e6");
        assert_eq!(fmt_g(1.23e-5), "1.23e-5");
        assert_eq!(fmt_g(0.065), "0.065");
        assert_eq!(fmt_g(-10.0), "-10");
        assert_eq!(fmt_g(291.15), "291.15");
        assert_eq!(fmt_g(1000.0), "1000");
    }
}
