//! Geometry of the report's topology map: where sites go when the file gives no positions
//! (a seeded, deterministic stress-majorisation layout) and where labels go so that no
//! two label boxes overlap and no label sits on a link (a greedy candidate search).
//!
//! Everything here is plain sequential floating point in a fixed order, so the same
//! network gives the same coordinates, to the bit, on every run and at any thread count.

use crate::model::Network;

/// A axis-aligned box: left, top, right, bottom in drawing units.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Box2 {
    pub x0: f64,
    pub y0: f64,
    pub x1: f64,
    pub y1: f64,
}

impl Box2 {
    /// The box of width `w`, height `h` centred on `(cx, cy)`.
    pub fn centred(cx: f64, cy: f64, w: f64, h: f64) -> Box2 {
        Box2 {
            x0: cx - w / 2.0,
            y0: cy - h / 2.0,
            x1: cx + w / 2.0,
            y1: cy + h / 2.0,
        }
    }

    /// Whether the two boxes share interior points. O(1).
    pub fn overlaps(&self, o: &Box2) -> bool {
        self.x0 < o.x1 && o.x0 < self.x1 && self.y0 < o.y1 && o.y0 < self.y1
    }

    /// Whether the segment `a`–`b` passes through the box (Liang–Barsky clipping). O(1).
    pub fn crosses(&self, a: (f64, f64), b: (f64, f64)) -> bool {
        let (dx, dy) = (b.0 - a.0, b.1 - a.1);
        let mut t0: f64 = 0.0;
        let mut t1: f64 = 1.0;
        for (p, q) in [
            (-dx, a.0 - self.x0),
            (dx, self.x1 - a.0),
            (-dy, a.1 - self.y0),
            (dy, self.y1 - a.1),
        ] {
            if p == 0.0 {
                if q < 0.0 {
                    return false;
                }
            } else {
                let r = q / p;
                if p < 0.0 {
                    t0 = t0.max(r);
                } else {
                    t1 = t1.min(r);
                }
            }
        }
        t0 < t1
    }

    /// The box's centre.
    pub fn centre(&self) -> (f64, f64) {
        ((self.x0 + self.x1) / 2.0, (self.y0 + self.y1) / 2.0)
    }
}

/// A generous estimate of the width of `text` at `size` px in a sans-serif font: each
/// character at the width of a wide sans face (DejaVu Sans, one of the widest common
/// ones), so the real text fits in the box. O(characters).
pub fn text_width(text: &str, size: f64) -> f64 {
    let em: f64 = text
        .chars()
        .map(|c| match c {
            'i' | 'j' | 'l' | '.' | ',' | ':' | ';' | '\'' | '|' | '!' => 0.34,
            'f' | 't' | 'r' | '-' | '(' | ')' | ' ' | 'I' => 0.46,
            'm' | 'w' | 'M' | 'W' | '%' | '@' => 1.0,
            c if c.is_ascii_uppercase() => 0.78,
            c if c.is_ascii_digit() => 0.66,
            c if c.is_ascii() => 0.64,
            _ => 1.0,
        })
        .sum();
    em * size
}

/// splitmix64: a small seeded generator (Steele, Lea, Flood 2014), for the layout's start.
struct SplitMix(u64);

