//! Notes for stderr (threads capped, the estimate, `--resume`, journal lines, capacity
//! fallback, `--apply`) and the usage refusals worded with them. Each writes one or more
//! whole lines to the `Write` it is given.

use std::io::{self, Write};

use crate::model::strict::printable;
use crate::numbers::num;

/// A note on stderr: `--threads` was above the core count and is capped.
pub fn note_threads_capped(w: &mut dyn Write, asked: usize, cores: usize) -> io::Result<()> {
    writeln!(
        w,
        "redoubt: note: --threads {asked} is above the {cores} cores of this machine; using \
         {cores} (results do not depend on it)"
    )
}

/// A note on stderr: the estimated time of the run before it starts (`scenarios` counted,
/// not yet enumerated; `first_solve` is one sample failure).
pub fn note_estimate(
    w: &mut dyn Write,
    scenarios: usize,
    first_solve: std::time::Duration,
    threads: usize,
    minutes: f64,
) -> io::Result<()> {
    writeln!(
        w,
        "redoubt: {} to solve; one took {}, so about {} on {}",
        crate::numbers::count(scenarios, "scenario"),
        crate::numbers::duration(first_solve.as_secs_f64()),
        crate::numbers::duration(60.0 * minutes),
        crate::numbers::count(threads, "thread")
    )
}

/// The refusal of a run estimated beyond its time limit (both in minutes), in durations
/// a person reads at a glance ([`crate::numbers::duration`]: seconds under two minutes).
pub fn estimate_refused(minutes: f64, scenarios: usize, one_took: f64, limit: f64) -> String {
    format!(
        "the run is estimated at {} ({}, one took {}), above the limit of {} \
         (--max-minutes {limit}); pass --yes to run it anyway, raise --max-minutes, or lower \
         --depth / narrow --kinds",
        crate::numbers::duration(60.0 * minutes),
        crate::numbers::count(scenarios, "scenario"),
        crate::numbers::duration(one_took),
        crate::numbers::duration(60.0 * limit),
    )
}

/// `audit --shard` writes a part file and nothing else: `--csv`, `--report` and `--why`
/// (flags given as `csv`, `report`, `why`) are refused with a pointer to `merge`, which
/// writes them for the whole run.
pub fn refuse_with_shard(csv: bool, report: bool, why: bool) -> crate::error::Result<()> {
    let given: Vec<&str> = [(csv, "--csv"), (report, "--report"), (why, "--why")]
        .into_iter()
        .filter_map(|(on, flag)| on.then_some(flag))
        .collect();
    if given.is_empty() {
        return Ok(());
    }
    Err(crate::error::Error::Usage(format!(
        "--shard writes only a part file, so {} would describe one shard; give {} to \
         `redoubt merge PART… --json FILE`, which writes {} for the whole run",
        given.join(", "),
        if given.len() == 1 { "it" } else { "them" },
        if given.len() == 1 { "it" } else { "them" }
    )))
}

/// A note on stderr: what `--resume` found in the journal.
pub fn note_resume(
    w: &mut dyn Write,
    journal: &std::path::Path,
    opened: crate::journal::Opened,
    outages: usize,
) -> io::Result<()> {
    match opened {
        crate::journal::Opened::Fresh => Ok(()),
        crate::journal::Opened::NothingToResume => writeln!(
            w,
            "redoubt: note: no journal at {}; starting from the beginning",
            journal.display()
        ),
        crate::journal::Opened::Resumed(n) => writeln!(
            w,
            "redoubt: resuming: {n} of {} restored from {}",
            crate::numbers::count(outages, "outage"),
            journal.display()
        ),
    }
}

/// A note on stderr: a line of the journal was ignored on `--resume` (damaged, or its
/// evaluation does not verify against the network); what it held is solved again.
pub fn note_journal_line(
    w: &mut dyn Write,
    journal: &std::path::Path,
    line: usize,
    why: &str,
) -> io::Result<()> {
    writeln!(
        w,
        "redoubt: note: {} line {line} ignored: {why}; what it held is solved again",
        journal.display()
    )
}

/// A note on stderr: the plan's walk master outgrew the exact warm simplex (`rows`
/// simplex rows at most), so `interior` of its `solves` LP solves went to the
/// interior-point solver.
pub fn note_plan_interior_point(
    w: &mut dyn Write,
    interior: usize,
    solves: usize,
    rows: usize,
) -> io::Result<()> {
    writeln!(
        w,
        "redoubt: note: the plan's master outgrew the exact simplex ({rows} rows besides its \
         demand rows), so {interior} \
         of its {solves} solves went to the interior-point solver (slower; its rows hold to \
         about 1e-7); the plan is still checked on every scenario"
    )
}

/// A note on stderr: the journal could not be written (the run went on without it).
pub fn note_journal_failed(w: &mut dyn Write, why: &str) -> io::Result<()> {
    writeln!(
        w,
        "redoubt: note: journaling stopped ({why}); an interrupted run would resume from \
         what was saved before"
    )
}

/// A note on stderr: `import networkx --capacity-attr ATTR --capacity C` gave `n` of `of`
/// links the capacity `C` because their edge has no `ATTR`.
pub fn note_capacity_fallback(
    w: &mut dyn Write,
    n: usize,
    of: usize,
    attr: &str,
    capacity: f64,
) -> io::Result<()> {
    writeln!(
        w,
        "redoubt: note: {n} of {of} links have no `{}` and take --capacity {}",
        printable(attr),
        num(capacity)
    )
}

/// The note after `plan --apply` on a file with service chains: `count` (site, function)
/// purchases written into `sites[].functions`.
pub fn note_applied_functions(
    w: &mut dyn Write,
    path: &std::path::Path,
    count: usize,
) -> io::Result<()> {
    writeln!(
        w,
        "redoubt: wrote {} with the purchase added ({count} function capacit{} raised in \
         sites[].functions); audit it to review the change",
        path.display(),
        if count == 1 { "y" } else { "ies" }
    )
}

/// A note on stderr: `plan --apply` wrote the network with the purchase added.
pub fn note_applied(w: &mut dyn Write, path: &std::path::Path, add: &[f64]) -> io::Result<()> {
    let sites = add.iter().filter(|a| **a > 0.0).count();
    writeln!(
        w,
        "redoubt: wrote {} with the purchase added ({sites} site{} with more processing); \
         audit it to review the change",
        path.display(),
        if sites == 1 { "" } else { "s" }
    )
}
