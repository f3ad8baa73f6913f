//! Axis scales for the plots: linear, base-10 log and symmetric log, each with its own
//! tick positions and tick labels in real (untransformed) values.
//!
//! The symmetric-log transform with linear band half-width `c > 0` is
//!
//! ```text
//! s(x) = x / c                          for |x| <= c
//! s(x) = sign(x) (1 + log10(|x| / c))   for |x| >  c
//! ```
//!
//! It is continuous, strictly increasing and odd; `s(±c 10^k) = ±(1 + k)`, so one unit of
//! the transformed axis is one decade outside the band and the band itself spans ±1.

use plotters::coord::ranged1d::{KeyPointHint, NoDefaultFormatting, Ranged, ValueFormatter};
use std::ops::Range;

/// The symmetric-log transform (see the module documentation).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SymLog {
    /// Half-width of the linear band around zero (> 0).
    pub linear: f64,
}

impl SymLog {
    pub fn new(linear: f64) -> Self {
        assert!(
            linear > 0.0 && linear.is_finite(),
            "the symmetric-log band must be > 0"
        );
        SymLog { linear }
    }

    /// The transformed value.
    pub fn forward(&self, x: f64) -> f64 {
        let a = x.abs() / self.linear;
        if a <= 1.0 {
            x / self.linear
        } else {
            x.signum() * (1.0 + a.log10())
        }
    }

    /// The inverse of [`SymLog::forward`].
    pub fn inverse(&self, y: f64) -> f64 {
        if y.abs() <= 1.0 {
            y * self.linear
        } else {
            y.signum() * self.linear * 10f64.powf(y.abs() - 1.0)
        }
    }

    /// A band half-width for data whose largest magnitude is `max_abs`: a power of ten
    /// `decades` decades below it (1 when the data are all zero).
    pub fn for_data(max_abs: f64, decades: i32) -> Self {
        if max_abs.is_nan() || max_abs <= 0.0 || max_abs.is_infinite() {
            return SymLog::new(1.0);
        }
        let k = max_abs.log10().floor() as i32 - decades;
        SymLog::new(10f64.powi(k))
    }
}

/// How values map onto an axis.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Scale {
    Linear,
    /// Base-10 log; values <= 0 cannot be drawn.
    Log,
    SymLog(SymLog),
}

impl Scale {
    /// The transformed value (NaN where the scale cannot show `v`).
    pub fn forward(&self, v: f64) -> f64 {
        match self {
            Scale::Linear => v,
            Scale::Log => {
                if v > 0.0 {
                    v.log10()
                } else {
                    f64::NAN
                }
            }
            Scale::SymLog(s) => s.forward(v),
        }
    }

    pub fn inverse(&self, y: f64) -> f64 {
        match self {
            Scale::Linear => y,
            Scale::Log => 10f64.powf(y),
            Scale::SymLog(s) => s.inverse(y),
        }
    }

    /// Whether `v` can be drawn on this scale.
    pub fn shows(&self, v: f64) -> bool {
        v.is_finite() && (*self != Scale::Log || v > 0.0)
    }

    /// An axis range covering `values` (those the scale can show): padded on a linear
    /// scale, widened to whole decades on a log or symmetric-log scale (which always includes 0).
    /// `None` when no value can be shown.
    pub fn range_for(&self, values: impl IntoIterator<Item = f64>) -> Option<(f64, f64)> {
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        for v in values {
            if self.shows(v) {
                let t = self.forward(v);
                lo = lo.min(t);
                hi = hi.max(t);
            }
        }
        if lo > hi {
            return None;
        }
        let (lo, hi) = match self {
            Scale::Linear => {
                if hi - lo <= 1e-12 * hi.abs().max(lo.abs()).max(1e-300) {
                    let d = if hi == 0.0 { 1.0 } else { 0.05 * hi.abs() };
                    (lo - d, hi + d)
                } else {
                    let pad = 0.04 * (hi - lo);
                    (lo - pad, hi + pad)
                }
            }
            Scale::Log => {
                let (l, h) = (lo.floor(), hi.ceil());
                if h - l < 1.0 {
                    (l, l + 1.0)
                } else {
                    (l, h)
                }
            }
            Scale::SymLog(_) => {
                let (l, h) = (lo.min(0.0).floor(), hi.max(0.0).ceil());
                if h - l < 1.0 {
                    (-1.0, 1.0)
                } else {
                    (l, h)
                }
            }
        };
        Some((self.inverse(lo), self.inverse(hi)))
    }
}

