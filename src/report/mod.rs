//! Output formats. Only this module knows how results look on a terminal or in a file:
//! [`text`] for the `check` summary and the tables, [`json`] for `--json` files.

pub mod json;
pub mod routing;
pub mod text;

/// The caution every report carries.
pub const CAUTION: &str = "Caution: a planning aid under the model's assumptions (fluid, splittable \
traffic; the capacities in the file; one processing step per unit); it does not replace the \
operator's own engineering review and change procedures.";

/// A number for people: at most three decimals, trailing zeros trimmed, `-0` shown as `0`.
pub fn num(x: f64) -> String {
    if !x.is_finite() {
        return if x > 0.0 {
            "unlimited".into()
        } else {
            x.to_string()
        };
    }
    let s = format!("{:.3}", x);
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" { "0".into() } else { s.into() }
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

/// `part` as a percentage of `whole` with one decimal (`0%` when `whole` is 0).
pub fn percent(part: f64, whole: f64) -> String {
    if whole <= 0.0 {
        "0%".into()
    } else {
        format!("{:.1}%", 100.0 * part / whole)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn formatting() {
        assert_eq!(num(12.0), "12");
        assert_eq!(num(12.3456), "12.346");
        assert_eq!(num(-0.0001), "0");
        assert_eq!(round9(1.0000000000004), 1.0);
        assert_eq!(round9(1e300), 1e300);
        assert_eq!(percent(1.0, 3.0), "33.3%");
    }
}
