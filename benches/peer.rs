//! redoubt's audit beside a warm-started simplex peer, on the same generated files.
//!
//! Networks (deterministic, see `common::document`):
//! - `T12`: 12 sites, 18 links, 66 demands, 2 shared-risk groups; depth 1 and depth 2.
//! - `T22`: 22 sites, 36 links, 200 demands, 3 groups; depth 1 and depth 2.
//! - `B`: 50 sites, 88 links, 662 demands, 4 groups; depth 1 and every double failure.
//! - `G200`: 200 sites, 395 links, 3,903 demands (every site a source), 107 processing
//!   sites, 6 groups; depth 1 (601 outages).
//!
//! Every audit fails links, sites and groups. redoubt runs through the audit's own batch
//! (`audit::Batch`: baseline, then every outage from its parent, thin evaluations, two
//! threads), timed from reading the JSON text to the last verified outage. The peer is
//! `peer_warm.py` (HiGHS, the source-aggregated two-layer LP built once and re-solved warm
//! per scenario) with `--jobs 2`, timed as a process (interpreter start included; its own
//! `elapsed_s` is printed beside it). Its `served_required` is compared with redoubt's for
//! every scenario (relative to Σ required, 1e-6): an independent formulation and solver.
//! Without `python3` + `highspy` the peer is skipped with a message.
//!
//! Built with `--features highs`, each depth also prints redoubt with HiGHS (its first LP
//! backend and large walk masters) beside the default pure-Rust path (HiGHS turned off in
//! the same process, `solve::highs::set_enabled`), and a warm HiGHS edge-LP baseline of our
//! own in Rust (`warm_peer`: the peer's method — the source-aggregated two-layer LP of the
//! intact network built once per thread, each scenario re-solved by dual simplex without
//! presolve from the baseline's optimal basis after zeroing the failed rows and stranded
//! demands' bounds, then restoring them; two threads), with its served values compared.
//!
//! Run: `cargo bench --bench peer` (all), or name networks: `-- T12 T22 B G200`;
//! `-- nopeer` skips the peer, `-- nowarm` the warm HiGHS baseline, `-- depth1` skips every depth
//! but 1. The peer script is
//! looked up at `$PEER_WARM`, else `../shared/peers/peer_warm.py` and
//! `../../shared/peers/peer_warm.py` from the crate.

mod common;

use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;

use common::{Demands, document, peak_mb};
use redoubt::audit::{Batch, Keep, RunOptions};
use redoubt::model::Network;
use redoubt::scenario::{self, Kinds};
use redoubt::solve::Engine;

const TWO: RunOptions = RunOptions {
    threads: Some(2),
    progress: false,
};

const ALL: Kinds = Kinds {
    links: true,
    sites: true,
    groups: true,
};

/// One generated network: its name, JSON text and the depths to audit.
struct Case {
    name: &'static str,
    text: String,
    depths: Vec<usize>,
}

fn cases(chosen: &[&str]) -> Vec<Case> {
    let want = |n: &str| chosen.is_empty() || chosen.contains(&n);
    let mut out = Vec::new();
    if want("T12") {
        let doc = document(
            12,
            12,
            18,
            Demands::Random(66),
            &[(2, 30.0), (6, 25.0), (9, 20.0)],
            2,
        );
        out.push(Case {
            name: "T12",
            text: doc.to_string(),
            depths: vec![1, 2],
        });
    }
    if want("T22") {
        let doc = document(
            22,
            22,
            36,
            Demands::Random(200),
            &[(1, 60.0), (8, 50.0), (15, 40.0), (19, 45.0)],
            3,
        );
        out.push(Case {
            name: "T22",
            text: doc.to_string(),
            depths: vec![1, 2],
        });
    }
    if want("B") {
        let doc = document(
            50,
            50,
            88,
            Demands::Random(662),
            &[
                (3, 160.0),
                (14, 120.0),
                (27, 150.0),
                (38, 110.0),
                (45, 90.0),
            ],
            4,
        );
        out.push(Case {
            name: "B",
            text: doc.to_string(),
            depths: vec![1, 2],
        });
    }
    if want("G200") {
        // 107 processing sites: i ↦ 107·i mod 200 is a permutation of 0..200.
        let procs: Vec<(usize, f64)> = (0..200)
            .filter(|i| (107 * i) % 200 < 107)
            .map(|i| (i, 30.0 + 10.0 * (i % 3) as f64))
            .collect();
        let doc = document(200, 200, 395, Demands::Random(3903), &procs, 6);
        out.push(Case {
            name: "G200",
            text: doc.to_string(),
            depths: vec![1],
        });
    }
    out
}

