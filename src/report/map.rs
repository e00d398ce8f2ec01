//! The report's topology map: the drawing computed once per run ([`Drawing::of`], held
//! by the report model), the utilisation colour scale, the per-scenario marks, and the
//! SVG with its legend. The page's script redraws the marks of a chosen scenario from the
//! data [`marks_json`] writes; the SVG as written shows the worst scenario.

use std::fmt::Write as _;

use super::html::esc;
use super::layout::{self, Box2, Placer};
use super::model::Model;
use super::num;
use crate::model::Network;
use crate::scenario::Element;

/// Width of the map drawing, in SVG units.
pub const MAP_WIDTH: f64 = 900.0;
/// Margin around the drawn sites.
const MAP_MARGIN: f64 = 70.0;
/// Font size of site labels and of capacity labels.
const SITE_FONT: f64 = 12.0;
const CAP_FONT: f64 = 11.0;
/// Radius of the box kept clear around a site marker.
const MARKER: f64 = 10.0;
/// Spacing of parallel links between the same two sites.
const PARALLEL: f64 = 9.0;

/// The utilisation colour scale: a link direction's load over its capacity falls in the
/// first step whose upper end it is below (the last holds everything above 100%, which
/// only an offered load under a deployed routing reaches). Thresholds are common practice
/// for link utilisation views, no source.
pub const UTIL_STEPS: [(f64, &str, &str); 5] = [
    (0.5, "#3f8f5a", "below 50%"),
    (0.8, "#b3a12b", "50% to 80%"),
    (0.95, "#e0842a", "80% to 95%"),
    (1.000_000_001, "#c62f23", "95% to 100%"),
    (f64::INFINITY, "#6a2a8c", "above 100% (overloaded)"),
];
/// A link whose utilisation is not known (no allocation kept).
const UNKNOWN: &str = "#9aa9b1";

/// The step of [`UTIL_STEPS`] a utilisation falls in (`None` when unknown). O(1).
pub fn util_step(u: Option<f64>) -> Option<usize> {
    let u = u.filter(|u| !u.is_nan())?;
    UTIL_STEPS
        .iter()
        .position(|s| u < s.0)
        .or(Some(UTIL_STEPS.len() - 1))
}

/// The map's geometry, computed once per run: site positions, each link's drawn segment
/// and the label boxes (placed so that no two overlap and none lies on a link).
pub struct Drawing {
    pub width: f64,
    pub height: f64,
    /// Sites at the file's `x`/`y` (every site has them); else the stress layout.
    pub from_file: bool,
    pub site: Vec<(f64, f64)>,
    /// Per link: the segment drawn (parallel links between one pair of sites are spread).
    pub seg: Vec<((f64, f64), (f64, f64))>,
    pub site_label: Vec<Box2>,
    pub link_label: Vec<Box2>,
}

/// A capacity label's text.
fn cap_text(c: f64) -> String {
    num(c)
}

