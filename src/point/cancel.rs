//! Stopping a long call early (Ctrl-C) without kernels that know about Python.
//!
//! A [`Watch`] is one call's stop flag plus a `poll` function that says whether the call
//! should stop (the binding's asks Python whether Ctrl-C was pressed, which needs the GIL and
//! runs only on the thread that made the call). [`Watched`] wraps a call's [`BlochSource`]
//! and checks the watch each time a kernel asks for Hamiltonians — before every Wilson line,
//! every bulk-grid row, every batch — so kernels stop between tasks without a change of
//! their own, and a stopped call returns [`CoreError::Interrupted`] from every task after.
//!
//! `poll` runs only on the calling thread (a worker of its own pool where it can be, see
//! `crate::exec::pools`) and at most every [`POLL_EVERY`]; every other check is one atomic load.
//! A call handed whole to another pool's threads (its caller only waits) is not polled: it
//! stops at its end, as before.

use crate::error::{CoreError, CoreResult};
use crate::zone::bloch::BlochSource;
use crate::C64;
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::thread::ThreadId;
use std::time::{Duration, Instant};

/// Longest time between two polls while the calling thread works (Ctrl-C must answer within
/// ~100 ms however long the call).
pub const POLL_EVERY: Duration = Duration::from_millis(40);

/// One call's stop flag and how to learn that it should stop.
pub struct Watch<'a> {
    stop: AtomicBool,
    caller: ThreadId,
    start: Instant,
    /// nanoseconds after `start` of the next poll
    next: AtomicU64,
    poll: &'a (dyn Fn() -> bool + Sync),
}

impl<'a> Watch<'a> {
    /// A watch of the calling thread; `poll()` true means: stop.
    pub fn new(poll: &'a (dyn Fn() -> bool + Sync)) -> Self {
        Self {
            stop: AtomicBool::new(false),
            caller: std::thread::current().id(),
            start: Instant::now(),
            next: AtomicU64::new(POLL_EVERY.as_nanos() as u64),
            poll,
        }
    }

    /// Whether the call was stopped.
    pub fn stopped(&self) -> bool {
        self.stop.load(Ordering::Relaxed)
    }

    /// `Err(Interrupted)` once the call should stop; polls on the calling thread when due.
    pub fn check(&self) -> CoreResult<()> {
        if self.stopped() {
            return Err(CoreError::Interrupted);
        }
        if std::thread::current().id() == self.caller {
            let now = self.start.elapsed().as_nanos() as u64;
            if now >= self.next.load(Ordering::Relaxed) {
                self.next
                    .store(now + POLL_EVERY.as_nanos() as u64, Ordering::Relaxed);
                if (self.poll)() {
                    self.stop.store(true, Ordering::Relaxed);
                    return Err(CoreError::Interrupted);
                }
            }
        }
        Ok(())
    }
}

/// A source that checks a [`Watch`] before it builds any Hamiltonian.
pub struct Watched<'a> {
    pub inner: &'a dyn BlochSource,
    pub watch: &'a Watch<'a>,
}

impl BlochSource for Watched<'_> {
    fn dim(&self) -> usize {
        self.inner.dim()
    }
    fn norb(&self) -> usize {
        self.inner.norb()
    }
    fn fill(&self, kappa: &[f64], out: &mut [C64]) -> CoreResult<()> {
        self.watch.check()?;
        self.inner.fill(kappa, out)
    }
    fn prefers_batches(&self) -> bool {
        self.inner.prefers_batches()
    }
    // (forwarded like every other method: without it a watched call loses its gap proof and
    // its loops resolved to the gap — the test below compares whole results)
    fn variation(&self) -> Option<&crate::zone::variation::VariationBound> {
        self.inner.variation()
    }
    fn local_variation(&self, centre: &[f64], half: &[f64; 3]) -> CoreResult<Option<f64>> {
        self.inner.local_variation(centre, half)
    }
    fn fill_line(
        &self,
        base: &[f64],
        axis: usize,
        points: usize,
        out: &mut [C64],
    ) -> CoreResult<()> {
        self.watch.check()?;
        self.inner.fill_line(base, axis, points, out)
    }
    fn fill_line_shifted(
        &self,
        base: &[f64],
        axis: usize,
        points: usize,
        shift: f64,
        out: &mut [C64],
    ) -> CoreResult<()> {
        self.watch.check()?;
        self.inner.fill_line_shifted(base, axis, points, shift, out)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::exec::guided::tests::pool;
    use crate::point::engine::evaluate_point;
    use crate::sampling::{Method, ProveGap, Sampling};
    use crate::topology::wilson::tests::random_model;
    use std::sync::atomic::AtomicUsize;

    fn sampling() -> Sampling {
        Sampling {
            loop_points: 64,
            lines: 400,
            max_lines: 400,
            step_limit: 0.2,
            gap_floor: 0.0,
            gap_points: 4,
            gap_starts: 0,
            method: Method::Wilson,
            certify: false,
            prove_gap: ProveGap::Never,
        }
    }

    #[test]
    fn a_watch_that_never_fires_changes_nothing() {
        let model = random_model(4, 11).at(&[]).unwrap();
        let never = || false;
        let watch = Watch::new(&never);
        let watched = Watched {
            inner: &model,
            watch: &watch,
        };
        let s = Sampling {
            loop_points: 12,
            lines: 7,
            max_lines: 13,
            ..sampling()
        };
        let plain = evaluate_point(&model, 2, None, None, &s).unwrap();
        let seen = evaluate_point(&watched, 2, None, None, &s).unwrap();
        assert_eq!(format!("{plain:?}"), format!("{seen:?}"));
    }

    #[test]
    fn a_fired_watch_stops_the_point_soon_on_any_number_of_workers() {
        let model = random_model(4, 12).at(&[]).unwrap();
        for workers in [1, 2] {
            let polls = AtomicUsize::new(0);
            // fires at the second poll, ~POLL_EVERY into the call
            let poll = || polls.fetch_add(1, Ordering::Relaxed) >= 1;
            let t0 = Instant::now();
            let r = pool(workers).install(|| {
                let watch = Watch::new(&poll);
                let watched = Watched {
                    inner: &model,
                    watch: &watch,
                };
                evaluate_point(&watched, 2, None, None, &sampling())
            });
            assert!(
                matches!(r, Err(CoreError::Interrupted)),
                "{workers} workers"
            );
            assert!(
                t0.elapsed() < 10 * POLL_EVERY,
                "stopped after {:?}",
                t0.elapsed()
            );
        }
    }
}
