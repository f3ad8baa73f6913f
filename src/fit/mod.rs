//! Field data: observation files, comparison of a run with them, and parameter fitting.
//!
//! - [`lm`]            weighted least squares by Levenberg–Marquardt, with bounds, log
//!   parameters, a batched finite-difference Jacobian, covariance and identifiability
//! - [`observations`]  the observation file (`time_year,depth_m,quantity,value,sigma`)
//! - [`compare`]       model values at the observed times and depths, statistics per
//!   quantity (`deepdry compare`)
//! - [`fitting`]       `deepdry fit`: the fit file, model runs in memory in parallel, the
//!   summary (JSON) and the fitted case
//! - [`progress`]      `fit-progress.json`: the state after each accepted iteration, for
//!   `deepdry fit --restart`

pub mod compare;
pub mod fitting;
pub mod lm;
pub mod observations;
pub mod progress;
