//! The interrupt flag every long solve polls, kept under `solve/` so that the engines
//! read it without depending on the audit layer that sets it
//! ([`crate::audit::install_interrupt_handler`]).
//!
//! Polled by the walk engine between rounds and inside its repairs, by the warm simplex
//! at every pivot, by clarabel at every interior-point iteration (its termination
//! callback), by HiGHS at every simplex iteration (its user interrupt callback, with the
//! `highs` feature: `solve::highs`), and by every backend ladder before each attempt. A solve that sees the flag
//! returns [`Error::Interrupted`]; nothing half-solved is returned as a result, so a
//! journal only ever holds complete scenarios.

use std::sync::atomic::{AtomicBool, Ordering};

use crate::error::{Error, Result};

static REQUESTED: AtomicBool = AtomicBool::new(false);

/// Asks every solve in flight to stop; returns whether a stop was already asked for.
/// O(1), async-signal-safe (one atomic swap).
pub fn request() -> bool {
    REQUESTED.swap(true, Ordering::SeqCst)
}

/// Whether a stop was asked for. O(1): one atomic load, cheap enough for a pivot loop.
pub fn requested() -> bool {
    REQUESTED.load(Ordering::Relaxed)
}

/// `Err(Error::Interrupted)` once a stop was asked for, else `Ok(())`.
pub fn check() -> Result<()> {
    if requested() {
        Err(Error::Interrupted("solve abandoned".into()))
    } else {
        Ok(())
    }
}
