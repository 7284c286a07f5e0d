//! Kernel benchmarks of the Rust core (a small `cargo bench` harness, no extra dependencies):
//! Hermitian eigensolvers per matrix at n = 4…64 (reference Jacobi, size-specialised Jacobi
//! cold and warm-started, the size-specialised Householder + QR that production uses for
//! n ≤ 16 — one matrix at a time, two together and, for n ≤ 8, four in the lanes of
//! `eigen_quad` — nalgebra Householder, faer), Bloch sums, one Wilson line and one full
//! parameter point of the cubic Wilson–Dirac model at fixed sampling (40 × 41 × 6).
//!
//! `cargo bench --no-default-features --bench kernels` prints a markdown table; set
//! `KERNEL_BENCH_QUICK=1` for a fast smoke run. Timings are the best of several repeats (other
//! jobs share the machine); use `valgrind --tool=callgrind` on `--bench kernels -- ONLY` for
//! instruction counts when comparing kernels A/B.

use rayon::prelude::*;
use std::hint::black_box;
use std::time::Instant;
use toposweep::linalg::eigen::{
    eigh_householder_into, eigh_into, eigh_jacobi_into, eigh_occupied_into,
    eigh_occupied_pair_into, eigh_occupied_quad_into, eigh_pair_into, eigh_quad_into,
    eigh_reference_into, eigh_warm_into, JACOBI_MAX_N, QUAD_MAX_N, SMALL_MAX_N,
};
use toposweep::linalg::matrix::{unitarise, unitarise_reference};
use toposweep::point::engine::evaluate_point;
use toposweep::sampling::{Method, ProveGap, Sampling};
use toposweep::topology::wilson::{wilson_line_with, Kernels};
use toposweep::zone::bloch::{BlochSource, Hoppings};
use toposweep::C64;

fn c(re: f64, im: f64) -> C64 {
    C64::new(re, im)
}

struct Rng(u64);
impl Rng {
    fn next(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        ((self.0 >> 11) as f64) / ((1u64 << 53) as f64) - 0.5
    }
    fn hermitian(&mut self, n: usize) -> Vec<C64> {
        let mut h = vec![c(0.0, 0.0); n * n];
        for i in 0..n {
            h[i * n + i] = c(self.next(), 0.0);
            for j in i + 1..n {
                let z = c(self.next(), self.next());
                h[i * n + j] = z;
                h[j * n + i] = z.conj();
            }
        }
        h
    }
}

/// Best time per call in ns over `repeats` runs of `inner` calls each.
fn time_ns(repeats: usize, inner: usize, mut f: impl FnMut(usize)) -> f64 {
    let mut best = f64::INFINITY;
    for _ in 0..repeats {
        let t = Instant::now();
        for i in 0..inner {
            f(i);
        }
        best = best.min(t.elapsed().as_nanos() as f64 / inner as f64);
    }
    best
}

fn kron(a: &[C64; 4], b: &[C64; 4]) -> Vec<C64> {
    let mut k = vec![c(0.0, 0.0); 16];
    for i in 0..2 {
        for j in 0..2 {
            for p in 0..2 {
                for q in 0..2 {
                    k[(2 * i + p) * 4 + 2 * j + q] = a[2 * i + j] * b[2 * p + q];
                }
            }
        }
    }
    k
}

/// Cubic Wilson–Dirac model with terms (mass, hopping), as `toposweep.models.wilson_dirac`.
fn wilson_dirac() -> Hoppings {
    wilson_dirac_with(0.0)
}

