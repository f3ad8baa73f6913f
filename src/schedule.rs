//! Time functions for boundary values. Times in seconds, values in SI units.
//! STUB: types fixed; implementations to be written.

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
    /// Value at time `t` [s].
    pub fn value(&self, t: f64) -> f64 {
        let _ = t;
        todo!()
    }
    /// Times where the schedule jumps or changes slope (sorted, deduplicated); the stepper
    /// lands exactly on each.
    pub fn breakpoints(&self) -> Vec<f64> {
        todo!()
    }
}
