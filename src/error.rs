//! Typed errors and the exit codes of the `deepdry` binary.

use thiserror::Error;

/// Exit codes (documented in the README).
pub mod exit {
    /// Success.
    pub const OK: i32 = 0;
    /// Bad input: case file, command-line value, schedule or profile table, checkpoint.
    pub const INPUT: i32 = 2;
    /// The solver could not continue (time step below its minimum); a diagnostic
    /// checkpoint with the last good state was written.
    pub const NUMERICAL: i32 = 3;
    /// Reading or writing a file failed (permissions, full disk, corrupt file).
    pub const IO: i32 = 4;
    /// Interrupted by SIGINT/SIGTERM; a checkpoint at the interruption time was written.
    pub const INTERRUPTED: i32 = 5;
    /// A verification case failed (`deepdry verify`).
    pub const VERIFY_FAILED: i32 = 6;
    /// An internal error (a bug): please report it.
    pub const INTERNAL: i32 = 70;
}

/// Every error a user can see. Messages are one line and name the file, key or value.
#[derive(Debug, Error)]
pub enum Error {
    /// Bad input, already formatted as `file: key: value: what is allowed`.
    #[error("{0}")]
    Input(String),
    /// A file could not be read or written.
    #[error("{0}")]
    Io(String),
    /// The solver could not continue.
    #[error("{0}")]
    Numerical(String),
    /// The run was interrupted by a signal and stopped cleanly.
    #[error("{0}")]
    Interrupted(String),
    /// One or more verification cases failed.
    #[error("{0}")]
    VerifyFailed(String),
    /// A bug.
    #[error("internal error: {0}")]
    Internal(String),
}

impl Error {
    pub fn exit_code(&self) -> i32 {
        match self {
            Error::Input(_) => exit::INPUT,
            Error::Io(_) => exit::IO,
            Error::Numerical(_) => exit::NUMERICAL,
            Error::Interrupted(_) => exit::INTERRUPTED,
            Error::VerifyFailed(_) => exit::VERIFY_FAILED,
            Error::Internal(_) => exit::INTERNAL,
        }
    }
    /// An input error with a formatted message.
    pub fn input(msg: impl Into<String>) -> Self {
        Error::Input(msg.into())
    }
    /// An I/O error on `path`.
    pub fn io(path: &std::path::Path, what: impl std::fmt::Display) -> Self {
        Error::Io(format!("{}: {}", path.display(), what))
    }
}

impl From<hdf5::Error> for Error {
    fn from(e: hdf5::Error) -> Self {
        Error::Io(format!("HDF5: {e}"))
    }
}

pub type Result<T> = std::result::Result<T, Error>;