/// [`wilson_dirac`] plus a constant on-site `breaking`·σx⊗1 (even under time reversal, odd under
/// the inversion σz⊗1): H(κ) is a generic 4×4 away from the TRIMs (no two-level closed form).
fn wilson_dirac_with(breaking: f64) -> Hoppings {
    let z = c(0.0, 0.0);
    let s0 = [c(1.0, 0.0), z, z, c(1.0, 0.0)];
    let sx = [z, c(1.0, 0.0), c(1.0, 0.0), z];
    let sy = [z, c(0.0, -1.0), c(0.0, 1.0), z];
    let sz = [c(1.0, 0.0), z, z, c(-1.0, 0.0)];
    let g4 = kron(&sz, &s0);
    let mut t = g4.clone();
    let mut r = vec![0i64, 0, 0];
    let mut term = vec![0i64];
    for (i, s) in [sx, sy, sz].iter().enumerate() {
        let gi = kron(&sx, s);
        t.extend(g4.iter().zip(&gi).map(|(a, b)| (a - c(0.0, 1.0) * b) * 0.5));
        let mut rv = [0i64; 3];
        rv[i] = 1;
        r.extend(rv);
        term.push(1);
    }
    if breaking != 0.0 {
        t.extend(kron(&sx, &s0).iter().map(|x| x * breaking));
        r.extend([0, 0, 0]);
        term.push(-1);
    }
    Hoppings::new(3, 4, 2, r, t, term).unwrap()
}

