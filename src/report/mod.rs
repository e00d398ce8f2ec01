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
pub mod worst;

/// The caution every report carries.
pub const CAUTION: &str = "Caution: a planning aid under the model's assumptions (fluid, splittable \
traffic; the capacities in the file; one processing step per unit); it does not replace the \
operator's own engineering review, change procedures and local rules.";

/// A probability for files: 15 significant digits (small probabilities would vanish
/// under a fixed number of decimals), so the last digits of summation noise do not show.
/// O(1).
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

/// Below this magnitude (and above 0), [`num`] prints engineering notation (`2.5e-6`), so a
/// small amount never prints as `0`.
pub const ENGINEERING_BELOW: f64 = 1e-3;

/// Decimals [`num`] shows below [`ENGINEERING_FROM`] (and of an engineering mantissa).
pub const DECIMALS: usize = 3;

/// A number for people. From [`ENGINEERING_BELOW`] to below [`ENGINEERING_FROM`] in
/// magnitude: at most [`DECIMALS`] decimals, trailing zeros trimmed, `-0` shown as `0`.
/// Outside that range (and not zero): engineering notation, a mantissa in [1, 1000) with at
/// most [`DECIMALS`] decimals and an exponent that is a multiple of 3 (`1.5e12`,
/// `170e306`, `2.5e-6`, `100e-12`), so a nonzero amount never prints as `0`. `+∞` prints
/// `no limit`. O(1); the result never exceeds 16 characters for any finite input.
pub fn num(x: f64) -> String {
    if !x.is_finite() {
        return if x > 0.0 {
            "no limit".into()
        } else {
            x.to_string()
        };
    }
    if x != 0.0 && (x.abs() >= ENGINEERING_FROM || x.abs() < ENGINEERING_BELOW) {
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

/// Engineering notation of a finite nonzero `x`: mantissa in [1, 1000) with at most
/// [`DECIMALS`] decimals (trailing zeros trimmed), exponent a multiple of 3. Built from
/// Rust's correctly rounded scientific formatting, so it is exact for every magnitude
/// (subnormals included) and the mantissa is rounded once. O(1).
fn engineering(x: f64) -> String {
    let exponent = |s: &str| -> i32 {
        s.rsplit_once('e')
            .and_then(|(_, e)| e.parse().ok())
            .unwrap_or(0)
    };
    let mut e = exponent(&format!("{x:e}"));
    // At most two rounds: rounding the mantissa can carry it to the next power of ten once.
    for _ in 0..2 {
        let base = e.div_euclid(3) * 3;
        let shift = (e - base) as usize;
        let s = format!("{:.*e}", shift + DECIMALS, x);
        let got = exponent(&s);
        if got != e {
            e = got;
            continue;
        }
        let mantissa = s.split_once('e').map_or(s.as_str(), |(m, _)| m);
        let digits: String = mantissa.chars().filter(char::is_ascii_digit).collect();
        let (int, frac) = digits.split_at((shift + 1).min(digits.len()));
        let frac = frac.trim_end_matches('0');
        let sign = if x < 0.0 { "-" } else { "" };
        return if frac.is_empty() {
            format!("{sign}{int}e{base}")
        } else {
            format!("{sign}{int}.{frac}e{base}")
        };
    }
    format!("{x:e}")
}

/// The value a reader sees in a report for `x`: [`num`] parsed back (`x` itself when it
/// prints as a word). Gates compare at this precision, so a printed "14" never "exceeds 14".
pub fn displayed(x: f64) -> f64 {
    num(x).parse().unwrap_or(x)
}

/// A limit exactly as the user gave it: [`num`] when that reads back as `x`, else the
/// shortest digits that do (`11.9999`, not `12`; `1.2345678901e12` for a value
/// engineering notation would round). O(1).
pub fn given(x: f64) -> String {
    let n = num(x);
    if n.parse::<f64>().ok() == Some(x) || !x.is_finite() {
        n
    } else if x.abs() >= ENGINEERING_FROM || (x != 0.0 && x.abs() < ENGINEERING_BELOW) {
        format!("{x:e}")
    } else {
        format!("{x}")
    }
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

/// Significant digits of a number in a file ([`file_num`]).
pub const FILE_DIGITS: usize = 12;

/// A number for files: rounded to [`FILE_DIGITS`] significant digits, or to a whole
/// number when that keeps more digits (from 1e11 on), so an integer is always kept as it is.
/// The last digits of floating-point arithmetic do not show, equal results print equal,
/// and a small amount (1e-10 units) keeps its digits instead of vanishing under a fixed
/// number of decimals. Monotone (rounding to a grid that only coarsens with magnitude, and
/// every grid holds the powers of ten): `x <= y` implies `file_num(x) <= file_num(y)`, so
/// a value never prints above a bound it does not exceed. A pure function of `x` (the same
/// bytes whatever the thread count). O(1).
pub fn file_num(x: f64) -> f64 {
    let r = if !x.is_finite() || x == x.trunc() {
        x
    } else if x.abs() >= 1e11 {
        x.round()
    } else {
        format!("{:.*e}", FILE_DIGITS - 1, x).parse().unwrap_or(x)
    };
    // `-0` prints as `0`.
    if r == 0.0 { 0.0 } else { r }
}

/// `a − b` for files: the difference of the two values as [`file_num`] writes them,
/// rounded where their last written digit is, so the subtraction's own rounding (`0.3 −
/// 0.1 = 0.19999999999999998`, `1e6 + 0.1 − 1e6 = 0.10000000009`) does not show. O(1).
pub fn file_diff(a: f64, b: f64) -> f64 {
    let (a, b) = (file_num(a), file_num(b));
    let d = a - b;
    let big = a.abs().max(b.abs());
    if d == 0.0 || !d.is_finite() || big == 0.0 {
        return file_num(d);
    }
    // The place value of the last significant digit of the larger operand.
    let place = big.log10().floor() as i32 + 1 - FILE_DIGITS as i32;
    let rounded: f64 = if place >= 0 {
        d
    } else {
        format!("{:.*}", (-place) as usize, d).parse().unwrap_or(d)
    };
    file_num(rounded)
}

/// `part` as a percentage of `whole` with one decimal, for a part of a whole (a served
/// fraction, a shortfall over the required demand): the ratio is taken first and clamped
/// to [0, 1], so no magnitude overflows. A ratio strictly between 0 and 0.05 % prints
/// `<0.1%` and one strictly between 99.95 % and 1 prints `>99.9%`, so a nonzero part
/// never reads as none and a short scenario never reads as fully served. `0%` when
/// `whole` is not positive, `—` when the ratio is not a number. O(1).
pub fn percent(part: f64, whole: f64) -> String {
    if whole.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater) {
        return "0%".into();
    }
    let ratio = part / whole;
    if ratio.is_nan() {
        return "—".into();
    }
    let r = ratio.clamp(0.0, 1.0);
    let text = format!("{:.1}%", 100.0 * r);
    if r > 0.0 && text == "0.0%" {
        "<0.1%".into()
    } else if r < 1.0 && text == "100.0%" {
        ">99.9%".into()
    } else {
        text
    }
}

/// A ratio that may exceed 1 (a utilisation: offered load over capacity) as a percentage
/// with one decimal, never clamped: 2.5 prints `250.0%`. From [`ENGINEERING_FROM`] % on the
/// percentage is in [`num`]'s engineering notation (`1.5e12%`); a ratio strictly between 0
/// and 0.05 % prints `<0.1%`; a negative or not-a-number ratio prints `—`, `+∞` prints
/// `inf`. O(1).
pub fn ratio_percent(ratio: f64) -> String {
    if ratio.is_nan() || ratio < 0.0 {
        return "—".into();
    }
    if ratio.is_infinite() {
        return "inf".into();
    }
    let pct = 100.0 * ratio;
    if pct.is_infinite() || pct >= ENGINEERING_FROM {
        // 100 · ratio overflows only above f64::MAX / 100: show the ratio's own digits.
        return if pct.is_infinite() {
            format!("{}00%", num(ratio))
        } else {
            format!("{}%", num(pct))
        };
    }
    let text = format!("{pct:.1}%");
    if ratio > 0.0 && text == "0.0%" {
        "<0.1%".into()
    } else {
        text
    }
}

/// The decimal text of `x` (its shortest round-trip digits, never in exponent form) with
/// the decimal point moved `places` to the right (left when negative): `shift_point(0.95,
/// 2)` is `"95"`, `shift_point(11.9999, -2)` is `"0.119999"`. Exact, with no rounding:
/// a limit given as `0.999999` shows as `99.9999%`, not `100%`. O(digits).
pub fn shift_point(x: f64, places: i32) -> String {
    let text = format!("{x}");
    shift_text(&text, places).unwrap_or(text)
}

/// [`shift_point`] on a plain decimal text (`-12.5`, `0.001`, `7`); `None` when the text is
/// not one (an exponent, a word).
pub fn shift_text(text: &str, places: i32) -> Option<String> {
    let (sign, body) = match text.strip_prefix('-') {
        Some(b) => ("-", b),
        None => ("", text.strip_prefix('+').unwrap_or(text)),
    };
    let (int, frac) = body.split_once('.').unwrap_or((body, ""));
    if int.is_empty() && frac.is_empty()
        || !int.chars().chain(frac.chars()).all(|c| c.is_ascii_digit())
    {
        return None;
    }
    let digits = format!("{int}{frac}");
    // Position of the point within `digits` after the move (may fall outside).
    let point = int.len() as i64 + places as i64;
    let (int, frac) = if point <= 0 {
        (
            "0".to_string(),
            format!("{}{digits}", "0".repeat((-point) as usize)),
        )
    } else if point as usize >= digits.len() {
        (
            format!("{digits}{}", "0".repeat(point as usize - digits.len())),
            String::new(),
        )
    } else {
        let (i, f) = digits.split_at(point as usize);
        (i.to_string(), f.to_string())
    };
    let int = int.trim_start_matches('0');
    let int = if int.is_empty() { "0" } else { int };
    let frac = frac.trim_end_matches('0');
    Some(if frac.is_empty() {
        format!("{sign}{int}")
    } else {
        format!("{sign}{int}.{frac}")
    })
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
        assert_eq!(num(0.001), "0.001");
        assert_eq!(num(-0.0), "0");
        assert_eq!(num(999_999_999.0), "999999999");
        assert_eq!(num(1e9), "1e9");
        assert_eq!(num(1.5e12), "1.5e12");
        assert_eq!(num(15e12), "15e12");
        assert_eq!(num(-2.5e10), "-25e9");
        assert_eq!(num(999_999_999_999.9), "1e12");
        assert_eq!(num(1e308), "100e306");
        assert_eq!(num(f64::MAX), "179.769e306");
        // Small amounts keep their digits instead of printing as 0.
        assert_eq!(num(-0.0001), "-100e-6");
        assert_eq!(num(2.5e-6), "2.5e-6");
        assert_eq!(num(1e-10), "100e-12");
        assert_eq!(num(1.23456e-7), "123.456e-9");
        assert_eq!(num(0.00099999999), "1e-3");
        assert_eq!(num(5e-324), "4.941e-324");
        assert_eq!(displayed(14.000000021), 14.0);
        assert_eq!(displayed(1.5e12), 1.5e12);
        assert_eq!(displayed(2.5e-6), 2.5e-6);
        assert_eq!(given(11.9999), "11.9999");
        assert_eq!(given(12.0), "12");
        assert_eq!(given(1.5e12), "1.5e12");
        assert_eq!(given(1.2345678901e12), "1.2345678901e12");
        assert_eq!(given(2.5e-6), "2.5e-6");
        assert_eq!(given(1.23456789e-7), "1.23456789e-7");
        assert_eq!(small(0.0), "0");
        assert_eq!(small(1.24e-9), "1.2e-9");
        for x in [
            1e9,
            3.3e15,
            7.77e100,
            f64::MAX,
            -f64::MAX,
            -1.23456e-300,
            f64::MIN_POSITIVE,
            -5e-324,
        ] {
            assert!(num(x).len() <= 16, "{x}: {}", num(x));
            assert_ne!(displayed(x), 0.0, "{x}");
        }
    }

    /// Common practice, no source: numbers in files keep 12 significant digits.
    #[test]
    fn file_numbers() {
        assert_eq!(file_num(1.0000000000004), 1.0);
        assert_eq!(file_num(0.1 + 0.2), 0.3);
        assert_eq!(file_num(1e-10), 1e-10);
        assert_eq!(file_num(1.00000000001e-10), 1.00000000001e-10);
        assert_eq!(file_num(2.5e-6 + 1e-22), 2.5e-6);
        assert_eq!(file_num(104.999999979), 104.999999979);
        assert_eq!(file_num(1e300), 1e300);
        assert_eq!(file_num(1_234_567_890_123.0), 1_234_567_890_123.0);
        assert_eq!(file_num(1_234_567_890_123.4), 1_234_567_890_123.0);
        assert_eq!(file_num(-0.0).to_bits(), 0.0f64.to_bits());
        assert_eq!(file_diff(0.3, 0.1), 0.2);
        assert_eq!(file_diff(1e6 + 0.1, 1e6), 0.1);
        assert_eq!(file_diff(2.5e-6, 0.0), 2.5e-6);
        // Monotone around the switch to whole numbers and at powers of ten.
        let xs = [
            99_999_999_999.99,
            99_999_999_999.999_99,
            1e11,
            1e11 + 0.4,
            1e11 + 0.6,
            1_234_567_890_122.6,
            1_234_567_890_123.0,
            1_234_567_890_123.4,
        ];
        for w in xs.windows(2) {
            assert!(file_num(w[0]) <= file_num(w[1]), "{w:?}");
        }
    }

    /// Common practice, no source: percentages of a whole and utilisations.
    #[test]
    fn percentages() {
        assert_eq!(percent(1.0, 3.0), "33.3%");
        assert_eq!(percent(1e308, 1e308), "100.0%");
        assert_eq!(percent(f64::MAX, f64::MAX / 2.0), "100.0%");
        assert_eq!(percent(1.0, 0.0), "0%");
        assert_eq!(percent(2.5e-6, 7e11), "<0.1%");
        assert_eq!(percent(0.0, 7e11), "0.0%");
        assert_eq!(percent(99.99999, 100.0), ">99.9%");
        assert_eq!(ratio_percent(2.5), "250.0%");
        assert_eq!(ratio_percent(1.7), "170.0%");
        assert_eq!(ratio_percent(0.5), "50.0%");
        assert_eq!(ratio_percent(1e-9), "<0.1%");
        assert_eq!(ratio_percent(0.0), "0.0%");
        assert_eq!(ratio_percent(f64::INFINITY), "inf");
        assert_eq!(ratio_percent(1e12), "100e12%");
        assert!(
            ratio_percent(f64::MAX).len() <= 20,
            "{}",
            ratio_percent(f64::MAX)
        );
    }

    /// Common practice, no source: moving a decimal point by hand.
    #[test]
    fn shifted_points() {
        assert_eq!(shift_point(0.95, 2), "95");
        assert_eq!(shift_point(0.999999, 2), "99.9999");
        assert_eq!(shift_point(0.07, 2), "7");
        assert_eq!(shift_point(1.0, 2), "100");
        assert_eq!(shift_point(0.0, 2), "0");
        assert_eq!(shift_text("95.5", -2).as_deref(), Some("0.955"));
        assert_eq!(shift_text("7", -2).as_deref(), Some("0.07"));
        assert_eq!(shift_text("-12.5", 1).as_deref(), Some("-125"));
        assert_eq!(shift_text("1e3", -2), None);
        assert_eq!(shift_text("", -2), None);
        assert_eq!(shift_text(".", -2), None);
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
