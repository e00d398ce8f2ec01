//! The `--report` page checked from the outside: rendered and driven in headless Chromium
//! (an independent browser), its facts compared with the `--json` document of the same
//! run (a separate exporter) and with hand counts of the demo file.
//!
//! The page is driven by a probe script this test appends to a copy of `report.html`;
//! the probe clicks and types as a reader would and writes what it sees into the DOM,
//! which `chromium --dump-dom` returns.

mod common;

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};
use std::process::Command;

use common::{TempDir, demo, redoubt, s};
use serde_json::Value;

fn chromium() -> Option<PathBuf> {
    ["/usr/bin/chromium", "/usr/bin/chromium-browser"]
        .iter()
        .map(PathBuf::from)
        .find(|p| p.exists())
}

/// Whether CI is set (`CI` not empty, `0` or `false`; common practice, no source).
fn in_ci() -> bool {
    std::env::var("CI").is_ok_and(|v| !matches!(v.trim(), "" | "0" | "false"))
}

/// `audit DEMO ARGS --quiet --json DIR/a.json --report DIR`: the page, its Markdown twin
/// and the JSON document.
fn audit_with_report(dir: &TempDir, args: &[&str]) -> (String, String, Value) {
    let json = dir.join("a.json");
    let demo = demo();
    let mut all = vec!["audit", s(&demo)];
    all.extend_from_slice(args);
    all.extend_from_slice(&["--quiet", "--json", s(&json), "--report", s(&dir.0)]);
    let run = redoubt(&all);
    assert!(run.code == 0 || run.code == 1, "{all:?}: {}", run.stderr);
    let html = std::fs::read_to_string(dir.join("report.html")).expect("report.html");
    let md = std::fs::read_to_string(dir.join("report.md")).expect("report.md");
    let doc: Value = serde_json::from_str(&std::fs::read_to_string(&json).expect("json"))
        .expect("json document");
    (html, md, doc)
}

/// Loads `html` with `probe` appended in headless Chromium and returns the JSON the probe
/// wrote into `<pre id="probe-out">`; `None` when there is no browser outside CI.
fn probe(dir: &Path, html: &str, probe: &str) -> Option<Value> {
    let Some(browser) = chromium() else {
        assert!(
            !in_ci(),
            "CI is set but there is no chromium: the page was not driven"
        );
        eprintln!("SKIPPED: no chromium at /usr/bin/chromium (apt-get install -y chromium)");
        return None;
    };
    let page = dir.join("probe.html");
    let at = html.rfind("</main>").expect("page end");
    let text = format!(
        "{}<pre id=\"probe-out\"></pre><script>{probe}</script>{}",
        &html[..at],
        &html[at..]
    );
    std::fs::write(&page, text).expect("probe page");
    let out = Command::new(browser)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--window-size=1200,3000",
            "--enable-logging=stderr",
            "--v=0",
        ])
        .arg(format!("--user-data-dir={}", dir.join("profile").display()))
        .arg("--dump-dom")
        .arg(format!("file://{}", page.display()))
        .output()
        .expect("chromium runs");
    let dom = String::from_utf8_lossy(&out.stdout);
    let log = String::from_utf8_lossy(&out.stderr);
    for line in log.lines() {
        assert!(
            !(line.contains("Uncaught") || line.contains("ERROR:CONSOLE")),
            "page error: {line}"
        );
    }
    let start = dom.find("<pre id=\"probe-out\">").expect("probe output") + 20;
    let end = start + dom[start..].find("</pre>").expect("probe end");
    let text = dom[start..end]
        .replace("&quot;", "\"")
        .replace("&lt;", "<")
        .replace("&gt;", ">")
        .replace("&amp;", "&");
    Some(serde_json::from_str(&text).unwrap_or_else(|e| panic!("{e}: {text}")))
}

