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

/// Midpoint and size of the largest gap between sorted centres on the circle.
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
}
