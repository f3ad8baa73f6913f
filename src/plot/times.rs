//! Choosing which snapshots to draw.

use crate::error::{Error, Result};

/// Default number of snapshots drawn when no times are requested.
pub const DEFAULT_COUNT: usize = 6;

/// Indices of the snapshots nearest to each requested time [year], in increasing time
/// order without repeats. A requested time outside the span of `available` (or a
/// non-finite one) is an [`Error::Input`].
pub fn pick_nearest(available: &[f64], requested: &[f64]) -> Result<Vec<usize>> {
    if available.is_empty() {
        return Err(Error::input("the results file has no snapshots"));
    }
    let lo = available.iter().cloned().fold(f64::INFINITY, f64::min);
    let hi = available.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
    let slack = 1e-9 * lo.abs().max(hi.abs()).max(1e-12);
    let mut out = Vec::new();
    for &t in requested {
        if !t.is_finite() || t < lo - slack || t > hi + slack {
            return Err(Error::input(format!(
                "--times: {t} yr is outside the snapshots of the results file ({} to {} yr)",
                super::scale::format_real(lo).replace('−', "-"),
                super::scale::format_real(hi).replace('−', "-"),
            )));
        }
        out.push(nearest(available, t, |a, b| (a - b).abs()));
    }
    Ok(sorted_unique(available, out))
}

/// Up to `count` snapshots spread evenly in log time between the first positive
/// snapshot time and the last; a snapshot at t <= 0 (the initial state) is always
/// included, as is the last snapshot. All snapshots when there are at most `count`.
pub fn pick_default(available: &[f64], count: usize) -> Vec<usize> {
    let n = available.len();
    if n <= count {
        return sorted_unique(available, (0..n).collect());
    }
    let mut out = Vec::new();
    let mut slots = count.max(1);
    let positive: Vec<f64> = available.iter().cloned().filter(|t| *t > 0.0).collect();
    if let Some(i0) = (0..n).find(|&i| available[i] <= 0.0) {
        out.push(i0);
        slots -= 1;
    }
    if !positive.is_empty() && slots > 0 {
        let a = positive
            .iter()
            .cloned()
            .fold(f64::INFINITY, f64::min)
            .log10();
        let b = positive
            .iter()
            .cloned()
            .fold(f64::NEG_INFINITY, f64::max)
            .log10();
        let log_dist = |x: f64, y: f64| {
            if x > 0.0 {
                (x.log10() - y).abs()
            } else {
                f64::INFINITY
            }
        };
        for k in 0..slots {
            let target = if slots == 1 {
                b
            } else {
                a + (b - a) * k as f64 / (slots - 1) as f64
            };
            out.push(nearest(available, target, log_dist));
        }
    }
    sorted_unique(available, out)
}

/// The default snapshots with the times the user asked for first: the snapshots at the
/// `asked` times (those the file has, to rounding), then as many of [`pick_default`]'s
/// as fit in `count`. When more than `count` times were asked for, `count` of them spread
/// over the list (the first and last included).
pub fn pick_default_with(available: &[f64], count: usize, asked: &[f64]) -> Vec<usize> {
    let count = count.max(1);
    let first: Vec<usize> = asked
        .iter()
        .filter(|t| t.is_finite())
        .filter_map(|&t| {
            let i = nearest(available, t, |a, b| (a - b).abs());
            let at = available.get(i)?;
            ((at - t).abs() <= 1e-9 * t.abs().max(1.0)).then_some(i)
        })
        .collect();
    let first = sorted_unique(available, first);
    let k = first.len();
    if k == 0 {
        return pick_default(available, count);
    }
    if k >= count {
        let spread = (0..count)
            .map(|j| {
                first[if count == 1 {
                    k - 1
                } else {
                    j * (k - 1) / (count - 1)
                }]
            })
            .collect();
        return sorted_unique(available, spread);
    }
    let mut best = first.clone();
    for extra in (count - k)..=available.len() {
        let mut u = first.clone();
        u.extend(pick_default(available, extra));
        let u = sorted_unique(available, u);
        if u.len() > count {
            break;
        }
        let full = u.len() == count;
        best = u;
        if full {
            break;
        }
    }
    best
}

fn nearest(available: &[f64], t: f64, dist: impl Fn(f64, f64) -> f64) -> usize {
    let mut best = 0;
    let mut d_best = f64::INFINITY;
    for (i, &a) in available.iter().enumerate() {
        let d = dist(a, t);
        if d < d_best {
            best = i;
            d_best = d;
        }
    }
    best
}

fn sorted_unique(available: &[f64], mut idx: Vec<usize>) -> Vec<usize> {
    idx.sort_by(|&i, &j| available[i].total_cmp(&available[j]).then(i.cmp(&j)));
    idx.dedup();
    idx
}
