//! Service chains and gains: the validated form of the top-level `functions`, each site's
//! `functions` and `expand`, and each demand's `chain` (the contract's section "Service
//! chains and traffic that changes volume").
//!
//! A file without `functions` has no [`Chains`] (`Network::chains` is `None`) and means
//! one function `processing` of gain 1 whose capacity is `sites[].processing`; every
//! engine reads it exactly as before. A file with `functions` has one, and its sites carry
//! processing 0 and no expansion (those fields are refused there).
//!
//! Invariants established by [`lower`]: function ids are unique and pass
//! [`super::strict::check_id`]; every gain is finite and > 0; every chain's cumulative
//! gain (each prefix product) is a normal positive number, and so is each demand's volume
//! times it; every capacity and purchase amount is finite, ≥ 0 and at most
//! [`super::MAX_AMOUNT`]; every function id named by a site or a chain is known.

use std::collections::{BTreeMap, HashMap};

use super::file::{ExpandFile, FunctionFile, SiteFile};
use super::network::{Expansion, MAX_AMOUNT};
use super::strict::{check_id, near_miss, printable};
use crate::error::{Error, Result};

/// Index of a function in [`Chains::functions`].
pub type FunctionIdx = usize;

/// One network function.
#[derive(Debug, Clone, PartialEq)]
pub struct Function {
    pub id: String,
    /// Traffic that leaves the function per unit that enters it.
    pub gain: f64,
}

/// The service-chain part of a network.
#[derive(Debug, Clone, PartialEq)]
pub struct Chains {
    pub functions: Vec<Function>,
    /// Per site, per function: capacity, measured where traffic enters the function.
    pub capacity: Vec<Vec<f64>>,
    /// Per site, per function: how more of it may be bought (`None`: it cannot).
    pub expand: Vec<Vec<Option<Expansion>>>,
    /// Per demand: the function indices it must pass, in order (empty: plain traffic).
    pub chain: Vec<Vec<FunctionIdx>>,
}

impl Chains {
    /// Cumulative gains of a chain: entry `j` is `g1 · … · gj` (entry 0 is 1), so a unit
    /// at the origin is `cumulative[j]` units in layer `j`. O(chain length).
    pub fn cumulative(&self, chain: &[FunctionIdx]) -> Vec<f64> {
        let mut out = Vec::with_capacity(chain.len() + 1);
        let mut g = 1.0;
        out.push(g);
        for &f in chain {
            g *= self.functions[f].gain;
            out.push(g);
        }
        out
    }

    /// The gain of demand `d`'s whole chain: delivered units per origin unit. O(chain).
    pub fn total_gain(&self, d: usize) -> f64 {
        self.chain[d]
            .iter()
            .map(|&f| self.functions[f].gain)
            .product()
    }

    /// The chain of demand `d` written with function ids (`-` for plain traffic).
    pub fn describe(&self, d: usize) -> String {
        if self.chain[d].is_empty() {
            "-".into()
        } else {
            self.chain[d]
                .iter()
                .map(|&f| self.functions[f].id.as_str())
                .collect::<Vec<_>>()
                .join(" > ")
        }
    }
}

impl super::Network {
    /// This network with `add[v][f]` units of function `f` bought at site `v` (added to
    /// its capacity in `sites[].functions`); the network itself when it has no chains.
    /// Each traffic matrix's view gets the same purchase. O(size of the network).
    pub fn with_added_functions(&self, add: &[Vec<f64>]) -> super::Network {
        let mut n = self.clone();
        if let Some(ch) = n.chains.as_mut() {
            for (row, more) in ch.capacity.iter_mut().zip(add) {
                for (c, a) in row.iter_mut().zip(more) {
                    *c += a;
                }
            }
        }
        for m in &mut n.matrices {
            m.view = std::sync::Arc::new(m.view.with_added_functions(add));
        }
        n
    }
}

fn non_negative(el: &str, field: &str, v: f64) -> Result<f64> {
    if !(v.is_finite() && v >= 0.0) {
        Err(Error::Input(format!(
            "{el}: field `{field}` must be a finite number >= 0, got {v}"
        )))
    } else if v > MAX_AMOUNT {
        Err(Error::Input(format!(
            "{el}: field `{field}` must be at most {MAX_AMOUNT:e}, got {v:e}; use a larger unit"
        )))
    } else {
        Ok(v)
    }
}

