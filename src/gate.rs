//! Gates: pass/fail limits on an audit's worst scenario, for scripts and change reviews.
//!
//! By default a gate compares the worst value *as printed* ([`crate::numbers::displayed`])
//! with the limit *exactly as given*: a shortfall printed as `14` passes `--max-shortfall
//! 14` even when the solver's value is 14.000000021, and a shortfall printed as `12` fails
//! `--max-shortfall 11.9999` (the limit is never rounded). A served fraction is compared
//! as its printed percentage (`95.5%` is the fraction 0.955, exactly) with the limit given.
//! With `--gate-tolerance T` the raw value is compared with the limit loosened by `T`
//! instead.

use crate::audit::Audit;
use crate::error::{Error, Result};
use crate::numbers::{displayed, num, shift_text};

/// What a gate limits.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum GateKind {
    /// Largest shortfall against surviving required demand (traffic units).
    MaxShortfall,
    /// Largest stranded required demand (traffic units).
    MaxStranded,
    /// Smallest served fraction of surviving required demand (0..1).
    MinServedFraction,
    /// Least growth headroom of the audit, a factor of required demand (`--min-headroom
    /// 1.2`: every surviving demand must fit at 120 % of its required in every scenario).
    MinHeadroom,
}

/// A gate: its kind and its limit (units for the maxima, a fraction for the minimum).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Gate {
    pub kind: GateKind,
    pub limit: f64,
}

/// A gate's verdict on an audit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GateResult {
    pub kind: GateKind,
    pub limit: f64,
    /// The worst value over the scenarios (0 for maxima, 1 for the fraction, when none;
    /// `+∞` for the headroom when no scenario has surviving required demand).
    pub value: f64,
    /// The first scenario (in list order) with the worst value.
    pub scenario: Option<usize>,
    pub passed: bool,
}

/// Checks a limit given on the command line: finite and `>= 0`.
pub fn max_limit(flag: &str, x: f64) -> Result<f64> {
    if x.is_finite() && x >= 0.0 {
        Ok(x)
    } else {
        Err(Error::Usage(format!(
            "{flag} must be a finite number >= 0, got {x}"
        )))
    }
}

/// Parses `--min-served-fraction`: a fraction from 0 to 1 (`0.95`) or a percentage from
/// 0% to 100% (`95%`), returned as a fraction.
pub fn parse_fraction(text: &str) -> Result<f64> {
    let bad = || {
        Error::Usage(format!(
            "--min-served-fraction must be a fraction from 0 to 1 (0.95) or a percentage \
             from 0% to 100% (95%), got {text:?}"
        ))
    };
    let t = text.trim();
    let (number, scale) = match t.strip_suffix('%') {
        Some(p) => (p.trim(), 100.0),
        None => (t, 1.0),
    };
    let x: f64 = number.parse().map_err(|_| bad())?;
    // A percentage's decimal point is moved in the text, so `33.3%` is the fraction 0.333
    // exactly as written (dividing the parsed 33.3 by 100 would round twice).
    let f = if scale == 1.0 {
        x
    } else {
        shift_text(number, -2)
            .and_then(|t| t.parse().ok())
            .unwrap_or(x / scale)
    };
    if f.is_finite() && (0.0..=1.0).contains(&f) {
        Ok(f)
    } else {
        Err(bad())
    }
}

/// The fraction a reader sees for `f` in a report: its percentage as [`num`] prints it,
/// with the decimal point moved back by two places in the text (so `95.5%` is exactly the
/// nearest double to 0.955). O(1).
pub fn displayed_fraction(f: f64) -> f64 {
    let printed = num(100.0 * f);
    shift_text(&printed, -2)
        .and_then(|t| t.parse().ok())
        .unwrap_or_else(|| displayed(100.0 * f) / 100.0)
}

