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
    /// A defect of the program, not of its input: a state the code relies on not holding
    /// (a thin evaluation where a full one is kept, a written file that does not read back
    /// as intended). Like [`Error::Solver`] it exits with [`EXIT_INTERNAL`].
    #[error("internal error: {0}")]
    Internal(String),
    /// Standard output was closed by its reader (`| head`): the run ends quietly.
    #[error("standard output closed")]
    BrokenPipe,
    /// The run was interrupted (SIGINT, SIGTERM or SIGHUP); the message says what was kept
    /// and how to resume.
    #[error("interrupted: {0}")]
    Interrupted(String),
}

/// Exit status of an internal fault ([`Error::Solver`], [`Error::Internal`]): something
/// went wrong that no input or command line could have caused. 3 is the status the solver
/// failure has always had (README); it is kept so scripts that test for it keep working.
/// (The sysexits.h convention would be 70, `EX_SOFTWARE`; a convention, not a standard,
/// and not this tool's contract.)
pub const EXIT_INTERNAL: i32 = 3;

/// Exit status of bad input or usage (a file that cannot be read or written included).
pub const EXIT_USAGE: i32 = 2;

/// Exit status when standard output is closed early: 128 + SIGPIPE (13), what a shell
/// reports for a tool that a closed pipe stops.
pub const EXIT_BROKEN_PIPE: i32 = 141;

/// Exit status after an interrupt: 128 + SIGINT (2), also when SIGTERM or SIGHUP stopped
/// the run (all three are handled alike: the same clean stop and resume hint).
pub const EXIT_INTERRUPTED: i32 = 130;

impl Error {
    /// Exit status: [`EXIT_USAGE`] for bad input or usage (and unreadable or unwritable
    /// files), [`EXIT_INTERNAL`] for a solver failure or another internal fault,
    /// [`EXIT_BROKEN_PIPE`] and [`EXIT_INTERRUPTED`]. (0 and 1 are a command's
    /// [`crate::Outcome`], never an error.) O(1).
    pub fn exit_code(&self) -> i32 {
        match self {
            Error::Input(_) | Error::Usage(_) | Error::Io { .. } => EXIT_USAGE,
            Error::Solver(_) | Error::Internal(_) => EXIT_INTERNAL,
            Error::BrokenPipe => EXIT_BROKEN_PIPE,
            Error::Interrupted(_) => EXIT_INTERRUPTED,
        }
    }
}

pub type Result<T> = std::result::Result<T, Error>;

#[cfg(test)]
mod tests {
    use super::*;

    /// The table of exit statuses in the README, kind by kind: usage and input 2, internal
    /// faults 3, interrupt 130 = 128 + SIGINT (2), closed stdout 141 = 128 + SIGPIPE (13)
    /// (signal numbers from signal(7), Linux). Every status is distinct from the others and
    /// from a command's own 0 and 1 (a gate that failed).
    #[test]
    fn every_kind_has_its_status() {
        let io = || Error::Io {
            path: PathBuf::from("x"),
            source: std::io::Error::other("x"),
        };
        let table = [
            (Error::Input("x".into()), 2),
            (Error::Usage("x".into()), 2),
            (io(), 2),
            (Error::Solver("x".into()), 3),
            (Error::Internal("x".into()), 3),
            (Error::Interrupted("x".into()), 128 + 2),
            (Error::BrokenPipe, 128 + 13),
        ];
        for (e, code) in &table {
            assert_eq!(e.exit_code(), *code, "{e:?}");
        }
        let mut codes: Vec<i32> = vec![EXIT_USAGE, EXIT_INTERNAL, EXIT_INTERRUPTED];
        codes.push(EXIT_BROKEN_PIPE);
        codes.extend([0, 1]);
        codes.sort();
        codes.dedup();
        assert_eq!(codes.len(), 6, "statuses collide: {codes:?}");
    }
}
