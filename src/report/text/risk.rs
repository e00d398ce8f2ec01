//! The risk section of the audit screen (when probabilities are given).

#[allow(unused_imports)]
use super::*;

/// The risk section: expected shortfall (with its bound), the probability of any
/// shortfall, the most likely short scenarios and the probability left unexamined, under
/// [`crate::risk::ASSUMPTION`].
pub fn risk_report(net: &Network, audit: &Audit, r: &crate::risk::Risk) -> String {
    let u = &net.unit;
    let mut out = String::new();
    let _ = writeln!(out, "\nRisk (assumption: {}):", crate::risk::ASSUMPTION);
    let _ = writeln!(
        out,
        "  expected shortfall {} {u} over the scenarios examined (at most {} {u} counting the \
         unexamined states as short by all required demand)",
        crate::report::sig(r.expected_shortfall),
        crate::report::sig(r.expected_shortfall_bound)
    );
    let _ = writeln!(
        out,
        "  probability of any shortfall {} (examined scenarios)",
        crate::report::probability(r.p_any_shortfall)
    );
    let _ = writeln!(
        out,
        "  probability the chosen depth left unexamined {}",
        crate::report::probability(r.uncovered_probability)
    );
    if !r.without_probability.is_empty() {
        let n = r.without_probability.len();
        let _ = writeln!(
            out,
            "  {n} element{} without failure_probability, treated as never failing: {}",
            if n == 1 { "" } else { "s" },
            first_k(r.without_probability.iter().map(|e| e.name(net)), 5)
        );
    }
    if r.most_likely_short.is_empty() {
        let _ = writeln!(
            out,
            "  no examined scenario with a shortfall has a positive probability"
        );
        return out;
    }
    let mut t = table(&[
        "most likely short",
        "probability",
        &format!("shortfall ({u})"),
        &format!("share of expected ({u})"),
    ]);

    for &i in &r.most_likely_short {
        let e = audit.eval(i);
        t.add_row(vec![
            Cell::new(audit.scenarios[i].display_name()),
            Cell::new(crate::report::probability(r.probability[i])),
            Cell::new(num(e.shortfall)),
            Cell::new(crate::report::sig(r.probability[i] * e.shortfall)),
        ]);
    }
    right(&mut t, &[1, 2, 3]);
    let _ = writeln!(out, "{}", render(&mut t, &[]));
    out
}
