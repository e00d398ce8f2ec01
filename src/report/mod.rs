//! Output formats. Only this module knows how results look on a terminal or in a file:
//! [`text`] for the `check` summary, the tables, notes and gate lines, [`json`] for `--json`
//! files and the resume journal's lines, [`mod@file`] for writing output files safely.
//!
//! Every exporter writes to a `&mut dyn Write` it is given; nothing here prints.

pub mod csv;
pub mod file;
pub mod html;
pub mod journal;
pub mod json;
pub mod markdown;
pub mod routing;
pub mod screen;
pub mod text;

/// The caution every report carries.
pub const CAUTION: &str = "Caution: a planning aid under the model's assumptions (fluid, splittable \
traffic; the capacities in the file; one processing step per unit); it does not replace the \
operator's own engineering review, change procedures and local rules.";

/// A probability for files: 15 significant digits (small probabilities would vanish
/// under [`round9`]), so the last digits of summation noise do not show. O(1).
pub fn prob(x: f64) -> f64 {
    if x == 0.0 || !x.is_finite() {
        return x;
    }
    format!("{x:.14e}").parse().unwrap_or(x)
}

/// A probability for people: `0`, four decimals from 0.01 on (`0.0199`), else three
/// significant digits in scientific notation (`1.23e-5`). O(1).
pub fn probability(p: f64) -> String {
    if p == 0.0 {
        "0".into()
    } else if p >= 1e-2 {
        trimmed4(p)
    } else {
        format!("{p:.2e}")
    }
}

/// A small expected amount for people: [`num`] from 0.001 on, else three significant
/// digits in scientific notation (an expected shortfall is often tiny). O(1).
pub fn sig(x: f64) -> String {
    if x == 0.0 || x.abs() >= 1e-3 {
        num(x)
    } else {
        format!("{x:.2e}")
    }
}

fn trimmed4(x: f64) -> String {
    let s = format!("{x:.4}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    s.into()
}

/// From this magnitude on, [`num`] prints engineering notation (`1.5e12`).
pub const ENGINEERING_FROM: f64 = 1e9;

/// Decimals [`num`] shows below [`ENGINEERING_FROM`] (and of an engineering mantissa).
pub const DECIMALS: usize = 3;

/// A number for people. Below [`ENGINEERING_FROM`] in magnitude: at most [`DECIMALS`]
/// decimals, trailing zeros trimmed, `-0` shown as `0`. From it on: engineering notation,
/// a mantissa in [1, 1000) with at most [`DECIMALS`] decimals and an exponent that is a
/// multiple of 3 (`1.5e12`, `170e306`). `+∞` prints `no limit`. O(1); the result never
/// exceeds 16 characters for any finite input.
pub fn num(x: f64) -> String {
    if !x.is_finite() {
        return if x > 0.0 {
            "no limit".into()
        } else {
            x.to_string()
        };
    }
    if x.abs() >= ENGINEERING_FROM {
        return engineering(x);
    }
    trimmed(x)
}

/// `x` with [`DECIMALS`] decimals, trailing zeros and a lone `-0` removed.
fn trimmed(x: f64) -> String {
    let s = format!("{:.*}", DECIMALS, x);
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" { "0".into() } else { s.into() }
}

/// Engineering notation of a finite `x` with `|x| >= 1`: mantissa in [1, 1000), exponent a
/// multiple of 3.
fn engineering(x: f64) -> String {
    let mut exp = (x.abs().log10().floor() as i32).div_euclid(3) * 3;
    let mantissa = |exp: i32| x / 10f64.powi(exp);
    if mantissa(exp).abs() < 1.0 {
        exp -= 3;
    }
    let mut s = trimmed(mantissa(exp));
    // Rounding to DECIMALS can carry the mantissa to 1000: move to the next exponent.
    if s.trim_start_matches('-').starts_with("1000") {
        exp += 3;
        s = trimmed(mantissa(exp));
    }
    format!("{s}e{exp}")
}

/// The value a reader sees in a report for `x`: [`num`] parsed back (`x` itself when it
/// prints as a word). Gates compare at this precision, so a printed "14" never "exceeds 14".
pub fn displayed(x: f64) -> f64 {
    num(x).parse().unwrap_or(x)
}

/// A small relative quantity (a gap, a residual) in scientific notation with one decimal,
/// `0` when it is exactly zero (never `0.0e0`).
pub fn small(x: f64) -> String {
    if x == 0.0 {
        "0".into()
    } else {
        format!("{x:.1e}")
    }
}

/// A number for files: rounded to 9 decimals, so solver noise below 1e-9 does not show
/// and equal results print equal.
pub fn round9(x: f64) -> f64 {
    // Above 1e6 nine decimals are beyond f64 precision anyway; leave such values alone.
    if !x.is_finite() || x.abs() >= 1e6 {
        return x;
    }
    let r = (x * 1e9).round() / 1e9;
    if r == 0.0 { 0.0 } else { r }
}

/// `part` as a percentage of `whole` with one decimal. The ratio is taken first and
/// clamped to [0, 1] (every percentage reported is a part of a whole), so no magnitude
/// overflows; `0%` when `whole` is not positive, `—` when the ratio is not a number.
pub fn percent(part: f64, whole: f64) -> String {
    if whole.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater) {
        return "0%".into();
    }
    let ratio = part / whole;
    if ratio.is_nan() {
        return "—".into();
    }
    format!("{:.1}%", 100.0 * ratio.clamp(0.0, 1.0))
}