impl Drawing {
    /// Lays the network out and places every label: O(n² · iterations) for the layout
    /// ([`layout::stress_layout`], skipped when the file gives positions) plus
    /// O((n + m) · candidates · (n + m)) for the labels. Deterministic.
    pub fn of(net: &Network) -> Drawing {
        let sites = &net.sites;
        let from_file = !sites.is_empty() && sites.iter().all(|s| s.x.is_some() && s.y.is_some());
        let raw: Vec<(f64, f64)> = if from_file {
            sites
                .iter()
                .map(|s| (s.x.unwrap_or(0.0), s.y.unwrap_or(0.0)))
                .collect()
        } else {
            layout::stress_layout(net)
        };
        let width = MAP_WIDTH;
        let height = layout::height_for(&raw, width).max(320.0);
        let site = layout::fit(&raw, width, height, MAP_MARGIN, from_file);
        // Parallel links between the same two sites are spread across their common line.
        let mut pairs: std::collections::BTreeMap<(usize, usize), Vec<usize>> =
            std::collections::BTreeMap::new();
        for (l, link) in net.links.iter().enumerate() {
            pairs
                .entry((link.from.0.min(link.to.0), link.from.0.max(link.to.0)))
                .or_default()
                .push(l);
        }
        let mut seg = vec![((0.0, 0.0), (0.0, 0.0)); net.links.len()];
        for ((a, b), ls) in &pairs {
            let (pa, pb) = (site[*a], site[*b]);
            let (dx, dy) = (pb.0 - pa.0, pb.1 - pa.1);
            let len = (dx * dx + dy * dy).sqrt().max(1e-9);
            let (nx, ny) = (-dy / len, dx / len);
            for (j, &l) in ls.iter().enumerate() {
                let off = (j as f64 - (ls.len() - 1) as f64 / 2.0) * PARALLEL;
                let (p, q) = (
                    (pa.0 + nx * off, pa.1 + ny * off),
                    (pb.0 + nx * off, pb.1 + ny * off),
                );
                let link = &net.links[l];
                seg[l] = if link.from.0 == *a { (p, q) } else { (q, p) };
            }
        }
        let mut placer = Placer {
            taken: site
                .iter()
                .map(|&(x, y)| Box2::centred(x, y, 2.0 * MARKER, 2.0 * MARKER))
                .collect(),
            lines: seg.clone(),
            bounds: Box2 {
                x0: 2.0,
                y0: 2.0,
                x1: width - 2.0,
                y1: height - 2.0,
            },
        };
        let site_label = sites
            .iter()
            .enumerate()
            .map(|(v, s)| {
                let w = layout::text_width(&s.id, SITE_FONT) + 4.0;
                let c = layout::around_point(site[v].0, site[v].1, MARKER, w, SITE_FONT + 5.0);
                placer.place(&c, None)
            })
            .collect();
        let link_label = net
            .links
            .iter()
            .enumerate()
            .map(|(l, link)| {
                let w = layout::text_width(&cap_text(link.capacity), CAP_FONT) + 4.0;
                // The part of the line outside the two site markers.
                let (a, b) = seg[l];
                let c = layout::beside_segment(a, b, w, CAP_FONT + 4.0, 2.0);
                placer.place(&c, Some(l))
            })
            .collect();
        Drawing {
            width,
            height,
            from_file,
            site,
            seg,
            site_label,
            link_label,
        }
    }
}

/// What the map marks for one scenario: failed links and sites, saturated (or, under a
/// deployed routing, overloaded) links, and each link's utilisation (its busier
/// direction; `None` when unknown).
pub struct Marks {
    pub link_failed: Vec<bool>,
    pub site_failed: Vec<bool>,
    pub saturated: Vec<bool>,
    pub util: Vec<Option<f64>>,
}

