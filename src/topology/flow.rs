//! Hybrid Wannier centre flow: Z2 by largest-gap tracking (Soluyanov & Vanderbilt,
//! Phys. Rev. B 83, 035108 (2011)) and the tests that decide where pump lines must be inserted.
//!
//! Centres live on the unit circle [0, 1). Along the pump coordinate the midpoint z of the
//! largest gap between neighbouring centres is tracked; the Z2 index is the parity of the number
//! of centres that z jumps over. With an even number of centres (time reversal), counting the
//! centres in either arc between z_m and z_{m+1} gives the same parity, so no arc has to be chosen.

/// `x.rem_euclid(1.0)`, bit for bit, without the library remainder (an `fmod` call, slow) for
/// the x that occur here, in (−1, 2): there it is x, x + 1 (rounded as `rem_euclid` rounds
/// it) or x − 1 (exact, by Sterbenz's lemma). The examination of a plane's lines was ~8 µs,
/// most of it in `fmod`, and it runs after the lines, while the other worker waits.
#[inline]
pub fn unit_mod(x: f64) -> f64 {
    if (0.0..1.0).contains(&x) {
        x
    } else if -1.0 < x && x < 0.0 {
        x + 1.0
    } else if (1.0..2.0).contains(&x) {
        x - 1.0
    } else {
        x.rem_euclid(1.0)
    }
}

/// Distance on the unit circle.
pub fn circ_dist(a: f64, b: f64) -> f64 {
    let d = unit_mod(a - b);
    d.min(1.0 - d)
}

/// Midpoint and size of the largest gap between sorted centres on the circle. Of equal gaps
/// the first in sorted order wins, so a line's midpoint does not depend on rounding in a tie.
pub fn largest_gap(c: &[f64]) -> (f64, f64) {
    let n = c.len();
    if n == 0 {
        return (0.5, 1.0);
    }
    let (mut at, mut best) = (0, -1.0);
    for i in 0..n {
        let hi = if i + 1 < n { c[i + 1] } else { c[0] + 1.0 };
        let g = hi - c[i];
        if g > best {
            (at, best) = (i, g);
        }
    }
    let hi = if at + 1 < n { c[at + 1] } else { c[0] + 1.0 };
    (unit_mod((c[at] + hi) * 0.5), best)
}

/// Largest motion of any centre between two sorted sets, matching them by the best cyclic shift.
pub fn largest_step(a: &[f64], b: &[f64]) -> f64 {
    let n = a.len();
    if n == 0 || n != b.len() {
        return if n == b.len() { 0.0 } else { 1.0 };
    }
    (0..n)
        .map(|shift| {
            (0..n)
                .map(|i| circ_dist(a[i], b[(i + shift) % n]))
                .fold(0.0, f64::max)
        })
        .fold(f64::INFINITY, f64::min)
}

/// Smallest distance from point `z` to any centre.
pub fn clearance(z: f64, c: &[f64]) -> f64 {
    c.iter()
        .map(|&x| circ_dist(z, x))
        .fold(f64::INFINITY, f64::min)
}

/// What the refinement test found between two neighbouring lines.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Interval {
    pub step: f64,
    pub clearance: f64,
    pub refine: bool,
}

/// Decide whether a pump line must be inserted between neighbouring lines `a` and `b`: a centre
/// moved more than `step_limit`, or a largest-gap midpoint of one line lies closer to a centre
/// of the other than the margin — min(step_limit / 2, a quarter of that largest gap) — so the
/// jump count between them could be wrong.
pub fn inspect(a: &[f64], b: &[f64], step_limit: f64) -> Interval {
    inspect_with_gaps(a, b, largest_gap(a), largest_gap(b), step_limit)
}

/// [`inspect`] given the [`largest_gap`] of each line (a plane computes each line's once).
pub fn inspect_with_gaps(
    a: &[f64],
    b: &[f64],
    (za, ga): (f64, f64),
    (zb, gb): (f64, f64),
    step_limit: f64,
) -> Interval {
    if a.iter().chain(b).any(|x| !x.is_finite()) {
        return Interval {
            step: 1.0,
            clearance: 0.0,
            refine: true,
        };
    }
    let step = largest_step(a, b);
    let ca = clearance(za, b);
    let cb = clearance(zb, a);
    let margin_a = (0.5 * step_limit).min(0.25 * ga);
    let margin_b = (0.5 * step_limit).min(0.25 * gb);
    Interval {
        step,
        clearance: ca.min(cb),
        refine: step > step_limit || ca < margin_a || cb < margin_b,
    }
}

