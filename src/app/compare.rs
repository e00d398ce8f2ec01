//! `redoubt compare`: both files loaded and audited (same scenarios, walk engine; the
//! layered walk engine for a file with `functions`), the
//! comparison model of [`crate::compare`], then `--json` and the text.

use std::io::Write;
use std::path::Path;

use super::options::CompareOptions;
use super::scenarios::{run_options, scenario_list, solve_list};
use super::{Outcome, load, stdout_result};
use crate::audit::{Audit, RunOptions};
use crate::baseline::with_baseline;
use crate::compare::{compare, same_unit};
use crate::error::{Error, Result};
use crate::model::Network;
use crate::report;
use crate::solve::Engine;

/// Audits one side (`net`, read from `path`): its scenarios (with `--down`), solved with
/// the walk engine; a scenario option that does not fit this side's network is named with
/// the side (`BEFORE (path): …`).
fn audit_side(
    args: &CompareOptions,
    net: Network,
    path: &Path,
    which: &str,
    opts: RunOptions,
    err: &mut dyn Write,
) -> Result<(Network, Audit)> {
    let side = args.side(path.to_path_buf());
    let in_side = |e: Error| match e {
        Error::Usage(m) => Error::Usage(format!("{which} ({}): {m}", path.display())),
        other => other,
    };
    let list = scenario_list(&net, &side, args.fail.as_deref()).map_err(in_side)?;
    let audit = solve_list(&net, list, Engine::Walks, &side, opts, err)?;
    Ok((net, audit))
}

/// `redoubt compare`: audits both sides (with `--headroom`, each side's headroom per
/// outage, [`crate::headroom::of_audit`]), writes `--json` (atomically) before the text,
/// and returns [`Outcome::GateFailed`] when the change does not pass
/// ([`crate::compare::Comparison::passed`]). Two files in different units are refused
/// before any solving.
pub(super) fn run(
    args: &CompareOptions,
    out: &mut dyn Write,
    err: &mut dyn Write,
) -> Result<Outcome> {
    if let Some(json) = &args.json {
        report::file::check_output("--json", json, &[&args.before, &args.after])?;
    }
    let mut others: Vec<&Path> = vec![&args.before, &args.after];
    others.extend(args.json.as_deref());
    let report_files = super::audit::report_dir(args.report.as_deref(), &others)?;
    let (nb, na) = (load(&args.before)?, load(&args.after)?);
    same_unit(&nb, &na)?;
    let opts = run_options(&args.sides, err);
    let (nb, ab) = audit_side(args, nb, &args.before, "BEFORE", opts, err)?;
    let (na, aa) = audit_side(args, na, &args.after, "AFTER", opts, err)?;
    let down = match &args.sides.down {
        Some(list) => list.split(',').map(str::to_string).collect(),
        None => Vec::new(),
    };
    let bb = with_baseline(&nb, &ab)?;
    let ba = with_baseline(&na, &aa)?;
    let mut c = compare(
        (&nb, &ab),
        (&na, &aa),
        args.tolerance,
        down,
        args.allow_new_short,
    );
    if args.headroom {
        let hb = crate::headroom::of_audit(&nb, &ab, None, opts)?;
        let ha = crate::headroom::of_audit(&na, &aa, None, opts)?;
        let gate = args
            .min_headroom
            .map(|limit| crate::gate::check_headroom(&ha.least, limit, None));
        c.headroom = Some(crate::headroom::compare((&ab, &hb), (&aa, &ha), gate));
    }
    if let Some(path) = &args.json {
        let doc = report::json::compare_json(&c, &bb, &ba);
        report::file::write_atomic(path, |w| report::json::write(w, &doc))?;
    }
    if let Some((html, md)) = &report_files {
        let page = report::compare_page::Page::new(&c, &bb, &ba);
        report::file::write_atomic(html, |w| page.write_html(w))?;
        report::file::write_atomic(md, |w| page.write_markdown(w))?;
    }
    stdout_result(report::text::write_compare(out, &c, &bb, &ba, args.top))?;
    Ok(if c.passed() {
        Outcome::Ok
    } else {
        Outcome::GateFailed
    })
}
