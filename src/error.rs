//! The top-level error: one variant per layer, each mapped to a documented exit status
//! (0 success, 2 bad input, 3 numerical failure, 1 other; 130/143 interrupted by SIGINT/SIGTERM).

use crate::checkpoint::RestartError;
use crate::config::ConfigError;
use crate::integrate::driver::RunError;
use crate::integrate::SolverError;
use crate::output::OutputError;

/// Any failure of an icefold command.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// Bad configuration (exit 2).
    #[error("config error: {0}")]
    Config(#[from] ConfigError),
    /// Bad command-line use or input file (exit 2).
    #[error("{0}")]
    Usage(String),
    /// An input file that is missing, not a file, not HDF5, or not an icefold file (exit 2).
    #[error("{0}")]
    BadFile(OutputError),
    /// Output could not be created where asked (exit 2).
    #[error("output error: {0}")]
    OutputPath(OutputError),
    /// Other output failure (exit 1); a full disk is said first, on one line.
    #[error("output error: {}", output_message(.0))]
    Output(OutputError),
    /// Numerical failure (exit 3).
    #[error("numerical failure: {0}")]
    Solver(#[from] SolverError),
    /// A restart file that cannot be resumed from: unreadable, damaged, of another command or
    /// made with another config (exit 2).
    #[error("{0}")]
    Restart(RestartError),
    /// A checkpoint could not be written (exit 1; the job stops without writing its output).
    #[error("{0}")]
    Checkpoint(RestartError),
    /// Interrupted by a signal (exit 128 + signal).
    #[error("interrupted by signal {signal}: {reached}")]
    Interrupted {
        /// Signal number.
        signal: i32,
        /// How far the work got.
        reached: String,
    },
    /// Anything else (exit 1).
    #[error("{0}")]
    Other(String),
}

impl From<OutputError> for Error {
    fn from(e: OutputError) -> Self {
        match e {
            OutputError::NoDirectory { .. } | OutputError::Create { .. } | OutputError::Exists { .. } => {
                Error::OutputPath(e)
            }
            OutputError::NotFound { .. }
            | OutputError::NotAFile { .. }
            | OutputError::Open { .. }
            | OutputError::Foreign { .. }
            | OutputError::Damaged { .. } => Error::BadFile(e),
            other => Error::Output(other),
        }
    }
}

impl From<RunError> for Error {
    fn from(e: RunError) -> Self {
        match e {
            RunError::Solver(s) => Error::Solver(s),
            RunError::Output(o) => match o.downcast::<OutputError>() {
                Ok(oe) => Error::from(*oe),
                Err(other) => match other.downcast::<RestartError>() {
                    Ok(re) => Error::Checkpoint(*re),
                    Err(other) => Error::Other(other.to_string()),
                },
            },
        }
    }
}

impl Error {
    /// The process exit status for this error.
    pub fn exit_code(&self) -> i32 {
        match self {
            Error::Config(_)
            | Error::Usage(_)
            | Error::OutputPath(_)
            | Error::BadFile(_)
            | Error::Restart(_) => 2,
            Error::Solver(_) => 3,
            Error::Interrupted { signal, .. } => 128 + signal,
            Error::Output(_) | Error::Checkpoint(_) | Error::Other(_) => 1,
        }
    }
}

/// An output failure as one line, leading with "no space left on device" when the disk is
/// full (HDF5 reports errno 28 deep inside a multi-line message).
fn output_message(e: &OutputError) -> String {
    let text = e.to_string().replace('\n', " ");
    if text.contains("errno = 28") || text.contains("No space left on device") {
        format!("no space left on device: {text}")
    } else {
        text
    }
}
