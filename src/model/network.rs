//! The validated network: what the solver may trust.
//!
//! Invariants established by [`Network::from_file`] and relied on everywhere else:
//! - site, link and demand endpoints are indices into `sites`, and `from != to`;
//! - every amount is finite, `>= 0` and at most [`MAX_AMOUNT`]; `required <= volume`;
//!   `expand_step > 0` when set; the sums listed at [`MAX_TOTAL`] are at most it, so every
//!   derived total (sums, twice a sum, a percentage, a plan's cost) stays finite;
//! - site ids and link ids are unique; risk groups are sorted by name, each with its
//!   member links sorted and without repeats;
//! - ids, names and labels hold no control characters, and site, link and group ids no
//!   `,` and no leading or trailing whitespace (see [`super::strict::check_id`]), so every
//!   element can be named in `--fail` and printed as it is;
//! - `arcs` lists every usable direction: `2 * links` minus one per one-way link, in link
//!   order, forward direction first.

use std::collections::{BTreeMap, HashMap};

use super::file::{DemandFile, LinkFile, MatrixFile, NetworkFile, RiskGroupFile, SiteFile};
use super::shape::{check_shape, describe_parse_error, describe_syntax_error};
use super::strict::{self, check_id, check_label, printable};
use crate::error::{Error, Result};

pub use super::index::{ArcIdx, DemandIdx, LinkIdx, SiteIdx};

