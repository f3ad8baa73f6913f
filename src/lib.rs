//! deepdry: coupled heat, liquid water and water vapour in deep unsaturated soil.
//!
//! Module map:
//! - [`model`]    the validated run description in SI units (what the solver consumes)
//! - [`case`]     TOML case files -> [`model::Model`], with one-line errors
//! - [`mesh`]     graded 1-D finite-volume mesh
//! - [`schedule`] time functions for boundary values
//! - [`props`]    constitutive laws and water properties, each with derivatives
//! - [`physics`]  residual and exact Jacobian of the three balance laws
//! - [`solve`]    linear solvers, Newton, time stepping
//! - [`sim`]      a simulation and its observers (results file, checkpoints, progress, memory)
//! - [`run`]      `deepdry run`: start modes, the output folder, signals
//! - [`output`]   results files (HDF5)
//! - [`plot`]     pictures of a results file (SVG, PNG)
//! - [`ensemble`] plans, sampling, members on threads or job-array shards, collect
//! - [`fit`]      observation files, `deepdry compare`, Levenberg–Marquardt fitting
//! - [`export`]   a results file as CSV files (`deepdry export`)
//! - [`error`]    typed errors
//! - [`verify`]   verification cases, reference solutions and the report
//! - [`bench`], [`accuracy`] `deepdry bench` (and `--accuracy`), on runs of [`batch`]

// Index loops read like the formulas they implement.
#![allow(clippy::needless_range_loop)]

pub mod accuracy;
pub mod batch;
pub mod bench;
pub mod case;
pub mod checkpoint;
pub mod cli;
pub mod ensemble;
pub mod error;
pub mod export;
pub mod fit;
pub mod inspect;
pub mod memory;
pub mod mesh;
pub mod model;
pub mod output;
pub mod physics;
pub mod plot;
pub mod props;
pub mod run;
pub mod schedule;
pub mod sim;
pub mod solute;
pub mod solve;
pub mod verify;
