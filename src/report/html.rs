//! `audit --report DIR`: one self-contained HTML file (inline styles, inline SVG and one
//! small inline script; no external script, style, font or image, so it opens offline)
//! and its Markdown twin ([`super::markdown`]). Both are built from one [`Report`], so
//! they say the same. The page holds every scenario in a sortable, filterable table
//! ([`super::table`]), the closings, the worst scenario's explanation and prices, and the
//! topology map ([`super::map`]) whose marks follow the scenario chosen in the table.

use std::fmt;
use std::io::{self, Write};

use super::export::{Exporter, Html, streamed};
use super::model::Model;
use super::{file_diff, map, num, percent, table};

/// File names inside the report folder.
pub const HTML_FILE: &str = "report.html";
/// The Markdown twin's file name.
pub const MARKDOWN_FILE: &str = "report.md";

/// The model's assumptions, as the report states them.
pub const ASSUMPTIONS: [&str; 5] = [
    "Traffic is fluid and splittable: a demand may be spread over several walks.",
    "Every unit is processed once, at one processing site on its walk, within that site's \
     processing capacity.",
    "Links carry at most their capacity in each direction; a walk that crosses a link twice \
     uses it twice.",
    "After a failure traffic may take any surviving walk (the best re-route), unless a routing \
     model is chosen.",
    "Failure probabilities, when given, are independent.",
];

/// Bars in the criticality chart.
const CHART_BARS: usize = 12;
/// Bins of the shortfall distribution (plus one for scenarios with none).
const HISTOGRAM_BINS: usize = 8;

/// The smallest round bin width (`m` × 10^`k`, `m` ∈ {1, 2, 5}) that covers (0, `top`]
/// in at most `bins` bins; `None` when `top` is not positive. O(log top).
pub fn round_width(top: f64, bins: usize) -> Option<(u64, i32)> {
    if !(top > 0.0 && top.is_finite()) || bins == 0 {
        return None;
    }
    let mut k = (top / bins as f64).log10().floor() as i32 - 1;
    loop {
        for m in [1u64, 2, 5] {
            if (top / decimal(m, k)).ceil() <= bins as f64 {
                return Some((m, k));
            }
        }
        k += 1;
    }
}

/// `n` × 10^`k` as the nearest double (an integer times a power of ten, divided when `k`
/// is negative, so 3 × 10⁻¹ is 0.3, not 0.30000000000000004).
pub fn decimal(n: u64, k: i32) -> f64 {
    if k >= 0 {
        n as f64 * 10f64.powi(k)
    } else {
        n as f64 / 10f64.powi(-k)
    }
}

/// Rows of a table, each a list of cell texts.
pub type Rows = Vec<Vec<String>>;

/// What both report files show: the run's [`Model`], built once and read by both
/// exporters (the views below only format it).
pub type Report<'a> = Model<'a>;