fn main() {
    let quick = std::env::var_os("KERNEL_BENCH_QUICK").is_some();
    let only = std::env::args().nth(1).filter(|a| !a.starts_with('-'));
    let want = |name: &str| only.as_deref().map_or(true, |o| name.contains(o));
    let (reps, scale) = if quick { (2, 0.05) } else { (7, 1.0) };
    let inner = |base: usize| ((base as f64 * scale) as usize).max(1);
    let mut rng = Rng(12345);

    if want("eigen") {
        let (mut e4, mut v4) = (vec![0.0; 4], vec![c(0.0, 0.0); 16]);
        println!("| n | reference Jacobi (µs) | fixed-size Jacobi (µs) | warm-started Jacobi (µs) | fixed-size Householder + QR (µs) | paired Householder + QR (µs/matrix) | four-lane Householder + QR (µs/matrix) | nalgebra Householder (µs) | faer (µs) |");
        println!("|---|---|---|---|---|---|---|---|---|");
        for n in [4usize, 8, 16, 32, 64] {
            let batch = 64;
            let hs: Vec<Vec<C64>> = (0..batch).map(|_| rng.hermitian(n)).collect();
            // warm start: a matrix 1e-2 away and its eigenvectors (a neighbouring κ point)
            let guesses: Vec<Vec<C64>> = hs
                .iter()
                .map(|h| {
                    let d = rng.hermitian(n);
                    let hn: Vec<C64> = h.iter().zip(&d).map(|(a, b)| a + b * 1e-2).collect();
                    let (mut e, mut v) = (vec![0.0; n], vec![c(0.0, 0.0); n * n]);
                    eigh_into(&hn, n, &mut e, &mut v).unwrap();
                    v
                })
                .collect();
            let (mut e, mut v) = (vec![0.0; n], vec![c(0.0, 0.0); n * n]);
            let k = inner(200_000 / (n * n));
            let fmt = |x: f64| format!("{:.3}", x / 1e3);
            // the reference is the dynamic Jacobi up to SMALL_MAX_N, nalgebra's Householder above
            let refj = if n <= SMALL_MAX_N {
                fmt(time_ns(reps, k, |i| {
                    eigh_reference_into(black_box(&hs[i % batch]), n, &mut e, &mut v).unwrap()
                }))
            } else {
                "(= Householder)".into()
            };
            let (fixed, warm) = if n <= JACOBI_MAX_N {
                (
                    fmt(time_ns(reps, k, |i| {
                        eigh_jacobi_into(black_box(&hs[i % batch]), n, &mut e, &mut v).unwrap()
                    })),
                    fmt(time_ns(reps, k, |i| {
                        eigh_warm_into(
                            black_box(&hs[i % batch]),
                            n,
                            &guesses[i % batch],
                            &mut e,
                            &mut v,
                        )
                        .unwrap()
                    })),
                )
            } else {
                ("–".into(), "–".into())
            };
            let small = if n <= SMALL_MAX_N {
                fmt(time_ns(reps, k, |i| {
                    eigh_into(black_box(&hs[i % batch]), n, &mut e, &mut v).unwrap()
                }))
            } else {
                "–".into()
            };
            // two independent matrices per call (as κ points s, s + 1), time per matrix
            let (mut e2, mut v2) = (vec![0.0; n], vec![c(0.0, 0.0); n * n]);
            let paired = if n <= SMALL_MAX_N {
                fmt(time_ns(reps, k / 2, |i| {
                    eigh_pair_into(
                        [
                            black_box(&hs[(2 * i) % batch]),
                            black_box(&hs[(2 * i + 1) % batch]),
                        ],
                        n,
                        [&mut e, &mut e2],
                        [&mut v, &mut v2],
                    )
                    .unwrap()
                }) / 2.0)
            } else {
                "–".into()
            };
            // four per call (n ≤ QUAD_MAX_N; above, two pairs)
            let quad = if n <= QUAD_MAX_N {
                let (mut e3, mut v3) = (vec![0.0; n], vec![c(0.0, 0.0); n * n]);
                let (mut e4, mut v4) = (vec![0.0; n], vec![c(0.0, 0.0); n * n]);
                fmt(time_ns(reps, k / 4, |i| {
                    eigh_quad_into(
                        std::array::from_fn(|j| black_box(&hs[(4 * i + j) % batch][..])),
                        n,
                        [&mut e, &mut e2, &mut e3, &mut e4],
                        [&mut v, &mut v2, &mut v3, &mut v4],
                    )
                    .unwrap()
                }) / 4.0)
            } else {
                "–".into()
            };
            let hh = time_ns(reps, k, |i| {
                eigh_householder_into(black_box(&hs[i % batch]), n, &mut e, &mut v).unwrap()
            });
            #[cfg(feature = "faer")]
            let fa = fmt(time_ns(reps, k, |i| {
                toposweep::linalg::eigen::eigh_faer_into(
                    black_box(&hs[i % batch]),
                    n,
                    &mut e,
                    &mut v,
                )
                .unwrap()
            }));
            #[cfg(not(feature = "faer"))]
            let fa = "(build with --features faer)";
            println!(
                "| {n} | {refj} | {fixed} | {warm} | {small} | {paired} | {quad} | {} | {fa} |",
                fmt(hh)
            );
        }
        println!();
        // 4×4 in detail: generic (random Hermitian, as for models without inversion) and
        // Kramers-degenerate (Wilson–Dirac H(κ) at random κ: the closed two-level form), with
        // every vector or only the lowest two (what a half-filled Wilson line asks for)
        let wdm = wilson_dirac().at(&[-2.0, 1.0]).unwrap();
        let kap: Vec<f64> = (0..192).map(|_| rng.next() + 0.5).collect();
        let mut kramers = vec![c(0.0, 0.0); 64 * 16];
        wdm.fill(&kap, &mut kramers).unwrap();
        let generic: Vec<C64> = (0..64).flat_map(|_| rng.hermitian(4)).collect();
        let mut occ = vec![c(0.0, 0.0); 8];
        let k = inner(20_000);
        let mut occ2 = vec![c(0.0, 0.0); 8];
        let mut e4b = vec![0.0; 4];
        let (mut e4c, mut e4d) = (vec![0.0; 4], vec![0.0; 4]);
        let (mut occ3, mut occ4) = (vec![c(0.0, 0.0); 8], vec![c(0.0, 0.0); 8]);
        let mut v4s = [
            vec![c(0.0, 0.0); 16],
            vec![c(0.0, 0.0); 16],
            vec![c(0.0, 0.0); 16],
            vec![c(0.0, 0.0); 16],
        ];
        println!("| 4×4 | reference Jacobi (µs) | fixed-size Jacobi (µs) | production, all vectors (µs) | production, lowest two vectors (µs) | paired, lowest two vectors (µs/matrix) | four together, lowest two vectors (µs/matrix) | four together, all vectors (µs/matrix) |");
        println!("|---|---|---|---|---|---|---|---|");
        for (name, hk) in [
            ("generic (random Hermitian)", &generic),
            (
                "Kramers-degenerate (Wilson–Dirac H(κ)), closed form",
                &kramers,
            ),
        ] {
            let m = |i: usize| &hk[(i % 64) * 16..(i % 64 + 1) * 16];
            let slow = time_ns(reps, k, |i| {
                eigh_reference_into(black_box(m(i)), 4, &mut e4, &mut v4).unwrap()
            });
            let jac = time_ns(reps, k, |i| {
                eigh_jacobi_into(black_box(m(i)), 4, &mut e4, &mut v4).unwrap()
            });
            let full = time_ns(reps, k, |i| {
                eigh_into(black_box(m(i)), 4, &mut e4, &mut v4).unwrap()
            });
            let half = time_ns(reps, k, |i| {
                eigh_occupied_into(black_box(m(i)), 4, 2, &mut e4, &mut occ, &mut v4).unwrap()
            });
            let pair = time_ns(reps, k / 2, |i| {
                eigh_occupied_pair_into(
                    [black_box(m(2 * i)), black_box(m(2 * i + 1))],
                    4,
                    2,
                    [&mut e4, &mut e4b],
                    [&mut occ, &mut occ2],
                    &mut v4,
                )
                .unwrap()
            }) / 2.0;
            let quad = time_ns(reps, k / 4, |i| {
                eigh_occupied_quad_into(
                    std::array::from_fn(|j| black_box(m(4 * i + j))),
                    4,
                    2,
                    [&mut e4, &mut e4b, &mut e4c, &mut e4d],
                    [&mut occ, &mut occ2, &mut occ3, &mut occ4],
                    &mut v4,
                )
                .unwrap()
            }) / 4.0;
            let quad_full = time_ns(reps, k / 4, |i| {
                let [a, b, cc, d] = &mut v4s;
                eigh_quad_into(
                    std::array::from_fn(|j| black_box(m(4 * i + j))),
                    4,
                    [&mut e4, &mut e4b, &mut e4c, &mut e4d],
                    [a, b, cc, d],
                )
                .unwrap()
            }) / 4.0;
            println!(
                "| {name} | {:.3} | {:.3} | {:.3} | {:.3} | {:.3} | {:.3} | {:.3} |",
                slow / 1e3,
                jac / 1e3,
                full / 1e3,
                half / 1e3,
                pair / 1e3,
                quad / 1e3,
                quad_full / 1e3
            );
        }
        println!();
    }

    // Profiling aids (not in the default run): one generic n×n solve at a time, two together,
    // or four in lanes, over 64 random matrices; `-- solo-4` / `-- pair-4` / `-- quad-4`
    // (n = 2…8) under perf or callgrind give per-matrix counts (divide by
    // KERNEL_PROFILE_CALLS, default 200 000 matrices).
    if let Some(o) = only.as_deref() {
        let calls: usize = std::env::var("KERNEL_PROFILE_CALLS")
            .ok()
            .and_then(|v| v.parse().ok())
            .unwrap_or(200_000);
        for n in 2usize..=8 {
            let (solo, pair, quad) = (
                format!("solo-{n}"),
                format!("pair-{n}"),
                format!("quad-{n}"),
            );
            if o != solo && o != pair && o != quad {
                continue;
            }
            let hs: Vec<Vec<C64>> = (0..64).map(|_| rng.hermitian(n)).collect();
            let (mut e, mut v) = (vec![0.0; n], vec![c(0.0, 0.0); n * n]);
            let (mut e2, mut v2) = (vec![0.0; n], vec![c(0.0, 0.0); n * n]);
            let (mut e3, mut v3) = (vec![0.0; n], vec![c(0.0, 0.0); n * n]);
            let (mut e4, mut v4) = (vec![0.0; n], vec![c(0.0, 0.0); n * n]);
            let t = Instant::now();
            if o == quad {
                for i in 0..calls / 4 {
                    eigh_quad_into(
                        std::array::from_fn(|j| black_box(&hs[(4 * i + j) % 64][..])),
                        n,
                        [&mut e, &mut e2, &mut e3, &mut e4],
                        [&mut v, &mut v2, &mut v3, &mut v4],
                    )
                    .unwrap();
                }
            } else if o == solo {
                for i in 0..calls {
                    eigh_into(black_box(&hs[i % 64]), n, &mut e, &mut v).unwrap();
                }
            } else {
                for i in 0..calls / 2 {
                    eigh_pair_into(
                        [
                            black_box(&hs[(2 * i) % 64]),
                            black_box(&hs[(2 * i + 1) % 64]),
                        ],
                        n,
                        [&mut e, &mut e2],
                        [&mut v, &mut v2],
                    )
                    .unwrap();
                }
            }
            println!(
                "{o}: {:.3} µs per matrix",
                t.elapsed().as_secs_f64() * 1e6 / calls as f64
            );
        }
    }

    if want("polar") {
        println!("| occupied n | polar factor, reference (ns) | fast (ns) |");
        println!("|---|---|---|");
        for n in [2usize, 4, 8] {
            let ms: Vec<Vec<C64>> = (0..64).map(|_| rng.hermitian(n)).collect();
            let mut buf = vec![c(0.0, 0.0); n * n];
            let k = inner(100_000 / n);
            let r = time_ns(reps, k, |i| {
                buf.copy_from_slice(&ms[i % 64]);
                unitarise_reference(black_box(&mut buf), n).unwrap();
            });
            let f = time_ns(reps, k, |i| {
                buf.copy_from_slice(&ms[i % 64]);
                unitarise(black_box(&mut buf), n).unwrap();
            });
            println!("| {n} | {r:.0} | {f:.0} |");
        }
        println!();
    }

    let wd = wilson_dirac().at(&[-2.0, 1.0]).unwrap();
    let wdg = wilson_dirac_with(0.1).at(&[-2.0, 1.0]).unwrap();
    if want("line") {
        let lp = 40;
        let kappa: Vec<f64> = (0..lp)
            .flat_map(|s| [0.0, s as f64 / lp as f64, 0.2])
            .collect();
        let mut h = vec![c(0.0, 0.0); lp * 16];
        let k = inner(2000);
        let bloch = time_ns(reps, k, |_| wd.fill(black_box(&kappa), &mut h).unwrap());
        let bloch_line = time_ns(reps, k, |_| {
            wd.fill_line(black_box(&[0.0, 0.0, 0.2]), 1, lp, &mut h)
                .unwrap()
        });
        let fast = time_ns(reps, k, |_| {
            wilson_line_with(black_box(&h), &kappa, 3, 4, 2, None, Kernels::Fast).unwrap();
        });
        let slow = time_ns(reps, k, |_| {
            wilson_line_with(black_box(&h), &kappa, 3, 4, 2, None, Kernels::Reference).unwrap();
        });
        // generic 4×4 at every κ point: four κ points at a time (production), two, one
        let mut hg = vec![c(0.0, 0.0); lp * 16];
        wdg.fill_line(&[0.0, 0.0, 0.2], 1, lp, &mut hg).unwrap();
        let generic_line = |kernels| {
            time_ns(reps, k, |_| {
                wilson_line_with(black_box(&hg), &kappa, 3, 4, 2, None, kernels).unwrap();
            })
        };
        let gen_single = generic_line(Kernels::FastSingle);
        let gen_pair = generic_line(Kernels::FastPairs);
        let gen_quad = generic_line(Kernels::Fast);
        println!("| Wilson–Dirac, one line of 40 κ points | time (µs) | per κ point (ns) |");
        println!("|---|---|---|");
        for (name, t) in [
            (
                "Bloch sums H(κ), per-line table fill (used for lines)",
                bloch_line,
            ),
            (
                "Bloch sums H(κ), batched parallel fill (TRIMs, gap grid)",
                bloch,
            ),
            ("Wilson line, reference kernels", slow),
            ("Wilson line, fast kernels", fast),
            (
                "same + 0.1 σx⊗1 (generic 4×4), fast kernels, one κ point at a time",
                gen_single,
            ),
            (
                "same + 0.1 σx⊗1 (generic 4×4), fast kernels, κ points solved in pairs",
                gen_pair,
            ),
            (
                "same + 0.1 σx⊗1 (generic 4×4), fast kernels, four κ points in lanes (production)",
                gen_quad,
            ),
        ] {
            println!("| {name} | {:.2} | {:.0} |", t / 1e3, t / lp as f64);
        }
        println!();
    }

    if want("point") {
        let s = fixed_sampling();
        let pools: Vec<rayon::ThreadPool> = [1, 2]
            .iter()
            .map(|&t| {
                rayon::ThreadPoolBuilder::new()
                    .num_threads(t)
                    .build()
                    .unwrap()
            })
            .collect();
        // one and two threads, interleaved (best of each): the time per point, the gain of the
        // second thread, and the indices it gave
        let run = |model: &toposweep::zone::bloch::Bloch, label: &str| {
            let mut best = [f64::INFINITY; 2];
            for _ in 0..reps.min(5) {
                for (b, pool) in best.iter_mut().zip(&pools) {
                    let t = pool.install(|| {
                        time_ns(1, inner(20), |_| {
                            black_box(evaluate_point(model, 2, None, None, &s).unwrap());
                        })
                    });
                    *b = b.min(t);
                }
            }
            let r = evaluate_point(model, 2, None, None, &s).unwrap();
            println!(
                "{label}: one thread {:.3} ms, two threads {:.3} ms ({:.2}×) → ({};{:?})\n",
                best[0] / 1e6,
                best[1] / 1e6,
                best[0] / best[1],
                r.nu0,
                r.nu
            );
        };
        run(
            &wd,
            "Wilson–Dirac point (m = −2), 6 planes × 41 lines × 40 points",
        );
        if std::env::var_os("KERNEL_BENCH_SKIP_GENERIC").is_none() {
            run(&wdg, "same + 0.1 σx⊗1 (generic 4×4 away from the TRIMs)");
        }
        paired_with_probe(&wd, &s, &pools, if quick { 4 } else { 30 }, inner(20));
    }

    if want("dense") {
        dense_tables(&mut rng, reps, &inner);
    }

    #[cfg(feature = "faer")]
    if want("simd") {
        simd_state_table(&wd, &mut rng, reps);
    }
}