/// The `--min-headroom` gate on an audit's least headroom ([`crate::headroom::Least`]):
/// fails when the headroom is below `limit` (a factor of required demand, `1.2` for
/// 120 %), compared as printed ([`crate::headroom::shown`]: its printed percentage read
/// back as a factor) unless `tolerance` is given (then raw, with the limit loosened by
/// it). An unproven headroom is its proven lower bound, so the gate never passes on an
/// overstated value. No value (no scenario has surviving required demand): passes, with
/// value `+∞` and no scenario. O(1).
pub fn check_headroom(
    least: &crate::headroom::Least,
    limit: f64,
    tolerance: Option<f64>,
) -> GateResult {
    let (value, passed) = match least.value {
        None => (f64::INFINITY, true),
        Some(v) => (
            v,
            match tolerance {
                Some(t) => v >= limit - t,
                None => crate::headroom::shown(v) >= limit,
            },
        ),
    };
    GateResult {
        kind: GateKind::MinHeadroom,
        limit,
        value,
        scenario: least.scenario,
        passed,
    }
}

/// Evaluates each gate on `audit`. O(gates · scenarios). A [`GateKind::MinHeadroom`] gate
/// needs the headroom: it is checked by [`check_headroom`] and skipped here. The worst scenario is the first
/// in list order whose value, as printed, is worst. A maximum gate fails when the
/// worst value exceeds its limit, the fraction gate when the worst fraction is below it;
/// unless `tolerance` is given, the worst value is compared as printed (a fraction as its
/// printed percentage, [`displayed_fraction`]) with the limit exactly as given.
pub fn check(audit: &Audit, gates: &[Gate], tolerance: Option<f64>) -> Vec<GateResult> {
    gates
        .iter()
        .filter(|g| g.kind != GateKind::MinHeadroom)
        .map(|g| {
            let value_of = |i: usize| {
                let e = audit.eval(i);
                match g.kind {
                    GateKind::MaxShortfall => e.shortfall,
                    GateKind::MaxStranded => e.stranded,
                    GateKind::MinServedFraction | GateKind::MinHeadroom => e.served_fraction(),
                }
            };
            let minimum = g.kind == GateKind::MinServedFraction;
            // Scenarios are compared as printed, so solver noise never picks among
            // values that print alike: the first in list order wins.
            let printed = |v: f64| {
                if minimum {
                    displayed(100.0 * v)
                } else {
                    displayed(v)
                }
            };
            let mut worst: Option<(usize, f64)> = None;
            for i in 0..audit.scenarios.len() {
                let v = value_of(i);
                let better = match worst {
                    None => true,
                    Some((_, w)) if minimum => printed(v).total_cmp(&printed(w)).is_lt(),
                    Some((_, w)) => printed(v).total_cmp(&printed(w)).is_gt(),
                };
                if better {
                    worst = Some((i, v));
                }
            }
            let value = worst.map_or(if minimum { 1.0 } else { 0.0 }, |w| w.1);
            let passed = match (tolerance, minimum) {
                (Some(t), false) => value <= g.limit + t,
                (Some(t), true) => value >= g.limit - t,
                (None, false) => displayed(value) <= g.limit,
                (None, true) => displayed_fraction(value) >= g.limit,
            };
            GateResult {
                kind: g.kind,
                limit: g.limit,
                value,
                scenario: worst.map(|w| w.0),
                passed,
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Common practice, no source: the accepted spellings of a fraction.
    #[test]
    fn fractions() {
        assert_eq!(parse_fraction("0.95").unwrap(), 0.95);
        assert_eq!(parse_fraction("95%").unwrap(), 0.95);
        assert_eq!(parse_fraction("100%").unwrap(), 1.0);
        assert_eq!(parse_fraction("0").unwrap(), 0.0);
        // Moved in the text: exactly the nearest double to the fraction written.
        assert_eq!(parse_fraction("33.3%").unwrap(), 0.333);
        assert_eq!(parse_fraction("7%").unwrap(), 0.07);
        assert_eq!(parse_fraction("99.9999%").unwrap(), 0.999999);
        for bad in ["-0.1", "1.5", "95", "abc", "nan", "101%", ""] {
            assert!(parse_fraction(bad).is_err(), "{bad}");
        }
    }

    /// Hand-worked: a printed percentage read back as a fraction, exactly.
    #[test]
    fn printed_fractions() {
        assert_eq!(displayed_fraction(0.955), 0.955);
        assert_eq!(displayed_fraction(0.07), 0.07);
        // 0.9999999 prints as 100%: the reader sees the whole.
        assert_eq!(displayed_fraction(0.9999999), 1.0);
        // 0.12345678 prints as 12.346%.
        assert_eq!(displayed_fraction(0.12345678), 0.12346);
    }
}
