//! One exporter per output format of an audit, behind one trait: each formats a
//! [`Model`] (computed once per run) onto the writer it is given.
//!
//! | exporter | output |
//! |---|---|
//! | [`Text`] | the terminal report (verdict, routed comparison, tables, why, relief, closings, risk, gates, caution) |
//! | [`Json`] | the `--json` document (routed fields under `--routing`), streamed |
//! | [`Csv`] | `--csv`: one row per scenario |
//! | [`Html`] | `--report DIR`'s `report.html` |
//! | [`Markdown`] | `--report DIR`'s `report.md` |

use std::io::{self, Write};

use super::model::Model;

/// An output format of the audit report.
pub trait Exporter {
    /// Writes `model` in this format to `out`, section by section (no exporter holds the
    /// whole output in memory except where a format needs it whole). Deterministic: the
    /// bytes depend only on the model (and, for text, the screen width).
    fn write(&self, model: &Model<'_>, out: &mut dyn Write) -> io::Result<()>;
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
