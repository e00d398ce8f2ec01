//! `redoubt worst`: reads the network, checks the output path before solving, runs
//! [`crate::worst::search`], writes the JSON file (atomically) before the text on
//! standard output, as the audit does.

use std::io::Write;

use crate::cli::{WorstArgs, WorstBy};
use crate::error::{Error, Result};
use crate::report;
use crate::scenario::Kinds;
use crate::worst::{self, By, Options};
use crate::{Outcome, audit, load, stdout_result};

/// Runs `redoubt worst` with its writers. O(the search).
pub fn run(args: &WorstArgs, out: &mut dyn Write, _err: &mut dyn Write) -> Result<Outcome> {
    audit::install_interrupt_handler();
    if args.threads == Some(0) {
        return Err(Error::Usage("--threads must be at least 1".into()));
    }
    let net = load(&args.network)?;
    if let Some(json) = &args.json {
        report::file::check_output("--json", json, &[&args.network])?;
    }
    let opts = Options {
        k: args.k,
        kinds: Kinds::parse(&args.kinds)?,
        top: args.top,
        by: match args.by {
            WorstBy::Shortfall => By::Shortfall,
            WorstBy::Lost => By::Lost,
        },
        threads: args.threads,
    };
    let found = worst::search(&net, opts)?;
    if let Some(path) = &args.json {
        report::file::write_atomic(path, |w| report::worst::write_json(w, &net, &found))?;
    }
    stdout_result(out.write_all(report::worst::text(&net, &found).as_bytes()))?;
    Ok(Outcome::Ok)
}
