//! `audit --report DIR`: one self-contained HTML file (inline styles and SVG; no scripts,
//! no external styles or fonts, so it opens offline) and its Markdown twin
//! ([`super::markdown`]). Both are built from one [`Report`], so they say the same.

use std::fmt::Write as _;
use std::io::{self, Write};

use super::export::{Exporter, Html};
use super::model::Model;
use super::{CAUTION, file_diff, num, percent};
use crate::scenario::Element;
use crate::solve::Resource;

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
/// Side of the topology drawing's square, in SVG units.
const MAP_SIZE: f64 = 560.0;
/// Margin around the drawn sites.
const MAP_MARGIN: f64 = 50.0;

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
    pub fn worst_short(&self) -> Option<usize> {
        self.shown
            .first()
            .copied()
            .filter(|&i| self.audit.eval(i).shortfall > 0.0)
    }

    /// Summary facts: (label, value).
    pub fn summary(&self) -> Vec<(String, String)> {
        let n = self.net;
        let u = &n.unit;
        vec![
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
        ]
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
                    super::text::main_bottleneck(self.net, e),
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
    /// scenarios with no shortfall, the rest split (0, worst] into equal widths.
    pub fn histogram(&self) -> Vec<(String, usize)> {
        let values: Vec<f64> = (0..self.audit.scenarios.len())
            .map(|i| self.audit.eval(i).shortfall)
            .collect();
        let worst = values.iter().copied().fold(0.0, f64::max);
        let mut bins = vec![("none".to_string(), 0usize)];
        if worst > 0.0 {
            let step = worst / HISTOGRAM_BINS as f64;
            for b in 0..HISTOGRAM_BINS {
                bins.push((
                    format!("{}–{}", num(step * b as f64), num(step * (b + 1) as f64)),
                    0,
                ));
            }
        }
        for v in values {
            if v <= 0.0 {
                bins[0].1 += 1;
            } else {
                let step = worst / HISTOGRAM_BINS as f64;
                let b = ((v / step).ceil() as usize).clamp(1, HISTOGRAM_BINS);
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
                        super::text::additions(self.net, &c.add, 3),
                        num(c.not_closable),
                    ]
                })
            })
            .take(self.top)
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

    /// Site positions in drawing units: the file's `x`/`y` when every site has them, else
    /// a circle in file order (deterministic).
    pub fn positions(&self) -> Vec<(f64, f64)> {
        let sites = &self.net.sites;
        let inner = MAP_SIZE - 2.0 * MAP_MARGIN;
        if !sites.is_empty() && sites.iter().all(|s| s.x.is_some() && s.y.is_some()) {
            let xs: Vec<f64> = sites.iter().map(|s| s.x.unwrap_or(0.0)).collect();
            let ys: Vec<f64> = sites.iter().map(|s| s.y.unwrap_or(0.0)).collect();
            let (x0, x1) = (
                xs.iter().copied().fold(f64::INFINITY, f64::min),
                xs.iter().copied().fold(f64::NEG_INFINITY, f64::max),
            );
            let (y0, y1) = (
                ys.iter().copied().fold(f64::INFINITY, f64::min),
                ys.iter().copied().fold(f64::NEG_INFINITY, f64::max),
            );
            let span = (x1 - x0).max(y1 - y0);
            let scale = if span > 0.0 { inner / span } else { 0.0 };
            return xs
                .iter()
                .zip(&ys)
                .map(|(x, y)| {
                    (
                        MAP_MARGIN + (x - x0) * scale,
                        // Larger y is drawn higher up, as on a map.
                        MAP_MARGIN + (y1 - y) * scale,
                    )
                })
                .collect();
        }
        let n = sites.len().max(1) as f64;
        let r = inner / 2.0;
        (0..sites.len())
            .map(|i| {
                let a = std::f64::consts::TAU * i as f64 / n - std::f64::consts::FRAC_PI_2;
                (MAP_SIZE / 2.0 + r * a.cos(), MAP_SIZE / 2.0 + r * a.sin())
            })
            .collect()
    }

    /// For the map: failed links and sites of scenario `i` (its group links included), and
    /// the links with a saturated direction in it.
    pub fn marks(&self, i: Option<usize>) -> (Vec<bool>, Vec<bool>, Vec<bool>) {
        let n = self.net;
        let mut link_failed = vec![false; n.links.len()];
        let mut site_failed = vec![false; n.sites.len()];
        let mut saturated = vec![false; n.links.len()];
        if let Some(i) = i {
            for e in &self.audit.scenarios[i].elements {
                match *e {
                    Element::Link(l) => link_failed[l] = true,
                    Element::Site(v) => site_failed[v] = true,
                    Element::Group(g) => {
                        for &l in &n.groups[g].links {
                            link_failed[l] = true;
                        }
                    }
                }
            }
            for b in &self.audit.eval(i).bottlenecks {
                if let Resource::Arc(a) = b.resource {
                    saturated[n.arcs[a].link] = true;
                }
            }
        }
        (link_failed, site_failed, saturated)
    }
}