/// Views of the model for the HTML and Markdown reports (tables as text cells, chart
/// values). Each is O(rows shown) except where said.
impl Model<'_> {
    /// The verdict line of the text report, and the gate lines.
    pub fn verdict(&self) -> String {
        super::text::verdict(self)
    }

    /// One line per gate (`PASS …`/`FAIL …`).
    pub fn gate_lines(&self) -> Vec<String> {
        self.gates
            .iter()
            .map(|g| super::text::gate_line(self.net, self.audit, g))
            .collect()
    }

    /// The worst scenario (drawn on the map), if any scenario is short.
    pub fn worst_short(&self) -> Option<crate::audit::ScenarioId> {
        self.shown
            .first()
            .copied()
            .filter(|&i| self.audit.eval(i).shortfall > 0.0)
    }

    /// Summary facts: (label, value).
    pub fn summary(&self) -> Vec<(String, String)> {
        let n = self.net;
        let u = &n.unit;
        let mut facts: Vec<(String, String)> = vec![
            ("network".into(), n.name.clone()),
            ("sites".into(), n.sites.len().to_string()),
            ("links".into(), n.links.len().to_string()),
            ("demands".into(), n.demands.len().to_string()),
            ("risk groups".into(), n.groups.len().to_string()),
            ("offered volume".into(), super::amount(n.total_volume(), u)),
            (
                "required demand".into(),
                super::amount(n.total_required(), u),
            ),
            (
                "processing capacity".into(),
                super::amount(n.total_processing(), u),
            ),
            (
                "baseline served".into(),
                format!(
                    "{} of {} {u} required ({})",
                    num(self.baseline.served_required),
                    num(self.baseline.surviving_required),
                    percent(
                        self.baseline.served_required,
                        self.baseline.surviving_required
                    )
                ),
            ),
        ];
        facts.extend(super::chains::summary_rows(n, self.baseline));
        facts.extend([
            (
                "scenarios".into(),
                format!(
                    "{} ({})",
                    self.audit.scenarios.len(),
                    super::count(self.audit.outages.len(), "distinct outage")
                ),
            ),
            (
                "verification".into(),
                super::text::verification_summary(self.audit),
            ),
        ]);
        facts
    }

    /// The worst-scenarios table: header and rows of text.
    pub fn worst_table(&self) -> (Vec<String>, Vec<Vec<String>>) {
        let u = &self.net.unit;
        let head = vec![
            "#".to_string(),
            "failed".into(),
            format!("shortfall ({u})"),
            "% of surviving required".into(),
            format!("stranded ({u})"),
            format!("throughput loss ({u})"),
            "main bottleneck".into(),
        ];
        let rows = self
            .shown
            .iter()
            .take(self.top)
            .enumerate()
            .map(|(r, &i)| {
                let e = self.audit.eval(i);
                vec![
                    (r + 1).to_string(),
                    self.audit.scenarios[i].display_name(),
                    num(e.shortfall),
                    percent(e.shortfall, e.surviving_required),
                    num(e.stranded),
                    num(file_diff(self.baseline.throughput, e.throughput).max(0.0)),
                    super::text::main_bottleneck(self.net.view(self.audit.scenarios[i].matrix), e),
                ]
            })
            .collect();
        (head, rows)
    }

    /// Element criticality: (element name, worst shortfall), worst first.
    pub fn criticality(&self) -> Vec<(String, f64)> {
        self.criticality
            .iter()
            .take(CHART_BARS)
            .map(|c| (c.element.name(self.net), c.worst_shortfall))
            .collect()
    }

    /// The shortfall distribution: (bin label, scenario count); the first bin holds the
    /// scenarios with no shortfall, the rest split (0, top] into bins of one round width
    /// ([`round_width`]: 1, 2 or 5 × 10^k, at most `HISTOGRAM_BINS` (8) bins), bin `b`
    /// holding (`(b−1)·w`, `b·w`]. O(scenarios).
    pub fn histogram(&self) -> Vec<(String, usize)> {
        let values: Vec<f64> = (0..self.audit.scenarios.len())
            .map(|i| self.audit.eval(i).shortfall)
            .collect();
        let worst = values.iter().copied().fold(0.0, f64::max);
        let mut bins = vec![("none".to_string(), 0usize)];
        let Some((m, k)) = round_width(worst, HISTOGRAM_BINS) else {
            bins[0].1 = values.len();
            return bins;
        };
        let edge = |b: usize| decimal(b as u64 * m, k);
        let w = edge(1);
        let count = ((worst / w).ceil() as usize).max(1);
        for b in 0..count {
            bins.push((format!("{}–{}", num(edge(b)), num(edge(b + 1))), 0));
        }
        for v in values {
            if v <= 0.0 {
                bins[0].1 += 1;
            } else {
                let b = ((v / w).ceil() as usize).clamp(1, count);
                bins[b].1 += 1;
            }
        }
        bins
    }

    /// The closing table, when `--close` ran: header and rows.
    pub fn closing_table(&self) -> Option<(Vec<String>, Vec<Vec<String>>)> {
        let closings = self.closings?;
        let u = &self.net.unit;
        let head = vec![
            "failed".to_string(),
            format!("shortfall ({u})"),
            "cost".into(),
            "add at".into(),
            format!("not closable ({u})"),
        ];
        let rows = self
            .shown
            .iter()
            .copied()
            .filter_map(|i| {
                closings[self.audit.outage_of[i]].as_ref().map(|c| {
                    vec![
                        self.audit.scenarios[i].display_name(),
                        num(self.audit.eval(i).shortfall),
                        num(c.cost),
                        super::text::closing_additions(self.net, c, 3),
                        num(c.not_closable),
                    ]
                })
            })
            .collect();
        Some((head, rows))
    }

    /// The risk figures and table, when probabilities were given.
    pub fn risk_table(&self) -> Option<(Vec<String>, Vec<String>, Rows)> {
        let r = self.risk?;
        let u = &self.net.unit;
        let facts = vec![
            format!(
                "expected shortfall {} {u} over the examined scenarios (at most {} {u})",
                super::sig(r.expected_shortfall),
                super::sig(r.expected_shortfall_bound)
            ),
            format!(
                "probability of any shortfall {}",
                super::probability(r.p_any_shortfall)
            ),
            format!(
                "probability the chosen depth left unexamined {}",
                super::probability(r.uncovered_probability)
            ),
            format!("assumption: {}", crate::risk::ASSUMPTION),
        ];
        let head = vec![
            "most likely short".to_string(),
            "probability".into(),
            format!("shortfall ({u})"),
        ];
        let rows = r
            .most_likely_short
            .iter()
            .map(|&i| {
                vec![
                    self.audit.scenarios[i].display_name(),
                    super::probability(r.probability[i]),
                    num(self.audit.eval(i).shortfall),
                ]
            })
            .collect();
        Some((facts, head, rows))
    }
}