/// Looks a function id up, with a near miss in the message when one is close.
fn function_of(
    index: &HashMap<String, FunctionIdx>,
    ids: &[&str],
    el: &str,
    field: &str,
    id: &str,
) -> Result<FunctionIdx> {
    index.get(id).copied().ok_or_else(|| {
        let hint = match near_miss(id, ids) {
            Some(k) => format!(" (did you mean \"{k}\"?)"),
            None => format!("; the file's `functions` are: {}", ids.join(", ")),
        };
        Error::Input(format!(
            "{el}: field `{field}` names unknown function \"{}\"{hint}",
            printable(id)
        ))
    })
}

/// Refuses the chain fields in a file without top-level `functions`. O(sites + demands).
pub fn refuse_without_functions(
    sites: &[SiteFile],
    demand_chains: &[(String, bool)],
) -> Result<()> {
    for (i, s) in sites.iter().enumerate() {
        for (field, given) in [
            ("functions", s.functions.is_some()),
            ("expand", s.expand.is_some()),
        ] {
            if given {
                return Err(Error::Input(format!(
                    "sites[{i}] (id \"{}\"): field `{field}` needs the top-level `functions` \
                     list naming each function and its gain",
                    printable(&s.id)
                )));
            }
        }
    }
    if let Some((el, _)) = demand_chains.iter().find(|(_, given)| *given) {
        return Err(Error::Input(format!(
            "{el}: field `chain` needs the top-level `functions` list naming each function \
             and its gain"
        )));
    }
    Ok(())
}

/// Validates and lowers the chain fields of a file that lists `functions`: `sites` are the
/// file's sites (already checked otherwise), `demand_chains` each demand's element label
/// with its `chain` (`None`: plain traffic) and volume. Every error names the element, the
/// field and the value. O(functions + sites · functions + Σ chain lengths).
pub fn lower(
    functions: &[FunctionFile],
    sites: &[SiteFile],
    demand_chains: &[(String, Option<Vec<String>>, f64)],
) -> Result<Chains> {
    let mut index: HashMap<String, FunctionIdx> = HashMap::new();
    let mut list = Vec::with_capacity(functions.len());
    for (i, f) in functions.iter().enumerate() {
        let el = format!("functions[{i}] (id \"{}\")", printable(&f.id));
        check_id(&el, "id", &f.id, true)?;
        if let Some(prev) = index.insert(f.id.clone(), i) {
            return Err(Error::Input(format!(
                "{el}: field `id` value \"{}\" is already used by functions[{prev}]",
                printable(&f.id)
            )));
        }
        if !(f.gain.is_finite() && f.gain > 0.0 && f.gain <= MAX_AMOUNT) {
            return Err(Error::Input(format!(
                "{el}: field `gain` must be a finite number > 0 (traffic out per unit in), \
                 got {}",
                f.gain
            )));
        }
        list.push(Function {
            id: f.id.clone(),
            gain: f.gain,
        });
    }
    let ids: Vec<&str> = list.iter().map(|f| f.id.as_str()).collect();
    let nf = list.len();
    let mut capacity = vec![vec![0.0; nf]; sites.len()];
    let mut expand = vec![vec![None; nf]; sites.len()];
    for (i, s) in sites.iter().enumerate() {
        let el = format!("sites[{i}] (id \"{}\")", printable(&s.id));
        for (field, given) in [
            ("processing", s.processing.is_some()),
            ("expand_cost", s.expand_cost.is_some()),
            ("expand_max", s.expand_max.is_some()),
            ("expand_step", s.expand_step.is_some()),
        ] {
            if given {
                return Err(Error::Input(format!(
                    "{el}: field `{field}` is not allowed when the file lists `functions`; \
                     give each function's capacity in `sites[].functions` and its purchases \
                     in `sites[].expand`"
                )));
            }
        }
        let caps: &BTreeMap<String, f64> = match &s.functions {
            Some(m) => m,
            None => &BTreeMap::new(),
        };
        for (id, &c) in caps {
            let f = function_of(&index, &ids, &el, "functions", id)?;
            capacity[i][f] = non_negative(&el, &format!("functions.{id}"), c)?;
        }
        let buys: &BTreeMap<String, ExpandFile> = match &s.expand {
            Some(m) => m,
            None => &BTreeMap::new(),
        };
        for (id, e) in buys {
            let f = function_of(&index, &ids, &el, "expand", id)?;
            let cost = non_negative(&el, &format!("expand.{id}.cost"), e.cost)?;
            let max = match e.max {
                Some(m) => non_negative(&el, &format!("expand.{id}.max"), m)?,
                None => f64::INFINITY,
            };
            expand[i][f] = Some(Expansion {
                cost,
                max,
                step: None,
            });
        }
    }
    for f in 0..nf {
        let total: f64 = capacity.iter().map(|c| c[f]).sum();
        if !(total.is_finite() && total <= super::MAX_TOTAL) {
            return Err(Error::Input(format!(
                "sites: the sum of function `{}` capacities is {total:e}, above the limit \
                 {:e}; use a larger unit",
                ids[f],
                super::MAX_TOTAL
            )));
        }
    }
    let mut chain = Vec::with_capacity(demand_chains.len());
    for (el, c, volume) in demand_chains {
        let mut fs = Vec::new();
        let mut g = 1.0f64;
        for id in c.iter().flatten() {
            let f = function_of(&index, &ids, el, "chain", id)?;
            g *= list[f].gain;
            if !(g.is_normal() && (volume * g).is_finite()) {
                return Err(Error::Input(format!(
                    "{el}: field `chain`: the product of the gains up to \"{}\" is {g:e}, \
                     outside what can be computed with its volume {volume}; use gains \
                     nearer 1",
                    printable(id)
                )));
            }
            fs.push(f);
        }
        chain.push(fs);
    }
    Ok(Chains {
        functions: list,
        capacity,
        expand,
        chain,
    })
}