/// One axis: a scale on the closed value range `lo..=hi`, optionally drawn reversed
/// (larger values at the bottom of a y axis: depth downward).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Axis {
    pub scale: Scale,
    pub lo: f64,
    pub hi: f64,
    pub reversed: bool,
    /// Most labelled ticks (tick positions and label decimals both follow from it).
    pub max_ticks: usize,
}

impl Axis {
    pub fn new(scale: Scale, lo: f64, hi: f64) -> Self {
        Axis {
            scale,
            lo,
            hi,
            reversed: false,
            max_ticks: 9,
        }
    }

    pub fn with_ticks(mut self, max: usize) -> Self {
        self.max_ticks = max.max(2);
        self
    }

    pub fn reversed(mut self) -> Self {
        self.reversed = true;
        self
    }

    /// Position of `v` along the axis, 0 at `lo` and 1 at `hi` (before any reversal).
    fn unreversed_fraction(&self, v: f64) -> f64 {
        let (a, b) = (self.scale.forward(self.lo), self.scale.forward(self.hi));
        (self.scale.forward(v) - a) / (b - a)
    }

    /// Position of `v` along the drawn axis, from 0 at the start (left or bottom) to 1.
    pub fn fraction(&self, v: f64) -> f64 {
        let f = self.unreversed_fraction(v);
        if self.reversed {
            1.0 - f
        } else {
            f
        }
    }

    /// Whether `v` lies on the drawn axis (inclusive, with a little rounding slack).
    pub fn contains(&self, v: f64) -> bool {
        self.scale.shows(v) && (-1e-9..=1.0 + 1e-9).contains(&self.unreversed_fraction(v))
    }

    /// Tick positions: major ones (labelled) when `minor` is false, else the minor ones.
    /// At most about `max` major ticks.
    pub fn ticks(&self, max: usize, minor: bool) -> Vec<f64> {
        let max = max.max(2);
        let ticks = match self.scale {
            Scale::Linear => linear_ticks(self.lo, self.hi, max, minor),
            Scale::Log => log_ticks(self.lo, self.hi, max, minor),
            Scale::SymLog(s) => symlog_ticks(s, self.lo, self.hi, max, minor),
        };
        ticks.into_iter().filter(|v| self.contains(*v)).collect()
    }

    /// The label of a tick at `v`.
    pub fn label(&self, v: f64) -> String {
        match self.scale {
            Scale::Linear => format_linear(v, linear_step(self.lo, self.hi, self.max_ticks)),
            Scale::Log | Scale::SymLog(_) => format_real(v),
        }
    }
}

impl Ranged for Axis {
    type FormatOption = NoDefaultFormatting;
    type ValueType = f64;

    fn map(&self, value: &f64, limit: (i32, i32)) -> i32 {
        let f = self.fraction(*value);
        let f = if f.is_finite() {
            f.clamp(-10.0, 11.0)
        } else {
            0.0
        };
        (limit.0 as f64 + f * (limit.1 - limit.0) as f64).round() as i32
    }

    fn key_points<Hint: KeyPointHint>(&self, hint: Hint) -> Vec<f64> {
        let minor = hint.weight().allow_light_points();
        let n = if minor {
            8
        } else {
            hint.max_num_points().min(12)
        };
        self.ticks(n, minor)
    }

    fn range(&self) -> Range<f64> {
        self.lo..self.hi
    }
}

impl ValueFormatter<f64> for Axis {
    fn format_ext(&self, value: &f64) -> String {
        self.label(*value)
    }
}

/// 1, 2 or 5 times a power of ten, at least `raw`.
pub fn nice_step(raw: f64) -> f64 {
    if raw.is_nan() || raw <= 0.0 || raw.is_infinite() {
        return 1.0;
    }
    let p = 10f64.powf(raw.log10().floor());
    let m = raw / p;
    let k = if m <= 1.0 + 1e-9 {
        1.0
    } else if m <= 2.0 + 1e-9 {
        2.0
    } else if m <= 5.0 + 1e-9 {
        5.0
    } else {
        10.0
    };
    k * p
}

/// The spacing of at most `max` labelled ticks on a linear axis from `lo` to `hi`.
fn linear_step(lo: f64, hi: f64, max: usize) -> f64 {
    nice_step((hi - lo).abs() / (max as f64 - 1.0).max(1.0))
}

fn linear_ticks(lo: f64, hi: f64, max: usize, minor: bool) -> Vec<f64> {
    let (lo, hi) = (lo.min(hi), lo.max(hi));
    let mut step = linear_step(lo, hi, max);
    if minor {
        step /= if (step / 10f64.powf(step.log10().floor()) - 2.0).abs() < 1e-6 {
            4.0
        } else {
            5.0
        };
    }
    let first = (lo / step).ceil() as i64;
    let last = (hi / step).floor() as i64;
    (first..=last)
        .map(|k| {
            let v = k as f64 * step;
            if v.abs() < 1e-9 * step {
                0.0
            } else {
                v
            }
        })
        .collect()
}