/// Escapes text for HTML content and attribute values.
pub fn esc(s: &str) -> String {
    let mut o = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => o.push_str("&amp;"),
            '<' => o.push_str("&lt;"),
            '>' => o.push_str("&gt;"),
            '"' => o.push_str("&quot;"),
            '\'' => o.push_str("&#39;"),
            c => o.push(c),
        }
    }
    o
}

/// The page's own styles: a paper-like page, slate headings, amber marks.
pub(crate) const STYLE: &str = "body{font:15px/1.45 system-ui,sans-serif;margin:0;background:#f6f4ef;\
color:#1f2a30}main{max-width:1080px;margin:0 auto;padding:24px 32px 48px}\
h1{font-size:26px;margin:8px 0 4px;color:#23404f}h2{font-size:18px;margin:32px 0 8px;\
color:#23404f;border-bottom:2px solid #d9b45a;padding-bottom:3px}\
.caution{background:#fff7e0;border-left:6px solid #c98a12;padding:10px 14px;margin:14px 0}\
.verdict{font-size:17px;font-weight:600;padding:10px 14px;background:#e6eef2;\
border-radius:6px}.verdict.fail{background:#f8e1dc}table{border-collapse:collapse;\
margin:6px 0 10px;background:#fff}th,td{padding:4px 10px;border-bottom:1px solid #e3ded2;\
text-align:left;vertical-align:top}th{font-weight:600;color:#23404f;background:#efeadf}\
td.n{text-align:right;font-variant-numeric:tabular-nums}td.k{white-space:nowrap}.facts td:first-child{color:#566}\
svg{background:#fff;border:1px solid #e3ded2;margin:6px 0}figcaption{color:#566;\
font-size:13px}ul{margin:4px 0}code{font-size:13px}\
#scenarios th{cursor:pointer;user-select:none}#scenarios th[aria-sort=descending]::after{content:' ▼'}\
#scenarios th[aria-sort=ascending]::after{content:' ▲'}#scenarios tbody tr{cursor:pointer}\
#scenarios tr.sel td{background:#fdf1c7}#filter{font:inherit;padding:4px 8px}\
#topology .ln{stroke-width:3}#topology .halo{stroke:none;stroke-width:13;stroke-linecap:round}\
#topology .sat .halo{stroke:#ffd84d;stroke-opacity:.85}#topology .sat .ln{stroke-width:4.5}\
#topology .failed .ln{stroke:#2c3338;stroke-dasharray:7 5;stroke-width:2}\
#topology .failed .arrow{fill:#2c3338}#topology .mk{fill:#fff;stroke:#23404f;stroke-width:2}\
#topology .failed .mk{fill:#f3c6bf;stroke:#b0281c}#topology .cross{stroke:#b0281c;\
stroke-width:2.5;display:none}#topology .failed .cross{display:inline}\
#topology .lbl rect{fill:#fff;fill-opacity:.9}#topology .lbl text{fill:#1f2a30}\
#topology .clbl text{fill:#4b5b64}.legend{font-size:13px;color:#33444c}\
.legend .key{display:inline-block;margin:2px 12px 2px 0}.legend i{display:inline-block;\
width:18px;height:10px;margin-right:5px;vertical-align:middle;font-style:normal}\
.legend i.dash{border-top:2px dashed #2c3338;height:0}.legend i.halo{background:#ffd84d}\
.legend i.sq{width:10px;border:2px solid #23404f;background:#fff}\
.legend i.xsite{color:#b0281c;font-weight:700;width:auto}";