/// The marks of scenario `i`: O(elements + arcs + bottlenecks); a thin evaluation's
/// allocation is read back through the model's `full` (utilisation unknown if that fails).
pub fn marks(m: &Model<'_>, i: crate::audit::ScenarioId) -> Marks {
    let n = m.net;
    let mut link_failed = vec![false; n.links.len()];
    let mut site_failed = vec![false; n.sites.len()];
    let mut saturated = vec![false; n.links.len()];
    for e in &m.audit.scenarios[i].elements {
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
    for (l, link) in n.links.iter().enumerate() {
        if site_failed[link.from] || site_failed[link.to] {
            link_failed[l] = true;
        }
    }
    let k = m.audit.outage_of[i];
    let e = m.audit.eval(i);
    for l in e.saturated_links(n) {
        saturated[l] = true;
    }
    let arc_util: Option<Vec<f64>> = match m.routed {
        Some(ra) => {
            for &l in &ra.offered[k].overloaded_links {
                saturated[l] = true;
            }
            Some(ra.offered[k].arc_util.clone())
        }
        None => {
            let ratio = |load: &[f64]| -> Vec<f64> {
                n.arcs
                    .iter()
                    .zip(load)
                    .map(|(a, &x)| {
                        if a.capacity > 0.0 {
                            x / a.capacity
                        } else if x > 0.0 {
                            f64::INFINITY
                        } else {
                            0.0
                        }
                    })
                    .collect()
            };
            if e.arc_load.len() == n.arcs.len() {
                Some(ratio(&e.arc_load))
            } else {
                (m.full)(k)
                    .ok()
                    .filter(|f| f.arc_load.len() == n.arcs.len())
                    .map(|f| ratio(&f.arc_load))
            }
        }
    };
    let mut util = vec![None; n.links.len()];
    if let Some(au) = arc_util.filter(|u| u.len() == n.arcs.len()) {
        for (a, u) in n.arcs.iter().zip(au) {
            let slot: &mut Option<f64> = &mut util[a.link];
            *slot = Some(slot.map_or(u, |s: f64| s.max(u)));
        }
    }
    for (l, f) in link_failed.iter().enumerate() {
        if *f {
            util[l] = None;
        }
    }
    Marks {
        link_failed,
        site_failed,
        saturated,
        util,
    }
}

/// One scenario's marks as compact JSON for the page's script: failed links `f`, failed
/// sites `s`, saturated links `t`, and `u`, one character per link (the step of
/// [`UTIL_STEPS`], `-` unknown or failed). O(links + sites).
pub fn marks_json(mk: &Marks) -> String {
    let idx = |v: &[bool]| {
        v.iter()
            .enumerate()
            .filter(|(_, b)| **b)
            .map(|(k, _)| k.to_string())
            .collect::<Vec<_>>()
            .join(",")
    };
    let u: String = mk
        .util
        .iter()
        .map(|&u| match util_step(u) {
            Some(s) => char::from(b'0' + s as u8),
            None => '-',
        })
        .collect();
    format!(
        "{{\"f\":[{}],\"s\":[{}],\"t\":[{}],\"u\":\"{u}\"}}",
        idx(&mk.link_failed),
        idx(&mk.site_failed),
        idx(&mk.saturated)
    )
}

/// The colour of a link in the drawing.
fn link_colour(mk: &Marks, l: usize) -> &'static str {
    match util_step(mk.util[l]) {
        Some(s) => UTIL_STEPS[s].1,
        None => UNKNOWN,
    }
}

/// The arrow head at the end of a one-way link's segment `a`→`b`, its tip at the target
/// marker's edge. O(1).
fn arrow_path(a: (f64, f64), b: (f64, f64)) -> String {
    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
    let len = (dx * dx + dy * dy).sqrt().max(1e-9);
    let (ux, uy) = (dx / len, dy / len);
    let tip = (b.0 - ux * (MARKER + 1.0), b.1 - uy * (MARKER + 1.0));
    let base = (tip.0 - ux * 11.0, tip.1 - uy * 11.0);
    format!(
        "M{:.1} {:.1}L{:.1} {:.1}L{:.1} {:.1}Z",
        tip.0,
        tip.1,
        base.0 - uy * 5.0,
        base.1 + ux * 5.0,
        base.0 + uy * 5.0,
        base.1 - ux * 5.0
    )
}

