use super::*;
use crate::solve::lp::{Backend, Lp, Sense};

/// Hand-solved: max x + y + z with x, y in one set (x + y ≤ 3), coupling rows x + z ≤ 2
/// and y + z ≤ 2, z in no set. The point x = y = 1.5, z = 0.5 makes every row tight and
/// gives 3.5; the duals ½ on each of the three rows price every column at exactly 1 and
/// cost 3·½ + 2·½ + 2·½ = 3.5, so 3.5 is optimal (weak duality), and they are the only
/// optimal duals (all three columns are positive, so each must price at exactly 1:
/// u + y₁ = u + y₂ = y₁ + y₂ = 1).
#[test]
fn small_set_lp_by_hand() {
    let mut s = Gub::new();
    let set = s.add_set_row(3.0);
    let r1 = s.add_row(2.0);
    let r2 = s.add_row(2.0);
    s.add_col(1.0, 0.0, f64::INFINITY, 0.0, vec![(set, 1.0), (r1, 1.0)]);
    s.add_col(1.0, 0.0, f64::INFINITY, 0.0, vec![(set, 1.0), (r2, 1.0)]);
    s.add_col(1.0, 0.0, f64::INFINITY, 0.0, vec![(r1, 1.0), (r2, 1.0)]);
    s.solve(100).unwrap();
    assert!((s.objective() - 3.5).abs() < 1e-12, "{}", s.objective());
    for r in [set, r1, r2] {
        assert!((s.dual(r) - 0.5).abs() < 1e-12, "row {r}: {}", s.dual(r));
    }
}

/// A seeded generator of random GUB packing LPs: `m` coupling rows with 0/1/2 entries
/// (like walk masters' arc rows), `g` set rows, every column in one set (or, one in five,
/// in none).
struct Case {
    rhs: Vec<f64>,
    set_rhs: Vec<f64>,
    cols: Vec<(usize, Vec<(usize, f64)>)>,
    obj: Vec<f64>,
}

fn random_case(next: &mut impl FnMut(u64) -> u64) -> Case {
    let m = 2 + next(10) as usize;
    let g = 1 + next(8) as usize;
    let n = 2 + next(40) as usize;
    let rhs = (0..m).map(|_| (1 + next(20)) as f64 / 2.0).collect();
    let set_rhs = (0..g).map(|_| (1 + next(12)) as f64 / 2.0).collect();
    let cols = (0..n)
        .map(|_| {
            let set = if next(5) == 0 {
                NONE
            } else {
                next(g as u64) as usize
            };
            let mut c: Vec<(usize, f64)> = Vec::new();
            for i in 0..m {
                if next(3) == 0 {
                    c.push((i, (1 + next(2)) as f64));
                }
            }
            if c.is_empty() && set == NONE {
                c.push((next(m as u64) as usize, 1.0));
            }
            (set, c)
        })
        .collect();
    let obj = (0..n).map(|_| (1 + next(4)) as f64).collect();
    Case {
        rhs,
        set_rhs,
        cols,
        obj,
    }
}

/// A seeded linear congruential generator (Knuth's MMIX constants, from memory): a number
/// in `0..n` per call.
fn generator(mut seed: u64) -> impl FnMut(u64) -> u64 {
    move |n: u64| {
        seed = seed
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (seed >> 33) % n
    }
}