/// A table of text cells onto `out`: `numeric` columns right-aligned, names in the first
/// column (the second under a `#` column) never broken. O(cells).
pub(crate) fn table_html(
    out: &mut dyn fmt::Write,
    head: &[String],
    rows: &[Vec<String>],
    numeric: &[usize],
) -> fmt::Result {
    out.write_str("<table><thead><tr>")?;
    for h in head {
        write!(out, "<th>{}</th>", esc(h))?;
    }
    out.write_str("</tr></thead><tbody>\n")?;
    for r in rows {
        out.write_str("<tr>")?;
        for (c, v) in r.iter().enumerate() {
            if numeric.contains(&c) {
                write!(out, "<td class=\"n\">{}</td>", esc(v))?;
            } else if c == 0 || (c == 1 && head.first().is_some_and(|h| h == "#")) {
                // Names are never broken (they paste back into --fail).
                write!(out, "<td class=\"k\">{}</td>", esc(v))?;
            } else {
                write!(out, "<td>{}</td>", esc(v))?;
            }
        }
        out.write_str("</tr>\n")?;
    }
    out.write_str("</tbody></table>\n")
}

/// A horizontal bar chart: one labelled bar per item, scaled to the largest.
fn bars_svg(o: &mut dyn fmt::Write, items: &[(String, f64)], unit: &str, id: &str) -> fmt::Result {
    const ROW: f64 = 24.0;
    const LABEL: f64 = 230.0;
    const BAR: f64 = 520.0;
    let h = ROW * items.len().max(1) as f64 + 20.0;
    let max = items.iter().map(|i| i.1).fold(0.0, f64::max);
    write!(
        o,
        "<svg id=\"{id}\" xmlns=\"http://www.w3.org/2000/svg\" width=\"{w}\" height=\"{h}\" \
         viewBox=\"0 0 {w} {h}\" role=\"img\">",
        w = LABEL + BAR + 90.0
    )?;
    for (k, (name, v)) in items.iter().enumerate() {
        let y = 10.0 + ROW * k as f64;
        let len = if max > 0.0 { BAR * v / max } else { 0.0 };
        write!(
            o,
            "<text x=\"{tx}\" y=\"{ty}\" text-anchor=\"end\" font-size=\"13\" \
             fill=\"#1f2a30\">{name}</text><rect x=\"{LABEL}\" y=\"{y}\" width=\"{len:.1}\" \
             height=\"{bh}\" fill=\"#2f6f8a\"/><text x=\"{vx:.1}\" y=\"{ty}\" font-size=\"12\" \
             fill=\"#566\">{val} {unit}</text>",
            tx = LABEL - 8.0,
            ty = y + 14.0,
            bh = ROW - 7.0,
            vx = LABEL + len + 6.0,
            name = esc(name),
            val = esc(&num(*v)),
            unit = esc(unit),
        )?;
    }
    o.write_str("</svg>")
}

