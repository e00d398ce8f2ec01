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
        |i| scenario_name(net, audit, i),
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
    if g.kind == GateKind::MinHeadroom {
        return headroom_gate_line(net, audit, g);
    }
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
        GateKind::MinHeadroom => unreachable!("worded by headroom_gate_line"),
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

/// The `--min-headroom` line: the audit's least headroom as a percentage of required
/// demand and the scenario that sets it against the limit (given as a factor, shown with
/// its percentage), e.g. `FAIL --min-headroom 1.2: least headroom 118% of required
/// (link:ab) is below the limit 1.2 (120%)`.
fn headroom_gate_line(net: &Network, audit: &Audit, g: &GateResult) -> String {
    let verdict = if g.passed { "PASS" } else { "FAIL" };
    let limit = format!("{} ({}%)", given(g.limit), shift_point(g.limit, 2));
    let Some(i) = g.scenario.filter(|_| g.value.is_finite()) else {
        return format!(
            "{verdict} --min-headroom {}: no scenario has surviving required demand, so \
             there is no headroom to limit",
            given(g.limit)
        );
    };
    let mut value = crate::headroom::percent(g.value);
    // Compared raw (--gate-tolerance), a failing value may print like its limit.
    if !g.passed && crate::headroom::shown(g.value) >= g.limit {
        value = format!("{}%", 100.0 * g.value);
    }
    format!(
        "{verdict} --min-headroom {}: least headroom {value} of required ({}) {} the limit \
         {limit}",
        given(g.limit),
        scenario_name(net, audit, i),
        if g.passed { "meets" } else { "is below" }
    )
}

/// Scenario `i`'s name, with ` under matrix ID` for a file with `matrices`. O(name).
fn scenario_name(net: &Network, audit: &Audit, i: usize) -> String {
    let _ = net;
    audit.scenarios[i].display_name()
}