/// An amount with its traffic unit, `num(x) unit`. The default label `units` (a file
/// without `unit`) reads `unit` when the amount prints as exactly 1 (`1 unit`, `0.5
/// units`); other labels (`Gbit/s`, `Mpps`) are symbols and never change. O(1).
pub fn amount(x: f64, unit: &str) -> String {
    let n = num(x);
    let u = if n == "1" { unit_one(unit) } else { unit };
    format!("{n} {u}")
}

/// The unit label for one unit: `unit` for the default `units`, any other label as is.
pub fn unit_one(unit: &str) -> &str {
    if unit == "units" { "unit" } else { unit }
}

/// `n noun` with the plural `s` when `n` is not 1 (`1 outage`, `3 outages`). For nouns
/// whose plural is the word plus `s`. O(len).
pub fn count(n: usize, noun: &str) -> String {
    format!("{n} {noun}{}", if n == 1 { "" } else { "s" })
}

/// A duration for people, from seconds, with one decimal at most: milliseconds under a
/// second (`0.6 ms`, `60 ms`; `under 0.1 ms` when it would print as 0), seconds under two
/// minutes (`17.6 s`), minutes under two hours (`5 minutes`, `60.2 minutes`), hours
/// beyond (`2.5 hours`). Never `0 minutes`. O(1).
pub fn duration(seconds: f64) -> String {
    let one = |x: f64| {
        let s = format!("{x:.1}");
        s.trim_end_matches(".0").to_string()
    };
    if !seconds.is_finite() {
        return num(seconds);
    }
    if seconds < 1.0 {
        return match one(seconds * 1000.0) {
            z if z == "0" || z == "-0" => "under 0.1 ms".into(),
            ms => format!("{ms} ms"),
        };
    }
    if seconds < 120.0 {
        return format!("{} s", one(seconds));
    }
    let minutes = seconds / 60.0;
    if minutes < 120.0 {
        return format!("{} minutes", one(minutes));
    }
    format!("{} hours", one(minutes / 60.0))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Common practice, no source: hand-written expected renderings.
    #[test]
    fn formatting() {
        assert_eq!(num(12.0), "12");
        assert_eq!(num(12.3456), "12.346");
        assert_eq!(num(-0.0001), "0");
        assert_eq!(num(999_999_999.0), "999999999");
        assert_eq!(num(1e9), "1e9");
        assert_eq!(num(1.5e12), "1.5e12");
        assert_eq!(num(15e12), "15e12");
        assert_eq!(num(-2.5e10), "-25e9");
        assert_eq!(num(999_999_999_999.9), "1e12");
        assert_eq!(num(1e308), "100e306");
        assert_eq!(num(f64::MAX), "179.769e306");
        assert_eq!(displayed(14.000000021), 14.0);
        assert_eq!(displayed(1.5e12), 1.5e12);
        assert_eq!(small(0.0), "0");
        assert_eq!(small(1.24e-9), "1.2e-9");
        assert_eq!(round9(1.0000000000004), 1.0);
        assert_eq!(round9(1e300), 1e300);
        assert_eq!(percent(1.0, 3.0), "33.3%");
        assert_eq!(percent(1e308, 1e308), "100.0%");
        assert_eq!(percent(f64::MAX, f64::MAX / 2.0), "100.0%");
        assert_eq!(percent(1.0, 0.0), "0%");
        assert_eq!(amount(1.0, "units"), "1 unit");
        assert_eq!(amount(1.0004, "units"), "1 unit");
        assert_eq!(amount(0.5, "units"), "0.5 units");
        assert_eq!(amount(1.0, "Mpps"), "1 Mpps");
        assert_eq!(count(1, "outage"), "1 outage");
        assert_eq!(count(0, "outage"), "0 outages");
        assert_eq!(duration(0.06), "60 ms");
        assert_eq!(duration(0.0006), "0.6 ms");
        assert_eq!(duration(0.00001), "under 0.1 ms");
        assert_eq!(duration(17.58), "17.6 s");
        assert_eq!(duration(119.0), "119 s");
        assert_eq!(duration(300.0), "5 minutes");
        assert_eq!(duration(3612.0), "60.2 minutes");
        assert_eq!(duration(9000.0), "2.5 hours");
        for x in [1e9, 3.3e15, 7.77e100, f64::MAX, -f64::MAX] {
            assert!(num(x).len() <= 16, "{x}: {}", num(x));
        }
    }
}