/// The peer script, if found.
fn peer_script() -> Option<PathBuf> {
    if let Ok(p) = std::env::var("PEER_WARM") {
        return Some(PathBuf::from(p));
    }
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    [
        "../shared/peers/peer_warm.py",
        "../../shared/peers/peer_warm.py",
    ]
    .iter()
    .map(|p| root.join(p))
    .find(|p| p.exists())
}

/// Whether `python3` can import highspy and numpy.
fn peer_ready() -> bool {
    Command::new("python3")
        .args(["-c", "import highspy, numpy"])
        .output()
        .is_ok_and(|o| o.status.success())
}

/// Largest resident set of any waited-for child process so far, in MB.
fn children_peak_mb() -> f64 {
    // SAFETY: getrusage writes into the zeroed struct we own.
    unsafe {
        let mut r: libc::rusage = std::mem::zeroed();
        if libc::getrusage(libc::RUSAGE_CHILDREN, &mut r) == 0 {
            r.ru_maxrss as f64 / 1024.0
        } else {
            f64::NAN
        }
    }
}

/// What one side measured: wall seconds, served per scenario name, and notes.
struct Side {
    seconds: f64,
    /// The peer's own `elapsed_s` (interpreter start and file reading excluded).
    elapsed: f64,
    served: HashMap<String, f64>,
}

fn redoubt_audit(text: &str, depth: usize) -> (Side, String) {
    let t = Instant::now();
    let net = Network::from_json(text).expect("generated network is valid");
    let mut batch =
        Batch::new(&net, scenario::lazy(&net, ALL, depth), Engine::Walks).keeping(Keep::Thin);
    let outages = batch.outages();
    let tb = Instant::now();
    batch.seed(
        redoubt::audit::probe(&net, Engine::Walks, None).expect("baseline"),
        None,
    );
    let baseline = tb.elapsed().as_secs_f64();
    batch.solve_rest(&net, TWO, None).expect("solves");
    let audit = batch.into_audit();
    let seconds = t.elapsed().as_secs_f64();
    let st = audit.stats;
    let served = (0..audit.scenarios.len())
        .map(|i| {
            (
                audit.scenarios[i].failed.join(","),
                audit.eval(i).served_required,
            )
        })
        .collect();
    let unproven = audit
        .evaluations
        .iter()
        .filter(|e| !e.verification.proven)
        .count();
    let note = format!(
        "{outages} outages, baseline {baseline:.2} s | no-flow {} repair {} colgen {} fallback {} \
         | master solves {} rounds {} max columns {} | unproven {unproven} | peak MB {:.0}",
        st.no_flow,
        st.repaired,
        st.generated,
        st.fallback,
        st.lp_solves,
        st.rounds,
        st.max_columns,
        peak_mb()
    );
    (
        Side {
            seconds,
            elapsed: seconds,
            served,
        },
        note,
    )
}

