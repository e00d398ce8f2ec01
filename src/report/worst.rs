//! The output of `redoubt worst`: the table of the worst sets with one line on the proof
//! and the caution ([`text`]), and the JSON document ([`json`], written by [`write_json`]).
//! Field names of the JSON contract: `worst[].rank`, `failed`, `shortfall`, `stranded`,
//! `lost`, `served_required`; `proof`.

use std::io::{self, Write};

use serde::Serialize;

use super::screen::{finish, render, right, table};
use super::{amount, caution_for, file_num, num};
use crate::model::Network;
use crate::worst::{By, Proof, Worst, WorstSet};

/// How the bound of the proof is obtained, in one sentence (text and JSON).
pub const METHOD: &str = "best-first branch and bound over sets; a set that was not solved \
is bounded by a solved subset's proven lower-bound allocation: that subset's value plus the \
flow the allocation sends through the added elements (dropping the walks they break leaves \
a feasible allocation)";

fn by_name(by: By) -> &'static str {
    match by {
        By::Shortfall => "shortfall",
        By::Lost => "lost",
    }
}

fn kinds_list(w: &Worst) -> Vec<&'static str> {
    let k = w.options.kinds;
    [(k.links, "links"), (k.sites, "sites"), (k.groups, "groups")]
        .into_iter()
        .filter(|p| p.0)
        .map(|p| p.1)
        .collect()
}

/// The text report: a heading, the table worst first, one line on the proof, a line on
/// unproven solves when there are any, and the caution. O(listed sets · names).
pub fn text(net: &Network, w: &Worst) -> String {
    let o = &w.options;
    let p = &w.proof;
    let mut s = String::new();
    s.push_str(&format!(
        "Worst sets of at most {} failed elements ({}; ranked by {}; amounts in {}):\n",
        o.k,
        kinds_list(w).join(", "),
        by_name(o.by),
        net.unit
    ));
    if w.sets.is_empty() {
        s.push_str("No set of the pool loses any required demand.\n");
    } else {
        let several = net.matrix_count() > 1;
        let mut header = vec!["rank", "failed"];
        if several {
            header.push("matrix");
        }
        header.extend(["shortfall", "stranded", "lost", "served required"]);
        let mut t = table(&header);
        for (i, set) in w.sets.iter().enumerate() {
            let mut row = vec![(i + 1).to_string(), set.failed.join(" + ")];
            if several {
                row.push(net.matrix_id(set.matrix).to_string());
            }
            row.extend([
                num(set.shortfall),
                num(set.stranded),
                num(set.lost),
                num(set.served_required),
            ]);
            t.add_row(row);
        }
        if several {
            right(&mut t, &[0, 3, 4, 5, 6]);
        } else {
            right(&mut t, &[0, 2, 3, 4, 5]);
        }
        s.push_str(&render(&mut t, &[1]));
        s.push('\n');
    }
    s.push_str(&proof_line(net, w));
    s.push('\n');
    if p.unproven > 0 {
        s.push_str(&format!(
            "UNPROVEN: {} solved outages were not proven optimal; their values are their proven \
             lower bounds' (never understated).\n",
            p.unproven
        ));
    }
    s.push_str(caution_for(net));
    s.push('\n');
    finish(&s)
}

/// `n` as an English ordinal: 1st, 2nd, 3rd, 4th, …, 11th, 12th, 13th, …, 21st. O(1).
fn ordinal(n: usize) -> String {
    let suffix = match (n % 10, n % 100) {
        (_, 11..=13) => "th",
        (1, _) => "st",
        (2, _) => "nd",
        (3, _) => "rd",
        _ => "th",
    };
    format!("{n}{suffix}")
}

/// The one line on the proof.
fn proof_line(net: &Network, w: &Worst) -> String {
    let p = &w.proof;
    let counts = format!(
        "{} of {} sets solved ({} distinct outages), {} bounded, {} pruned unvisited",
        p.sets_solved, p.sets_total, p.outages_solved, p.sets_bounded, p.sets_pruned
    );
    let full = w.sets.len() >= w.options.top;
    match p.bound {
        None => format!("Proof: exhaustive, every set solved ({counts})."),
        Some(b) if full => format!(
            "Proof: every set not solved loses at most {} (a solved subset's proven allocation \
             plus its flow through the added elements), below the {} worst's {}; {counts}.",
            amount(b, &net.unit),
            ordinal(w.options.top),
            num(p.threshold)
        ),
        Some(b) => format!(
            "Proof: only {} sets lose anything; every set not solved loses at most {} (a solved \
             subset's proven allocation plus its flow through the added elements), within the \
             verifier's noise of {}; {counts}.",
            w.sets.len(),
            amount(b, &net.unit),
            num(p.floor)
        ),
    }
}