/// How processing may be bought at a site.
#[derive(Debug, Clone, PartialEq)]
pub struct Expansion {
    /// Cost of one added unit.
    pub cost: f64,
    /// Most units that may be added (`f64::INFINITY` when unlimited).
    pub max: f64,
    /// Module size when processing is bought in whole modules.
    pub step: Option<f64>,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Site {
    pub id: String,
    /// Processing capacity in traffic units.
    pub processing: f64,
    /// `None`: this site cannot be expanded.
    pub expansion: Option<Expansion>,
    /// Unavailability (probability of being down), when the file gives one.
    pub failure_probability: Option<f64>,
    /// Drawing position, when the file gives one (finite).
    pub x: Option<f64>,
    /// Drawing position, when the file gives one (finite).
    pub y: Option<f64>,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Link {
    pub id: String,
    pub from: SiteIdx,
    pub to: SiteIdx,
    /// Capacity of each direction that exists.
    pub capacity: f64,
    pub one_way: bool,
    /// Indices into [`Network::groups`].
    pub groups: Vec<usize>,
    /// Routing metric (1..=[`MAX_METRIC`]), the same in both directions; 1 when absent.
    pub metric: u32,
    /// Unavailability (probability of being down), when the file gives one.
    pub failure_probability: Option<f64>,
}

/// Largest routing metric a link may carry (24 bits, as link-state protocols allow).
pub const MAX_METRIC: u32 = 16_777_215;

/// Checks an optional failure probability: a finite number with 0 <= p < 1.
fn probability(element: &str, value: Option<f64>) -> Result<Option<f64>> {
    match value {
        None => Ok(None),
        Some(p) if p.is_finite() && (0.0..1.0).contains(&p) => Ok(Some(p)),
        Some(p) => Err(Error::Input(format!(
            "{element}: field `failure_probability` must be a number with 0 <= p < 1, got {p}"
        ))),
    }
}

/// Checks a routing metric: a whole number from 1 to [`MAX_METRIC`]; 1 when absent.
fn metric(element: &str, value: Option<f64>) -> Result<u32> {
    match value {
        None => Ok(1),
        Some(m) if m.fract() == 0.0 && (1.0..=MAX_METRIC as f64).contains(&m) => Ok(m as u32),
        Some(m) => Err(Error::Input(format!(
            "{element}: field `metric` must be a whole number from 1 to {MAX_METRIC}, got {m}"
        ))),
    }
}

/// One direction of a link: the unit the LP's capacity rows are written for.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Arc {
    pub link: LinkIdx,
    pub from: SiteIdx,
    pub to: SiteIdx,
    pub capacity: f64,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Demand {
    /// The file's `id`, or `FROM→TO #N` (N = position in the file, from 1).
    pub label: String,
    pub from: SiteIdx,
    pub to: SiteIdx,
    pub volume: f64,
    pub required: f64,
}

/// A shared-risk link group: failing it fails all its member links.
#[derive(Debug, Clone, PartialEq)]
pub struct RiskGroup {
    pub name: String,
    pub links: Vec<LinkIdx>,
    /// Unavailability of the group as a whole, from the top-level `risk_groups` list.
    pub failure_probability: Option<f64>,
}

/// The name of matrix 0, the file's top-level `demands`.
pub const BASE_MATRIX: &str = "base";

/// One further traffic matrix, lowered into its own view: the same sites, links, arcs and
/// groups with the matrix's demands (and no matrices of its own).
#[derive(Debug, Clone, PartialEq)]
pub struct Matrix {
    pub id: String,
    pub view: std::sync::Arc<Network>,
}

/// A network whose every reference and number has been checked.
#[derive(Debug, Clone, PartialEq)]
pub struct Network {
    pub name: String,
    pub unit: String,
    pub sites: Vec<Site>,
    pub links: Vec<Link>,
    pub arcs: Vec<Arc>,
    pub demands: Vec<Demand>,
    pub groups: Vec<RiskGroup>,
    /// The further traffic matrices of the file, in file order (matrix `m` ≥ 1 is
    /// `matrices[m - 1]`; matrix 0 is `demands`, named `base`). Empty without any, and
    /// always empty in a matrix's own view.
    pub matrices: Vec<Matrix>,
    /// Service chains and gains when the file lists `functions` ([`super::chains`]);
    /// `None`: one function `processing` of gain 1 (`Site::processing`, `Site::expansion`).
    pub chains: Option<super::chains::Chains>,
    site_index: HashMap<String, SiteIdx>,
    link_index: HashMap<String, LinkIdx>,
    group_index: HashMap<String, usize>,
}

/// Largest single amount (processing, capacity, volume, required, expand_cost,
/// expand_max, expand_step) a file may hold. Far above any real network in any unit; it
/// keeps twice an amount, a percentage of one and a sum of a few of them finite.
pub const MAX_AMOUNT: f64 = 1e300;

/// Largest value of each of these sums: Σ volume, Σ processing, Σ capacity, Σ finite
/// expand_max, and the dearest expand_cost × Σ volume (the most a plan that buys no more
/// processing than the demand needs can cost). Kept there, every derived total stays
/// finite (at most a few times this).
pub const MAX_TOTAL: f64 = 1e300;

/// Checks that `value` is a finite number `>= 0` and at most [`MAX_AMOUNT`], naming
/// `element` and `field` otherwise.
fn non_negative(element: &str, field: &str, value: f64) -> Result<f64> {
    if !(value.is_finite() && value >= 0.0) {
        Err(Error::Input(format!(
            "{element}: field `{field}` must be a finite number >= 0, got {value}"
        )))
    } else if value > MAX_AMOUNT {
        Err(Error::Input(format!(
            "{element}: field `{field}` must be at most {MAX_AMOUNT:e}, got {value:e}; use a \
             larger unit"
        )))
    } else {
        Ok(value)
    }
}

/// Checks an optional drawing coordinate: any finite number.
fn coordinate(element: &str, field: &str, value: Option<f64>) -> Result<Option<f64>> {
    match value {
        Some(v) if !v.is_finite() => Err(Error::Input(format!(
            "{element}: field `{field}` must be a finite number, got {v}"
        ))),
        other => Ok(other),
    }
}

fn site_label(i: usize, s: &SiteFile) -> String {
    format!("sites[{i}] (id \"{}\")", printable(&s.id))
}

fn link_label(i: usize, l: &LinkFile) -> String {
    format!("links[{i}] (id \"{}\")", printable(&l.id))
}

fn group_label(i: usize, g: &RiskGroupFile) -> String {
    format!("risk_groups[{i}] (id \"{}\")", printable(&g.id))
}

fn demand_label(i: usize, d: &DemandFile) -> String {
    let (from, to) = (printable(&d.from), printable(&d.to));
    match &d.id {
        Some(id) => format!("demands[{i}] (id \"{}\", {from}→{to})", printable(id)),
        None => format!("demands[{i}] ({from}→{to})"),
    }
}

/// The UTF-8 byte-order mark some editors write at the start of a file.
const BOM: char = '\u{FEFF}';

impl Network {
    /// Parses the bytes of a file into a validated network: UTF-8 text (a leading
    /// byte-order mark is skipped), then [`Network::from_json`]. Invalid UTF-8 is an input
    /// error naming the line and byte offset. Linear in the length of the file.
    pub fn from_bytes(bytes: &[u8]) -> Result<Network> {
        match std::str::from_utf8(bytes) {
            Ok(text) => Network::from_json(text),
            Err(e) => {
                let at = e.valid_up_to();
                let line = 1 + bytes[..at].iter().filter(|&&b| b == b'\n').count();
                Err(Error::Input(format!(
                    "the file is not UTF-8 text: invalid byte 0x{:02X} at byte offset {at} \
                     (line {line})",
                    bytes[at]
                )))
            }
        }
    }

    /// Parses JSON text into a validated network. Every error names the element, the
    /// field and the value; nothing here panics, whatever the text holds. A leading
    /// byte-order mark is skipped; duplicate keys and unknown fields are refused (see
    /// [`strict`]). Linear in the length of the text.
    pub fn from_json(text: &str) -> Result<Network> {
        let text = text.strip_prefix(BOM).unwrap_or(text);
        // First the document as plain JSON: syntax, trailing content, numbers out of range,
        // and keys repeated within an object.
        let value: serde_json::Value = match strict::parse_document(text) {
            Ok(v) => v?,
            Err(e) => return Err(Error::Input(describe_syntax_error(text, &e))),
        };
        check_shape(&value)?;
        strict::check_fields(&value)?;
        let file: NetworkFile = match serde_path_to_error::deserialize(&value) {
            Ok(f) => f,
            Err(e) => return Err(Error::Input(describe_parse_error(&value, &e))),
        };
        Network::from_file(file)
    }

    /// Lowers the file types into a network, checking every invariant listed in the
    /// module documentation. Linear in the size of the file (hash maps for ids).
    pub fn from_file(file: NetworkFile) -> Result<Network> {
        Network::from_file_and(file, std::iter::empty())
    }

    /// [`Network::from_file`] of `file` with `more` demands listed after its own, taken one
    /// at a time (so a long generated list is never held as file types). Same checks, same
    /// errors (indices continue after the file's demands). Linear in the size of the file
    /// plus the number of demands.
    pub fn from_file_and(
        mut file: NetworkFile,
        more: impl Iterator<Item = DemandFile>,
    ) -> Result<Network> {
        let file_demands = std::mem::take(&mut file.demands);
        for (field, label) in [("name", &file.name), ("unit", &file.unit)] {
            if let Some(text) = label {
                check_label(field, text)?;
            }
        }
        if file.sites.is_empty() {
            return Err(Error::Input(
                "field `sites` must list at least one site, got none".into(),
            ));
        }
        let mut sites = Vec::with_capacity(file.sites.len());
        let mut site_index = HashMap::new();
        for (i, s) in file.sites.iter().enumerate() {
            let el = site_label(i, s);
            check_id(&el, "id", &s.id, true)?;
            if let Some(prev) = site_index.insert(s.id.clone(), SiteIdx(i)) {
                return Err(Error::Input(format!(
                    "{el}: field `id` value \"{}\" is already used by sites[{prev}]",
                    printable(&s.id)
                )));
            }
            let processing = non_negative(&el, "processing", s.processing.unwrap_or(0.0))?;
            let max = match s.expand_max {
                Some(m) => Some(non_negative(&el, "expand_max", m)?),
                None => None,
            };
            let step = match s.expand_step {
                Some(st) => {
                    let st = non_negative(&el, "expand_step", st)?;
                    if st <= 0.0 {
                        return Err(Error::Input(format!(
                            "{el}: field `expand_step` must be > 0, got {st}"
                        )));
                    }
                    Some(st)
                }
                None => None,
            };
            let expansion = match s.expand_cost {
                Some(c) => Some(Expansion {
                    cost: non_negative(&el, "expand_cost", c)?,
                    max: max.unwrap_or(f64::INFINITY),
                    step,
                }),
                None => None,
            };
            sites.push(Site {
                id: s.id.clone(),
                processing,
                expansion,
                failure_probability: probability(&el, s.failure_probability)?,
                x: coordinate(&el, "x", s.x)?,
                y: coordinate(&el, "y", s.y)?,
            });
        }
        let lookup = |el: &str, field: &str, id: &str| -> Result<SiteIdx> {
            site_index.get(id).copied().ok_or_else(|| {
                Error::Input(format!(
                    "{el}: field `{field}` names unknown site \"{}\"",
                    printable(id)
                ))
            })
        };

        let mut links = Vec::with_capacity(file.links.len());
        let mut link_index = HashMap::new();
        let mut group_members: BTreeMap<String, Vec<LinkIdx>> = BTreeMap::new();
        for (i, l) in file.links.iter().enumerate() {
            let el = link_label(i, l);
            check_id(&el, "id", &l.id, true)?;
            if let Some(prev) = link_index.insert(l.id.clone(), LinkIdx(i)) {
                return Err(Error::Input(format!(
                    "{el}: field `id` value \"{}\" is already used by links[{prev}]",
                    printable(&l.id)
                )));
            }
            let from = lookup(&el, "from", &l.from)?;
            let to = lookup(&el, "to", &l.to)?;
            if from == to {
                return Err(Error::Input(format!(
                    "{el}: fields `from` and `to` are the same site \"{}\"",
                    printable(&l.from)
                )));
            }
            let capacity = non_negative(&el, "capacity", l.capacity)?;
            for g in l.risk_groups.iter().flatten() {
                if g.is_empty() {
                    return Err(Error::Input(format!(
                        "{el}: field `risk_groups` holds an empty group name"
                    )));
                }
                check_id(&el, "risk_groups", g, true)?;
                let members = group_members.entry(g.clone()).or_default();
                if members.last() != Some(&LinkIdx(i)) {
                    members.push(LinkIdx(i));
                }
            }
            links.push(Link {
                id: l.id.clone(),
                from,
                to,
                capacity,
                one_way: l.one_way.unwrap_or(false),
                groups: Vec::new(),
                metric: metric(&el, l.metric)?,
                failure_probability: probability(&el, l.failure_probability)?,
            });
        }
        let mut groups = Vec::with_capacity(group_members.len());
        let mut group_index = HashMap::new();
        for (gi, (name, members)) in group_members.into_iter().enumerate() {
            for &l in &members {
                links[l].groups.push(gi);
            }
            group_index.insert(name.clone(), gi);
            groups.push(RiskGroup {
                name,
                links: members,
                failure_probability: None,
            });
        }
        let mut probability_given: HashMap<&str, usize> = HashMap::new();
        for (i, g) in file.risk_groups.iter().enumerate() {
            let el = group_label(i, g);
            check_id(&el, "id", &g.id, true)?;
            if let Some(prev) = probability_given.insert(&g.id, i) {
                return Err(Error::Input(format!(
                    "{el}: field `id` value \"{}\" is already used by risk_groups[{prev}]",
                    printable(&g.id)
                )));
            }
            let Some(&gi) = group_index.get(&g.id) else {
                return Err(Error::Input(format!(
                    "{el}: field `id` names risk group \"{}\", which no link's `risk_groups` \
                     lists",
                    printable(&g.id)
                )));
            };
            groups[gi].failure_probability = probability(&el, Some(g.failure_probability))?;
        }

        let mut demands = Vec::with_capacity(file_demands.len() + more.size_hint().0);
        let mut demand_chains = Vec::new();
        for (i, d) in file_demands.into_iter().chain(more).enumerate() {
            let d = &d;
            let el = demand_label(i, d);
            if let Some(id) = &d.id {
                check_id(&el, "id", id, false)?;
            }
            let from = lookup(&el, "from", &d.from)?;
            let to = lookup(&el, "to", &d.to)?;
            if from == to {
                return Err(Error::Input(format!(
                    "{el}: fields `from` and `to` are the same site \"{}\"",
                    printable(&d.from)
                )));
            }
            let volume = non_negative(&el, "volume", d.volume)?;
            let required = non_negative(&el, "required", d.required.unwrap_or(volume))?;
            if required > volume {
                return Err(Error::Input(format!(
                    "{el}: field `required` value {required} exceeds `volume` {volume}"
                )));
            }
            let label = match &d.id {
                Some(id) => id.clone(),
                None => format!("{}→{} #{}", d.from, d.to, i + 1),
            };
            demands.push(Demand {
                label,
                from,
                to,
                volume,
                required,
            });
            if file.functions.is_some() || d.chain.is_some() {
                demand_chains.push((el, d.chain.clone(), volume));
            }
        }
        let chains = match &file.functions {
            Some(functions) => {
                // Demands without an entry (none: every demand pushed one) are plain.
                Some(super::chains::lower(
                    functions,
                    &file.sites,
                    &demand_chains,
                )?)
            }
            None => {
                let given: Vec<(String, bool)> = demand_chains
                    .iter()
                    .map(|(el, c, _)| (el.clone(), c.is_some()))
                    .collect();
                super::chains::refuse_without_functions(&file.sites, &given)?;
                None
            }
        };

        // Every amount is finite and at most MAX_AMOUNT; their sums must stay within
        // MAX_TOTAL, or some derived total would not be finite.
        let volume_total = demands.iter().map(|d| d.volume).sum::<f64>();
        let dearest = sites
            .iter()
            .filter_map(|s| s.expansion.as_ref().map(|e| e.cost))
            .fold(0.0, f64::max);
        let totals = [
            (
                "demands",
                "volume",
                demands.iter().map(|d| d.volume).sum::<f64>(),
            ),
            (
                "sites",
                "processing",
                sites.iter().map(|s| s.processing).sum::<f64>(),
            ),
            (
                "links",
                "capacity",
                links.iter().map(|l| l.capacity).sum::<f64>(),
            ),
            (
                "sites",
                "expand_max",
                sites
                    .iter()
                    .filter_map(|s| s.expansion.as_ref().map(|e| e.max))
                    .filter(|m| m.is_finite())
                    .sum::<f64>(),
            ),
        ];
        for (list, field, total) in totals {
            if !total.is_finite() {
                return Err(Error::Input(format!(
                    "{list}: the sum of field `{field}` overflows ({total}); use a larger unit"
                )));
            }
            if total > MAX_TOTAL {
                return Err(Error::Input(format!(
                    "{list}: the sum of field `{field}` is {total:e}, above the limit \
                     {MAX_TOTAL:e}; use a larger unit"
                )));
            }
        }
        let cost_bound = dearest * volume_total;
        if cost_bound > MAX_TOTAL {
            return Err(Error::Input(format!(
                "sites: the largest `expand_cost` ({dearest:e}) times the sum of demand \
                 `volume` ({volume_total:e}) is above the limit {MAX_TOTAL:e}, so a plan's cost \
                 could not be reported; use a larger cost or traffic unit"
            )));
        }
        let mut arcs = Vec::with_capacity(2 * links.len());
        for (li, l) in links.iter().enumerate() {
            arcs.push(Arc {
                link: LinkIdx(li),
                from: l.from,
                to: l.to,
                capacity: l.capacity,
            });
            if !l.one_way {
                arcs.push(Arc {
                    link: LinkIdx(li),
                    from: l.to,
                    to: l.from,
                    capacity: l.capacity,
                });
            }
        }

        let matrix_files = std::mem::take(&mut file.matrices);
        let mut net = Network {
            name: file.name.unwrap_or_else(|| "unnamed network".into()),
            unit: file.unit.unwrap_or_else(|| "units".into()),
            sites,
            links,
            arcs,
            demands,
            groups,
            matrices: Vec::new(),
            chains,
            site_index,
            link_index,
            group_index,
        };
        net.matrices = lower_matrices(&net, matrix_files)?;
        Ok(net)
    }

    /// The network under matrix `m` (0: this network, `base`; `m` ≥ 1: the view of
    /// `matrices[m - 1]`). A view has no matrices, so a view returns itself for any `m`:
    /// resolving twice is harmless. O(1).
    pub fn view(&self, m: usize) -> &Network {
        if m == 0 || self.matrices.is_empty() {
            self
        } else {
            &self.matrices[m - 1].view
        }
    }

    /// How many traffic matrices the file has (1 + `matrices`).
    pub fn matrix_count(&self) -> usize {
        1 + self.matrices.len()
    }

    /// The name of matrix `m`: `base` for 0, else its id.
    pub fn matrix_id(&self, m: usize) -> &str {
        if m == 0 {
            BASE_MATRIX
        } else {
            &self.matrices[m - 1].id
        }
    }

    /// The index of the matrix named `id` (`base` is 0). O(matrices).
    pub fn matrix_index(&self, id: &str) -> Option<usize> {
        if id == BASE_MATRIX {
            return Some(0);
        }
        self.matrices.iter().position(|m| m.id == id).map(|i| i + 1)
    }

    pub fn site(&self, id: &str) -> Option<SiteIdx> {
        self.site_index.get(id).copied()
    }

    pub fn link(&self, id: &str) -> Option<LinkIdx> {
        self.link_index.get(id).copied()
    }

    pub fn group(&self, name: &str) -> Option<usize> {
        self.group_index.get(name).copied()
    }

    /// Σ required over all demands.
    pub fn total_required(&self) -> f64 {
        self.demands.iter().map(|d| d.required).sum()
    }

    /// Σ volume over all demands.
    pub fn total_volume(&self) -> f64 {
        self.demands.iter().map(|d| d.volume).sum()
    }

    /// Σ processing over all sites.
    pub fn total_processing(&self) -> f64 {
        self.sites.iter().map(|s| s.processing).sum()
    }

    /// Writes the network back into the file types, in the contract's shape: every field
    /// explicit (name, unit, demand labels as `id`, metric), risk groups as each link's
    /// `risk_groups` and, for groups with a probability, the top-level list. Reading the
    /// result gives an equal network (tested as a round trip). Linear in its size.
    pub fn to_file(&self) -> NetworkFile {
        NetworkFile {
            name: Some(self.name.clone()),
            unit: Some(self.unit.clone()),
            notes: None,
            sites: self
                .sites
                .iter()
                .enumerate()
                .map(|(v, s)| SiteFile {
                    id: s.id.clone(),
                    processing: self.chains.is_none().then_some(s.processing),
                    functions: self.chains.as_ref().map(|c| {
                        c.functions
                            .iter()
                            .zip(&c.capacity[v])
                            .filter(|&(_, &cap)| cap > 0.0)
                            .map(|(f, &cap)| (f.id.clone(), cap))
                            .collect()
                    }),
                    expand: self.chains.as_ref().map(|c| {
                        c.functions
                            .iter()
                            .zip(&c.expand[v])
                            .filter_map(|(f, e)| {
                                e.as_ref().map(|e| {
                                    (
                                        f.id.clone(),
                                        super::file::ExpandFile {
                                            cost: e.cost,
                                            max: Some(e.max).filter(|m| m.is_finite()),
                                        },
                                    )
                                })
                            })
                            .collect()
                    }),
                    expand_cost: s.expansion.as_ref().map(|e| e.cost),
                    expand_max: s
                        .expansion
                        .as_ref()
                        .map(|e| e.max)
                        .filter(|m| m.is_finite()),
                    expand_step: s.expansion.as_ref().and_then(|e| e.step),
                    failure_probability: s.failure_probability,
                    x: s.x,
                    y: s.y,
                    notes: None,
                })
                .collect(),
            links: self
                .links
                .iter()
                .map(|l| LinkFile {
                    id: l.id.clone(),
                    from: self.sites[l.from].id.clone(),
                    to: self.sites[l.to].id.clone(),
                    capacity: l.capacity,
                    one_way: Some(l.one_way),
                    risk_groups: Some(
                        l.groups
                            .iter()
                            .map(|&g| self.groups[g].name.clone())
                            .collect(),
                    ),
                    metric: Some(f64::from(l.metric)),
                    failure_probability: l.failure_probability,
                    notes: None,
                })
                .collect(),
            demands: self
                .demands
                .iter()
                .enumerate()
                .map(|(i, d)| DemandFile {
                    id: Some(d.label.clone()),
                    chain: self.chains.as_ref().map(|c| {
                        c.chain[i]
                            .iter()
                            .map(|&f| c.functions[f].id.clone())
                            .collect()
                    }),
                    from: self.sites[d.from].id.clone(),
                    to: self.sites[d.to].id.clone(),
                    volume: d.volume,
                    required: Some(d.required),
                    notes: None,
                })
                .collect(),
            risk_groups: self
                .groups
                .iter()
                .filter_map(|g| {
                    g.failure_probability.map(|p| RiskGroupFile {
                        id: g.name.clone(),
                        failure_probability: p,
                        notes: None,
                    })
                })
                .collect(),
            matrices: self
                .matrices
                .iter()
                .map(|m| MatrixFile {
                    id: m.id.clone(),
                    demands: m.view.to_file().demands,
                    notes: None,
                })
                .collect(),
            functions: self.chains.as_ref().map(|c| {
                c.functions
                    .iter()
                    .map(|f| super::file::FunctionFile {
                        id: f.id.clone(),
                        gain: f.gain,
                        notes: None,
                    })
                    .collect()
            }),
        }
    }

    /// A copy with `add[v]` units of processing added at each site `v`.
    pub fn with_added_processing(&self, add: &[f64]) -> Network {
        let mut n = self.clone();
        for (s, &a) in n.sites.iter_mut().zip(add) {
            s.processing += a;
        }
        for m in &mut n.matrices {
            m.view = std::sync::Arc::new(m.view.with_added_processing(add));
        }
        n
    }
}

/// Lowers the file's `matrices` into views of `net` (its sites, links and groups with each
/// matrix's demands), checking each demand list as the top-level one is checked (errors
/// say `matrices[i] (id "…"): demands[j] …`) and each id: a valid id, unique, not
/// `base`. O(matrices × size of the network).
fn lower_matrices(net: &Network, files: Vec<MatrixFile>) -> Result<Vec<Matrix>> {
    if files.is_empty() {
        return Ok(Vec::new());
    }
    let mut base = net.to_file();
    base.demands = Vec::new();
    base.matrices = Vec::new();
    let mut seen: HashMap<String, usize> = HashMap::new();
    let mut out = Vec::with_capacity(files.len());
    for (i, m) in files.into_iter().enumerate() {
        let el = format!("matrices[{i}] (id \"{}\")", printable(&m.id));
        check_id(&el, "id", &m.id, true)?;
        if m.id == BASE_MATRIX {
            return Err(Error::Input(format!(
                "{el}: field `id` may not be \"{BASE_MATRIX}\": that name is the top-level \
                 `demands`; name this matrix otherwise"
            )));
        }
        if let Some(prev) = seen.insert(m.id.clone(), i) {
            return Err(Error::Input(format!(
                "{el}: field `id` value \"{}\" is already used by matrices[{prev}]; matrix \
                 ids are unique",
                printable(&m.id)
            )));
        }
        let mut file = base.clone();
        file.demands = m.demands;
        let view = Network::from_file(file).map_err(|e| match e {
            Error::Input(msg) => Error::Input(format!("{el}: {msg}")),
            other => other,
        })?;
        let mut view = view;
        view.name = net.name.clone();
        view.unit = net.unit.clone();
        out.push(Matrix {
            id: m.id,
            view: std::sync::Arc::new(view),
        });
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn err(text: &str) -> String {
        match Network::from_json(text) {
            Err(Error::Input(m)) => m,
            other => panic!("expected an input error, got {other:?}"),
        }
    }

    const OK: &str = r#"{"sites":[{"id":"a","processing":5},{"id":"b"}],
        "links":[{"id":"ab","from":"a","to":"b","capacity":10,"risk_groups":["g"]}],
        "demands":[{"from":"a","to":"b","volume":4,"required":3}]}"#;

    #[test]
    fn valid_file_lowers_with_defaults() {
        let n = Network::from_json(OK).unwrap();
        assert_eq!(n.sites[1].processing, 0.0);
        assert_eq!(n.arcs.len(), 2);
        assert_eq!(n.groups[0].links, vec![LinkIdx(0)]);
        assert_eq!(n.demands[0].required, 3.0);
        assert_eq!(n.unit, "units");
    }

    #[test]
    fn errors_name_element_field_and_value() {
        let m = err(&OK.replace("\"processing\":5", "\"processing\":-5"));
        assert!(
            m.contains("sites[0]") && m.contains("processing") && m.contains("-5"),
            "{m}"
        );
        let m = err(&OK.replace("\"to\":\"b\",\"capacity\"", "\"to\":\"zz\",\"capacity\""));
        assert!(
            m.contains("links[0]") && m.contains("`to`") && m.contains("zz"),
            "{m}"
        );
        let m = err(&OK.replace("\"required\":3", "\"required\":7"));
        assert!(
            m.contains("demands[0]") && m.contains("required") && m.contains('7'),
            "{m}"
        );
        let m = err(&OK.replace("\"capacity\":10", "\"capacity\":\"ten\""));
        assert!(
            m.contains("links[0]") && m.contains("capacity") && m.contains("ten"),
            "{m}"
        );
        assert!(m.contains("\"ab\""), "{m}");
        let m = err(&OK.replace("{\"id\":\"b\"}", "{\"id\":\"a\"}"));
        assert!(m.contains("sites[1]") && m.contains("already used"), "{m}");
        let m = err(&OK.replace("\"to\":\"b\",\"volume\"", "\"to\":\"a\",\"volume\""));
        assert!(m.contains("same site"), "{m}");
        let m = err("[1,2]");
        assert!(m.contains("one JSON object"), "{m}");
        let m = err("{\"sites\": [");
        assert!(m.contains("not a valid"), "{m}");
        let m = err(&OK.replace("\"capacity\":10", "\"capacity\":1e999"));
        assert!(
            m.contains("links[0]") && m.contains("capacity") && m.contains("1e999"),
            "{m}"
        );
        let m = err(&format!("{OK} {{}}"));
        assert!(m.contains("not a valid"), "{m}");
        let m = err(r#"{"sites":[["a", 5]]}"#);
        assert!(m.contains("sites[0]") && m.contains("object"), "{m}");
    }
}