fn peer_audit(script: &Path, file: &Path, depth: usize) -> Option<(Side, String)> {
    let out = file.with_extension(format!("peer{depth}.json"));
    let t = Instant::now();
    let status = Command::new("python3")
        .arg(script)
        .arg(file)
        .args(["--depth", &depth.to_string()])
        .args(["--kinds", "links,sites,groups", "--jobs", "2", "--out"])
        .arg(&out)
        .stdout(std::process::Stdio::null())
        .status()
        .ok()?;
    let seconds = t.elapsed().as_secs_f64();
    if !status.success() {
        println!("  peer failed: {status}");
        return None;
    }
    let doc: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&out).ok()?).ok()?;
    let mut served = HashMap::new();
    for s in doc["scenarios"].as_array()? {
        let mut names: Vec<String> = s["failed"]
            .as_array()?
            .iter()
            .filter_map(|n| n.as_str().map(String::from))
            .collect();
        names.sort();
        served.insert(names.join(","), s["served_required"].as_f64()?);
    }
    let note = format!(
        "own elapsed {} s, peak MB of a child {:.0}",
        doc["elapsed_s"],
        children_peak_mb()
    );
    let elapsed = doc["elapsed_s"].as_f64().unwrap_or(seconds);
    Some((
        Side {
            seconds,
            elapsed,
            served,
        },
        note,
    ))
}

/// The warm HiGHS edge-LP baseline (see the module comment), built with `--features highs`.
#[cfg(feature = "highs")]
mod warm_peer {
    use std::collections::HashMap;
    use std::time::Instant;

    use highs::{ColProblem, Model};
    use highs_sys::HighsInt;
    use redoubt::model::Network;
    use redoubt::scenario::{self, Outage};
    use redoubt::solve::flow::{self, Cap, FlowIndex};
    use redoubt::solve::lp::{Lp, Scaling, Sense};

    /// One LP (required or volume caps) of the intact network, loaded in HiGHS with the
    /// optimal basis of its baseline solve.
    struct Warm {
        model: Model,
        index: FlowIndex,
        scaled: Lp,
        objective_scale: f64,
        col_basis: Vec<HighsInt>,
        row_basis: Vec<HighsInt>,
    }

    impl Warm {
        /// Builds and solves the baseline LP of `net` with caps `cap`. None when the
        /// model is empty.
        fn new(net: &Network, cap: Cap) -> Option<Warm> {
            let mut lp = Lp::new(true);
            let index = flow::build(&mut lp, net, &Outage::default(), cap, 1.0, None);
            if lp.num_vars() == 0 {
                return None;
            }
            let scaling = Scaling::of(&lp);
            let scaled = scaling.apply(&lp);
            let mut pb = ColProblem::new();
            let rows: Vec<highs::Row> = scaled
                .rows
                .iter()
                .map(|r| match r.sense {
                    Sense::Le => pb.add_row(f64::NEG_INFINITY..=r.rhs),
                    Sense::Ge => pb.add_row(r.rhs..=f64::INFINITY),
                    Sense::Eq => pb.add_row(r.rhs..=r.rhs),
                })
                .collect();
            let mut cols: Vec<Vec<(highs::Row, f64)>> = vec![Vec::new(); scaled.num_vars()];
            for (i, r) in scaled.rows.iter().enumerate() {
                for &(j, a) in &r.coeffs {
                    cols[j].push((rows[i], a));
                }
            }
            for (j, c) in cols.iter().enumerate() {
                pb.add_column(scaled.objective[j], scaled.lower[j]..=scaled.upper[j], c);
            }
            let mut model = pb.optimise(highs::Sense::Maximise);
            model.make_quiet();
            model.set_option("solver", "simplex");
            model.set_option("simplex_strategy", 1);
            model.set_option("threads", 1);
            let ptr = model.as_mut_ptr();
            // SAFETY: `ptr` is the live HiGHS instance owned by `model`.
            unsafe {
                highs_sys::Highs_run(ptr);
                assert_eq!(
                    highs_sys::Highs_getModelStatus(ptr),
                    highs_sys::MODEL_STATUS_OPTIMAL,
                    "baseline solve"
                );
            }
            model.set_option("presolve", "off");
            let mut col_basis = vec![0; scaled.num_vars()];
            let mut row_basis = vec![0; scaled.rows.len()];
            // SAFETY: the arrays have one entry per column and per row.
            unsafe {
                highs_sys::Highs_getBasis(
                    model.as_mut_ptr(),
                    col_basis.as_mut_ptr(),
                    row_basis.as_mut_ptr(),
                );
            }
            Some(Warm {
                model,
                index,
                scaled,
                objective_scale: scaling.objective,
                col_basis,
                row_basis,
            })
        }

