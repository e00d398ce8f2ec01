//! `redoubt worst`: reads the network, checks the output path before solving, runs
//! [`crate::worst::search`], writes the JSON file (atomically) before the text on
//! standard output, as the audit does.

use std::io::Write;

use super::options::WorstOptions;
use super::{Outcome, load, stdout_result};
use crate::error::Result;
use crate::report;
use crate::worst;

/// Runs `redoubt worst` with its writers. O(the search).
pub fn run(args: &WorstOptions, out: &mut dyn Write, _err: &mut dyn Write) -> Result<Outcome> {
    let net = load(&args.network)?;
    if let Some(json) = &args.json {
        report::file::check_output("--json", json, &[&args.network])?;
    }
    let matrices = super::scenarios::matrices_for(&net, args.matrix.as_deref())?;
    let found = if net.matrix_count() == 1 {
        worst::search(&net, args.search)?
    } else {
        let mut each = Vec::with_capacity(matrices.len());
        for m in matrices {
            each.push((m, worst::search(net.view(m), args.search)?));
        }
        worst::merge(each, args.search)
    };
    if let Some(path) = &args.json {
        report::file::write_atomic(path, |w| report::worst::write_json(w, &net, &found))?;
    }
    stdout_result(out.write_all(report::worst::text(&net, &found).as_bytes()))?;
    Ok(Outcome::Ok)
}