/// The probe: table counts, sorting by shortfall, filtering, choosing a row, arrows,
/// label boxes and the legend, all read from the rendered page.
const PROBE: &str = r#"(function(){
var R={},T=document.getElementById('scenarios');
function rows(){return [].slice.call(T.tBodies[0].rows);}
function name(r){return r.cells[1].textContent;}
R.count=rows().length;R.first=name(rows()[0]);
var H=[].slice.call(T.tHead.rows[0].cells);
var c=H.findIndex(function(h){return h.textContent.indexOf('shortfall (')===0;});
H[c].click();
R.sorted=rows().map(function(r){return [name(r),parseFloat(r.cells[c].getAttribute('data-v'))];});
var F=document.getElementById('filter');
R.filter={};
['site:harrow','harrow','group:north-duct'].forEach(function(q){F.value=q;F.dispatchEvent(new Event('input'));
R.filter[q]={rows:rows().filter(function(r){return !r.hidden;}).map(name),
count:+document.getElementById('shown-count').textContent};});
F.value='';F.dispatchEvent(new Event('input'));
var pick=rows().find(function(r){return name(r)==='site:fenwick';});
if(pick){pick.click();
R.pick={sites:[].slice.call(document.querySelectorAll('#topology g.site.failed')).map(function(g){return +g.getAttribute('data-s');}),
links:[].slice.call(document.querySelectorAll('#topology g.link.failed')).map(function(g){return +g.getAttribute('data-l');}),
caption:document.getElementById('map-scenario').textContent};}
R.arrows=[].slice.call(document.querySelectorAll('#topology path.arrow')).map(function(a){return +a.getAttribute('data-l');});
var B=[].slice.call(document.querySelectorAll('#topology .lbl text')).map(function(t){var b=t.getBoundingClientRect();
return {x0:b.left,y0:b.top,x1:b.right,y1:b.bottom,t:t.textContent,cap:t.parentNode.classList.contains('clbl')};});
R.labels=B.length;R.overlaps=[];
for(var i=0;i<B.length;i++)for(var j=i+1;j<B.length;j++){var a=B[i],b=B[j];
if(a.x0<b.x1&&b.x0<a.x1&&a.y0<b.y1&&b.y0<a.y1)R.overlaps.push([a.t,b.t]);}
var lines=[].slice.call(document.querySelectorAll('#topology g.link')).map(function(g){var ln=g.querySelector('.ln'),m=ln.getScreenCTM();
function p(x,y){var q=ln.ownerSVGElement.createSVGPoint();q.x=+ln.getAttribute(x);q.y=+ln.getAttribute(y);return q.matrixTransform(m);}
return [p('x1','y1'),p('x2','y2')];});
function crosses(b,s){var a=s[0],e=s[1],dx=e.x-a.x,dy=e.y-a.y,t0=0,t1=1;
var P=[[-dx,a.x-b.x0],[dx,b.x1-a.x],[-dy,a.y-b.y0],[dy,b.y1-a.y]];
for(var k=0;k<4;k++){var p=P[k][0],q=P[k][1];if(p===0){if(q<0)return false;}else{var r=q/p;if(p<0)t0=Math.max(t0,r);else t1=Math.min(t1,r);}}
return t0<t1;}
R.onLines=[];B.forEach(function(b){lines.forEach(function(s,l){if(crosses(b,s))R.onLines.push([b.t,l]);});});
R.legendSteps=document.querySelectorAll('#legend .key[data-step]').length;
R.legendText=document.getElementById('legend')?document.getElementById('legend').textContent:'';
document.getElementById('probe-out').textContent=JSON.stringify(R);
})();"#;

fn failed(sc: &Value) -> Vec<String> {
    sc["failed"]
        .as_array()
        .expect("failed")
        .iter()
        .map(|v| v.as_str().expect("name").to_string())
        .collect()
}

