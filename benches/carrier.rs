//! Output size and memory at carrier scale, through the built binary (`redoubt audit`),
//! on generated networks (deterministic; see `common`).
//!
//! - `J34`: 34 sites, 60 links, a demand between every ordered pair (1,122), processing at
//!   every fifth site: `audit --depth 2 --json FILE` (4,465 scenarios), the file's size
//!   and the run's peak memory, by default and with `--detail`.
//! - `M500`: 500 sites, 1,000 links, a demand between every ordered pair (249,500),
//!   processing at every tenth site: the seconds until the estimate line and the peak
//!   memory of `audit --shard 1/1000 --json PART --yes` (the depth-1 audit's first
//!   thousandth: the baseline, the timed sample and one outage in 1,000).
//!
//! Peak memory is the child's "Maximum resident set size" as `/usr/bin/time -v` prints it.
//! `REDOUBT_BIN=PATH` measures another build of the binary (an older one, to compare).
//! Run with `cargo bench --bench carrier -- J34 M500` (default both; a few minutes).

mod common;

use std::io::{BufRead, BufReader};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::Instant;

use common::{Demands, document};

fn binary() -> PathBuf {
    std::env::var_os("REDOUBT_BIN").map_or_else(
        || PathBuf::from(env!("CARGO_BIN_EXE_redoubt")),
        PathBuf::from,
    )
}

/// What one run of the binary under `/usr/bin/time -v` showed.
struct Measured {
    status: i32,
    /// Peak resident memory, MB.
    peak_mb: f64,
    /// Seconds from the start to the first stderr line that says `estimate`, if any.
    estimate_s: Option<f64>,
    seconds: f64,
    stderr_tail: String,
}

/// Runs `redoubt ARGS` under `/usr/bin/time -v`, reading its stderr as it comes.
fn measure(args: &[&str]) -> Measured {
    let start = Instant::now();
    let mut child = Command::new("/usr/bin/time")
        .arg("-v")
        .arg(binary())
        .args(args)
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .expect("/usr/bin/time runs (apt-get install time)");
    let mut estimate_s = None;
    let mut peak_kb = f64::NAN;
    let mut tail = Vec::new();
    for line in BufReader::new(child.stderr.take().expect("piped")).lines() {
        let line = line.unwrap_or_default();
        if estimate_s.is_none() && line.to_lowercase().contains("estimate") {
            estimate_s = Some(start.elapsed().as_secs_f64());
        }
        if let Some(v) = line
            .trim()
            .strip_prefix("Maximum resident set size (kbytes):")
        {
            peak_kb = v.trim().parse().unwrap_or(f64::NAN);
        }
        tail.push(line);
    }
    let status = child.wait().expect("wait").code().unwrap_or(-1);
    let keep = tail.len().saturating_sub(30);
    Measured {
        status,
        peak_mb: peak_kb / 1024.0,
        estimate_s,
        seconds: start.elapsed().as_secs_f64(),
        stderr_tail: tail[keep..].join("\n"),
    }
}

fn write_net(dir: &Path, name: &str, doc: &serde_json::Value) -> PathBuf {
    let path = dir.join(name);
    std::fs::write(&path, doc.to_string()).expect("write the network");
    path
}

fn size_mb(p: &Path) -> f64 {
    std::fs::metadata(p).map_or(f64::NAN, |m| m.len() as f64 / 1e6)
}

/// The `J34` network: 34 sites, 60 links, every ordered pair, processing at every fifth site.
fn j34_doc() -> serde_json::Value {
    let n = 34;
    let procs: Vec<(usize, f64)> = (0..n).step_by(5).map(|i| (i, 60.0)).collect();
    document(34, n, 60, Demands::Random(n * (n - 1)), &procs, 0)
}

/// The `M500` network: 500 sites, 1,000 links, every ordered pair, processing at every
/// tenth site.
fn m500_doc() -> serde_json::Value {
    let n = 500;
    let procs: Vec<(usize, f64)> = (0..n).step_by(10).map(|i| (i, 2000.0)).collect();
    document(500, n, 1000, Demands::Random(n * (n - 1)), &procs, 0)
}

fn j34(dir: &Path) {
    let net = write_net(dir, "j34.json", &j34_doc());
    let net = net.to_str().expect("utf-8 path");
    for (label, extra) in [("default", None), ("--detail", Some("--detail"))] {
        let out = dir.join(format!("j34-{}.json", label.trim_start_matches('-')));
        let out_s = out.to_str().expect("utf-8 path");
        let mut args = vec![
            "audit", net, "--depth", "2", "--yes", "--quiet", "--json", out_s,
        ];
        args.extend(extra);
        let m = measure(&args);
        if m.status > 1 {
            println!("J34 {label}: exit {}\n{}", m.status, m.stderr_tail);
            continue;
        }
        println!(
            "J34 34 sites, 60 links, 1,122 demands, depth 2 ({label}): JSON {:.1} MB, peak {:.0} MB, {:.1} s",
            size_mb(&out),
            m.peak_mb,
            m.seconds
        );
        let _ = std::fs::remove_file(&out);
    }
}

fn m500(dir: &Path) {
    let t = Instant::now();
    let net = write_net(dir, "m500.json", &m500_doc());
    println!(
        "M500 network written: {:.1} MB in {:.1} s",
        size_mb(&net),
        t.elapsed().as_secs_f64()
    );
    let part = dir.join("m500.part");
    let args = [
        "audit",
        net.to_str().expect("utf-8 path"),
        "--kinds",
        "links,sites",
        "--yes",
        "--shard",
        "1/1000",
        "--json",
        part.to_str().expect("utf-8 path"),
    ];
    let m = measure(&args);
    println!(
        "M500 500 sites, 1,000 links, 249,500 demands, depth 1, shard 1/1000: exit {}, estimate after {}, peak {:.0} MB, {:.1} s",
        m.status,
        m.estimate_s
            .map_or("(no estimate line)".into(), |s| format!("{s:.1} s")),
        m.peak_mb,
        m.seconds
    );
    if m.status != 0 {
        println!("{}", m.stderr_tail);
    }
}

fn main() {
    let args: Vec<String> = std::env::args()
        .skip(1)
        .filter(|a| !a.starts_with('-'))
        .collect();
    let chosen: Vec<&str> = ["J34", "M500"]
        .into_iter()
        .filter(|c| args.is_empty() || args.iter().any(|a| a == c))
        .collect();
    if let Some(to) = std::env::var_os("REDOUBT_WRITE_NETS") {
        // Only write the two networks (j34.json, m500.json) into that folder.
        let to = PathBuf::from(to);
        std::fs::create_dir_all(&to).expect("folder");
        write_net(&to, "j34.json", &j34_doc());
        write_net(&to, "m500.json", &m500_doc());
        println!("wrote {}/j34.json and m500.json", to.display());
        return;
    }
    let dir = std::env::temp_dir().join(format!("redoubt-carrier-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temp dir");
    println!("binary: {}", binary().display());
    if chosen.contains(&"J34") {
        j34(&dir);
    }
    if chosen.contains(&"M500") {
        m500(&dir);
    }
    let _ = std::fs::remove_dir_all(&dir);
}