fn log_ticks(lo: f64, hi: f64, max: usize, minor: bool) -> Vec<f64> {
    let (a, b) = (lo.min(hi).log10(), lo.max(hi).log10());
    let (k0, k1) = (a.floor() as i32, b.ceil() as i32);
    let decades = (k1 - k0).max(1) as usize;
    let every = decades.div_ceil(max.saturating_sub(1).max(1)).max(1) as i32;
    let mut out = Vec::new();
    for k in k0..=k1 {
        if minor {
            if every == 1 {
                for m in 1..10 {
                    out.push(m as f64 * 10f64.powi(k));
                }
            } else {
                out.push(10f64.powi(k));
            }
        } else if (k1 - k).rem_euclid(every) == 0 {
            // Thinned from the top decade down, so the upper end is always labelled.
            out.push(10f64.powi(k));
        }
    }
    out
}

/// Ticks of a symmetric-log axis: 0 and ±c·10^k for every decade k ≥ 0 on the axis (c the
/// band half-width). Every decade is labelled while there are at most `2 max` of them;
/// beyond that every j-th decade counted from the band edge on both sides (so a symmetric
/// range gets the same decades on both sides), the others as minor ticks.
fn symlog_ticks(s: SymLog, lo: f64, hi: f64, max: usize, minor: bool) -> Vec<f64> {
    let (a, b) = (s.forward(lo.min(hi)), s.forward(lo.max(hi)));
    // Decades outside the band on each side: k = 0 is ±c, k = 1 is ±10c, ... (the slack
    // keeps a decade whose transform rounds to just below a whole number).
    let kpos = ((b + 1e-9).floor() as i32 - 1).max(-1);
    let kneg = ((-a + 1e-9).floor() as i32 - 1).max(-1);
    let count = (kpos + 1 + kneg + 1 + 1).max(1) as usize;
    let every = count.div_ceil(2 * max.max(2)).max(1) as i32;
    let mut out = Vec::new();
    if !minor {
        out.push(0.0);
    }
    for (sign, kmax) in [(1.0, kpos), (-1.0, kneg)] {
        for k in 0..=kmax {
            let base = s.linear * 10f64.powi(k);
            let labelled = k % every == 0;
            if minor {
                if every == 1 {
                    for m in 2..10 {
                        out.push(sign * m as f64 * base);
                    }
                } else if !labelled {
                    out.push(sign * base);
                }
            } else if labelled {
                out.push(sign * base);
            }
        }
    }
    out.sort_by(|x, y| x.total_cmp(y));
    out
}

/// A tick label on a linear axis with tick spacing `step`.
pub fn format_linear(v: f64, step: f64) -> String {
    if v == 0.0 {
        return "0".into();
    }
    let big = v.abs().max(step.abs());
    if !(1e-4..1e6).contains(&big) {
        return format_real(v);
    }
    let decimals = (-(step.abs().log10().floor()) as i32).max(0) as usize;
    format!("{v:.decimals$}")
}

/// A value in plain decimals when that is short, else as `m×10ⁿ` (`10ⁿ` for m = 1).
pub fn format_real(v: f64) -> String {
    if v == 0.0 {
        return "0".into();
    }
    let a = v.abs();
    let sign = if v < 0.0 { "−" } else { "" };
    if (1e-3..1e4).contains(&a) {
        let decimals = (2 - (a.log10().floor()) as i32).max(0) as usize;
        let s = format!("{a:.decimals$}");
        let s = if s.contains('.') {
            s.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            s
        };
        return format!("{sign}{s}");
    }
    let k = a.log10().floor() as i32;
    let m = a / 10f64.powi(k);
    let (m, k) = if m >= 9.9995 { (1.0, k + 1) } else { (m, k) };
    let exp = superscript(k);
    if (m - 1.0).abs() < 5e-4 {
        format!("{sign}10{exp}")
    } else {
        let ms = format!("{m:.2}");
        let ms = ms.trim_end_matches('0').trim_end_matches('.');
        format!("{sign}{ms}×10{exp}")
    }
}

fn superscript(k: i32) -> String {
    const DIGITS: [char; 10] = ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'];
    let mut s = String::new();
    if k < 0 {
        s.push('⁻');
    }
    for c in k.unsigned_abs().to_string().chars() {
        s.push(DIGITS[c as usize - '0' as usize]);
    }
    s
}