/// A column chart of scenario counts per shortfall bin.
fn histogram_svg(o: &mut dyn fmt::Write, bins: &[(String, usize)], unit: &str) -> fmt::Result {
    const W: f64 = 840.0;
    const H: f64 = 260.0;
    const BASE: f64 = 210.0;
    let n = bins.len().max(1) as f64;
    let col = (W - 60.0) / n;
    let max = bins.iter().map(|b| b.1).max().unwrap_or(0).max(1) as f64;
    write!(
        o,
        "<svg id=\"distribution\" xmlns=\"http://www.w3.org/2000/svg\" width=\"{W}\" \
         height=\"{H}\" viewBox=\"0 0 {W} {H}\" role=\"img\"><line x1=\"30\" y1=\"{BASE}\" \
         x2=\"{x2}\" y2=\"{BASE}\" stroke=\"#999\"/>",
        x2 = W - 20.0
    )?;
    for (k, (label, count)) in bins.iter().enumerate() {
        let x = 30.0 + col * k as f64 + 4.0;
        let h = (BASE - 30.0) * *count as f64 / max;
        let fill = if k == 0 { "#8fb59a" } else { "#c9703a" };
        write!(
            o,
            "<rect x=\"{x:.1}\" y=\"{y:.1}\" width=\"{bw:.1}\" height=\"{h:.1}\" \
             fill=\"{fill}\"/><text x=\"{cx:.1}\" y=\"{ly:.1}\" text-anchor=\"middle\" \
             font-size=\"12\">{count}</text><text x=\"{cx:.1}\" y=\"{by}\" \
             text-anchor=\"middle\" font-size=\"11\" fill=\"#566\">{label}</text>",
            y = BASE - h,
            bw = col - 8.0,
            cx = x + (col - 8.0) / 2.0,
            ly = BASE - h - 5.0,
            by = BASE + 16.0,
            label = esc(label),
        )?;
    }
    write!(
        o,
        "<text x=\"{cx}\" y=\"{y}\" text-anchor=\"middle\" font-size=\"12\" fill=\"#566\">\
         shortfall ({u}); bar height = number of scenarios</text></svg>",
        cx = W / 2.0,
        y = BASE + 40.0,
        u = esc(unit)
    )
}

/// The map section: the drawing (laid out once, [`Model::drawn`]; laid out here when the
/// model was built without it), the legend and a caption naming the marked scenario.
fn map_section(
    o: &mut dyn fmt::Write,
    r: &Report<'_>,
    first: Option<crate::audit::ScenarioId>,
) -> fmt::Result {
    let own;
    let d = match &r.drawing {
        Some(d) => d,
        None => {
            own = map::Drawing::of(r.net);
            &own
        }
    };
    let blank = map::Marks {
        link_failed: vec![false; r.net.links.len()],
        site_failed: vec![false; r.net.sites.len()],
        saturated: vec![false; r.net.links.len()],
        util: vec![None; r.net.links.len()],
    };
    let mk = first.map(|i| map::marks(r, i)).unwrap_or(blank);
    writeln!(
        o,
        "<h2>Topology</h2>\n<p>Marked: <strong id=\"map-scenario\">{}</strong> (choose a \
         scenario in the table to mark it). {}</p>",
        esc(&first.map_or("baseline".into(), |i| r.audit.scenarios[i].display_name())),
        if d.from_file {
            "Sites at the file's x, y positions."
        } else {
            "The file gives no x, y positions: sites placed by a deterministic \
             stress-majorisation layout (hop distances), the same on every run."
        }
    )?;
    o.write_str("<figure>")?;
    o.write_str(&map::map_svg(r, d, &mk))?;
    o.write_str(&map::legend_html(r.routed.is_some()))?;
    o.write_str("</figure>\n")
}

