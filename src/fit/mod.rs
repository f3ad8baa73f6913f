//! Field data: observation files, comparison of a run with them, and parameter fitting.
//!
//! - [`lm`]            weighted least squares by Levenberg–Marquardt, with bounds, log
//!   parameters, a batched finite-difference Jacobian, covariance and identifiability
//! - [`observations`]  the observation file (`time_year,depth_m,quantity,value,sigma`)
//! - [`compare`]       model values at the observed times and depths, statistics per
//!   quantity (`deepdry compare`)

pub mod compare;
pub mod lm;
pub mod observations;