/// One task of the probe: a chain of fused multiply–adds, each on the result of the one before.
/// (An integer chain would not do: the compiler folds a linear congruential loop into far
/// fewer steps; it may not reassociate floating-point arithmetic.)
fn chain(seed: u64, iterations: u64) -> u64 {
    let mut x = seed as f64;
    for _ in 0..iterations {
        x = x.mul_add(0.999_999_9, 1e-7);
    }
    x.to_bits()
}

/// A call of known, perfectly divisible work: `tasks` chains of `iterations` steps on the
/// current pool, like the lines of a point but with nothing serial in it. Returns their XOR —
/// the same for any number of workers (checked in [`paired_with_probe`]), so the work cannot
/// be skipped. Its gain from a second thread is the most any fork–join call of that length can
/// expect on this machine at that moment.
fn divisible_work(tasks: u64, iterations: u64) -> u64 {
    (0..tasks)
        .into_par_iter()
        .map(|t| chain(t, iterations))
        .reduce(|| 0, |a, b| a ^ b)
}

/// The point's threads gain beside that of a call with nothing serial in it
/// (`divisible_work`: 246 equal tasks of arithmetic, as long on one thread as the
/// point), in paired rounds — one thread, then two, `calls` calls each — through the same
/// pools: the share of what this machine gives a fork–join call that the core gets, without
/// Python.
fn paired_with_probe(
    model: &toposweep::zone::bloch::Bloch,
    s: &Sampling,
    pools: &[rayon::ThreadPool],
    rounds: usize,
    calls: usize,
) {
    let point = || {
        black_box(evaluate_point(model, 2, None, None, s).unwrap());
    };
    let t_point = pools[0].install(|| time_ns(3, calls, |_| point()));
    let t_unit = pools[0].install(|| {
        time_ns(3, calls, |_| {
            black_box(divisible_work(246, 1000));
        })
    });
    let iterations = ((1000.0 * t_point / t_unit).round() as u64).max(1);
    // the probe does its work: one answer on any number of workers, another for more work
    let serial = (0..246).map(|t| chain(t, iterations)).fold(0, |a, b| a ^ b);
    assert!(pools
        .iter()
        .all(|p| p.install(|| divisible_work(246, iterations)) == serial));
    assert_ne!(divisible_work(246, iterations + 1), serial);
    let probe = || {
        black_box(divisible_work(246, iterations));
    };
    let works: [&(dyn Fn() + Sync); 2] = [&point, &probe];
    let mut gains = [Vec::new(), Vec::new()];
    for _ in 0..rounds {
        for (g, f) in gains.iter_mut().zip(works) {
            let t1 = pools[0].install(|| time_ns(1, calls, |_| f()));
            let t2 = pools[1].install(|| time_ns(1, calls, |_| f()));
            g.push(t1 / t2);
        }
    }
    let median = |v: &mut Vec<f64>| {
        v.sort_by(|a, b| a.total_cmp(b));
        v[v.len() / 2]
    };
    let [mut gp, mut gq] = gains;
    println!(
        "Paired rounds (one thread, then two; {calls} calls each; median of {rounds}): \
         Wilson–Dirac point {:.2}×, 246 equal tasks of pure arithmetic as long on one thread \
         (`divisible_work`) {:.2}×\n",
        median(&mut gp),
        median(&mut gq)
    );
}