impl SplitMix {
    fn next(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^= z >> 31;
        (z >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// The seed of the layout's start positions (fixed: the same network, the same drawing).
const SEED: u64 = 0x0072_6564_6f75_6274;

/// Hop distances between all sites over the links (both directions), by one breadth-first
/// search per site: O(n·(n + m)). Sites in different components are one hop further apart
/// than the largest finite distance.
fn hop_distances(net: &Network) -> Vec<Vec<f64>> {
    let n = net.sites.len();
    let mut adj = vec![Vec::new(); n];
    for l in &net.links {
        adj[l.from].push(l.to.0);
        adj[l.to].push(l.from.0);
    }
    let mut d = vec![vec![f64::INFINITY; n]; n];
    let mut far: f64 = 1.0;
    for (s, row) in d.iter_mut().enumerate() {
        let mut queue = std::collections::VecDeque::from([s]);
        row[s] = 0.0;
        while let Some(v) = queue.pop_front() {
            for &w in &adj[v] {
                if row[w].is_infinite() {
                    row[w] = row[v] + 1.0;
                    far = far.max(row[w]);
                    queue.push_back(w);
                }
            }
        }
    }
    for row in &mut d {
        for x in row.iter_mut() {
            if x.is_infinite() {
                *x = far + 1.0;
            }
        }
    }
    d
}

/// Site positions by stress majorisation (Gansner, Koren and North, "Graph drawing by
/// stress majorization", 2004): target distance = hop distance, weight = distance⁻²,
/// Gauss–Seidel updates from a seeded random start. Then rotated so the widest spread is
/// horizontal (principal axis) and flipped so the first site is on the left half.
/// O(iterations · n²) with iterations ≤ 300, fewer for large networks (about 2·10⁸
/// updates at most). Returns unit-free coordinates; deterministic (fixed seed, fixed order).
pub fn stress_layout(net: &Network) -> Vec<(f64, f64)> {
    let n = net.sites.len();
    if n == 0 {
        return Vec::new();
    }
    if n == 1 {
        return vec![(0.0, 0.0)];
    }
    let d = hop_distances(net);
    let mut rng = SplitMix(SEED);
    let scale = (n as f64).sqrt();
    let mut p: Vec<(f64, f64)> = (0..n)
        .map(|_| (rng.next() * scale, rng.next() * scale))
        .collect();
    let iterations = (200_000_000 / (n * n)).clamp(10, 300);
    for _ in 0..iterations {
        let mut moved: f64 = 0.0;
        for i in 0..n {
            let (mut sx, mut sy, mut sw) = (0.0, 0.0, 0.0);
            for j in 0..n {
                if i == j {
                    continue;
                }
                let dij = d[i][j];
                let w = 1.0 / (dij * dij);
                let (dx, dy) = (p[i].0 - p[j].0, p[i].1 - p[j].1);
                let len = (dx * dx + dy * dy).sqrt();
                let (ux, uy) = if len > 1e-9 {
                    (dx / len, dy / len)
                } else {
                    // Coincident sites: pushed apart along a fixed direction per pair.
                    let a = (i * 7 + j * 13) as f64;
                    (a.cos(), a.sin())
                };
                sx += w * (p[j].0 + dij * ux);
                sy += w * (p[j].1 + dij * uy);
                sw += w;
            }
            let next = (sx / sw, sy / sw);
            moved = moved.max((next.0 - p[i].0).abs() + (next.1 - p[i].1).abs());
            p[i] = next;
        }
        if moved < 1e-4 {
            break;
        }
    }
    principal(p)
}

/// Centres the points and rotates them so the principal axis is horizontal, then flips
/// so that site 0 lies left of the centre and the second axis keeps site 0 above. O(n).
fn principal(mut p: Vec<(f64, f64)>) -> Vec<(f64, f64)> {
    let n = p.len() as f64;
    let (mx, my) = p
        .iter()
        .fold((0.0, 0.0), |a, q| (a.0 + q.0 / n, a.1 + q.1 / n));
    let (mut sxx, mut sxy, mut syy) = (0.0, 0.0, 0.0);
    for q in &mut p {
        q.0 -= mx;
        q.1 -= my;
        sxx += q.0 * q.0;
        sxy += q.0 * q.1;
        syy += q.1 * q.1;
    }
    let theta = 0.5 * (2.0 * sxy).atan2(sxx - syy);
    let (c, s) = (theta.cos(), theta.sin());
    let mut r: Vec<(f64, f64)> = p
        .iter()
        .map(|q| (q.0 * c + q.1 * s, -q.0 * s + q.1 * c))
        .collect();
    if r[0].0 > 0.0 {
        r.iter_mut().for_each(|q| q.0 = -q.0);
    }
    if r[0].1 > 0.0 {
        r.iter_mut().for_each(|q| q.1 = -q.1);
    }
    r
}

/// Scales `p` into a `w` × `h` drawing with margin `m`, one scale for both axes (the
/// shape is kept), centred. `flip_y` draws larger y higher up (file positions, as on a
/// map). O(n).
pub fn fit(p: &[(f64, f64)], w: f64, h: f64, m: f64, flip_y: bool) -> Vec<(f64, f64)> {
    if p.is_empty() {
        return Vec::new();
    }
    let fold = |f: fn(&(f64, f64)) -> f64| {
        p.iter()
            .map(f)
            .fold((f64::INFINITY, f64::NEG_INFINITY), |a, v| {
                (a.0.min(v), a.1.max(v))
            })
    };
    let (x0, x1) = fold(|q| q.0);
    let (y0, y1) = fold(|q| q.1);
    let sx = if x1 > x0 {
        (w - 2.0 * m) / (x1 - x0)
    } else {
        f64::INFINITY
    };
    let sy = if y1 > y0 {
        (h - 2.0 * m) / (y1 - y0)
    } else {
        f64::INFINITY
    };
    let s = sx.min(sy);
    let s = if s.is_finite() { s } else { 0.0 };
    let (ox, oy) = ((w - (x1 - x0) * s) / 2.0, (h - (y1 - y0) * s) / 2.0);
    p.iter()
        .map(|q| {
            let y = if flip_y { y1 - q.1 } else { q.1 - y0 };
            (ox + (q.0 - x0) * s, oy + y * s)
        })
        .collect()
}

/// The drawing's height for a layout of spread `p` at width `w`: the layout's aspect,
/// kept between 0.45 and 0.85 of the width. O(n).
pub fn height_for(p: &[(f64, f64)], w: f64) -> f64 {
    let span = |f: fn(&(f64, f64)) -> f64| {
        let (a, b) = p
            .iter()
            .map(f)
            .fold((f64::INFINITY, f64::NEG_INFINITY), |a, v| {
                (a.0.min(v), a.1.max(v))
            });
        if b > a { b - a } else { 0.0 }
    };
    let (sx, sy) = (span(|q| q.0), span(|q| q.1));
    let aspect = if sx > 0.0 { sy / sx } else { 1.0 };
    (w * aspect.clamp(0.45, 0.85)).round()
}

/// What a label must avoid, and the labels placed so far.
pub struct Placer {
    /// Placed label boxes and site markers: a new label may not overlap any.
    pub taken: Vec<Box2>,
    /// Every drawn line segment: a label should not lie on one.
    pub lines: Vec<((f64, f64), (f64, f64))>,
    /// The drawing's extent: labels stay inside.
    pub bounds: Box2,
}

impl Placer {
    /// The cost of putting a label at `b`: 1000 per overlap with a taken box, 1000 when
    /// outside the drawing, 10 per crossed line except `own` (the label's own link, which
    /// counts 1000: a label never sits on its own line). O(taken + lines).
    fn cost(&self, b: &Box2, own: Option<usize>) -> f64 {
        let mut c = 0.0;
        if b.x0 < self.bounds.x0
            || b.y0 < self.bounds.y0
            || b.x1 > self.bounds.x1
            || b.y1 > self.bounds.y1
        {
            c += 1000.0;
        }
        c += 1000.0 * self.taken.iter().filter(|t| t.overlaps(b)).count() as f64;
        for (k, &(a, e)) in self.lines.iter().enumerate() {
            if b.crosses(a, e) {
                c += if Some(k) == own { 1000.0 } else { 10.0 };
            }
        }
        c
    }

    /// Places the first of `candidates` (in order of preference) with the least cost and
    /// takes its box. O(candidates · (taken + lines)).
    pub fn place(&mut self, candidates: &[Box2], own: Option<usize>) -> Box2 {
        let mut best = candidates[0];
        let mut best_cost = f64::INFINITY;
        for (k, b) in candidates.iter().enumerate() {
            let c = self.cost(b, own) + 0.01 * k as f64;
            if c < best_cost {
                best_cost = c;
                best = *b;
            }
            if c < 1.0 {
                break;
            }
        }
        self.taken.push(best);
        best
    }
}

/// Candidate boxes for a label of size `w` × `h` beside the segment `a`–`b`: centred on
/// points along it (middle first), pushed off the line on either side by half the box's
/// extent across the line plus `gap`, then further out. O(1) (a fixed count).
pub fn beside_segment(a: (f64, f64), b: (f64, f64), w: f64, h: f64, gap: f64) -> Vec<Box2> {
    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
    let len = (dx * dx + dy * dy).sqrt().max(1e-9);
    let (nx, ny) = (-dy / len, dx / len);
    // Half the box's extent along the normal: the support function of the box.
    let half = (nx.abs() * w + ny.abs() * h) / 2.0;
    let mut out = Vec::new();
    for extra in [0.0, 8.0, 18.0] {
        for t in [0.5, 0.4, 0.6, 0.3, 0.7, 0.22, 0.78] {
            let (px, py) = (a.0 + dx * t, a.1 + dy * t);
            for side in [1.0, -1.0] {
                let off = side * (half + gap + extra);
                out.push(Box2::centred(px + nx * off, py + ny * off, w, h));
            }
        }
    }
    out
}

/// Candidate boxes for a site label of size `w` × `h` around a marker of radius `r` at
/// `(x, y)`: above, below, right, left, then the corners, then further out. O(1).
pub fn around_point(x: f64, y: f64, r: f64, w: f64, h: f64) -> Vec<Box2> {
    let mut out = Vec::new();
    for extra in [0.0, 10.0, 22.0] {
        let g = r + 3.0 + extra;
        out.push(Box2::centred(x, y - g - h / 2.0, w, h));
        out.push(Box2::centred(x, y + g + h / 2.0, w, h));
        out.push(Box2::centred(x + g + w / 2.0, y, w, h));
        out.push(Box2::centred(x - g - w / 2.0, y, w, h));
        out.push(Box2::centred(x + g + w / 2.0, y - g - h / 2.0, w, h));
        out.push(Box2::centred(x - g - w / 2.0, y - g - h / 2.0, w, h));
        out.push(Box2::centred(x + g + w / 2.0, y + g + h / 2.0, w, h));
        out.push(Box2::centred(x - g - w / 2.0, y + g + h / 2.0, w, h));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Source: hand geometry — the unit box [0,1]² is crossed by the diagonal, missed by a
    /// segment beside it, and two boxes touching along an edge share no interior point.
    #[test]
    fn box_geometry_by_hand() {
        let b = Box2 {
            x0: 0.0,
            y0: 0.0,
            x1: 1.0,
            y1: 1.0,
        };
        assert!(b.crosses((-1.0, -1.0), (2.0, 2.0)));
        assert!(!b.crosses((2.0, 0.0), (3.0, 1.0)));
        assert!(!b.crosses((-1.0, 2.0), (2.0, 1.5)));
        let touching = Box2 {
            x0: 1.0,
            y0: 0.0,
            x1: 2.0,
            y1: 1.0,
        };
        assert!(!b.overlaps(&touching));
        assert!(b.overlaps(&Box2 {
            x0: 0.5,
            y0: 0.5,
            x1: 2.0,
            y1: 2.0
        }));
    }

    /// Source: a path graph's hop distances are those of equally spaced points on a line,
    /// so a stress-optimal layout has zero stress (hand calculation): the ends of a path of
    /// four sites lie three times as far apart as neighbours. Majorisation from a random
    /// start may stop in a slightly bent local minimum, so within 2%. Two runs give the
    /// same bits.
    #[test]
    fn a_path_is_laid_out_straight_and_the_same_every_time() {
        let text = r#"{"name":"p","unit":"u","sites":[{"id":"a","processing":1},{"id":"b","processing":0},
            {"id":"c","processing":0},{"id":"d","processing":0}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":1},{"id":"bc","from":"b","to":"c","capacity":1},
            {"id":"cd","from":"c","to":"d","capacity":1}],
            "demands":[{"from":"a","to":"d","volume":1}]}"#;
        let net = Network::from_json(text).expect("network");
        let p = stress_layout(&net);
        let dist =
            |i: usize, j: usize| ((p[i].0 - p[j].0).powi(2) + (p[i].1 - p[j].1).powi(2)).sqrt();
        assert!((dist(0, 3) / dist(0, 1) - 3.0).abs() < 0.06, "{p:?}");
        assert!((dist(1, 2) / dist(0, 1) - 1.0).abs() < 0.02, "{p:?}");
        let again = stress_layout(&net);
        assert!(
            p.iter()
                .zip(&again)
                .all(|(a, b)| a.0.to_bits() == b.0.to_bits() && a.1.to_bits() == b.1.to_bits())
        );
    }

    /// Source: a label beside a horizontal segment must clear it by the gap — worked by
    /// hand: a 20×10 box beside y = 0 with gap 3 has its near edge at |y| = 3.
    #[test]
    fn labels_beside_a_segment_clear_it() {
        let c = beside_segment((0.0, 0.0), (100.0, 0.0), 20.0, 10.0, 3.0);
        assert!((c[0].y0 - 3.0).abs() < 1e-9, "{:?}", c[0]);
        for b in &c {
            assert!(!b.crosses((0.0, 0.0), (100.0, 0.0)), "{b:?}");
        }
    }
}
