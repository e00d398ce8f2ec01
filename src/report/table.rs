//! The report's table of every scenario (worst first, as ranked by the model), its
//! Markdown form, and the page's small inline script: sorting by any column, filtering by
//! element name, and choosing a scenario to mark on the map. The script reads only the
//! page itself (no network access, no library).

use std::fmt;

use super::html::esc;
use super::model::Model;
use super::{file_diff, num, percent};

/// At most this many scenarios are listed (the `--json` and `--csv` files hold them all).
pub const MAX_ROWS: usize = 20_000;

/// A cell: its text, and for a numeric column the value it sorts by.
pub type Cell = (String, Option<f64>);

/// One scenario's row.
pub struct Row {
    /// Index into `audit.scenarios`.
    pub scenario: crate::audit::ScenarioId,
    pub cells: Vec<Cell>,
}

/// Every scenario of the run (up to [`MAX_ROWS`]) worst first: the column heads (with
/// whether each is numeric) and the rows. Under a deployed routing the values are the
/// routed ones, beside the best re-route's. O(rows · columns).
pub fn all_scenarios(m: &Model<'_>) -> (Vec<(String, bool)>, Vec<Row>) {
    let u = &m.net.unit;
    let mut head = vec![
        ("#".to_string(), true),
        ("failed".into(), false),
        (format!("shortfall ({u})"), true),
        ("% of surviving required".into(), true),
        (format!("stranded ({u})"), true),
        (format!("throughput loss ({u})"), true),
        ("main bottleneck".into(), false),
    ];
    if let Some(ra) = m.routed {
        let name = ra.mode.name();
        head.push((format!("served, {name} ({u})"), true));
        head.push((format!("served, best re-route ({u})"), true));
        head.push((format!("win-back ({u})"), true));
        head.push(("max link util.".into(), true));
    }
    if m.risk.is_some() {
        head.push(("probability".into(), true));
    }
    head.push(("same outage as".into(), false));
    let rows = m
        .order
        .iter()
        .take(MAX_ROWS)
        .map(|&i| {
            let e = m.audit.eval(i);
            let loss = file_diff(m.baseline_of(i).throughput, e.throughput).max(0.0);
            let ratio = if e.surviving_required > 0.0 {
                e.shortfall / e.surviving_required
            } else {
                0.0
            };
            let mut cells: Vec<Cell> = vec![
                (m.rank_of[i].to_string(), Some(m.rank_of[i] as f64)),
                (m.audit.scenarios[i].display_name(), None),
                (num(e.shortfall), Some(e.shortfall)),
                (percent(e.shortfall, e.surviving_required), Some(ratio)),
                (num(e.stranded), Some(e.stranded)),
                (num(loss), Some(loss)),
                (super::text::main_bottleneck(m.net_of(i), e), None),
            ];
            if let Some(ra) = m.routed {
                let k = m.audit.outage_of[i];
                let best = ra.best[k].served_required;
                let util = ra.offered[k].max_link_util;
                cells.push((num(e.served_required), Some(e.served_required)));
                cells.push((num(best), Some(best)));
                cells.push((num(ra.recoverable(k.0)), Some(ra.recoverable(k.0))));
                cells.push((
                    super::routing::util_text(util),
                    Some(if util.is_finite() { util } else { f64::MAX }),
                ));
            }
            if let Some(r) = m.risk {
                cells.push((super::probability(r.probability[i]), Some(r.probability[i])));
            }
            cells.push((
                m.folding.into[i]
                    .map(|r| m.audit.scenarios[r].display_name())
                    .unwrap_or_default(),
                None,
            ));
            Row { scenario: i, cells }
        })
        .collect();
    (head, rows)
}

/// The table as HTML onto `o`: `<table id="scenarios">`, numeric cells carrying `data-v` (their
/// sort value), each row its position in the page's data (`data-i`) and rank. O(rows).
pub fn scenarios_html(
    o: &mut dyn fmt::Write,
    head: &[(String, bool)],
    rows: &[Row],
) -> fmt::Result {
    o.write_str("<table id=\"scenarios\" class=\"sortable\"><thead><tr>")?;
    for (c, (h, numeric)) in head.iter().enumerate() {
        write!(
            o,
            "<th data-col=\"{c}\"{} title=\"sort by this column\">{}</th>",
            if *numeric { " class=\"n\"" } else { "" },
            esc(h)
        )?;
    }
    o.write_str("</tr></thead><tbody>\n")?;
    for (k, r) in rows.iter().enumerate() {
        write!(o, "<tr data-i=\"{k}\" data-rank=\"{}\">", k + 1)?;
        for (c, (text, value)) in r.cells.iter().enumerate() {
            match value {
                Some(v) => {
                    write!(
                        o,
                        "<td class=\"n\" data-v=\"{}\">{}</td>",
                        js_num(*v),
                        esc(text)
                    )?;
                }
                None if c == 1 => {
                    write!(o, "<td class=\"k\">{}</td>", esc(text))?;
                }
                None => {
                    write!(o, "<td>{}</td>", esc(text))?;
                }
            }
        }
        o.write_str("</tr>\n")?;
    }
    o.write_str("</tbody></table>\n")
}