        /// The LP's optimum under `outage`: failed arcs' and sites' rows and stranded
        /// demands' bounds set to 0, re-solved from the baseline basis, then restored.
        fn solve(&mut self, net: &Network, outage: &Outage) -> f64 {
            let alive = outage.site_alive(net);
            let mut rows = Vec::new();
            for (a, arc) in net.arcs.iter().enumerate() {
                if outage.links.contains(&arc.link) || !alive[arc.from] || !alive[arc.to] {
                    rows.extend(self.index.arc_row[a]);
                }
            }
            for (v, up) in alive.iter().enumerate() {
                if !up {
                    rows.extend(self.index.site_row[v]);
                }
            }
            let cols: Vec<usize> = net
                .demands
                .iter()
                .enumerate()
                .filter(|(_, d)| !alive[d.from] || !alive[d.to])
                .filter_map(|(d, _)| self.index.demand_var[d])
                .collect();
            let ptr = self.model.as_mut_ptr();
            // SAFETY: `ptr` is the live instance; rows and columns are in range; the basis
            // arrays have one entry per column and row.
            unsafe {
                for &r in &rows {
                    highs_sys::Highs_changeRowBounds(ptr, r as HighsInt, f64::NEG_INFINITY, 0.0);
                }
                for &c in &cols {
                    highs_sys::Highs_changeColBounds(ptr, c as HighsInt, 0.0, 0.0);
                }
                highs_sys::Highs_setBasis(ptr, self.col_basis.as_ptr(), self.row_basis.as_ptr());
                highs_sys::Highs_run(ptr);
                assert_eq!(
                    highs_sys::Highs_getModelStatus(ptr),
                    highs_sys::MODEL_STATUS_OPTIMAL,
                    "scenario solve"
                );
                let value = highs_sys::Highs_getObjectiveValue(ptr) / self.objective_scale;
                for &r in &rows {
                    let rhs = self.scaled.rows[r].rhs;
                    highs_sys::Highs_changeRowBounds(ptr, r as HighsInt, f64::NEG_INFINITY, rhs);
                }
                for &c in &cols {
                    let (lo, hi) = (self.scaled.lower[c], self.scaled.upper[c]);
                    highs_sys::Highs_changeColBounds(ptr, c as HighsInt, lo, hi);
                }
                value
            }
        }
    }

    /// Every scenario of `net` (links, sites and groups to `depth`) solved warm on two
    /// threads (scenarios dealt round-robin, each thread with its own two LPs): wall
    /// seconds and served_required per scenario name.
    pub fn audit(text: &str, depth: usize) -> (f64, HashMap<String, f64>) {
        let t = Instant::now();
        let net = Network::from_json(text).expect("valid");
        let list: Vec<scenario::Scenario> = scenario::lazy(&net, super::ALL, depth).collect();
        let volume = net.demands.iter().any(|d| d.volume > d.required);
        let served: Vec<(String, f64)> = std::thread::scope(|scope| {
            let handles: Vec<_> = (0..2)
                .map(|k| {
                    let (net, list) = (&net, &list);
                    scope.spawn(move || {
                        let mut req = Warm::new(net, Cap::Required);
                        let mut vol = if volume {
                            Warm::new(net, Cap::Volume)
                        } else {
                            None
                        };
                        let mut out = Vec::new();
                        for sc in list.iter().skip(k).step_by(2) {
                            let outage = sc.outage(net);
                            let served = req.as_mut().map_or(0.0, |w| w.solve(net, &outage));
                            if let Some(w) = vol.as_mut() {
                                w.solve(net, &outage);
                            }
                            out.push((sc.failed.join(","), served));
                        }
                        out
                    })
                })
                .collect();
            handles
                .into_iter()
                .flat_map(|h| h.join().expect("peer thread"))
                .collect()
        });
        (t.elapsed().as_secs_f64(), served.into_iter().collect())
    }
}