/// Number of centres of the later line inside the interval between the two midpoints.
fn jumps(z0: f64, z1: f64, next: &[f64]) -> usize {
    let (lo, hi) = if z0 <= z1 { (z0, z1) } else { (z1, z0) };
    next.iter().filter(|&&x| x > lo && x <= hi).count()
}

/// Z2 index (0 or 1) of a flow given as the centres of successive pump lines from a
/// time-reversal-invariant line to the next one.
pub fn z2_of_flow(lines: &[&[f64]]) -> u8 {
    let mid: Vec<f64> = lines.iter().map(|l| largest_gap(l).0).collect();
    z2_of_tracked_flow(lines, &mid)
}

/// [`z2_of_flow`] given the midpoint of each line's [`largest_gap`].
pub fn z2_of_tracked_flow(lines: &[&[f64]], mid: &[f64]) -> u8 {
    let total: usize = (1..lines.len())
        .map(|m| jumps(mid[m - 1], mid[m], lines[m]))
        .sum();
    (total % 2) as u8
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A Kramers pair that separates at t = 0 and recombines at t = 1/2 after one centre has
    /// wound around the circle: the textbook Z2-odd flow.
    fn odd_flow(m: usize) -> Vec<Vec<f64>> {
        (0..m)
            .map(|i| {
                let t = i as f64 / (m - 1) as f64; // 0 … 1
                let a = (0.5 * t).rem_euclid(1.0);
                let b = (-0.5 * t).rem_euclid(1.0);
                let mut v = vec![a, b];
                v.sort_by(|x, y| x.total_cmp(y));
                v
            })
            .collect()
    }

    /// The same pair separating and rejoining at the same point: trivial.
    fn even_flow(m: usize) -> Vec<Vec<f64>> {
        (0..m)
            .map(|i| {
                let t = i as f64 / (m - 1) as f64;
                let d = 0.2 * (std::f64::consts::PI * t).sin();
                let mut v = vec![(0.1 + d).rem_euclid(1.0), (0.1 - d).rem_euclid(1.0)];
                v.sort_by(|x, y| x.total_cmp(y));
                v
            })
            .collect()
    }

    /// `unit_mod` is `rem_euclid(1.0)` bit for bit (Rust's standard library is the reference),
    /// on the edges of its ranges and on numbers spread over (−3, 3).
    #[test]
    fn unit_mod_is_rem_euclid() {
        let mut xs = vec![
            0.0, -0.0, 1.0, -1.0, 2.0, -2.0, 0.5, 1.5, -0.5, 1e-300, -1e-300,
        ];
        for e in [0.0f64, 1.0, -1.0, 2.0, -2.0] {
            let up = f64::from_bits(e.to_bits() + 1);
            let down = f64::from_bits(e.to_bits().wrapping_sub(1));
            xs.extend([up, down, e + f64::EPSILON, e - f64::EPSILON, e - 1e-17]);
        }
        let mut rng = crate::test_rng::TestRng::new(9);
        xs.extend((0..100_000).map(|_| 6.0 * rng.uniform()));
        xs.extend([f64::NAN, f64::INFINITY, 7.25, -7.25]);
        for x in xs {
            let (got, want) = (unit_mod(x), x.rem_euclid(1.0));
            assert!(
                got.to_bits() == want.to_bits() || (got.is_nan() && want.is_nan()),
                "{x:e}: {got:e} vs {want:e}"
            );
        }
    }

    #[test]
    fn counts_odd_and_even_flows() {
        for m in [5, 11, 41] {
            let o = odd_flow(m);
            let e = even_flow(m);
            assert_eq!(
                z2_of_flow(&o.iter().map(|v| v.as_slice()).collect::<Vec<_>>()),
                1
            );
            assert_eq!(
                z2_of_flow(&e.iter().map(|v| v.as_slice()).collect::<Vec<_>>()),
                0
            );
        }
    }

    #[test]
    fn odd_flow_is_robust_to_a_shift() {
        // shifting every centre by a constant must not change the count
        for shift in [0.0, 0.13, 0.5, 0.77] {
            let o: Vec<Vec<f64>> = odd_flow(21)
                .into_iter()
                .map(|v| {
                    let mut w: Vec<f64> = v.iter().map(|x| (x + shift).rem_euclid(1.0)).collect();
                    w.sort_by(|a, b| a.total_cmp(b));
                    w
                })
                .collect();
            assert_eq!(
                z2_of_flow(&o.iter().map(|v| v.as_slice()).collect::<Vec<_>>()),
                1
            );
        }
    }

    #[test]
    fn step_and_refinement() {
        assert!((largest_step(&[0.1, 0.6], &[0.65, 0.12]) - 0.05).abs() < 1e-12);
        assert!((largest_step(&[0.98], &[0.02]) - 0.04).abs() < 1e-12);
        assert!(inspect(&[0.1, 0.2], &[0.1, 0.5], 0.1).refine);
        assert!(!inspect(&[0.1, 0.2], &[0.11, 0.21], 0.1).refine);
        assert!(inspect(&[f64::NAN, 0.2], &[0.11, 0.21], 0.1).refine);
    }

    #[test]
    fn largest_gap_wraps() {
        let (z, g) = largest_gap(&[0.1, 0.3]);
        assert!((g - 0.8).abs() < 1e-12 && (z - 0.7).abs() < 1e-12);
        let (z, g) = largest_gap(&[0.45, 0.55]);
        assert!((g - 0.9).abs() < 1e-12 && circ_dist(z, 0.0) < 1e-12);
    }
    // -- references written without the functions under test --------------------------------
    // The definitions (distance on the circle, gaps between neighbouring centres, the best
    // one-to-one matching of two sets) are common practice, no source; the references below
    // compute them the slow, obvious way.

    /// Distance on the unit circle of two points in [0, 1), without `unit_mod`.
    fn ref_dist(a: f64, b: f64) -> f64 {
        let d = (a - b).abs();
        d.min(1.0 - d)
    }

    /// `n` sorted uniform numbers in [0, 1).
    fn sorted_set(rng: &mut crate::test_rng::TestRng, n: usize) -> Vec<f64> {
        let mut v: Vec<f64> = (0..n).map(|_| rng.uniform() + 0.5).collect();
        v.sort_by(|x, y| x.total_cmp(y));
        v
    }

    /// Largest gap by brute force: for every centre, the distance forward to the nearest
    /// centre strictly ahead of it (1 if there is none); the first of equal gaps wins.
    fn ref_largest_gap(c: &[f64]) -> (f64, f64) {
        let mut best = (0.5, -1.0);
        for &x in c {
            let g = c
                .iter()
                .map(|&y| (y - x).rem_euclid(1.0))
                .filter(|&d| d > 0.0)
                .fold(1.0, f64::min);
            if g > best.1 {
                best = ((x + 0.5 * g).rem_euclid(1.0), g);
            }
        }
        best
    }

    /// Every permutation of 0..n (Heap's algorithm; n ≤ 6 here).
    fn permutations(n: usize) -> Vec<Vec<usize>> {
        fn heap(k: usize, p: &mut Vec<usize>, out: &mut Vec<Vec<usize>>) {
            if k <= 1 {
                out.push(p.clone());
                return;
            }
            for i in 0..k {
                heap(k - 1, p, out);
                let j = if k % 2 == 0 { i } else { 0 };
                p.swap(j, k - 1);
            }
        }
        let mut out = Vec::new();
        heap(n, &mut (0..n).collect(), &mut out);
        out
    }

    /// Largest motion under the best one-to-one matching of any kind (all permutations):
    /// for sorted sets on a circle the best matching keeps the cyclic order, which is what
    /// `largest_step` searches, so the two must agree.
    fn ref_largest_step(a: &[f64], b: &[f64]) -> f64 {
        permutations(a.len())
            .iter()
            .map(|p| {
                (0..a.len())
                    .map(|i| ref_dist(a[i], b[p[i]]))
                    .fold(0.0, f64::max)
            })
            .fold(f64::INFINITY, f64::min)
    }

    fn ref_clearance(z: f64, c: &[f64]) -> f64 {
        c.iter()
            .map(|&x| ref_dist(z, x))
            .fold(f64::INFINITY, f64::min)
    }

    #[test]
    fn circ_dist_goes_the_short_way_round() {
        assert!((circ_dist(0.1, 0.9) - 0.2).abs() < 1e-12);
        assert!((circ_dist(0.9, 0.1) - 0.2).abs() < 1e-12);
        assert!((circ_dist(0.3, 0.1) - 0.2).abs() < 1e-12);
        assert_eq!(circ_dist(0.25, 0.25), 0.0);
        let mut rng = crate::test_rng::TestRng::new(11);
        for _ in 0..10_000 {
            let (a, b) = (rng.uniform() + 0.5, rng.uniform() + 0.5);
            assert!((circ_dist(a, b) - ref_dist(a, b)).abs() < 1e-15, "{a} {b}");
        }
    }

    #[test]
    fn largest_gap_agrees_with_brute_force() {
        // an inner gap is the largest (the wrap-around one is not): midpoint 0.55
        let (z, g) = largest_gap(&[0.1, 0.2, 0.9]);
        assert!(
            (g - 0.7).abs() < 1e-12 && (z - 0.55).abs() < 1e-12,
            "{z} {g}"
        );
        assert_eq!(largest_gap(&[0.375]), (0.875, 1.0));
        assert_eq!(largest_gap(&[]), (0.5, 1.0));
        let mut rng = crate::test_rng::TestRng::new(12);
        for n in 1..9 {
            for _ in 0..500 {
                let c = sorted_set(&mut rng, n);
                let ((z, g), (zr, gr)) = (largest_gap(&c), ref_largest_gap(&c));
                assert!((g - gr).abs() < 1e-12 && ref_dist(z, zr) < 1e-12, "{c:?}");
            }
        }
    }

    #[test]
    fn largest_gap_ties_go_to_the_first_gap() {
        // equal gaps (exact in binary): the first in sorted order wins, as in the reference,
        // so a Kramers-degenerate line with evenly spread pairs gives the same midpoint on
        // every run
        for c in [vec![0.0, 0.25, 0.5, 0.75], vec![0.125, 0.125, 0.625, 0.625]] {
            let (z, g) = largest_gap(&c);
            let (zr, gr) = ref_largest_gap(&c);
            assert!(z == zr && g == gr, "{c:?}: {z} {g} vs {zr} {gr}");
        }
        assert_eq!(largest_gap(&[0.0, 0.25, 0.5, 0.75]), (0.125, 0.25));
    }

    #[test]
    fn largest_step_is_the_best_matching() {
        let mut rng = crate::test_rng::TestRng::new(13);
        for n in 1..7 {
            for trial in 0..200 {
                let a = sorted_set(&mut rng, n);
                // half the pairs: b is a moved a little (the case of neighbouring lines)
                let b = if trial % 2 == 0 {
                    sorted_set(&mut rng, n)
                } else {
                    let scale = [0.01, 0.1, 0.3][trial % 3];
                    let mut b: Vec<f64> = a
                        .iter()
                        .map(|x| (x + scale * rng.uniform()).rem_euclid(1.0))
                        .collect();
                    b.sort_by(|x, y| x.total_cmp(y));
                    b
                };
                let (got, want) = (largest_step(&a, &b), ref_largest_step(&a, &b));
                assert!((got - want).abs() < 1e-12, "{a:?} {b:?}: {got} vs {want}");
            }
        }
        // no centres: nothing moved; a centre more or less: the largest possible motion
        assert_eq!(largest_step(&[], &[]), 0.0);
        assert_eq!(largest_step(&[0.1, 0.2], &[0.1]), 1.0);
        assert_eq!(largest_step(&[0.1], &[0.1, 0.2]), 1.0);
        assert_eq!(largest_step(&[], &[0.3]), 1.0);
    }

    #[test]
    fn inspect_reports_step_and_clearance_of_the_reference() {
        let mut rng = crate::test_rng::TestRng::new(14);
        for n in 1..6 {
            for _ in 0..300 {
                let a = sorted_set(&mut rng, n);
                let b = sorted_set(&mut rng, n);
                let r = inspect(&a, &b, 0.08);
                let (za, zb) = (ref_largest_gap(&a).0, ref_largest_gap(&b).0);
                let clear = ref_clearance(za, &b).min(ref_clearance(zb, &a));
                assert!((r.step - ref_largest_step(&a, &b)).abs() < 1e-12);
                assert!((r.clearance - clear).abs() < 1e-12, "{a:?} {b:?}");
                assert!((clearance(za, &b) - ref_clearance(za, &b)).abs() < 1e-12);
            }
        }
    }

    /// The refinement rule of the docstring, case by case: a step of more than `step_limit`,
    /// or a midpoint of one line closer to a centre of the other than
    /// min(step_limit / 2, largest gap / 4). Each case sits clearly on one side of one bound
    /// (the numbers are worked out in the comments), so a changed bound flips it.
    #[test]
    fn refinement_rule_case_by_case() {
        // a = [0.1, 0.3]: largest gap 0.8 (0.3 → 1.1), midpoint 0.7. b = [0.1, 0.54]: step
        // 0.24; b's largest gap 0.56, midpoint 0.82. Clearance of 0.7 from b: 0.16; of 0.82
        // from a: 0.28. With step_limit 0.3 the margins are min(0.15, 0.2) = 0.15 and
        // min(0.15, 0.14) = 0.14: nothing to refine. The half-step bound is the one that
        // decides (with the quarter-gap bound alone, 0.16 < 0.2 would refine).
        let (a, b) = ([0.1, 0.3], [0.1, 0.54]);
        assert!(!inspect(&a, &b, 0.3).refine);
        assert!(!inspect(&b, &a, 0.3).refine);
        // the same pair with step_limit 0.36 (margins 0.18 and 0.14): 0.16 < 0.18 refines
        assert!(inspect(&a, &b, 0.36).refine);
        assert!(inspect(&b, &a, 0.36).refine);
        // a = [0.05, 0.25, 0.45, 0.65, 0.8]: largest gap 0.25 at 0.925; b moves 0.8 to 0.84:
        // step 0.04, b's largest gap 0.21 at 0.945. Clearances 0.085 (0.925 from b) and
        // 0.105 (0.945 from a). Step limit 0.2: margins min(0.1, 0.0625) and min(0.1,
        // 0.0525); here the quarter-gap bound decides (with the half-step bound alone,
        // 0.085 < 0.1 would refine).
        let (a, b) = (
            [0.05, 0.25, 0.45, 0.65, 0.8],
            [0.05, 0.25, 0.45, 0.65, 0.84],
        );
        assert!(!inspect(&a, &b, 0.2).refine);
        assert!(!inspect(&b, &a, 0.2).refine);
        // a centre moved more than the limit refines on its own (clearances 0.15 and 0.3 stay
        // above their margins 0.05)
        let r = inspect(&[0.1, 0.2], &[0.1, 0.5], 0.1);
        assert!(r.refine && r.step > 0.1 && r.clearance > 0.1);
        // bounds are strict ("more than", "closer than"), with numbers exact in binary:
        // a = [0.25, 0.75], b = [0.375, 0.875]: step 0.125; both midpoints (0.5 and 0.625,
        // the first of two equal gaps) are 0.125 from the other line's nearest centre
        let (a, b) = ([0.25, 0.75], [0.375, 0.875]);
        let r = inspect(&a, &b, 0.125); // step = limit, margins 0.0625
        assert!(r.step == 0.125 && !r.refine, "{r:?}");
        let r = inspect(&a, &b, 0.25); // clearance = margin = min(0.125, 0.5 / 4)
        assert!(r.clearance == 0.125 && !r.refine, "{r:?}");
        assert!(inspect(&a, &b, 0.124).refine); // a step of 0.125 > 0.124
    }

    #[test]
    fn jumps_counts_the_centres_between_the_midpoints() {
        let next = [0.1, 0.3, 0.5, 0.7];
        assert_eq!(jumps(0.2, 0.6, &next), 2);
        assert_eq!(jumps(0.6, 0.2, &next), 2); // either order
        assert_eq!(jumps(0.05, 0.95, &next), 4);
        assert_eq!(jumps(0.35, 0.45, &next), 0);
    }
}
