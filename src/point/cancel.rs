//! Stopping a long call early (Ctrl-C) without kernels that know about Python.
//!
//! A [`Watch`] is one call's stop flag plus a `poll` function that says whether the call
//! should stop (the binding's asks Python whether Ctrl-C was pressed, which needs the GIL and
//! runs only on the thread that made the call). [`Watched`] wraps a call's [`BlochSource`]
//! and checks the watch each time a kernel asks for Hamiltonians — before every Wilson line,
//! every bulk-grid row, every batch — so kernels stop between tasks without a change of
//! their own, and a stopped call returns [`CoreError::Interrupted`] from every task after.
//!
//! `poll` runs only on the calling thread and at most every [`POLL_EVERY`]; every other check
//! is one or two atomic loads. The calling thread polls while it works (a worker of its own
//! pool, see `crate::exec::pools`) and while it waits: a call handed whole to another pool's
//! threads has its caller wake every [`POLL_EVERY`] to poll (`crate::exec::pools::run_with`).
//!
//! **Calls inside calls.** A Python callback of a call (a `CallableModel`'s function) may call
//! the core again, on whatever worker runs it. Such an inner call's watch also reads the stop
//! flag of the call it runs inside — the watch whose [`Watched`] source was filling on that
//! thread ([`Watch::inside`]) — so a stopped call stops the calls of its callbacks too
//! instead of waiting for them to end.

use crate::error::{CoreError, CoreResult};
use crate::zone::bloch::BlochSource;
use crate::C64;
use std::cell::RefCell;
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::Arc;
use std::thread::ThreadId;
use std::time::{Duration, Instant};

/// Longest time between two polls while the calling thread works (Ctrl-C must answer within
/// ~100 ms however long the call).
pub const POLL_EVERY: Duration = Duration::from_millis(40);

thread_local! {
    /// The stop flag of the watched call whose source is filling on this thread (a Python
    /// callback running now may call the core again: that inner call stops with it).
    static ENCLOSING: RefCell<Option<Arc<AtomicBool>>> = const { RefCell::new(None) };
}

/// One call's stop flag and how to learn that it should stop.
pub struct Watch<'a> {
    stop: Arc<AtomicBool>,
    /// the stop flag of the call this one was made inside, if any (see the module notes)
    enclosing: Option<Arc<AtomicBool>>,
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
            stop: Arc::new(AtomicBool::new(false)),
            enclosing: ENCLOSING.with(|e| e.borrow().clone()),
            caller: std::thread::current().id(),
            start: Instant::now(),
            next: AtomicU64::new(POLL_EVERY.as_nanos() as u64),
            poll,
        }
    }

    /// Whether the call (or the call it was made inside) was stopped.
    pub fn stopped(&self) -> bool {
        self.stop.load(Ordering::Relaxed)
            || self
                .enclosing
                .as_ref()
                .is_some_and(|e| e.load(Ordering::Relaxed))
    }

    /// Run `f` (a source's fill that may call Python, and Python the core) with this watch
    /// as the enclosing one of any call made on this thread meanwhile.
    pub fn inside<R>(&self, f: impl FnOnce() -> R) -> R {
        /// puts the previous enclosing watch back, also when `f` unwinds
        struct Restore(Option<Arc<AtomicBool>>);
        impl Drop for Restore {
            fn drop(&mut self) {
                let previous = self.0.take();
                ENCLOSING.with(|e| *e.borrow_mut() = previous);
            }
        }
        let previous = ENCLOSING.with(|e| e.borrow_mut().replace(self.stop.clone()));
        let _restore = Restore(previous);
        f()
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

impl Watched<'_> {
    /// A fill of the inner source; one that may run Python (a batch source: a callback)
    /// runs [`Watch::inside`] this call's watch, so a core call it makes stops with this one.
    fn enclose(&self, fill: impl FnOnce() -> CoreResult<()>) -> CoreResult<()> {
        if self.inner.prefers_batches() {
            self.watch.inside(fill)
        } else {
            fill()
        }
    }
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
        self.enclose(|| self.inner.fill(kappa, out))
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
        self.enclose(|| self.inner.fill_line(base, axis, points, out))
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
        self.enclose(|| self.inner.fill_line_shifted(base, axis, points, shift, out))
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
    fn a_call_made_inside_a_watched_fill_stops_with_it() {
        // a batch source (a Python callback) whose fill makes a call of its own, as a
        // callback calling the core again does: that call's watch sees the outer one stop
        struct Calling<'w>(&'w Watch<'w>, std::sync::Mutex<Vec<bool>>);
        impl BlochSource for Calling<'_> {
            fn dim(&self) -> usize {
                2
            }
            fn norb(&self) -> usize {
                2
            }
            fn fill(&self, _: &[f64], out: &mut [C64]) -> CoreResult<()> {
                let never = || false;
                let inner = Watch::new(&never);
                self.1.lock().unwrap().push(inner.stopped());
                out.fill(C64::new(0.0, 0.0));
                Ok(())
            }
        }
        let fire = AtomicBool::new(false);
        let poll = || fire.load(Ordering::Relaxed);
        let outer = Watch::new(&poll);
        let src = Calling(&outer, Default::default());
        let watched = Watched {
            inner: &src,
            watch: &outer,
        };
        let mut h = vec![C64::new(0.0, 0.0); 4];
        watched.fill(&[0.1, 0.2], &mut h).unwrap();
        // the outer call stops (a poll that fires, due after POLL_EVERY)
        fire.store(true, Ordering::Relaxed);
        std::thread::sleep(POLL_EVERY);
        assert!(outer.check().is_err());
        let stops_with_it = src.0.inside(|| Watch::new(&poll).stopped());
        assert_eq!(*src.1.lock().unwrap(), [false]);
        assert!(stops_with_it, "a call made inside a stopped one goes on");
        // outside any fill, a new call has no enclosing one
        let never = || false;
        assert!(!Watch::new(&never).stopped());
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