/// Escapes text for HTML content and attribute values.
fn esc(s: &str) -> String {
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
const STYLE: &str = "body{font:15px/1.45 system-ui,sans-serif;margin:0;background:#f6f4ef;\
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
font-size:13px}ul{margin:4px 0}code{font-size:13px}";

fn table_html(out: &mut String, head: &[String], rows: &[Vec<String>], numeric: &[usize]) {
    out.push_str("<table><thead><tr>");
    for h in head {
        let _ = write!(out, "<th>{}</th>", esc(h));
    }
    out.push_str("</tr></thead><tbody>\n");
    for r in rows {
        out.push_str("<tr>");
        for (c, v) in r.iter().enumerate() {
            if numeric.contains(&c) {
                let _ = write!(out, "<td class=\"n\">{}</td>", esc(v));
            } else if c == 0 || (c == 1 && head.first().is_some_and(|h| h == "#")) {
                // Names are never broken (they paste back into --fail).
                let _ = write!(out, "<td class=\"k\">{}</td>", esc(v));
            } else {
                let _ = write!(out, "<td>{}</td>", esc(v));
            }
        }
        out.push_str("</tr>\n");
    }
    out.push_str("</tbody></table>\n");
}

/// A horizontal bar chart: one labelled bar per item, scaled to the largest.
fn bars_svg(items: &[(String, f64)], unit: &str, id: &str) -> String {
    const ROW: f64 = 24.0;
    const LABEL: f64 = 230.0;
    const BAR: f64 = 520.0;
    let h = ROW * items.len().max(1) as f64 + 20.0;
    let max = items.iter().map(|i| i.1).fold(0.0, f64::max);
    let mut s = format!(
        "<svg id=\"{id}\" xmlns=\"http://www.w3.org/2000/svg\" width=\"{w}\" height=\"{h}\" \
         viewBox=\"0 0 {w} {h}\" role=\"img\">",
        w = LABEL + BAR + 90.0
    );
    for (k, (name, v)) in items.iter().enumerate() {
        let y = 10.0 + ROW * k as f64;
        let len = if max > 0.0 { BAR * v / max } else { 0.0 };
        let _ = write!(
            s,
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
        );
    }
    s.push_str("</svg>");
    s
}

/// A column chart of scenario counts per shortfall bin.
fn histogram_svg(bins: &[(String, usize)], unit: &str) -> String {
    const W: f64 = 840.0;
    const H: f64 = 260.0;
    const BASE: f64 = 210.0;
    let n = bins.len().max(1) as f64;
    let col = (W - 60.0) / n;
    let max = bins.iter().map(|b| b.1).max().unwrap_or(0).max(1) as f64;
    let mut s = format!(
        "<svg id=\"distribution\" xmlns=\"http://www.w3.org/2000/svg\" width=\"{W}\" \
         height=\"{H}\" viewBox=\"0 0 {W} {H}\" role=\"img\"><line x1=\"30\" y1=\"{BASE}\" \
         x2=\"{x2}\" y2=\"{BASE}\" stroke=\"#999\"/>",
        x2 = W - 20.0
    );
    for (k, (label, count)) in bins.iter().enumerate() {
        let x = 30.0 + col * k as f64 + 4.0;
        let h = (BASE - 30.0) * *count as f64 / max;
        let fill = if k == 0 { "#8fb59a" } else { "#c9703a" };
        let _ = write!(
            s,
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
        );
    }
    let _ = write!(
        s,
        "<text x=\"{cx}\" y=\"{y}\" text-anchor=\"middle\" font-size=\"12\" fill=\"#566\">\
         shortfall ({u}); bar height = number of scenarios</text></svg>",
        cx = W / 2.0,
        y = BASE + 40.0,
        u = esc(unit)
    );
    s
}

