//! Speed and memory at scale, on generated networks (deterministic; see `common`).
//! Run with `cargo bench --bench scale -- NAME…` (default: all).
mod common;

use std::time::Instant;

use common::{Demands, generate, peak_mb};
use redoubt::scenario::Outage;
use redoubt::solve::colgen;

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let want = |n: &str| args.iter().any(|a| a == n);
    if want("probe200") {
        let procs: Vec<(usize, f64)> = (0..200).step_by(10).map(|i| (i, 250.0)).collect();
        let net = generate(200, 200, 395, Demands::Random(3903), &procs);
        let t = Instant::now();
        let b = colgen::evaluate_walks(&net, &Outage::default(), None).unwrap();
        println!(
            "200 baseline {:.2}s {:?} served {} of {} peak {:.0}",
            t.elapsed().as_secs_f64(),
            b.stats,
            b.evaluation.served_required,
            b.evaluation.surviving_required,
            peak_mb()
        );
        let o = redoubt::scenario::Scenario::new(&net, &[redoubt::scenario::Element::Link(7)])
            .outage(&net);
        let t = Instant::now();
        let c = colgen::evaluate_walks(&net, &o, Some(&b.basis)).unwrap();
        println!(
            "200 one link {:.2}s {:?} peak {:.0}",
            t.elapsed().as_secs_f64(),
            c.stats,
            peak_mb()
        );
    }
    if want("probe400") {
        let procs: Vec<(usize, f64)> = (0..400).step_by(20).map(|i| (i, 60.0)).collect();
        let net = generate(400, 400, 760, Demands::OnePerSource, &procs);
        let t = Instant::now();
        let b = colgen::evaluate_walks(&net, &Outage::default(), None).unwrap();
        println!(
            "400 baseline {:.2}s {:?} served {} of {} peak {:.0}",
            t.elapsed().as_secs_f64(),
            b.stats,
            b.evaluation.served_required,
            b.evaluation.surviving_required,
            peak_mb()
        );
    }
}