/// One listed set in the JSON document: its rank, then the set's own fields in
/// [`WorstSet`]'s order (`failed`, `shortfall`, `stranded`, `lost`, `served_required`,
/// `proven`; numbers as files write them), then its matrix.
#[derive(Serialize)]
pub struct SetJson {
    pub rank: usize,
    #[serde(flatten)]
    pub set: WorstSet,
    /// The traffic matrix (absent for a file without `matrices`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub matrix: Option<String>,
}

/// The `proof` object.
#[derive(Serialize)]
pub struct ProofJson {
    /// What is proven, in words.
    pub statement: String,
    /// How the bound is obtained.
    pub method: &'static str,
    /// The proof's figures in [`crate::worst::Proof`]'s order (its work counters left
    /// out): `bound` (null when every set was solved), `threshold`, `floor`, `tolerance`
    /// and the set counts; `bound` and `tolerance` at 12 significant digits.
    #[serde(flatten)]
    pub figures: Proof,
}

/// The `redoubt worst --json` document.
#[derive(Serialize)]
pub struct WorstJson {
    pub network: String,
    pub unit: String,
    pub caution: &'static str,
    pub k: usize,
    pub kinds: Vec<&'static str>,
    pub by: &'static str,
    pub top: usize,
    pub worst: Vec<SetJson>,
    pub proof: ProofJson,
}

/// The JSON document of `w` (numbers as files write them, [`file_num`]). O(listed sets).
pub fn json(net: &Network, w: &Worst) -> WorstJson {
    let p = &w.proof;
    let full = w.sets.len() >= w.options.top;
    let statement = match p.bound {
        None => "every set was solved; the list is exact".to_string(),
        Some(_) if full => format!(
            "every set not listed was solved and ranks below the {}, or was not solved and \
             has a value at most bound + tolerance, which as printed is below threshold",
            ordinal(w.options.top)
        ),
        Some(_) => "every set not listed was solved and loses nothing above floor, or was not \
                    solved and has a value at most bound + tolerance, which as printed is at \
                    most floor"
            .to_string(),
    };
    WorstJson {
        network: net.name.clone(),
        unit: net.unit.clone(),
        caution: caution_for(net),
        k: w.options.k,
        kinds: kinds_list(w),
        by: by_name(w.options.by),
        top: w.options.top,
        worst: w
            .sets
            .iter()
            .enumerate()
            .map(|(i, s)| SetJson {
                rank: i + 1,
                set: WorstSet {
                    shortfall: file_num(s.shortfall),
                    stranded: file_num(s.stranded),
                    lost: file_num(s.lost),
                    served_required: file_num(s.served_required),
                    ..s.clone()
                },
                matrix: (net.matrix_count() > 1).then(|| net.matrix_id(s.matrix).to_string()),
            })
            .collect(),
        proof: ProofJson {
            statement,
            method: METHOD,
            figures: Proof {
                bound: p.bound.map(file_num),
                tolerance: file_num(p.tolerance),
                ..p.clone()
            },
        },
    }
}

/// Writes [`json`] of `w` as pretty JSON with a trailing newline.
pub fn write_json(out: &mut dyn Write, net: &Network, w: &Worst) -> io::Result<()> {
    super::json::write(out, &json(net, w))
}

#[cfg(test)]
mod tests {
    #[test]
    fn ordinals() {
        let got: Vec<String> = [1, 2, 3, 4, 10, 11, 12, 13, 21, 22, 101, 111]
            .into_iter()
            .map(super::ordinal)
            .collect();
        assert_eq!(
            got,
            [
                "1st", "2nd", "3rd", "4th", "10th", "11th", "12th", "13th", "21st", "22nd",
                "101st", "111th"
            ]
        );
    }
}
