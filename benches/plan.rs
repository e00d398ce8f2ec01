//! `cargo bench --bench plan [-- [quick] [sites N] [processing P] NET… MASTER…] [-- write PATH]`: `redoubt plan` at depth 1
//! (links and sites) through the built binary on two threads, timed (wall), with each
//! master named (`walks`, the default, and `edge`, the hidden `--master edge`; both when
//! none is named) on each network named (both when none is):
//!
//! - `G200`: the 200-site network of `benches/scale.rs` (200 sites, 395 links, 3,903
//!   random demands, processing 180 at every tenth site, lowered from 200; at 180 its
//!   two short scenarios are limited by links, so no purchase is needed; `processing 170`
//!   leaves every processing-site failure short of processing, 3,400 in all against 3,299
//!   required, so a purchase must close them), with every processing site expandable
//!   (`expand_cost` 1, 2 or 3 by site, `expand_max` 400);
//! - `grid-50`: `fixtures/grid-50.json`.
//!
//! Prints per run the time (with the load average before it), the exit code, the
//! constraint generation (master rounds, scenarios the master started with and those
//! generation added), the stderr notes (the master leaving the exact simplex) and the
//! report's first lines (the plan's cost). `sites N` uses the `N`-site variant of the G200
//! network (`GN`); `quick` runs only `G100` with the walk master (a few minutes);
//! `write PATH` only writes the network file. Built with `--features highs`, the binary's
//! masters use HiGHS and the lines say `highs build`.

mod common;

use std::time::Instant;

use common::Demands;

/// The G200 document with expandable processing sites (`n` = 200), or its `n`-site
/// variant (`2n − 5` links, `19.5 n` demands: the same shape, smaller), with processing
/// `processing` at every tenth site.
fn document_of(n: usize, processing: f64) -> serde_json::Value {
    let procs: Vec<(usize, f64)> = (0..n).step_by(10).map(|i| (i, 200.0)).collect();
    let demands = if n == 200 { 3903 } else { n * 39 / 2 };
    let mut doc = common::document(200, n, 2 * n - 5, Demands::Random(demands), &procs, 0);
    let sites = doc["sites"].as_array_mut().expect("sites");
    for (i, s) in sites.iter_mut().enumerate() {
        if i % 10 == 0 {
            s["processing"] = serde_json::json!(processing);
            s["expand_cost"] = serde_json::json!(1 + (i / 10) % 3);
            s["expand_max"] = serde_json::json!(400);
        }
    }
    doc
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let sites = args
        .iter()
        .position(|a| a == "sites")
        .map_or(200, |i| args[i + 1].parse().expect("sites N"));
    let processing: f64 = args
        .iter()
        .position(|a| a == "processing")
        .map_or(180.0, |i| args[i + 1].parse().expect("processing P"));
    let quick = args.iter().any(|a| a == "quick");
    // `quick`: the 100-site variant only, walk master only (a few minutes).
    let sites = if quick { 100 } else { sites };
    let doc = document_of(sites, processing);
    if let Some(i) = args.iter().position(|a| a == "write") {
        let path = args.get(i + 1).expect("write PATH");
        std::fs::write(path, doc.to_string()).expect("write the network");
        return;
    }
    let tmp = std::env::temp_dir();
    let g = tmp.join(format!("redoubt-plan{sites}-{}.json", std::process::id()));
    let report = tmp.join(format!(
        "redoubt-plan{sites}-{}-out.json",
        std::process::id()
    ));
    std::fs::write(&g, doc.to_string()).expect("write the network");
    let g_name = format!("G{sites}");
    let grid = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/grid-50.json");
    let mut nets: Vec<(&str, &std::path::Path)> = vec![(&g_name, &g), ("grid-50", &grid)];
    let mut masters = vec!["walks", "edge"];
    if quick {
        nets.truncate(1);
        masters.truncate(1);
    }
    if args.iter().any(|a| *a == g_name || a == "grid-50") {
        nets.retain(|(n, _)| args.iter().any(|a| a == n));
    }
    if args.iter().any(|a| a == "walks" || a == "edge") {
        masters.retain(|m| args.iter().any(|a| a == m));
    }
    let build = if cfg!(feature = "highs") {
        "highs"
    } else {
        "default"
    };
    for (name, path) in nets {
        for master in &masters {
            println!(
                "PLAN {name} (file {}, {build} build): plan --depth 1 --kinds links,sites \
                 --threads 2 --master {master}",
                path.display()
            );
            let load = std::fs::read_to_string("/proc/loadavg").unwrap_or_default();
            let t = Instant::now();
            let out = std::process::Command::new(env!("CARGO_BIN_EXE_redoubt"))
                .args(["plan", path.to_str().expect("utf-8 path")])
                .args([
                    "--depth",
                    "1",
                    "--kinds",
                    "links,sites",
                    "--threads",
                    "2",
                    "--master",
                    master,
                    "--yes",
                    "--json",
                    report.to_str().expect("utf-8 path"),
                ])
                .output()
                .expect("redoubt runs");
            let took = t.elapsed().as_secs_f64();
            let text = String::from_utf8_lossy(&out.stdout);
            println!(
                "  plan: {took:.1} s wall, exit {:?}, load average before {}",
                out.status.code(),
                load.split_whitespace()
                    .take(3)
                    .collect::<Vec<_>>()
                    .join(" ")
            );
            if let Some(doc) = std::fs::read_to_string(&report)
                .ok()
                .and_then(|t| serde_json::from_str::<serde_json::Value>(&t).ok())
            {
                let rounds = doc["rounds"].as_array().cloned().unwrap_or_default();
                let active = |r: &serde_json::Value| r["active"].as_u64().unwrap_or(0);
                let (first, last) = (
                    rounds.first().map_or(0, active),
                    rounds.last().map_or(0, active),
                );
                println!(
                    "  generation: {} master rounds, {first} scenarios to start, {} added by \
                     generation, {} scenarios in all",
                    rounds.len(),
                    last - first,
                    doc["scenarios"].as_array().map_or(0, Vec::len)
                );
            }
            let err = String::from_utf8_lossy(&out.stderr);
            for line in err.lines().filter(|l| l.contains("note:")) {
                println!("  stderr | {line}");
            }
            for line in text.lines().take(12) {
                println!("  | {line}");
            }
            if !out.status.success() && out.status.code() != Some(1) {
                println!("  stderr: {err}");
            }
            let _ = std::fs::remove_file(&report);
        }
    }
    let _ = std::fs::remove_file(&g);
}