#[cfg(test)]
mod tests {
    use crate::model::Network;

    const FILE: &str = r#"{"functions":[{"id":"fw","gain":1},{"id":"nat","gain":0.75}],
        "sites":[{"id":"a","functions":{"fw":4}},
                 {"id":"b","functions":{"nat":2.5},"expand":{"nat":{"cost":3,"max":9},"fw":{"cost":1}}},
                 {"id":"c"}],
        "links":[{"id":"ab","from":"a","to":"b","capacity":5},{"id":"bc","from":"b","to":"c","capacity":5}],
        "demands":[{"from":"a","to":"c","volume":4,"chain":["fw","nat","fw"]},
                   {"from":"c","to":"a","volume":1}]}"#;

    /// The validated chains, and the file written back reads as an equal network (a
    /// round trip through `to_file`).
    #[test]
    fn chains_lower_and_round_trip() {
        let net = Network::from_json(FILE).unwrap();
        let ch = net.chains.as_ref().unwrap();
        assert_eq!(ch.chain[0], vec![0, 1, 0]);
        assert!(ch.chain[1].is_empty(), "no chain: plain traffic");
        assert_eq!(ch.capacity[1], vec![0.0, 2.5]);
        assert_eq!(ch.expand[1][1].as_ref().unwrap().max, 9.0);
        assert_eq!(ch.expand[1][0].as_ref().unwrap().max, f64::INFINITY);
        // 1, then ·1, ·0.75, ·1 (hand computed).
        assert_eq!(ch.cumulative(&ch.chain[0]), vec![1.0, 1.0, 0.75, 0.75]);
        assert_eq!(ch.total_gain(0), 0.75);
        let text = serde_json::to_string(&net.to_file()).unwrap();
        assert_eq!(Network::from_json(&text).unwrap(), net, "{text}");
        let plain = Network::from_json(
            r#"{"sites":[{"id":"a","processing":1},{"id":"b"}],
                "links":[{"id":"ab","from":"a","to":"b","capacity":1}],
                "demands":[{"from":"a","to":"b","volume":1}]}"#,
        )
        .unwrap();
        assert!(plain.chains.is_none());
        let text = serde_json::to_string(&plain.to_file()).unwrap();
        assert!(
            !text.contains("functions") && !text.contains("chain"),
            "{text}"
        );
    }
}