/// How many scenarios of `ours` differ from `theirs` by more than 1e-6 of `total` (or are
/// missing there).
fn disagreements(ours: &HashMap<String, f64>, theirs: &HashMap<String, f64>, total: f64) -> usize {
    ours.iter()
        .filter(|(k, v)| {
            theirs
                .get(*k)
                .is_none_or(|p| (*v - p).abs() > 1e-6 * total.max(1.0))
        })
        .count()
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let chosen: Vec<&str> = ["T12", "T22", "B", "G200"]
        .into_iter()
        .filter(|n| args.iter().any(|a| a == n))
        .collect();
    let skip_peer = args.iter().any(|a| a == "nopeer");
    let peer = if skip_peer {
        None
    } else {
        match peer_script() {
            Some(p) if peer_ready() => Some(p),
            Some(_) => {
                println!(
                    "peer skipped: python3 cannot import highspy and numpy (pip install highspy numpy)"
                );
                None
            }
            None => {
                println!("peer skipped: peer_warm.py not found (set PEER_WARM)");
                None
            }
        }
    };
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("target/peer-bench");
    std::fs::create_dir_all(&dir).expect("bench folder");
    for case in cases(&chosen) {
        let file = dir.join(format!("{}.json", case.name));
        std::fs::write(&file, &case.text).expect("network file");
        let net = Network::from_json(&case.text).expect("valid");
        let total_required: f64 = net.demands.iter().map(|d| d.required).sum();
        println!(
            "{}: {} sites, {} links, {} demands, {} groups ({})",
            case.name,
            net.sites.len(),
            net.links.len(),
            net.demands.len(),
            net.groups.len(),
            file.display()
        );
        let only_depth_1 = args.iter().any(|a| a == "depth1");
        for &depth in case.depths.iter().filter(|&&d| d == 1 || !only_depth_1) {
            #[cfg(feature = "highs")]
            redoubt::solve::highs::set_enabled(false);
            let (ours, note) = redoubt_audit(&case.text, depth);
            println!(
                "  depth {depth}: {} scenarios | redoubt {:.2} s | {note}",
                ours.served.len(),
                ours.seconds
            );
            #[cfg(feature = "highs")]
            {
                redoubt::solve::highs::set_enabled(true);
                let (with, hnote) = redoubt_audit(&case.text, depth);
                println!(
                    "  depth {depth}: redoubt with highs {:.2} s ({:.2}x faster than the default) | {hnote}",
                    with.seconds,
                    ours.seconds / with.seconds
                );
                if !args.iter().any(|a| a == "nowarm") {
                    let (warm_s, warm) = warm_peer::audit(&case.text, depth);
                    println!(
                        "  depth {depth}: warm HiGHS edge LP (Rust, 2 threads) {warm_s:.2} s | \
                         ratio warm/redoubt-highs {:.2}x, warm/redoubt-default {:.2}x | \
                         served differs from redoubt in {} of {} scenarios (highs) and {} (default)",
                        warm_s / with.seconds,
                        warm_s / ours.seconds,
                        disagreements(&with.served, &warm, total_required),
                        with.served.len(),
                        disagreements(&ours.served, &warm, total_required),
                    );
                }
            }
            let Some(script) = &peer else { continue };
            let Some((theirs, pnote)) = peer_audit(script, &file, depth) else {
                continue;
            };
            let disagree = disagreements(&ours.served, &theirs.served, total_required);
            println!(
                "  depth {depth}: peer {:.2} s ({pnote}) | ratio peer/redoubt {:.1}x (by the peer's own elapsed: {:.1}x) | served differs in {disagree} of {} scenarios",
                theirs.seconds,
                theirs.seconds / ours.seconds,
                theirs.elapsed / ours.seconds,
                ours.served.len()
            );
        }
    }
}
