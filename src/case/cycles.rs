//! `[time.cycle_skipping]`: its keys, and the check that the forcing repeats with the
//! period given (a jump along the drift of one period is only meaningful when every
//! period is the same).

use super::build::opt_num;
use super::schedules::fmt_g;
use super::tree::Table;
use crate::error::Error;
use crate::model::{CycleSkipping, Model, TimeControl};
use crate::props::constants::SECONDS_PER_YEAR;
use crate::schedule::Schedule;

type R<T> = Result<T, Error>;

pub const CYCLE_KEYS: &[&str] = &[
    "period_year",
    "exact_periods",
    "max_jump_periods",
    "tolerance",
    "jump",
];

/// Default whole periods integrated exactly between two jumps.
pub const DEFAULT_EXACT_PERIODS: u64 = 4;
/// Default most periods one jump skips.
pub const DEFAULT_MAX_JUMP_PERIODS: u64 = 1000;
/// Default relative tolerance of a jump's estimated error: the integration's own
/// period-to-period scatter at rtol 1e-3 is 1e-2 to 1e-1 of the weights at 1e-3, which
/// would hold every jump to 1–2 periods.
pub const DEFAULT_TOLERANCE: f64 = 1.0e-2;

/// Reads `[time.cycle_skipping]` of the time section `t` (None when absent); the span
/// must hold a block of exact periods and one more.
pub fn read(t: &Table, start_year: f64, end_year: f64) -> R<Option<CycleSkipping>> {
    let Some(v) = t.get("cycle_skipping") else {
        return Ok(None);
    };
    let c = v.table(CYCLE_KEYS)?;
    let span = end_year - start_year;
    let pv = c.req("period_year", "the forcing period [years]")?;
    let period = super::build::num(
        &pv,
        |p| p > 0.0 && p.is_finite(),
        "must be a positive number of years (the forcing's period)",
    )?;
    let exact = match c.get("exact_periods") {
        Some(v) => v.usize_in(3, 1000, "whole periods integrated between jumps")? as u64,
        None => DEFAULT_EXACT_PERIODS,
    };
    if span < (exact + 1) as f64 * period {
        return Err(pv.err(format!(
            "the run ({} to {}, {} yr) must hold at least exact_periods + 1 = {} periods for a jump",
            fmt_g(start_year),
            fmt_g(end_year),
            fmt_g(span),
            exact + 1
        )));
    }
    let max_jump = match c.get("max_jump_periods") {
        Some(v) => v.usize_in(1, 1_000_000_000, "periods")? as u64,
        None => DEFAULT_MAX_JUMP_PERIODS,
    };
    let tolerance = opt_num(
        &c,
        "tolerance",
        |x| (1e-8..=0.1).contains(&x),
        "must be 1e-8 to 0.1 (relative)",
    )?
    .unwrap_or(DEFAULT_TOLERANCE);
    let implicit = match c.get("jump") {
        Some(v) => v.choice(&["explicit", "implicit"])? == "implicit",
        None => false,
    };
    Ok(Some(CycleSkipping {
        period: period * SECONDS_PER_YEAR,
        exact_periods: exact,
        max_jump_periods: max_jump,
        tolerance,
        implicit,
    }))
}

/// Why schedule `s` does not repeat with period `period` [s] over (start, end) [s], if
/// it does not: constants and sinusoids whose period divides `period` repeat; a table or
/// stepped schedule only when it does not change inside the run.
fn not_periodic(s: &Schedule, period: f64, start: f64, end: f64) -> Option<String> {
    match s {
        Schedule::Constant(_) => None,
        Schedule::Sine { .. } => sine_not_dividing(s, period),
        Schedule::Steps { .. } | Schedule::Table { .. } => {
            let tol = 1e-9 * period;
            s.breakpoints()
                .into_iter()
                .find(|&b| b > start + tol && b < end - tol)
                .map(|b| {
                    format!(
                        "a table or stepped schedule that changes inside the run (at {} yr after the start)",
                        fmt_g((b - start) / SECONDS_PER_YEAR)
                    )
                })
        }
        Schedule::Sum(parts) => parts
            .iter()
            .find_map(|p| not_periodic(p, period, start, end)),
    }
}

