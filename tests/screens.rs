//! Screens and the `--report` files, through the real binary.
//!
//! Sources: line widths are counted here in characters (Unicode scalar values; every
//! character we print is one column wide); element names are checked against the demo
//! network file itself (read with serde_json, not with redoubt) and by running `--fail`
//! with each; the HTML report is rendered by headless Chromium, an independent browser.

mod common;

use std::collections::BTreeSet;
use std::io::Write as _;
use std::path::{Path, PathBuf};
use std::process::Command;

use common::{Run, redoubt_env};

const DEMO: &str = "fixtures/demo-harrowmere.json";
/// The screen width the tests ask for.
const COLUMNS: usize = 100;

/// `redoubt ARGS` through the shared harness, on a screen of [`COLUMNS`] columns.
fn redoubt(args: &[&str]) -> Run {
    let columns = COLUMNS.to_string();
    redoubt_env(args, &[("COLUMNS", columns.as_str())])
}

fn demo_path() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(DEMO)
}

/// Every `link:`, `site:` and `group:` name the demo file defines (from the file itself).
fn demo_names() -> BTreeSet<String> {
    let text = std::fs::read_to_string(demo_path()).expect("demo file");
    let doc: serde_json::Value = serde_json::from_str(&text).expect("demo JSON");
    let mut names = BTreeSet::new();
    for (key, prefix, field) in [
        ("sites", "site", "id"),
        ("links", "link", "id"),
        ("risk_groups", "group", "name"),
    ] {
        for e in doc[key].as_array().into_iter().flatten() {
            if let Some(id) = e[field].as_str() {
                names.insert(format!("{prefix}:{id}"));
            }
        }
    }
    // Groups are named on their links (`risk_groups: [...]`).
    for l in doc["links"].as_array().into_iter().flatten() {
        for g in l["risk_groups"].as_array().into_iter().flatten() {
            if let Some(g) = g.as_str() {
                names.insert(format!("group:{g}"));
            }
        }
    }
    names
}

/// The element names written in `text`: `kind:ID` words, trailing punctuation removed.
fn names_in(text: &str) -> BTreeSet<String> {
    let mut found = BTreeSet::new();
    for word in text.split(|c: char| c.is_whitespace() || c == ',' || c == '(' || c == ')') {
        for kind in ["link:", "site:", "group:"] {
            if let Some(at) = word.find(kind) {
                let name = word[at..].trim_end_matches(['.', ';', ':']);
                if name.len() > kind.len() {
                    found.insert(name.to_string());
                }
            }
        }
    }
    found
}

/// The demo's audit screens named in the README, each as its stdout.
fn demo_screens() -> Vec<(String, String)> {
    let demo = demo_path();
    let demo = demo.to_str().expect("utf-8 path");
    let cases: Vec<Vec<&str>> = vec![
        vec!["audit", demo],
        vec!["audit", demo, "--depth", "2"],
        vec!["audit", demo, "--close"],
        vec!["audit", demo, "--fail", "site:harrow"],
        vec!["plan", demo],
        vec!["audit", demo, "--routing", "nearest"],
        vec!["check", demo],
        vec!["compare", demo, demo, "--depth", "2"],
        vec!["plan", demo, "--budget", "10"],
    ];
    cases
        .into_iter()
        .map(|args| {
            let mut all = args.clone();
            all.push("--quiet");
            if args[0] == "check" {
                all.pop();
            }
            let run = redoubt(&all);
            assert!(run.code == 0 || run.code == 1, "{args:?}: {}", run.stderr);
            (args[1..].join(" "), run.stdout)
        })
        .collect()
}

#[test]
fn every_demo_screen_fits_100_columns_and_its_names_paste_into_fail() {
    let known = demo_names();
    assert!(known.len() > 30, "the demo defines its elements: {known:?}");
    let mut seen = BTreeSet::new();
    for (what, text) in demo_screens() {
        assert!(!text.is_empty(), "{what}: no output");
        for line in text.lines() {
            assert!(
                line.chars().count() <= COLUMNS,
                "{what}: a line of {} characters:\n{line}",
                line.chars().count()
            );
        }
        for name in names_in(&text) {
            assert!(
                known.contains(&name),
                "{what}: `{name}` is not a whole element name of the file (broken?)"
            );
            seen.insert(name);
        }
    }
    assert!(seen.len() > 10, "names found: {seen:?}");
    // Each name pasted back into --fail is accepted.
    let demo = demo_path();
    for name in &seen {
        let run = redoubt(&[
            "audit",
            demo.to_str().expect("utf-8"),
            "--fail",
            name,
            "--quiet",
        ]);
        assert_eq!(run.code, 0, "--fail {name}: {}", run.stderr);
        assert!(
            run.stdout.contains(&format!("Why {name}:")),
            "--fail explains the scenario by default:\n{}",
            run.stdout
        );
    }
}

