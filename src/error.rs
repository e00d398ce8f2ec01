//! The one error type of the crate and its mapping to exit statuses.

use std::path::PathBuf;

/// Everything that can stop a command. `main` maps each kind to an exit status with
/// [`Error::exit_code`]; a gate that fails is not an error (see [`crate::Outcome`]).
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// The network file is malformed or inconsistent. The message names the element,
    /// the field and the offending value.
    #[error("invalid network: {0}")]
    Input(String),
    /// The command line asks for something impossible (unknown element in `--fail`, ...).
    #[error("usage: {0}")]
    Usage(String),
    /// A file could not be read or written.
    #[error("{}: {source}", path.display())]
    Io {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    /// The LP backend did not return an optimal solution. This is a defect or a numerical
    /// limit, never a property of the network: every model the tool builds is feasible
    /// (all-zero flow) and bounded (flows are capped by demand).
    #[error("solver failed: {0}")]
    Solver(String),
    /// Standard output was closed by its reader (`| head`): the run ends quietly.
    #[error("standard output closed")]
    BrokenPipe,
    /// The run was interrupted (SIGINT, SIGTERM or SIGHUP); the message says what was kept
    /// and how to resume.
    #[error("interrupted: {0}")]
    Interrupted(String),
}

/// Exit status when standard output is closed early: 128 + SIGPIPE (13), what a shell
/// reports for a tool that a closed pipe stops.
pub const EXIT_BROKEN_PIPE: i32 = 141;

/// Exit status after an interrupt: 128 + SIGINT (2), also when SIGTERM or SIGHUP stopped
/// the run (all three are handled alike: the same clean stop and resume hint).
pub const EXIT_INTERRUPTED: i32 = 130;

impl Error {
    /// Exit status: 2 for bad input or usage (and unreadable or unwritable files), 3 for a
    /// solver failure, [`EXIT_BROKEN_PIPE`] and [`EXIT_INTERRUPTED`].
    pub fn exit_code(&self) -> i32 {
        match self {
            Error::Input(_) | Error::Usage(_) | Error::Io { .. } => 2,
            Error::Solver(_) => 3,
            Error::BrokenPipe => EXIT_BROKEN_PIPE,
            Error::Interrupted(_) => EXIT_INTERRUPTED,
        }
    }
}

pub type Result<T> = std::result::Result<T, Error>;