/// A number as JavaScript reads it back (shortest round-trip form; non-finite as a
/// large finite sentinel so sorting stays total).
pub fn js_num(v: f64) -> String {
    if v.is_finite() {
        format!("{v:?}")
    } else if v > 0.0 {
        "1e308".into()
    } else {
        "-1e308".into()
    }
}

/// JSON text made safe inside a `<script>` element: `<`, `>` and `&` (which appear only
/// inside strings) written as `\u` escapes. O(length).
pub fn script_safe(json: &str) -> String {
    json.replace('<', "\\u003c")
        .replace('>', "\\u003e")
        .replace('&', "\\u0026")
}

/// The page's script: sorting (a numeric column sorts largest first on the first click,
/// ties kept in rank order), filtering (each word of the filter must be a whole element
/// name of the row when it is one of the run's element names, else a part of one), and
/// choosing a row to mark its scenario on the map from the embedded data.
pub const SCRIPT: &str = r#"(function(){
var D=JSON.parse(document.getElementById('report-data').textContent);
var T=document.getElementById('scenarios');if(!T)return;
var B=T.tBodies[0],rows=[].slice.call(B.rows),H=T.tHead.rows[0].cells,dir={};
var names=new Set(D.names.map(function(x){return x.toLowerCase();}));
function key(r,c){var x=r.cells[c],v=x.getAttribute('data-v');return v===null?x.textContent:parseFloat(v);}
[].forEach.call(H,function(h,c){h.addEventListener('click',function(){
var num=h.classList.contains('n'),d=dir[c]=dir[c]?-dir[c]:(num&&c>0?-1:1);
rows.sort(function(a,b){var x=key(a,c),y=key(b,c),k=num?x-y:(x<y?-1:x>y?1:0);
return k*d||(+a.getAttribute('data-rank'))-(+b.getAttribute('data-rank'));});
rows.forEach(function(r){B.appendChild(r);});
[].forEach.call(H,function(o){o.removeAttribute('aria-sort');});
h.setAttribute('aria-sort',d<0?'descending':'ascending');});});
var F=document.getElementById('filter'),N=document.getElementById('shown-count');
function filter(){var w=F.value.toLowerCase().split(/[\s,+]+/).filter(Boolean),n=0;
rows.forEach(function(r){var el=D.sc[+r.getAttribute('data-i')].n.map(function(x){return x.toLowerCase();});
var ok=w.every(function(t){return names.has(t)?el.indexOf(t)>=0:el.some(function(x){return x.indexOf(t)>=0;});});
r.hidden=!ok;if(ok)n++;});N.textContent=n;}
if(F)F.addEventListener('input',filter);
function mark(i){var s=D.sc[i],f=new Set(s.f),S=new Set(s.s),t=new Set(s.t);
document.querySelectorAll('#topology g.link').forEach(function(g){var l=+g.getAttribute('data-l'),c=s.u.charAt(l),
col=c==='-'?D.unknown:D.steps[+c];g.setAttribute('class','link'+(f.has(l)?' failed':t.has(l)?' sat':''));
g.querySelector('.ln').setAttribute('stroke',col);var a=g.querySelector('.arrow');if(a)a.setAttribute('fill',col);});
document.querySelectorAll('#topology g.site').forEach(function(g){var v=+g.getAttribute('data-s');
g.setAttribute('class','site'+(S.has(v)?' failed':''));});
document.getElementById('map-scenario').textContent=s.n.join(' + ')||'baseline';
rows.forEach(function(r){r.classList.toggle('sel',+r.getAttribute('data-i')===i);});}
rows.forEach(function(r){r.addEventListener('click',function(){mark(+r.getAttribute('data-i'));});});
if(rows.length)mark(0);
})();"#;