/// The worst scenario's explanation (the `--why` data when given, else the worst
/// scenario with its closing from `--close` if any): the demands not fully served,
/// saturated resources, cut-off demands, what processing fixes, which links would have to
/// grow, and where one more unit of processing helps (its site prices).
fn why_section(o: &mut dyn fmt::Write, r: &Report<'_>) -> fmt::Result {
    let (i, closing) = match &r.why {
        Some(w) => (w.scenario, w.closing),
        None => match r.worst_short() {
            Some(i) => (i, r.closings.and_then(|c| c[r.audit.outage_of[i]].as_ref())),
            None => return Ok(()),
        },
    };
    // The scenario's demands are its traffic matrix's.
    let net = r.net.view(r.audit.scenarios[i].matrix);
    let u = &net.unit;
    let e = r.audit.eval(i);
    writeln!(
        o,
        "<h2 id=\"why\">Why the worst scenario is short</h2>\n<p><strong>{}</strong> serves {} \
         of {} {u} surviving required ({} short, {}); {} {u} stranded.</p>",
        esc(&r.audit.scenarios[i].display_name()),
        num(e.served_required),
        num(e.surviving_required),
        num(e.shortfall),
        percent(e.shortfall, e.surviving_required),
        num(e.stranded)
    )?;
    let head = vec![
        "demand".to_string(),
        "from → to".into(),
        format!("required ({u})"),
        format!("served ({u})"),
        format!("short ({u})"),
        "status".into(),
    ];
    let mut rows = Vec::new();
    for (dm, dem) in net.demands.iter().enumerate() {
        let stranded = e.stranded_demands.contains(&dm.into());
        let cut = e.cut_off.iter().any(|(c, _)| c.0 == dm);
        let short = e.demand_shortfall.get(dm).copied().unwrap_or(0.0);
        if dem.required <= 0.0 || !(stranded || cut || short > 0.0) {
            continue;
        }
        let status = if stranded {
            "stranded: an end site failed"
        } else if cut {
            "cut off: no walk through a surviving processing site"
        } else {
            "short"
        };
        rows.push(vec![
            dem.label.clone(),
            format!("{} → {}", net.sites[dem.from].id, net.sites[dem.to].id),
            num(dem.required),
            num(if stranded {
                0.0
            } else {
                e.demand_flow.get(dm).copied().unwrap_or(0.0)
            }),
            num(if stranded { dem.required } else { short }),
            status.into(),
        ]);
    }
    if !rows.is_empty() {
        o.write_str("<p>Demands not fully served (one of possibly several optimal splits):</p>\n")?;
        table_html(o, &head, &rows, &[2, 3, 4])?;
    }
    let names = |f: &dyn Fn(&crate::solve::Bottleneck) -> Option<String>| -> String {
        let v: Vec<String> = e.bottlenecks.iter().filter_map(f).collect();
        if v.is_empty() {
            "none".into()
        } else {
            v.join(", ")
        }
    };
    o.write_str("<ul>")?;
    write!(
        o,
        "<li>Saturated link directions: {}.</li><li>Saturated processing: {}.</li>",
        esc(&names(&|b| match b.resource {
            crate::solve::Resource::Arc(_) => Some(super::text::resource_name(net, b.resource)),
            _ => None,
        })),
        esc(&names(&|b| match b.resource {
            crate::solve::Resource::Site(v) => Some(net.sites[v].id.clone()),
            _ => None,
        }))
    )?;
    let grow = match closing {
        Some(c) => {
            let fixed = (c.best - e.served_required).max(0.0);
            let (what, by) = if c.functions.is_some() {
                ("Function capacity", "function capacity")
            } else {
                ("Processing", "processing")
            };
            write!(
                o,
                "<li>{what} can fix {} of the {} {u} short{}; {} {u} cannot be closed by \
                 {by}.</li>",
                num(fixed),
                num(e.shortfall),
                if fixed > 0.0 {
                    esc(&format!(
                        ": add {} (cost {})",
                        super::text::closing_additions(net, c, usize::MAX),
                        num(c.cost)
                    ))
                } else {
                    String::new()
                },
                num(c.not_closable)
            )?;
            c.binding_arcs.clone()
        }
        None => crate::expand::binding(e.arc_price.iter().copied().enumerate()),
    };
    writeln!(
        o,
        "<li>Links that would have to grow (one more {u} of capacity serves up to this much \
         more, its shadow price{}): {}.</li></ul>",
        if closing.is_some() {
            ", with processing added as far as allowed"
        } else {
            ""
        },
        esc(&if grow.is_empty() {
            "none".to_string()
        } else {
            grow.iter()
                .map(|&(a, p)| {
                    format!(
                        "{} +{}",
                        super::text::resource_name(net, crate::solve::Resource::Arc(a.into())),
                        num(p)
                    )
                })
                .collect::<Vec<_>>()
                .join(", ")
        })
    )?;
    if net.chains.is_some() {
        return super::chains::functions_html(o, net, e);
    }
    let mut prices: Vec<(usize, f64)> = e
        .site_price
        .iter()
        .enumerate()
        .filter_map(|(v, p)| p.filter(|p| *p > 1e-6).map(|p| (v, p)))
        .collect();
    prices.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
    o.write_str("<h2>Where one more unit helps</h2>\n")?;
    if prices.is_empty() {
        o.write_str("<p>In the worst scenario no site's processing limits what is served.</p>\n")?;
    } else {
        let rows: Vec<Vec<String>> = prices
            .iter()
            .map(|&(v, p)| vec![format!("site:{}", net.sites[v].id), num(p)])
            .collect();
        writeln!(
            o,
            "<p>In the worst scenario, one more {u} of processing at a site serves up to its \
             price more (the shadow price of its processing):</p>"
        )?;
        table_html(
            o,
            &["site".into(), format!("served per added {u}")],
            &rows,
            &[1],
        )?;
    }
    if !r.relief.is_empty() {
        let rows: Vec<Vec<String>> = r
            .relief
            .iter()
            .map(|&(v, n, p)| vec![format!("site:{}", net.sites[v].id), n.to_string(), num(p)])
            .collect();
        o.write_str("<p>Over all short scenarios (expandable sites):</p>\n")?;
        table_html(
            o,
            &[
                "site".into(),
                "short scenarios helped".into(),
                format!("most served per added {u}"),
            ],
            &rows,
            &[1, 2],
        )?;
    }
    Ok(())
}

