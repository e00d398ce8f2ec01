//! One exporter per output format, behind one trait: each formats a document (the audit's
//! [`Model`](super::model::Model), computed once per run, or a [`PlanReport`] or [`CheckReport`]) onto the
//! writer it is given.
//!
//! | exporter | document | output |
//! |---|---|---|
//! | [`Text`] | `Model` | the terminal report (verdict, routed comparison, tables, why, relief, closings, risk, gates, caution) |
//! | [`Text`] | [`PlanReport`] | `plan`'s tables (the routing's header first under `--routing`) |
//! | [`Text`] | [`CheckReport`] | `check`'s summary |
//! | [`Json`] | `Model` | the `--json` document (routed fields under `--routing`), streamed |
//! | [`Json`] | [`PlanReport`] | `plan --json` |
//! | [`Csv`] | `Model` | `--csv`: one row per scenario |
//! | [`Html`] | `Model` | `--report DIR`'s `report.html`, streamed |
//! | [`Markdown`] | `Model` | `--report DIR`'s `report.md`, streamed |

use std::fmt;
use std::io::{self, Write};

use crate::audit::Audit;
use crate::expand::Plan;
use crate::model::Network;
use crate::routing;
use crate::solve::Unservable;

/// An output format of a report on document `D`.
pub trait Exporter<D: ?Sized> {
    /// Writes `doc` in this format to `out`, section by section (no exporter holds the
    /// whole output in memory except where a format needs it whole). Deterministic: the
    /// bytes depend only on the document (and, for text, the screen width).
    fn write(&self, doc: &D, out: &mut dyn Write) -> io::Result<()>;
}

/// What `plan` reports: the solved scenarios, the purchase and how the tables are cut.
pub struct PlanReport<'a> {
    pub net: &'a Network,
    pub audit: &'a Audit,
    pub plan: &'a Plan,
    /// No site has an `expand_cost`: every unit costs 1.
    pub default_costs: bool,
    /// How many scenarios the tables show.
    pub top: usize,
    /// `--routing steered`: the routing model the plan was bought for (`None`: the best
    /// re-route).
    pub routing: Option<routing::Mode>,
}

/// What `check` reports: the network and the demands the intact network cuts off.
pub struct CheckReport<'a> {
    pub net: &'a Network,
    pub cut_off: &'a [(crate::model::DemandIdx, Unservable)],
}

/// The terminal report ([`super::text`]).
pub struct Text;

/// The `--json` document ([`super::json`]).
pub struct Json;

/// The `--csv` file ([`super::csv`]).
pub struct Csv;

/// `report.html` ([`super::html`]).
pub struct Html;

/// `report.md` ([`super::markdown`]).
pub struct Markdown;

/// Runs `write` on a [`fmt::Write`] that hands every piece to `out` as it comes (nothing
/// is gathered into one string), and returns `out`'s first error. The HTML and Markdown
/// layouts are written with `write!` through it. O(bytes written).
pub fn streamed(
    out: &mut dyn Write,
    write: impl FnOnce(&mut dyn fmt::Write) -> fmt::Result,
) -> io::Result<()> {
    /// `fmt::Write` onto an `io::Write`, keeping the first I/O error (`fmt::Error`
    /// carries none).
    struct Adapter<'w> {
        out: &'w mut dyn Write,
        error: Option<io::Error>,
    }
    impl fmt::Write for Adapter<'_> {
        fn write_str(&mut self, s: &str) -> fmt::Result {
            self.out.write_all(s.as_bytes()).map_err(|e| {
                self.error = Some(e);
                fmt::Error
            })
        }
    }
    let mut a = Adapter { out, error: None };
    write(&mut a).map_err(|_| {
        a.error
            .take()
            .unwrap_or_else(|| io::Error::other("a report could not be formatted"))
    })
}
