//! Time functions for boundary values. Times in seconds, values in SI units.

use std::f64::consts::PI;

#[derive(Debug, Clone, PartialEq)]
pub enum Schedule {
    /// A constant value.
    Constant(f64),
    /// Piecewise constant: `values[k]` holds on [times[k], times[k+1]); `values[0]` before
    /// `times[0]`. Times strictly increasing.
    Steps { times: Vec<f64>, values: Vec<f64> },
    /// Piecewise linear through (times[k], values[k]); held at the end values outside.
    Table { times: Vec<f64>, values: Vec<f64> },
    /// mean + amplitude · sin(2π (t − phase)/period).
    Sine {
        mean: f64,
        amplitude: f64,
        period: f64,
        phase: f64,
    },
    /// Sum of the parts.
    Sum(Vec<Schedule>),
}

impl Schedule {
    /// Value at time `t` [s]. An empty `Steps` or `Table` (never built by `case`) gives NaN.
    pub fn value(&self, t: f64) -> f64 {
        match self {
            Schedule::Constant(c) => *c,
            Schedule::Steps { times, values } => {
                // Number of times ≤ t; the value before the first time is values[0].
                let k = times.partition_point(|&tk| tk <= t);
                values.get(k.saturating_sub(1)).copied().unwrap_or(f64::NAN)
            }
            Schedule::Table { times, values } => {
                let (Some(&t_first), Some(&t_last)) = (times.first(), times.last()) else {
                    return f64::NAN;
                };
                if t <= t_first {
                    return values[0];
                }
                if t >= t_last {
                    return values[times.len() - 1];
                }
                // times[k-1] < t < times[k]
                let k = times.partition_point(|&tk| tk <= t);
                let (t0, t1) = (times[k - 1], times[k]);
                let (v0, v1) = (values[k - 1], values[k]);
                v0 + (v1 - v0) * (t - t0) / (t1 - t0)
            }
            Schedule::Sine {
                mean,
                amplitude,
                period,
                phase,
            } => mean + amplitude * (2.0 * PI * (t - phase) / period).sin(),
            Schedule::Sum(parts) => parts.iter().map(|p| p.value(t)).sum(),
        }
    }

    /// Times where the schedule jumps or changes slope (sorted, deduplicated); the stepper
    /// lands exactly on each. Steps: every step time after the first (the value before the
    /// first time equals the first value, so nothing happens there); tables: every knot;
    /// sinusoids and constants: none; sums: the union of their parts'.
    pub fn breakpoints(&self) -> Vec<f64> {
        self.sorted_times(Self::collect_breakpoints)
    }

    /// The times `collect` gathers from this schedule, sorted and deduplicated.
    fn sorted_times(&self, collect: fn(&Self, &mut Vec<f64>)) -> Vec<f64> {
        let mut out = Vec::new();
        collect(self, &mut out);
        out.sort_by(f64::total_cmp);
        out.dedup();
        out
    }

    /// Times where the schedule jumps in value (sorted, deduplicated): the steps of a
    /// stepped schedule where the value changes, and those of the parts of a sum.
    pub fn jumps(&self) -> Vec<f64> {
        self.sorted_times(Self::collect_jumps)
    }

    fn collect_jumps(&self, out: &mut Vec<f64>) {
        match self {
            Schedule::Constant(_) | Schedule::Sine { .. } | Schedule::Table { .. } => {}
            Schedule::Steps { times, values } => out.extend(
                times
                    .iter()
                    .skip(1)
                    .zip(values.windows(2))
                    .filter(|(_, v)| v[0] != v[1])
                    .map(|(t, _)| *t),
            ),
            Schedule::Sum(parts) => parts.iter().for_each(|p| p.collect_jumps(out)),
        }
    }