/// A Wilson–Dirac point on one thread: fresh, right after a 64×64 eigensolve by faer itself
/// (its AVX kernels may leave the upper register halves set), and after
/// `dense::leave_wide_simd` — the evidence for calling it after every faer call.
#[cfg(feature = "faer")]
fn simd_state_table(wd: &toposweep::zone::bloch::Bloch, rng: &mut Rng, reps: usize) {
    let s = fixed_sampling();
    let h = rng.hermitian(64);
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .unwrap();
    let (fresh, dirty, clean) = pool.install(|| {
        let point = || {
            time_ns(reps.min(5), 5, |_| {
                black_box(evaluate_point(wd, 2, None, None, &s).unwrap());
            })
        };
        let fresh = point();
        let m = faer::Mat::<C64>::from_fn(64, 64, |i, j| h[i * 64 + j]);
        black_box(m.self_adjoint_eigen(faer::Side::Lower).unwrap());
        let dirty = point();
        toposweep::linalg::dense::leave_wide_simd();
        (fresh, dirty, point())
    });
    println!("| Wilson–Dirac point, one thread | time (ms) |");
    println!("|---|---|");
    println!("| fresh thread | {:.2} |", fresh / 1e6);
    println!("| after one 64×64 faer eigensolve | {:.2} |", dirty / 1e6);
    println!(
        "| after that and `dense::leave_wide_simd` | {:.2} |",
        clean / 1e6
    );
    println!();
}

