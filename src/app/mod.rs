//! The command layer: one module per command, each taking the options [`options::lower`]
//! made from the parsed command line once. Commands read files, call the library, and
//! write what the exporters of [`crate::report`] produce to the writers they are given;
//! nothing below this layer sees a clap type or calls back up into it.

mod audit;
mod check;
mod compare;
mod import;
mod merge;
pub mod options;
mod plan;
mod plan_routed;
mod scenarios;
mod worst;

use std::io::{self, Write};
use std::path::{Path, PathBuf};

use crate::cli::Cli;
use crate::error::{Error, Result};
use crate::model::{self, Network};

pub use scenarios::{ESTIMATE_NOTE_FROM, MAX_SCENARIOS, Scenarios, scenarios_for};

/// What a successful command ends with.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outcome {
    /// Everything asked for was done and no gate failed.
    Ok,
    /// A gate (`--max-shortfall`, `--max-stranded`, `--min-served-fraction`) failed, or a
    /// `compare` found a change that does not pass.
    GateFailed,
}

impl Outcome {
    /// Exit status: 0, or 1 when a gate failed.
    pub fn exit_code(self) -> u8 {
        match self {
            Outcome::Ok => 0,
            Outcome::GateFailed => 1,
        }
    }
}

/// Runs one command line: reports go to `out` (standard output), notes to `err`. The
/// flags are lowered first ([`options::lower`]); every command but `check` installs the
/// interrupt handler before it starts.
pub fn run(cli: Cli, out: &mut dyn Write, err: &mut dyn Write) -> Result<Outcome> {
    use options::Command;
    let command = options::lower(cli)?;
    if !matches!(command, Command::Check(_)) {
        crate::audit::install_interrupt_handler();
    }
    match command {
        Command::Check(network) => check::run(&network, out),
        Command::Audit(o) => audit::run(&o, out, err),
        Command::Merge(o) => merge::run(&o, out),
        Command::Import(o) => import::run(&o, out, err),
        Command::Compare(o) => compare::run(&o, out, err),
        Command::Plan(o) => plan::run(&o, out, err),
        Command::Worst(o) => worst::run(&o, out, err),
    }
}

/// Reads and validates a network file.
pub fn load(path: &Path) -> Result<Network> {
    read_network(path).map(|(net, _)| net)
}

/// Reads and validates a network file; also returns its text (for the fingerprint and
/// `--apply`).
fn read_network(path: &Path) -> Result<(Network, String)> {
    let bytes = model::read_input(path)?;
    let net = Network::from_bytes(&bytes).map_err(|e| match e {
        Error::Input(m) => Error::Input(format!("{}: {m}", path.display())),
        other => other,
    })?;
    Ok((net, String::from_utf8_lossy(&bytes).into_owned()))
}

/// Maps a failed write to standard output: a closed pipe ends the run quietly
/// ([`Error::BrokenPipe`]), anything else is an I/O error on `<stdout>`.
pub fn stdout_result(r: io::Result<()>) -> Result<()> {
    r.map_err(|source| {
        if source.kind() == io::ErrorKind::BrokenPipe {
            Error::BrokenPipe
        } else {
            Error::Io {
                path: PathBuf::from("<stdout>"),
                source,
            }
        }
    })
}

/// Notes on stderr are best effort: a closed stderr never stops a run.
fn note(r: io::Result<()>) {
    let _ = r;
}

/// The refusal of a purchase (`plan`, `audit --close`) on the nearest-site model.
pub(crate) fn nearest_refused(what: &str) -> crate::error::Error {
    crate::error::Error::Usage(format!(
        "{what} --routing nearest: buying processing changes which sites are nearest, so \
         purchases are defined for --routing steered (or best) only"
    ))
}
