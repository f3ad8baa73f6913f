//! Linear solvers, Newton's method and time stepping.

pub mod blocktri;
pub mod linear;
pub mod newton;
pub mod stepper;