/// The page's embedded data for its script onto `o`: every element name, the colour
/// scale, and each listed scenario's names and marks ([`map::marks_json`]), each piece
/// made safe for a `<script>` element ([`table::script_safe`]; it maps characters one by
/// one, so piece by piece is the same as over the whole). O(rows · (links + sites)).
fn page_data(o: &mut dyn fmt::Write, r: &Report<'_>, rows: &[table::Row]) -> fmt::Result {
    let mut names: Vec<String> = r
        .criticality
        .iter()
        .map(|c| c.element.name(r.net))
        .collect();
    names.sort();
    o.write_str(&table::script_safe(&format!(
        "{{\"names\":{},\"steps\":{},\"unknown\":\"#9aa9b1\",\"sc\":[",
        serde_json::to_string(&names).unwrap_or_else(|_| "[]".into()),
        serde_json::to_string(&map::UTIL_STEPS.iter().map(|s| s.1).collect::<Vec<_>>())
            .unwrap_or_else(|_| "[]".into())
    )))?;
    for (k, row) in rows.iter().enumerate() {
        if k > 0 {
            o.write_char(',')?;
        }
        let mk = map::marks(r, row.scenario);
        let body = map::marks_json(&mk);
        o.write_str(&table::script_safe(&format!(
            "{{\"n\":{},{}",
            serde_json::to_string(&r.audit.scenarios[row.scenario].failed)
                .unwrap_or_else(|_| "[]".into()),
            &body[1..]
        )))?;
    }
    o.write_str("]}")
}

/// The opening every report page shares, appended to `o`: the document head with the
/// page's own styles ([`STYLE`], nothing fetched), `title` in the tab, `heading`, the
/// `caution` sentence, and the verdict (marked as failing unless `passed`). O(length of the text).
pub(crate) fn page_opening(
    o: &mut dyn fmt::Write,
    title: &str,
    heading: &str,
    verdict: &str,
    passed: bool,
    caution: &str,
) -> fmt::Result {
    write!(
        o,
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\
         <title>{}</title><style>{STYLE}</style></head><body><main>\n",
        esc(title)
    )?;
    writeln!(o, "<h1>{}</h1>", esc(heading))?;
    writeln!(o, "<p class=\"caution\">{}</p>", esc(caution))?;
    writeln!(
        o,
        "<p class=\"verdict{}\">{}</p>",
        if passed { "" } else { " fail" },
        esc(verdict)
    )
}