/// Why schedule `s` has a sinusoid whose period does not divide `period` [s], if it has
/// one (constants, tables and steps pass).
pub fn sine_not_dividing(s: &Schedule, period: f64) -> Option<String> {
    match s {
        Schedule::Sine { period: p, .. } => {
            let r = period / p;
            let k = r.round();
            if k >= 1.0 && (r - k).abs() <= 1e-9 * r {
                None
            } else {
                Some(format!(
                    "a sinusoid of period {} yr, which does not divide it",
                    fmt_g(p / SECONDS_PER_YEAR)
                ))
            }
        }
        Schedule::Sum(parts) => parts.iter().find_map(|p| sine_not_dividing(p, period)),
        _ => None,
    }
}

/// Refuses a model whose forcing does not repeat with the cycle-skipping period, or
/// that has what cycle skipping does not carry (solutes), naming `time.cycle_skipping
/// .period_year` of the case and what is allowed.
pub fn check(t: &Table, model: &Model) -> R<()> {
    let Some(cs) = model.time.cycle_skipping else {
        return Ok(());
    };
    let c = t
        .get("cycle_skipping")
        .ok_or_else(|| t.err("cycle_skipping missing"))?
        .table(CYCLE_KEYS)?;
    let pv = c.req("period_year", "the forcing period [years]")?;
    let TimeControl { start, end, .. } = model.time;
    let refuse = |what: &str, why: String| {
        pv.err(format!(
            "the forcing must repeat with this period, but {what} has {why} (allowed: constants and sinusoids whose periods divide it; no tables, steps or changes of boundary condition inside the run)"
        ))
    };
    let check_s = |what: &str, s: &Schedule| -> R<()> {
        match not_periodic(s, cs.period, start, end) {
            Some(why) => Err(refuse(what, why)),
            None => Ok(()),
        }
    };
    let tol = 1e-9 * cs.period;
    let inside = |b: f64| b > start + tol && b < end - tol;
    let change = |what: &str, b: f64| {
        refuse(
            what,
            format!(
                "a change of condition at {} yr after the start",
                fmt_g((b - start) / SECONDS_PER_YEAR)
            ),
        )
    };
    // Only the periods in force during the run count: each with its start and schedules,
    // the surface's, the bottom's and the plants', in that order.
    fn in_force<T>(periods: &[(f64, T)], start: f64, end: f64) -> impl Iterator<Item = &(f64, T)> {
        periods.iter().enumerate().filter_map(move |(k, p)| {
            let later = periods.get(k + 1).is_none_or(|next| next.0 > start);
            (later && p.0 < end).then_some(p)
        })
    }
    // (what, the period's start, its schedules with what each is)
    type Condition<'a> = (&'a str, f64, Vec<(&'a str, &'a Schedule)>);
    let mut conditions: Vec<Condition> = Vec::new();
    for (b, bc) in in_force(&model.surface.periods, start, end) {
        conditions.push(("[surface]", *b, bc.schedules().collect()));
    }
    for (b, bc) in in_force(&model.bottom.periods, start, end) {
        conditions.push(("[bottom]", *b, bc.schedules().collect()));
    }
    for (b, v) in in_force(&model.vegetation.periods, start, end) {
        let schedules = v
            .iter()
            .map(|v| ("the potential transpiration", &v.transpiration))
            .collect();
        conditions.push(("[[vegetation]]", *b, schedules));
    }
    for (label, b, schedules) in conditions {
        if inside(b) {
            return Err(change(label, b));
        }
        for (what, s) in schedules {
            check_s(what, s)?;
        }
    }
    if !model.solutes.is_empty() {
        return Err(pv.err(
            "cycle skipping does not carry solutes (their masses are not extrapolated): remove [time.cycle_skipping] or the [[solutes]]",
        ));
    }
    Ok(())
}