/// The fixed sampling of the per-point comparison: 6 planes × 41 lines × 40 κ, the 8³
/// gap grid, no gap search, no certificate.
fn fixed_sampling() -> Sampling {
    Sampling {
        loop_points: 40,
        lines: 41,
        max_lines: 41,
        step_limit: 0.08,
        gap_floor: 0.0,
        gap_points: 8,
        gap_starts: 0,
        method: Method::Wilson,
        certify: false,
        prove_gap: ProveGap::Never,
    }
}

/// A Hermitian eigensolver writing into (evals, vecs).
type Solver = dyn Fn(&[C64], usize, &mut [f64], &mut [C64]);

/// Products of many occupied bands (`dense::product` against its triple-loop reference) and the
/// accuracy of the large-n eigensolvers (why faer is used from n = 9).
fn dense_tables(rng: &mut Rng, reps: usize, inner: &dyn Fn(usize) -> usize) {
    use toposweep::linalg::dense::{product, product_loops, Op, View};
    println!(
        "| overlap U†V, occupied of n bands | dense::product (µs) | triple loops (µs) | ratio |"
    );
    println!("|---|---|---|---|");
    for occ in [8usize, 16, 32] {
        let rows = 2 * occ;
        let a = rng.hermitian(rows);
        let b = rng.hermitian(rows);
        let (va, vb) = (
            View::new(&a, rows, occ, rows),
            View::new(&b, rows, occ, rows),
        );
        let mut m = vec![c(0.0, 0.0); occ * occ];
        let k = inner(400_000 / (occ * occ * occ));
        let fast = time_ns(reps, k, |_| {
            product(&mut m, occ, black_box(va), Op::Adjoint, vb, Op::Plain)
        });
        let slow = time_ns(reps, k, |_| {
            product_loops(&mut m, occ, black_box(va), Op::Adjoint, vb, Op::Plain)
        });
        println!(
            "| {occ} of {rows} | {:.2} | {:.2} | {:.1}× |",
            fast / 1e3,
            slow / 1e3,
            slow / fast
        );
    }
    println!();
    // worst ‖Hv − λv‖ and ‖V†V − 1‖ over random and Kramers-degenerate matrices (|h_ij| ≤ 1)
    let worst = |solve: &Solver, n: usize, rng: &mut Rng| {
        let (mut e, mut v) = (vec![0.0; n], vec![c(0.0, 0.0); n * n]);
        let (mut res, mut orth) = (0.0f64, 0.0f64);
        for trial in 0..100 {
            let h = if trial % 2 == 0 {
                rng.hermitian(n)
            } else {
                kramers_pairs(rng, n)
            };
            solve(&h, n, &mut e, &mut v);
            for kk in 0..n {
                for i in 0..n {
                    let hv: C64 = (0..n).map(|j| h[i * n + j] * v[j * n + kk]).sum();
                    res = res.max((hv - v[i * n + kk] * e[kk]).norm());
                }
                for l in 0..n {
                    let d: C64 = (0..n).map(|i| v[i * n + kk].conj() * v[i * n + l]).sum();
                    orth = orth.max((d - if kk == l { 1.0 } else { 0.0 }).norm());
                }
            }
        }
        format!("{res:.1e} / {orth:.1e}")
    };
    println!("| n | nalgebra Householder: residual / orthogonality | faer |");
    println!("|---|---|---|");
    for n in [10usize, 12, 16, 24] {
        let nal = worst(
            &|h, n, e, v| toposweep::linalg::eigen::eigh_householder_into(h, n, e, v).unwrap(),
            n,
            rng,
        );
        #[cfg(feature = "faer")]
        let fa = worst(
            &|h, n, e, v| toposweep::linalg::eigen::eigh_faer_into(h, n, e, v).unwrap(),
            n,
            rng,
        );
        #[cfg(not(feature = "faer"))]
        let fa = "(build with --features faer)".to_string();
        println!("| {n} | {nal} | {fa} |");
    }
    println!();
}

