//! One line per gate at the end of the audit screen.

#[allow(unused_imports)]
use super::*;

/// One gate's verdict: `PASS` or `FAIL`, the flag and limit, the worst value and the
/// scenario it comes from, e.g. `FAIL --max-shortfall 5: worst shortfall 14 Gbit/s
/// (site:millbrook) exceeds the limit 5 Gbit/s`.
pub fn gate_line(net: &Network, audit: &Audit, g: &GateResult) -> String {
    let u = &net.unit;
    let verdict = if g.passed { "PASS" } else { "FAIL" };
    let scenario = g.scenario.map_or_else(
        || "no scenario".to_string(),
        |i| audit.scenarios[i].display_name(),
    );
    let amount = |flag, what| {
        (
            flag,
            what,
            crate::report::amount(g.value, u),
            format!(
                "{} {}",
                given(g.limit),
                if given(g.limit) == "1" {
                    crate::report::unit_one(u)
                } else {
                    u
                }
            ),
            if g.passed { "within" } else { "exceeds" },
        )
    };
    let (flag, what, value, limit, verb) = match g.kind {
        GateKind::MaxShortfall => amount("--max-shortfall", "shortfall"),
        GateKind::MaxStranded => amount("--max-stranded", "stranded"),
        GateKind::MinServedFraction => (
            "--min-served-fraction",
            "served fraction",
            format!("{}%", num(100.0 * g.value)),
            format!("{}%", shift_point(g.limit, 2)),
            if g.passed { "meets" } else { "is below" },
        ),
    };
    // Compared raw (--gate-tolerance), a failing value may print like its limit: show it
    // in full then.
    let value = if !g.passed && value == limit {
        match g.kind {
            GateKind::MinServedFraction => format!("{}%", 100.0 * g.value),
            _ => format!("{} {u}", g.value),
        }
    } else {
        value
    };
    format!("{verdict} {flag}: worst {what} {value} ({scenario}) {verb} the limit {limit}")
}