/// Asserts that `s` is at an optimum of `c` (its rows numbered in `s` by `row_of` and
/// `set_row`): the same objective as microlp's simplex on the LP of [`reference_lp`] (an
/// independent general-purpose solver), duals feasible (`≥ 0`, every column priced at
/// least its objective) and meeting the primal value (strong duality), every row met.
fn assert_optimal(s: &Gub, c: &Case, row_of: &[usize], set_row: &[usize], what: &str) {
    let lp = reference_lp(c, &c.rhs, &c.set_rhs);
    let reference = crate::solve::lp::Simplex.solve(&lp).unwrap();
    let v = s.objective();
    let tol = 1e-9 * v.abs().max(1.0);
    assert!(
        (v - reference.objective).abs() <= tol,
        "{what}: {v} vs microlp {}",
        reference.objective
    );
    let dual: f64 = (0..c.rhs.len())
        .map(|i| c.rhs[i] * s.dual(row_of[i]))
        .sum::<f64>()
        + (0..c.set_rhs.len())
            .map(|d| c.set_rhs[d] * s.dual(set_row[d]))
            .sum::<f64>();
    assert!((dual - v).abs() <= tol, "{what}: dual {dual} vs {v}");
    for (j, (set, e)) in c.cols.iter().enumerate() {
        let mut priced: f64 = e.iter().map(|&(i, a)| a * s.dual(row_of[i])).sum();
        if *set != NONE {
            priced += s.dual(set_row[*set]);
        }
        assert!(priced >= c.obj[j] - 1e-9, "{what}: column {j}");
    }
    assert!(row_of.iter().chain(set_row).all(|&r| s.dual(r) >= -1e-9));
    let x: Vec<f64> = (0..c.cols.len()).map(|j| s.value(j)).collect();
    assert!(lp.max_violation(&x) < 1e-9, "{what}");
}

/// The same LP for microlp: coupling rows first, then set rows as ordinary `≤` rows.
fn reference_lp(c: &Case, rhs: &[f64], set_rhs: &[f64]) -> Lp {
    let mut lp = Lp::new(true);
    for &o in &c.obj {
        lp.add_var(0.0, f64::INFINITY, o);
    }
    for (i, &b) in rhs.iter().enumerate() {
        let coeffs = c
            .cols
            .iter()
            .enumerate()
            .filter_map(|(j, (_, e))| e.iter().find(|x| x.0 == i).map(|x| (j, x.1)))
            .collect();
        lp.add_row(coeffs, Sense::Le, b);
    }
    for (d, &b) in set_rhs.iter().enumerate() {
        let coeffs = c
            .cols
            .iter()
            .enumerate()
            .filter(|(_, (s, _))| *s == d)
            .map(|(j, _)| (j, 1.0))
            .collect();
        lp.add_row(coeffs, Sense::Le, b);
    }
    lp
}

/// Seeded random GUB packing LPs against microlp's simplex (an independent
/// general-purpose solver, through [`crate::solve::lp::Simplex`]) with the set rows as
/// ordinary rows: same optimum; the duals are feasible (`y, u ≥ 0`, every column priced at
/// least its objective) and meet the primal value (strong duality); the point satisfies
/// every row. Built warm as the walk masters are: rows and columns interleaved, half the
/// columns added after a first solve, and, after that, one column entered at a positive
/// value after its rows' right-hand sides were raised by its load (the master's
/// activation of a held demand), against microlp on the raised right-hand sides.
#[test]
fn random_gub_lps_match_microlp() {
    let mut next = generator(0x6b0b);
    for case in 0..300 {
        let mut c = random_case(&mut next);
        let (m, g, n) = (c.rhs.len(), c.set_rhs.len(), c.cols.len());
        let mut s = Gub::new();
        // External row indices: sets and coupling rows interleaved.
        let mut row_of = vec![NONE; m];
        let mut set_row = vec![NONE; g];
        for k in 0..m.max(g) {
            if k < g {
                set_row[k] = s.add_set_row(c.set_rhs[k]);
            }
            if k < m {
                row_of[k] = s.add_row(c.rhs[k]);
            }
        }
        let entries = |(set, e): &(usize, Vec<(usize, f64)>)| {
            let mut v: Vec<(usize, f64)> = e.iter().map(|&(i, a)| (row_of[i], a)).collect();
            if *set != NONE {
                v.push((set_row[*set], 1.0));
            }
            v
        };
        let half = n / 2;
        for j in 0..half {
            s.add_col(c.obj[j], 0.0, f64::INFINITY, 0.0, entries(&c.cols[j]));
        }
        s.solve(10_000).unwrap();
        for j in half..n {
            s.add_col(c.obj[j], 0.0, f64::INFINITY, 0.0, entries(&c.cols[j]));
        }
        s.solve(10_000).unwrap();
        // One more column entered at value f with its rows raised by its load.
        let f = (1 + next(4)) as f64 / 4.0;
        let extra = c.cols[next(n as u64) as usize].clone();
        for &(i, a) in &extra.1 {
            s.shift_rhs(row_of[i], a * f);
            c.rhs[i] += a * f;
        }
        if extra.0 != NONE {
            s.shift_rhs(set_row[extra.0], f);
            c.set_rhs[extra.0] += f;
        }
        let o = (1 + next(4)) as f64;
        s.add_col(o, 0.0, f64::INFINITY, f, entries(&extra));
        c.cols.push(extra);
        c.obj.push(o);
        s.solve(10_000).unwrap();
        assert_optimal(&s, &c, &row_of, &set_row, &format!("case {case}"));
    }
}