/// The topology: links as lines, sites as circles (processing sites as squares); the
/// worst scenario's failed elements in red (dashed links, crossed sites), its saturated
/// links thick amber.
fn map_svg(r: &Report<'_>) -> String {
    let net = r.net;
    let pos = r.positions();
    let (lf, sf, sat) = r.marks(r.worst_short());
    let mut s = format!(
        "<svg id=\"topology\" xmlns=\"http://www.w3.org/2000/svg\" width=\"{MAP_SIZE}\" \
         height=\"{MAP_SIZE}\" viewBox=\"0 0 {MAP_SIZE} {MAP_SIZE}\" role=\"img\">"
    );
    for (l, link) in net.links.iter().enumerate() {
        let (a, b) = (pos[link.from], pos[link.to]);
        let (stroke, width, dash) = if lf[l] {
            ("#c0392b", 3.0, " stroke-dasharray=\"7 5\"")
        } else if sat[l] {
            ("#d9a21a", 6.0, "")
        } else {
            ("#8aa0ab", 2.0, "")
        };
        let _ = write!(
            s,
            "<line x1=\"{:.1}\" y1=\"{:.1}\" x2=\"{:.1}\" y2=\"{:.1}\" stroke=\"{stroke}\" \
             stroke-width=\"{width}\"{dash}><title>link:{}</title></line>",
            a.0,
            a.1,
            b.0,
            b.1,
            esc(&link.id)
        );
    }
    for (v, site) in net.sites.iter().enumerate() {
        let (x, y) = pos[v];
        let fill = if sf[v] { "#f3c6bf" } else { "#ffffff" };
        let edge = if sf[v] { "#c0392b" } else { "#23404f" };
        if site.processing > 0.0 {
            let _ = write!(
                s,
                "<rect x=\"{:.1}\" y=\"{:.1}\" width=\"16\" height=\"16\" fill=\"{fill}\" \
                 stroke=\"{edge}\" stroke-width=\"2.5\"/>",
                x - 8.0,
                y - 8.0
            );
        } else {
            let _ = write!(
                s,
                "<circle cx=\"{x:.1}\" cy=\"{y:.1}\" r=\"7\" fill=\"{fill}\" stroke=\"{edge}\" \
                 stroke-width=\"2\"/>"
            );
        }
        if sf[v] {
            let _ = write!(
                s,
                "<path d=\"M{:.1} {:.1}L{:.1} {:.1}M{:.1} {:.1}L{:.1} {:.1}\" stroke=\"#c0392b\" \
                 stroke-width=\"2.5\"/>",
                x - 11.0,
                y - 11.0,
                x + 11.0,
                y + 11.0,
                x - 11.0,
                y + 11.0,
                x + 11.0,
                y - 11.0
            );
        }
        let _ = write!(
            s,
            "<text x=\"{:.1}\" y=\"{:.1}\" text-anchor=\"middle\" font-size=\"12\" \
             fill=\"#1f2a30\">{}</text>",
            x,
            y - 13.0,
            esc(&site.id)
        );
    }
    s.push_str("</svg>");
    s
}

