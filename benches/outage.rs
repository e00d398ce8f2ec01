//! Prints solve figures for the 50-site, 88-link, 660-demand fixture: model size and wall
//! time of one outage (baseline and the first few single-link failures), and of a depth-1
//! link audit on all cores, then the same audit under the deployed routings (nearest,
//! steered: fixed shortest-path routes, trees reused where a failure does not touch them).
//! Run with `cargo bench --bench outage`.

use std::time::Instant;

use redoubt::audit::{self, RunOptions};
use redoubt::model::Network;
use redoubt::routing::{self, Mode, spt::Trees};
use redoubt::scenario::{self, Element, Kinds, Outage, Scenario};
use redoubt::solve::{self, flow, lp};

fn main() {
    let text = std::fs::read_to_string("fixtures/grid-50.json").expect("run from the project root");
    let net = Network::from_json(&text).expect("valid fixture");
    let mut model = lp::Lp::new(true);
    flow::build(
        &mut model,
        &net,
        &Outage::default(),
        flow::Cap::Required,
        1.0,
        None,
    );
    println!(
        "grid-50: {} sites, {} links, {} demands; LP {} variables, {} rows",
        net.sites.len(),
        net.links.len(),
        net.demands.len(),
        model.num_vars(),
        model.rows.len()
    );
    let mut outages = vec![Outage::default()];
    for l in 0..4 {
        outages.push(Scenario::new(&net, &[Element::Link(l.into())]).outage(&net));
    }
    for (i, o) in outages.iter().enumerate() {
        let t = Instant::now();
        let e = solve::evaluate(&net, o).expect("solves");
        println!(
            "outage {i}: evaluate (served + throughput LPs + certificate) {:.3} s, gap {:.1e}",
            t.elapsed().as_secs_f64(),
            e.certified_gap()
        );
    }
    let scenarios = scenario::enumerate(
        &net,
        Kinds {
            links: true,
            sites: false,
            groups: false,
        },
        1,
    );
    let n = scenarios.len();
    let t = Instant::now();
    audit::run(&net, scenarios.clone(), RunOptions::default()).expect("solves");
    println!(
        "depth-1 link audit, best re-route: {n} scenarios in {:.1} s on {} threads",
        t.elapsed().as_secs_f64(),
        rayon::current_num_threads()
    );
    let trees = Trees::baseline(&net);
    for mode in [Mode::Nearest, Mode::Steered] {
        let mut recomputed = 0;
        for o in &outages {
            let t = Instant::now();
            let r = routing::evaluate(&net, &trees, o, mode).expect("solves");
            recomputed += r.trees_recomputed;
            println!(
                "{}: one outage {:.3} s (served {:.3})",
                mode.name(),
                t.elapsed().as_secs_f64(),
                r.eval.served_required
            );
        }
        println!(
            "{}: {recomputed} of {} shortest-path trees recomputed over the {} outages above",
            mode.name(),
            net.sites.len() * outages.len(),
            outages.len()
        );
        let t = Instant::now();
        routing::run(&net, scenarios.clone(), mode, RunOptions::default(), false).expect("solves");
        println!(
            "depth-1 link audit, {}: {n} scenarios in {:.1} s on {} threads",
            mode.name(),
            t.elapsed().as_secs_f64(),
            rayon::current_num_threads()
        );
    }
}