    fn collect_breakpoints(&self, out: &mut Vec<f64>) {
        match self {
            Schedule::Constant(_) | Schedule::Sine { .. } => {}
            Schedule::Steps { times, .. } => out.extend(times.iter().skip(1)),
            Schedule::Table { times, .. } => out.extend(times),
            Schedule::Sum(parts) => parts.iter().for_each(|p| p.collect_breakpoints(out)),
        }
    }

    /// The schedule `scale · s(t) + offset`. The offset is applied once: for a sum, to its
    /// first part only (so °C → K adds 273.15 to a sum exactly once).
    pub fn affine(&self, scale: f64, offset: f64) -> Schedule {
        let map = |v: &[f64]| v.iter().map(|x| scale * x + offset).collect();
        match self {
            Schedule::Constant(c) => Schedule::Constant(scale * c + offset),
            Schedule::Steps { times, values } => Schedule::Steps {
                times: times.clone(),
                values: map(values),
            },
            Schedule::Table { times, values } => Schedule::Table {
                times: times.clone(),
                values: map(values),
            },
            Schedule::Sine {
                mean,
                amplitude,
                period,
                phase,
            } => Schedule::Sine {
                mean: scale * mean + offset,
                amplitude: scale * amplitude,
                period: *period,
                phase: *phase,
            },
            Schedule::Sum(parts) => Schedule::Sum(
                parts
                    .iter()
                    .enumerate()
                    .map(|(i, p)| p.affine(scale, if i == 0 { offset } else { 0.0 }))
                    .collect(),
            ),
        }
    }

    /// The exact integral of the schedule over [a, b] [value × s] (a ≤ b): piecewise
    /// constant and piecewise linear pieces summed exactly, sinusoids by their
    /// antiderivative.
    pub fn integral(&self, a: f64, b: f64) -> f64 {
        if b <= a {
            return 0.0;
        }
        match self {
            Schedule::Constant(c) => c * (b - a),
            Schedule::Steps { times, values } => {
                // values[k] on [times[k], times[k+1]), values[0] before times[0].
                let mut sum = 0.0;
                let mut from = a;
                for (k, v) in values.iter().enumerate() {
                    let end = times.get(k + 1).copied().unwrap_or(f64::INFINITY).min(b);
                    if end > from {
                        sum += v * (end - from);
                        from = end;
                    }
                    if from >= b {
                        break;
                    }
                }
                sum
            }
            Schedule::Table { times, .. } => {
                // Trapezoids between the knots inside (a, b) (exact for linear pieces).
                let mut knots = vec![a];
                knots.extend(times.iter().copied().filter(|&t| t > a && t < b));
                knots.push(b);
                knots
                    .windows(2)
                    .map(|w| 0.5 * (self.value(w[0]) + self.value(w[1])) * (w[1] - w[0]))
                    .sum()
            }
            Schedule::Sine {
                mean,
                amplitude,
                period,
                phase,
            } => {
                let w = 2.0 * PI / period;
                mean * (b - a) - amplitude / w * ((w * (b - phase)).cos() - (w * (a - phase)).cos())
            }
            Schedule::Sum(parts) => parts.iter().map(|p| p.integral(a, b)).sum(),
        }
    }

    /// Lower and upper bounds of the values the schedule can take at any time. Exact for
    /// every form except sums, where the bounds of the parts are added (a safe envelope).
    pub fn bounds(&self) -> (f64, f64) {
        let span = |v: &[f64]| {
            v.iter()
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &x| {
                    (lo.min(x), hi.max(x))
                })
        };
        match self {
            Schedule::Constant(c) => (*c, *c),
            Schedule::Steps { values, .. } | Schedule::Table { values, .. } => span(values),
            Schedule::Sine {
                mean, amplitude, ..
            } => (mean - amplitude.abs(), mean + amplitude.abs()),
            Schedule::Sum(parts) => parts.iter().fold((0.0, 0.0), |(lo, hi), p| {
                let (a, b) = p.bounds();
                (lo + a, hi + b)
            }),
        }
    }
}