/// A column with two set rows, or a set coefficient other than 1, is outside GUB form:
/// the solve refuses it (the caller then uses another backend) instead of solving a
/// different LP.
#[test]
fn columns_outside_gub_form_are_refused() {
    let mut s = Gub::new();
    let a = s.add_set_row(1.0);
    let b = s.add_set_row(1.0);
    s.add_col(1.0, 0.0, f64::INFINITY, 0.0, vec![(a, 1.0), (b, 1.0)]);
    assert!(s.solve(100).is_err());
    let mut s = Gub::new();
    let a = s.add_set_row(1.0);
    s.add_col(1.0, 0.0, f64::INFINITY, 0.0, vec![(a, 2.0)]);
    assert!(s.solve(100).is_err());
}

/// The plan master's use (against microlp, as above): after a first optimum, a coupling
/// row over existing columns (some basic) is added with its right-hand side at or above
/// the current point's left-hand side (so the basis stays feasible), the LP re-solved;
/// then the objective is replaced and the LP re-solved from the kept basis. Same optimum
/// as microlp on the final LP each time, duals feasible and meeting the primal value.
#[test]
fn rows_over_existing_columns_and_new_objectives_match_microlp() {
    let mut next = generator(0x90a1);
    for case in 0..200 {
        let mut c = random_case(&mut next);
        let (m, g, n) = (c.rhs.len(), c.set_rhs.len(), c.cols.len());
        let mut s = Gub::new();
        let set_row: Vec<usize> = (0..g).map(|d| s.add_set_row(c.set_rhs[d])).collect();
        let mut row_of: Vec<usize> = (0..m).map(|i| s.add_row(c.rhs[i])).collect();
        for (j, (set, e)) in c.cols.iter().enumerate() {
            let mut v: Vec<(usize, f64)> = e.iter().map(|&(i, a)| (row_of[i], a)).collect();
            if *set != NONE {
                v.push((set_row[*set], 1.0));
            }
            s.add_col(c.obj[j], 0.0, f64::INFINITY, 0.0, v);
        }
        s.solve(10_000).unwrap();
        // A new coupling row over random columns, not violated at the current point.
        let mut entries: Vec<(usize, f64)> = Vec::new();
        for j in 0..n {
            if next(2) == 0 {
                entries.push((j, (1 + next(3)) as f64));
            }
        }
        let lhs: f64 = entries.iter().map(|&(j, a)| a * s.value(j)).sum();
        let rhs = lhs + next(3) as f64 / 2.0;
        row_of.push(s.add_row_with(rhs, &entries));
        for &(j, a) in &entries {
            c.cols[j].1.push((m, a));
        }
        c.rhs.push(rhs);
        s.solve(10_000).unwrap();
        assert_optimal(&s, &c, &row_of, &set_row, &format!("case {case} new row"));
        c.obj = (0..n).map(|_| next(5) as f64).collect();
        s.set_objective(&c.obj);
        s.solve(10_000).unwrap();
        assert_optimal(
            &s,
            &c,
            &row_of,
            &set_row,
            &format!("case {case} new objective"),
        );
    }
}
