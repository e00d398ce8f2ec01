//! `cargo bench --bench plan [-- NET… MASTER…] [-- write PATH]`: `redoubt plan` at depth 1
//! (links and sites) through the built binary on two threads, timed (wall), with each
//! master named (`walks`, the default, and `edge`, the hidden `--master edge`; both when
//! none is named) on each network named (both when none is):
//!
//! - `G200`: the 200-site network of `benches/scale.rs` (200 sites, 395 links, 3,903
//!   random demands, processing at every tenth site, lowered from 200 to 180 so that
//!   losing a processing site leaves gaps a purchase can close), with every processing
//!   site expandable (`expand_cost` 1, 2 or 3 by site, `expand_max` 400);
//! - `grid-50`: `fixtures/grid-50.json`.
//!
//! Prints per run the time, the exit code and the report's first lines (the plan's cost,
//! its rounds). `write PATH` only writes the G200 file.

mod common;

use std::time::Instant;

use common::Demands;

/// The G200 document with expandable processing sites; `document_of(n)` its `n`-site
/// variant (`2n − 5` links, `19.5 n` demands: the same shape, smaller).
fn document() -> serde_json::Value {
    document_of(200)
}

fn document_of(n: usize) -> serde_json::Value {
    let procs: Vec<(usize, f64)> = (0..n).step_by(10).map(|i| (i, 200.0)).collect();
    let demands = if n == 200 { 3903 } else { n * 39 / 2 };
    let mut doc = common::document(200, n, 2 * n - 5, Demands::Random(demands), &procs, 0);
    let sites = doc["sites"].as_array_mut().expect("sites");
    for (i, s) in sites.iter_mut().enumerate() {
        if i % 10 == 0 {
            s["processing"] = serde_json::json!(180);
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
    let doc = document_of(sites);
    if let Some(i) = args.iter().position(|a| a == "write") {
        let path = args.get(i + 1).expect("write PATH");
        std::fs::write(path, doc.to_string()).expect("write the network");
        return;
    }
    let g200 = std::env::temp_dir().join(format!("redoubt-plan200-{}.json", std::process::id()));
    std::fs::write(&g200, doc.to_string()).expect("write the network");
    let grid = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/grid-50.json");
    let mut nets: Vec<(&str, &std::path::Path)> = vec![("G200", &g200), ("grid-50", &grid)];
    let mut masters = vec!["walks", "edge"];
    if args.iter().any(|a| a == "G200" || a == "grid-50") {
        nets.retain(|(n, _)| args.iter().any(|a| a == n));
    }
    if args.iter().any(|a| a == "walks" || a == "edge") {
        masters.retain(|m| args.iter().any(|a| a == m));
    }
    for (name, path) in nets {
        for master in &masters {
            println!(
                "PLAN {name} (file {}): plan --depth 1 --kinds links,sites --threads 2 --master {master}",
                path.display()
            );
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
                    "-q",
                ])
                .output()
                .expect("redoubt runs");
            let took = t.elapsed().as_secs_f64();
            let text = String::from_utf8_lossy(&out.stdout);
            println!("  plan: {took:.1} s wall, exit {:?}", out.status.code());
            for line in text.lines().take(12) {
                println!("  | {line}");
            }
            if !out.status.success() {
                println!("  stderr: {}", String::from_utf8_lossy(&out.stderr));
            }
        }
    }
    let _ = std::fs::remove_file(&g200);
}