/// Sources: the `--json` document of the same run (scenario count, the worst scenario,
/// which scenarios name an element); hand counts of the demo file
/// (fixtures/demo-harrowmere.json): 4 one-way links (greyholt-saltings,
/// saltings-millbrook, oxley-harrow, lowater-oxley, links 15 to 18), 16 site and 21
/// capacity labels, and site fenwick (site 3) with its 3 links quarry-fenwick (2),
/// stonegate-fenwick (5) and fenwick-brackley (6).
#[test]
fn the_page_lists_sorts_filters_and_maps_every_scenario() {
    let dir = TempDir::new("report-page");
    let (html, md, doc) = audit_with_report(&dir, &["--close"]);
    let scenarios = doc["scenarios"].as_array().expect("scenarios");
    assert_eq!(
        scenarios.len(),
        42,
        "the demo at depth 1 (hand count in screens.rs)"
    );
    for text in [&html, &md] {
        assert!(text.contains("Caution: a planning aid"), "caution kept");
    }
    // No network access: nothing loaded from elsewhere.
    for banned in ["<script src", "<link", "@import", "https://", "url("] {
        assert!(!html.contains(banned), "self-contained: found {banned}");
    }
    // The Markdown twin lists every scenario as a table row, and the closings.
    for sc in scenarios {
        let name = failed(sc).join(" + ");
        assert!(
            md.lines()
                .any(|l| l.starts_with('|') && l.contains(&format!("| {name} |"))),
            "{name} in report.md"
        );
    }
    assert!(md.contains("## Closing the gaps"), "closings in report.md");
    let Some(r) = probe(&dir.0, &html, PROBE) else {
        return;
    };
    assert_eq!(
        r["count"].as_u64(),
        Some(scenarios.len() as u64),
        "every scenario listed"
    );
    // The JSON's worst: its scenario of rank 1, which has the largest shortfall.
    let first = scenarios
        .iter()
        .find(|s| s["rank"].as_u64() == Some(1))
        .expect("rank 1");
    let worst = failed(first).join(" + ");
    let max = scenarios
        .iter()
        .map(|s| s["shortfall"].as_f64().expect("shortfall"))
        .fold(0.0, f64::max);
    assert_eq!(first["shortfall"].as_f64(), Some(max));
    assert_eq!(
        r["first"].as_str(),
        Some(worst.as_str()),
        "first view: worst first"
    );
    let sorted = r["sorted"].as_array().expect("sorted");
    assert_eq!(
        sorted[0][0].as_str(),
        Some(worst.as_str()),
        "sorted by shortfall"
    );
    let values: Vec<f64> = sorted.iter().map(|p| p[1].as_f64().expect("v")).collect();
    assert!(values.windows(2).all(|w| w[0] >= w[1]), "{values:?}");
    assert!((values[0] - max).abs() <= 1e-9 * max.max(1.0));
    // Filtering: exactly the scenarios whose failed names match, per the JSON.
    for (q, exact) in [
        ("site:harrow", true),
        ("harrow", false),
        ("group:north-duct", true),
    ] {
        let want: BTreeSet<String> = scenarios
            .iter()
            .filter(|sc| {
                failed(sc)
                    .iter()
                    .any(|n| if exact { n == q } else { n.contains(q) })
            })
            .map(|sc| failed(sc).join(" + "))
            .collect();
        let got: BTreeSet<String> = r["filter"][q]["rows"]
            .as_array()
            .expect("rows")
            .iter()
            .map(|v| v.as_str().expect("name").to_string())
            .collect();
        assert!(!want.is_empty(), "{q}");
        assert_eq!(got, want, "filter {q}");
        assert_eq!(r["filter"][q]["count"].as_u64(), Some(want.len() as u64));
    }
    // Choosing site:fenwick marks fenwick and its three links (hand count).
    let pick = &r["pick"];
    assert_eq!(pick["caption"].as_str(), Some("site:fenwick"));
    assert_eq!(pick["sites"], serde_json::json!([3]));
    assert_eq!(pick["links"], serde_json::json!([2, 5, 6]));
    // One arrow per one-way link direction, on exactly the one-way links of the file.
    let file: Value = common::json::read_fixture(&demo());
    let one_way: Vec<u64> = file["links"]
        .as_array()
        .expect("links")
        .iter()
        .enumerate()
        .filter(|(_, l)| l["one_way"].as_bool() == Some(true))
        .map(|(k, _)| k as u64)
        .collect();
    assert_eq!(one_way, vec![15, 16, 17, 18], "hand count of the demo file");
    let arrows: Vec<u64> = r["arrows"]
        .as_array()
        .expect("arrows")
        .iter()
        .map(|v| v.as_u64().expect("index"))
        .collect();
    assert_eq!(arrows, one_way);
    // Labels: 16 site names and 21 capacities; no two boxes overlap, none sits on a link.
    assert_eq!(r["labels"].as_u64(), Some(16 + 21));
    assert_eq!(r["overlaps"], serde_json::json!([]), "overlapping labels");
    assert_eq!(r["onLines"], serde_json::json!([]), "labels over links");
    assert_eq!(
        r["legendSteps"].as_u64(),
        Some(5),
        "colour scale in the legend"
    );
    let legend = r["legendText"].as_str().expect("legend");
    for t in ["50%", "80%", "95%", "100%", "failed link", "one-way"] {
        assert!(legend.contains(t), "legend: {t} in {legend}");
    }
}