/// The HTML report as one string.
pub fn html(r: &Report<'_>) -> String {
    let net = r.net;
    let u = &net.unit;
    let mut o = String::new();
    let _ = write!(
        o,
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\
         <title>redoubt audit — {}</title><style>{STYLE}</style></head><body><main>\n",
        esc(&net.name)
    );
    let _ = writeln!(o, "<h1>Failure audit: {}</h1>", esc(&net.name));
    let _ = writeln!(o, "<p class=\"caution\">{}</p>", esc(CAUTION));
    let failed_gate = r.gates.iter().any(|g| !g.passed);
    let _ = writeln!(
        o,
        "<p class=\"verdict{}\">{}</p>",
        if failed_gate { " fail" } else { "" },
        esc(&r.verdict())
    );
    let gates = r.gate_lines();
    if !gates.is_empty() {
        o.push_str("<ul>");
        for g in gates {
            let _ = write!(o, "<li><code>{}</code></li>", esc(&g));
        }
        o.push_str("</ul>\n");
    }
    o.push_str("<h2>Network</h2>\n<table class=\"facts\"><tbody>");
    for (k, v) in r.summary() {
        let _ = write!(o, "<tr><td>{}</td><td>{}</td></tr>", esc(&k), esc(&v));
    }
    o.push_str("</tbody></table>\n<h2>Assumptions of the model</h2>\n<ul>");
    for a in ASSUMPTIONS {
        let _ = write!(o, "<li>{}</li>", esc(a));
    }
    o.push_str("</ul>\n<h2>Worst scenarios</h2>\n");
    let (head, rows) = r.worst_table();
    table_html(&mut o, &head, &rows, &[0, 2, 3, 4, 5]);
    let _ = writeln!(
        o,
        "<p>Shortfall: required demand of surviving demands not routed and processed. \
         Stranded: required demand of demands whose own end site failed (not in the \
         shortfall). Throughput loss: offered volume the baseline carries and the scenario \
         does not.</p>"
    );
    o.push_str("<h2>Element criticality</h2>\n<figure>");
    o.push_str(&bars_svg(&r.criticality(), u, "criticality"));
    let _ = writeln!(
        o,
        "<figcaption>Worst shortfall of any scenario containing each element (top {}).\
         </figcaption></figure>",
        CHART_BARS
    );
    o.push_str("<h2>Shortfall over the scenarios</h2>\n<figure>");
    o.push_str(&histogram_svg(&r.histogram(), u));
    o.push_str(
        "<figcaption>How many scenarios fall in each shortfall range.</figcaption></figure>\n",
    );
    o.push_str("<h2>Topology</h2>\n<figure>");
    o.push_str(&map_svg(r));
    let _ = writeln!(
        o,
        "<figcaption>{}Squares process traffic. {}</figcaption></figure>",
        match r.worst_short() {
            Some(i) => format!(
                "Marked: the worst scenario, {} — failed links red dashed, failed sites crossed, \
                 saturated links thick amber. ",
                r.audit.scenarios[i].display_name()
            ),
            None => "No scenario is short, so nothing is marked. ".into(),
        },
        if net.sites.iter().all(|s| s.x.is_some() && s.y.is_some()) {
            "Sites at the file's x, y positions."
        } else {
            "Sites on a circle in file order (the file gives no x, y positions)."
        }
    );
    if let Some((head, rows)) = r.closing_table() {
        o.push_str("<h2>Closing the gaps</h2>\n");
        table_html(&mut o, &head, &rows, &[1, 2, 4]);
    }
    if let Some((facts, head, rows)) = r.risk_table() {
        o.push_str("<h2>Risk</h2>\n<ul>");
        for f in facts {
            let _ = write!(o, "<li>{}</li>", esc(&f));
        }
        o.push_str("</ul>\n");
        table_html(&mut o, &head, &rows, &[1, 2]);
    }
    let _ = writeln!(o, "<p class=\"caution\">{}</p>", esc(CAUTION));
    o.push_str("</main></body></html>\n");
    o
}

/// The HTML exporter: [`html`] to `w`.
impl Exporter for Html {
    fn write(&self, r: &Model<'_>, w: &mut dyn Write) -> io::Result<()> {
        write(w, r)
    }
}

/// The HTML exporter as a function: [`html`] to `w`.
pub fn write(w: &mut dyn Write, r: &Report<'_>) -> io::Result<()> {
    w.write_all(html(r).as_bytes())
}