/// The HTML report onto `o`, section by section. O(scenarios listed · (links + sites)).
pub fn html(o: &mut dyn fmt::Write, r: &Report<'_>) -> fmt::Result {
    let net = r.net;
    let u = &net.unit;
    let failed_gate = r.gates.iter().any(|g| !g.passed);
    page_opening(
        o,
        &format!("redoubt audit — {}", net.name),
        &format!("Failure audit: {}", net.name),
        &r.verdict(),
        !failed_gate,
        super::caution_for(net),
    )?;
    let gates = r.gate_lines();
    if !gates.is_empty() {
        o.write_str("<ul>")?;
        for g in gates {
            write!(o, "<li><code>{}</code></li>", esc(&g))?;
        }
        o.write_str("</ul>\n")?;
    }
    o.write_str("<h2>Network</h2>\n<table class=\"facts\"><tbody>")?;
    for (k, v) in r.summary() {
        write!(o, "<tr><td>{}</td><td>{}</td></tr>", esc(&k), esc(&v))?;
    }
    if let Some(ra) = r.routed {
        for b in &ra.baselines {
            let under = if r.several_matrices() {
                format!(" under matrix {}", r.net.matrix_id(b.matrix))
            } else {
                String::new()
            };
            write!(
                o,
                "<tr><td>routing</td><td>{} (as deployed); baseline{} serves {} {u}, the best \
                 re-route {} {u}; largest link utilisation under the offered load {}</td></tr>",
                esc(ra.mode.name()),
                esc(&under),
                num(b.routed.eval.served_required),
                num(b.best.served_required),
                esc(&super::routing::util_text(b.routed.offered.max_link_util))
            )?;
        }
    }
    o.write_str("</tbody></table>\n<h2>Assumptions of the model</h2>\n<ul>")?;
    for a in super::chains::assumptions(r.net) {
        write!(o, "<li>{}</li>", esc(a))?;
    }
    o.write_str("</ul>\n")?;
    let (head, rows) = table::all_scenarios(r);
    writeln!(
        o,
        "<h2>All scenarios</h2>\n<p>{} listed{}, worst first. Click a column head to sort, \
         type element names to filter (<span id=\"shown-count\">{}</span> shown), click a row \
         to mark it on the map.</p>\n<p><input id=\"filter\" type=\"search\" \
         placeholder=\"filter: e.g. link:{}\" aria-label=\"filter scenarios by element name\" \
         size=\"40\"></p>",
        super::count(rows.len(), "scenario"),
        if rows.len() < r.audit.scenarios.len() {
            format!(
                " of {} (the --json and --csv files hold all)",
                r.audit.scenarios.len()
            )
        } else {
            String::new()
        },
        rows.len(),
        esc(net.links.first().map_or("", |l| l.id.as_str()))
    )?;
    table::scenarios_html(o, &head, &rows)?;
    writeln!(
        o,
        "<p>Shortfall: required demand of surviving demands not routed and processed. \
         Stranded: required demand of demands whose own end site failed (not in the \
         shortfall). Throughput loss: offered volume the baseline carries and the scenario \
         does not.{}</p>",
        if r.routed.is_some() {
            " Values are those of the deployed routing; win-back is what the best re-route \
             would recover."
        } else {
            ""
        }
    )?;
    map_section(o, r, rows.first().map(|row| row.scenario))?;
    why_section(o, r)?;
    if let Some((head, rows)) = r.closing_table() {
        o.write_str("<h2>Closing the gaps</h2>\n")?;
        writeln!(
            o,
            "<p>The cheapest processing added per short scenario{}.</p>",
            if r.default_costs() {
                " (no site has a cost: every unit costs 1)"
            } else {
                ""
            }
        )?;
        table_html(o, &head, &rows, &[1, 2, 4])?;
    }
    o.write_str("<h2>Element criticality</h2>\n<figure>")?;
    bars_svg(o, &r.criticality(), u, "criticality")?;
    writeln!(
        o,
        "<figcaption>Worst shortfall of any scenario containing each element (top {}).\
         </figcaption></figure>",
        CHART_BARS
    )?;
    o.write_str("<h2>Shortfall over the scenarios</h2>\n<figure>")?;
    histogram_svg(o, &r.histogram(), u)?;
    o.write_str(
        "<figcaption>How many scenarios fall in each shortfall range (a range includes its \
         upper end).</figcaption></figure>\n",
    )?;
    if let Some((facts, head, rows)) = r.risk_table() {
        o.write_str("<h2>Risk</h2>\n<ul>")?;
        for f in facts {
            write!(o, "<li>{}</li>", esc(&f))?;
        }
        o.write_str("</ul>\n")?;
        table_html(o, &head, &rows, &[1, 2])?;
    }
    writeln!(
        o,
        "<p class=\"caution\">{}</p>",
        esc(super::caution_for(r.net))
    )?;
    o.write_str("<script type=\"application/json\" id=\"report-data\">")?;
    page_data(o, r, &rows)?;
    write!(o, "</script>\n<script>{}</script>\n", table::SCRIPT)?;
    o.write_str("</main></body></html>\n")
}

/// The HTML exporter: [`html`] streamed to `w`.
impl Exporter<Model<'_>> for Html {
    fn write(&self, r: &Model<'_>, w: &mut dyn Write) -> io::Result<()> {
        write(w, r)
    }
}

/// The HTML exporter as a function: [`html`] streamed to `w`.
pub fn write(w: &mut dyn Write, r: &Report<'_>) -> io::Result<()> {
    streamed(w, |o| html(o, r))
}