/// Source: the `--json` shortfalls of the same run, counted by hand into the bins; the
/// round widths are 1, 2 or 5 × 10^k (the demo's worst, 37, over at most 8 bins gives
/// width 5: 37/8 = 4.6, and 5 is the first of 1, 2, 5, 10 … not below it). Two runs give
/// the same bytes.
#[test]
fn histogram_bins_are_round_and_runs_are_identical() {
    let dir = TempDir::new("report-bins");
    let (html, md, doc) = audit_with_report(&dir, &[]);
    let again = TempDir::new("report-bins-again");
    let (html2, md2, _) = audit_with_report(&again, &[]);
    assert!(html == html2 && md == md2, "two runs, identical bytes");
    let shortfalls: Vec<f64> = doc["scenarios"]
        .as_array()
        .expect("scenarios")
        .iter()
        .map(|s| s["shortfall"].as_f64().expect("shortfall"))
        .collect();
    let section = md
        .split("## Shortfall over the scenarios")
        .nth(1)
        .expect("histogram section");
    let mut bins = Vec::new();
    for line in section.lines().skip_while(|l| !l.starts_with("| none")) {
        if !line.starts_with('|') {
            break;
        }
        let cells: Vec<&str> = line.trim_matches('|').split('|').map(str::trim).collect();
        bins.push((
            cells[0].to_string(),
            cells[1].parse::<usize>().expect("count"),
        ));
    }
    assert_eq!(bins[0].1, shortfalls.iter().filter(|&&v| v <= 0.0).count());
    let mut width = None;
    for (k, (label, count)) in bins.iter().enumerate().skip(1) {
        let (lo, hi) = label.split_once('–').expect("range");
        let (lo, hi): (f64, f64) = (lo.parse().expect("lo"), hi.parse().expect("hi"));
        let w = hi - lo;
        assert_eq!(*width.get_or_insert(w), w, "equal widths");
        assert_eq!(lo, w * (k - 1) as f64, "edges are multiples of the width");
        let want = shortfalls.iter().filter(|&&v| v > lo && v <= hi).count();
        assert_eq!(*count, want, "bin {label}");
    }
    assert_eq!(width, Some(5.0), "hand calculation above");
    let max = shortfalls.iter().copied().fold(0.0, f64::max);
    assert_eq!(bins.len() - 1, (max / 5.0).ceil() as usize);
    assert_eq!(bins.iter().map(|b| b.1).sum::<usize>(), shortfalls.len());
}

/// Source: the `--json` document of the same routed run (its scenarios and their
/// `max_link_utilisation`): a routed audit writes a report whose table holds every
/// scenario with the routed values.
#[test]
fn a_routed_audit_writes_a_report() {
    let dir = TempDir::new("report-routed");
    let (html, md, doc) = audit_with_report(&dir, &["--routing", "nearest"]);
    let scenarios = doc["scenarios"].as_array().expect("scenarios");
    assert!(md.contains("served, nearest"), "routed column in report.md");
    assert!(html.contains("Offered load over capacity"), "routed legend");
    assert!(html.contains("Caution: a planning aid"));
    let rows = html.matches("<tr data-i=").count();
    assert_eq!(rows, scenarios.len());
    // Each scenario's max link utilisation cell carries the JSON's value.
    let col = html
        .split("<thead>")
        .nth(1)
        .and_then(|t| t.split("</thead>").next())
        .expect("head")
        .matches("<th ")
        .collect::<Vec<_>>()
        .len();
    assert!(col > 10, "routed columns present");
    for sc in scenarios {
        let name = match failed(sc).join(" + ") {
            n if n.is_empty() => "baseline".to_string(),
            n => n,
        };
        let row = html
            .split("<tr data-i=")
            .find(|r| r.contains(&format!("<td class=\"k\">{name}</td>")))
            .unwrap_or_else(|| panic!("{name} row"));
        let u = &sc["max_link_utilisation"];
        if let Some(u) = u.as_f64() {
            let found = row.split("data-v=\"").skip(1).any(|c| {
                c.split('"')
                    .next()
                    .and_then(|v| v.parse::<f64>().ok())
                    .is_some_and(|v| (v - u).abs() <= 1e-9 * u.abs().max(1.0))
            });
            assert!(found, "{name}: max link utilisation {u} in {row}");
        }
    }
}
