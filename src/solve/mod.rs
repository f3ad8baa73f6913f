//! Linear solvers, Newton's method and time stepping, for any [`problem::Problem`]: no
//! module here knows the soil physics (the column implements the trait in `physics`).

pub mod blocktri;
pub mod envelope;
pub mod linear;
pub mod newton;
pub mod problem;
pub mod stepper;
