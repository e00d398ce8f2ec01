//! Seeded random test data shared by several test files: the splitmix64 generator and the
//! random ring-plus-chords network that the approximate-engine tests audit.

use serde_json::{Value, json};

/// splitmix64 (Steele, Lea and Flood's constants, from memory; the generator of
/// `benches/common/mod.rs`): a small deterministic generator, so seeded tests are the same
/// on every run.
pub struct Rng(pub u64);

impl Rng {
    /// The next 64 random bits.
    pub fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^ (z >> 31)
    }

    /// A number in `0..n` (0 when `n` is 0).
    pub fn below(&mut self, n: usize) -> usize {
        (self.next() % n.max(1) as u64) as usize
    }
}

/// A ring of `sites` plus random chords up to `links` links (capacities 4..20, tight
/// enough that some failures short demand), `demands` random demands (required 1..8,
/// volume 2 more), and site `i`'s processing `processing(i, rng)` (drawn in site order,
/// after the chords and before the capacities), as a network file's text.
pub fn random_network(
    seed: u64,
    sites: usize,
    links: usize,
    demands: usize,
    processing: impl Fn(usize, &mut Rng) -> usize,
) -> String {
    let mut rng = Rng(seed);
    let mut edges: Vec<(usize, usize)> = (0..sites).map(|i| (i, (i + 1) % sites)).collect();
    while edges.len() < links {
        let (a, b) = (rng.below(sites), rng.below(sites));
        if a != b && !edges.contains(&(a, b)) && !edges.contains(&(b, a)) {
            edges.push((a, b));
        }
    }
    let site_docs: Vec<Value> = (0..sites)
        .map(|i| json!({"id": format!("s{i}"), "processing": processing(i, &mut rng)}))
        .collect();
    let link_docs: Vec<Value> = edges
        .iter()
        .enumerate()
        .map(|(k, &(a, b))| {
            json!({"id": format!("l{k}"), "from": format!("s{a}"), "to": format!("s{b}"),
                   "capacity": 4 + 4 * rng.below(5)})
        })
        .collect();
    let demand_docs: Vec<Value> = (0..demands)
        .map(|_| {
            let a = rng.below(sites);
            let b = (a + 1 + rng.below(sites - 1)) % sites;
            let v = 1 + rng.below(8);
            json!({"from": format!("s{a}"), "to": format!("s{b}"), "volume": v + 2, "required": v})
        })
        .collect();
    json!({"sites": site_docs, "links": link_docs, "demands": demand_docs}).to_string()
}