/// The map SVG for the marks `mk` (the worst scenario as written), then its legend.
pub fn map_svg(m: &Model<'_>, d: &Drawing, mk: &Marks) -> String {
    let net = m.net;
    let (w, h) = (d.width, d.height);
    let mut s = format!(
        "<svg id=\"topology\" xmlns=\"http://www.w3.org/2000/svg\" width=\"{w}\" \
         height=\"{h}\" viewBox=\"0 0 {w} {h}\" role=\"img\">"
    );
    for (l, link) in net.links.iter().enumerate() {
        let (a, b) = d.seg[l];
        let colour = link_colour(mk, l);
        let cls = match (mk.link_failed[l], mk.saturated[l]) {
            (true, _) => "link failed",
            (false, true) => "link sat",
            _ => "link",
        };
        let _ = write!(
            s,
            "<g class=\"{cls}\" data-l=\"{l}\"><title>link:{id} — capacity {cap} {u}{dir}</title>\
             <line class=\"halo\" x1=\"{:.1}\" y1=\"{:.1}\" x2=\"{:.1}\" y2=\"{:.1}\"/>\
             <line class=\"ln\" x1=\"{:.1}\" y1=\"{:.1}\" x2=\"{:.1}\" y2=\"{:.1}\" \
             stroke=\"{colour}\"/>",
            a.0,
            a.1,
            b.0,
            b.1,
            a.0,
            a.1,
            b.0,
            b.1,
            id = esc(&link.id),
            cap = esc(&num(link.capacity)),
            u = esc(&net.unit),
            dir = if link.one_way { " (one way)" } else { "" },
        );
        if link.one_way {
            let _ = write!(
                s,
                "<path class=\"arrow\" data-l=\"{l}\" d=\"{}\" fill=\"{colour}\"/>",
                arrow_path(a, b)
            );
        }
        s.push_str("</g>");
    }
    for (v, site) in net.sites.iter().enumerate() {
        let (x, y) = d.site[v];
        let cls = if mk.site_failed[v] {
            "site failed"
        } else {
            "site"
        };
        let _ = write!(
            s,
            "<g class=\"{cls}\" data-s=\"{v}\"><title>site:{}{}</title>",
            esc(&site.id),
            if site.processing > 0.0 {
                format!(" — processing {} {}", num(site.processing), esc(&net.unit))
            } else {
                String::new()
            }
        );
        if site.processing > 0.0 {
            let _ = write!(
                s,
                "<rect class=\"mk\" x=\"{:.1}\" y=\"{:.1}\" width=\"16\" height=\"16\"/>",
                x - 8.0,
                y - 8.0
            );
        } else {
            let _ = write!(
                s,
                "<circle class=\"mk\" cx=\"{x:.1}\" cy=\"{y:.1}\" r=\"7\"/>"
            );
        }
        let _ = write!(
            s,
            "<path class=\"cross\" d=\"M{:.1} {:.1}L{:.1} {:.1}M{:.1} {:.1}L{:.1} {:.1}\"/></g>",
            x - 10.0,
            y - 10.0,
            x + 10.0,
            y + 10.0,
            x - 10.0,
            y + 10.0,
            x + 10.0,
            y - 10.0
        );
    }
    let label = |s: &mut String, b: &Box2, text: &str, size: f64, cls: &str| {
        let (cx, cy) = b.centre();
        let _ = write!(
            s,
            "<g class=\"{cls}\"><rect x=\"{:.1}\" y=\"{:.1}\" width=\"{:.1}\" height=\"{:.1}\" \
             rx=\"3\"/><text x=\"{cx:.1}\" y=\"{:.1}\" font-size=\"{size}\" \
             text-anchor=\"middle\">{}</text></g>",
            b.x0,
            b.y0,
            b.x1 - b.x0,
            b.y1 - b.y0,
            cy + size * 0.35,
            esc(text)
        );
    };
    for (v, site) in net.sites.iter().enumerate() {
        label(&mut s, &d.site_label[v], &site.id, SITE_FONT, "lbl slbl");
    }
    for (l, link) in net.links.iter().enumerate() {
        label(
            &mut s,
            &d.link_label[l],
            &cap_text(link.capacity),
            CAP_FONT,
            "lbl clbl",
        );
    }
    s.push_str("</svg>");
    s
}

/// The map's legend: the utilisation colour scale with its thresholds, and the marks.
pub fn legend_html(routed: bool) -> String {
    let mut s = String::from("<div id=\"legend\" class=\"legend\"><strong>");
    s.push_str(if routed {
        "Offered load over capacity (busier direction)"
    } else {
        "Utilisation in the scenario's allocation (busier direction)"
    });
    s.push_str(":</strong> ");
    for (k, (_, colour, words)) in UTIL_STEPS.iter().enumerate() {
        let _ = write!(
            s,
            "<span class=\"key\" data-step=\"{k}\"><i style=\"background:{colour}\"></i>{}</span>",
            esc(words)
        );
    }
    let _ = write!(
        s,
        "<span class=\"key\"><i style=\"background:{UNKNOWN}\"></i>not known</span><br>\
         <span class=\"key\"><i class=\"dash\"></i>failed link</span>\
         <span class=\"key\"><i class=\"xsite\">×</i>failed site</span>\
         <span class=\"key\"><i class=\"halo\"></i>{}</span>\
         <span class=\"key\"><i class=\"sq\"></i>processing site</span>\
         <span class=\"key\">▶ one-way link</span>\
         <span class=\"key\">numbers beside links: capacity per direction</span></div>",
        if routed {
            "saturated or overloaded link"
        } else {
            "saturated link"
        }
    );
    s
}