/// Source: hand count of the demo's verdict — the text's own table lists 11 short
/// scenarios of 42 at depth 1; the verdict must agree with the JSON file's scenarios.
#[test]
fn verdict_comes_first_and_agrees_with_the_json() {
    let dir = std::env::temp_dir().join(format!("redoubt-verdict-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temp dir");
    let json = dir.join("a.json");
    let demo = demo_path();
    let run = redoubt(&[
        "audit",
        demo.to_str().expect("utf-8"),
        "--quiet",
        "--json",
        json.to_str().expect("utf-8"),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let doc: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&json).expect("json")).expect("json");
    let scenarios = doc["scenarios"].as_array().expect("scenarios");
    let short = scenarios
        .iter()
        .filter(|s| s["shortfall"].as_f64().unwrap_or(0.0) > 0.0)
        .count();
    let first = run.stdout.lines().next().unwrap_or_default();
    assert!(
        first.starts_with(&format!(
            "Verdict: {short} of {} scenarios short",
            scenarios.len()
        )),
        "{first}"
    );
    let gated = redoubt(&[
        "audit",
        demo.to_str().expect("utf-8"),
        "--quiet",
        "--max-shortfall",
        "5",
    ]);
    assert_eq!(gated.code, 1);
    assert!(
        gated
            .stdout
            .starts_with("Verdict: FAIL (1 of 1 gate failed)"),
        "{}",
        gated.stdout
    );
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn every_command_help_ends_with_examples_in_one_layout() {
    for cmd in ["check", "audit", "plan", "compare"] {
        let run = redoubt(&[cmd, "--help"]);
        assert_eq!(run.code, 0, "{cmd}: {}", run.stderr);
        let tail: Vec<&str> = run
            .stdout
            .lines()
            .skip_while(|l| *l != "Examples:")
            .skip(1)
            .collect();
        assert!(tail.len() >= 4, "{cmd}: examples:\n{}", run.stdout);
        for pair in tail.chunks(2) {
            assert!(
                pair[0].starts_with(&format!("  redoubt {cmd} ")),
                "{cmd}: {pair:?}"
            );
            assert!(
                pair.get(1).is_some_and(|l| l.starts_with("      ")),
                "{cmd}: {pair:?}"
            );
        }
    }
}

/// Whether the tests run under CI: the `CI` variable set to anything but empty, `0` or
/// `false` (CI runners set `CI=true`; common practice, no source).
fn in_ci() -> bool {
    std::env::var("CI").is_ok_and(|v| !matches!(v.trim(), "" | "0" | "false"))
}

fn chromium() -> Option<PathBuf> {
    ["/usr/bin/chromium", "/usr/bin/chromium-browser"]
        .iter()
        .map(PathBuf::from)
        .find(|p| p.exists())
}

/// Renders the demo's HTML report in headless Chromium: the DOM it builds must hold the
/// three charts and the caution, the page must log no errors, and a screenshot is left
/// in the temp folder for a look.
#[test]
fn html_report_renders_in_headless_chromium() {
    let dir = std::env::temp_dir().join(format!("redoubt-report-{}", std::process::id()));
    let demo = demo_path();
    let run = redoubt(&[
        "audit",
        demo.to_str().expect("utf-8"),
        "--close",
        "--quiet",
        "--report",
        dir.to_str().expect("utf-8"),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let html = std::fs::read_to_string(dir.join("report.html")).expect("report.html");
    let md = std::fs::read_to_string(dir.join("report.md")).expect("report.md");
    for text in [&html, &md] {
        assert!(text.contains("Caution: a planning aid"), "caution");
        assert!(
            text.contains("Verdict: 11 of 42 scenarios short"),
            "verdict"
        );
    }
    for banned in [
        "<script src",
        "<link",
        "@import",
        "http://",
        "https://",
        "url(",
    ] {
        let outside = html.replace("http://www.w3.org/2000/svg", "");
        assert!(!outside.contains(banned), "self-contained: found {banned}");
    }
    let Some(browser) = chromium() else {
        // CI installs Chromium (.ci/run), so there a missing browser is a failure, never a
        // silent pass. Elsewhere the test says it was skipped on the terminal itself:
        // libtest captures the print macros of a passing test, not a direct write.
        assert!(
            !in_ci(),
            "CI is set but there is no chromium at /usr/bin/chromium or \
             /usr/bin/chromium-browser: the HTML report was not rendered"
        );
        let _ = writeln!(
            std::io::stderr(),
            "SKIPPED html_report_renders_in_headless_chromium: no chromium at \
             /usr/bin/chromium (apt-get install -y chromium); with CI set this fails"
        );
        return;
    };
    let url = format!("file://{}", dir.join("report.html").display());
    let profile = dir.join("profile");
    let common = [
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
    ];
    let dom = Command::new(&browser)
        .args(common)
        .arg(format!("--user-data-dir={}", profile.display()))
        .args(["--enable-logging=stderr", "--v=0", "--dump-dom"])
        .arg(&url)
        .output()
        .expect("chromium runs");
    let dom_text = String::from_utf8_lossy(&dom.stdout);
    let log = String::from_utf8_lossy(&dom.stderr);
    assert!(dom.status.success(), "chromium failed:\n{log}");
    for id in ["criticality", "distribution", "topology"] {
        assert!(
            dom_text.contains(&format!("<svg id=\"{id}\"")),
            "the rendered DOM has the {id} chart"
        );
    }
    assert!(dom_text.contains("Caution: a planning aid"));
    for line in log.lines() {
        assert!(
            !(line.contains("CONSOLE")
                || line.contains("Uncaught")
                || line.contains("ERROR:CONSOLE")),
            "page error: {line}"
        );
    }
    let shot = dir.join("report.png");
    let snap = Command::new(&browser)
        .args(common)
        .arg(format!("--user-data-dir={}", profile.display()))
        .arg(format!("--screenshot={}", shot.display()))
        .arg("--window-size=1200,3000")
        .arg(&url)
        .output()
        .expect("chromium runs");
    assert!(
        snap.status.success(),
        "{}",
        String::from_utf8_lossy(&snap.stderr)
    );
    let png = std::fs::read(&shot).expect("screenshot written");
    assert!(png.starts_with(b"\x89PNG"), "a PNG screenshot");
    eprintln!("screenshot: {}", shot.display());
}