/// A random Hermitian matrix whose eigenvalues come in exactly degenerate pairs (the spectrum of
/// a model with time reversal and inversion): diag(A, A*) in a random unitary basis.
fn kramers_pairs(rng: &mut Rng, n: usize) -> Vec<C64> {
    let half = rng.hermitian(n / 2);
    let mut block = vec![c(0.0, 0.0); n * n];
    let m = n / 2;
    for i in 0..m {
        for j in 0..m {
            block[(2 * i) * n + 2 * j] = half[i * m + j];
            block[(2 * i + 1) * n + 2 * j + 1] = half[i * m + j].conj();
        }
    }
    // random unitary: the eigenvectors of a random Hermitian matrix
    let (_, u) = toposweep::linalg::eigen::eigh(&rng.hermitian(n), n).unwrap();
    let mut out = vec![c(0.0, 0.0); n * n];
    for i in 0..n {
        for j in 0..n {
            let mut s = c(0.0, 0.0);
            for k in 0..n {
                for l in 0..n {
                    s += u[i * n + k] * block[k * n + l] * u[j * n + l].conj();
                }
            }
            out[i * n + j] = s;
        }
    }
    for i in 0..n {
        for j in i..n {
            let a = (out[i * n + j] + out[j * n + i].conj()) * 0.5;
            out[i * n + j] = a;
            out[j * n + i] = a.conj();
        }
    }
    out
}
