//! A call of known, perfectly divisible work for the benchmarks: what the machine and the pools
//! give a fork–join call of a given length, with nothing serial in it.
//!
//! `tasks` equal tasks, each a chain of `iterations` floating-point multiply–adds, spread over the
//! pool like the lines of a point. Two whole processes that run side by side never wait for each
//! other; a call does, at its end, for the last task — and on a virtual machine for a worker
//! whose virtual CPU the host has paused. This call has that wait and nothing else, so its gain
//! from a second thread is the most any fork–join call of the same length can expect at that
//! moment.

use rayon::prelude::*;

/// One task: a chain of fused multiply–adds, each on the result of the one before. (An integer
/// chain would not do: the compiler folds a linear congruential loop into far fewer steps; it
/// may not reassociate floating-point arithmetic.)
fn chain(seed: u64, iterations: u64) -> u64 {
    let mut x = seed as f64;
    for _ in 0..iterations {
        x = x.mul_add(0.999_999_9, 1e-7);
    }
    x.to_bits()
}

/// Run `tasks` chains of `iterations` steps on the current pool; their XOR (the same for any
/// number of workers, so that the work cannot be skipped).
pub fn divisible_work(tasks: u64, iterations: u64) -> u64 {
    (0..tasks)
        .into_par_iter()
        .map(|t| chain(t, iterations))
        .reduce(|| 0, |a, b| a ^ b)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn same_result_on_any_number_of_workers() {
        let serial = (0..37).map(|t| chain(t, 1000)).fold(0, |a, b| a ^ b);
        for n in [1, 2, 3] {
            let pool = rayon::ThreadPoolBuilder::new()
                .num_threads(n)
                .build()
                .unwrap();
            assert_eq!(pool.install(|| divisible_work(37, 1000)), serial, "{n}");
        }
        // the chain really runs: a different length gives a different result
        assert_ne!(divisible_work(37, 1001), serial);
    }

    #[test]
    fn time_grows_with_the_work() {
        let t = |it| {
            let t0 = std::time::Instant::now();
            // (inputs hidden from the optimiser too: with them known, `cargo test --release`
            // timed the long chain at less than 100 short ones, every time)
            std::hint::black_box(chain(std::hint::black_box(1), std::hint::black_box(it)));
            t0.elapsed()
        };
        // (the shorter time as the best of several, so that a pause of the thread cannot
        // inflate it)
        let short = (0..5).map(|_| t(1000)).min().unwrap();
        assert!(t(2_000_000) > short * 100);
    }
}
