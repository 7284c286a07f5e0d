//! Which threads run a call: the rayon pools of the binding.
//!
//! A call asks for `n` workers. Handing the work to a pool costs two wake-ups of sleeping
//! threads — the worker that takes it, and the caller when it is done — and on a virtual
//! machine each is tens of microseconds, which a 4-band point (a millisecond or two) feels.
//! So where it can, the calling thread is itself one of the `n` workers and starts at once:
//!
//! * `n = 1`: any calling thread runs the work itself (a one-worker pool around it);
//! * `n > 1` from the main thread (marked by [`mark_main_thread`]): a pool of the main thread
//!   plus `n − 1` workers, so only the helpers need waking;
//! * anything else — other threads asking for `n > 1`, or a thread asking for a second size —
//!   goes to a pool of `n` workers shared by all such calls, so several threads that call at
//!   once do not start more threads than they asked for.
//!
//! A thread can be a worker of one pool only (rayon), so the calling thread joins the pool of
//! the first size it asks for; later calls of another size use the shared pools.
//!
//! **Ctrl-C.** A call handed to a shared pool must still hear Ctrl-C, which Python delivers
//! to the calling thread only: that thread does not block in the pool but waits for the
//! work's end in naps of [`NAP`], running the caller's `on_wait` between them (the binding
//! polls the call's watch there, `crate::point::cancel`), and the workers stop at their next
//! check. `help_until` runs its `on_idle` likewise.
//!
//! **Fork.** A child started by `fork()` (Python's `os.fork`, multiprocessing's fork start
//! method) inherits the memory of every pool but none of its threads: work handed to such a
//! pool waits forever. So each pool is tagged with the process that built it, and a call in
//! another process builds its pools anew ([`process`]). The inherited pools are never used or
//! dropped (dropping one would signal threads that do not exist); the calling thread stays
//! registered as worker 0 of its inherited pool — rayon has no way to leave one — so in the
//! child it hands every call to the shared pools, rebuilt there.

use crate::error::{CoreError, CoreResult};
use std::cell::RefCell;
use std::collections::HashMap;
use std::rc::Rc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Mutex, OnceLock, PoisonError};
use std::thread::ThreadId;

static MAIN_THREAD: OnceLock<ThreadId> = OnceLock::new();

/// Mark the calling thread as the main thread (the binding calls this at import when Python
/// imports it on its main thread). Only the first mark counts.
pub fn mark_main_thread() {
    let _ = MAIN_THREAD.set(std::thread::current().id());
}

fn on_main_thread() -> bool {
    MAIN_THREAD.get() == Some(&std::thread::current().id())
}

/// Workers when the caller does not say: RAYON_NUM_THREADS, else the cores this process may
/// use (CPU affinity and cgroup quota included). Read once per process: asking the system
/// reads cgroup files, ~15 µs that every default call paid (as much as a small model's point).
pub fn default_threads() -> usize {
    static THREADS: OnceLock<usize> = OnceLock::new();
    *THREADS.get_or_init(|| {
        std::env::var("RAYON_NUM_THREADS")
            .ok()
            .and_then(|v| v.trim().parse::<usize>().ok())
            .filter(|&n| n > 0)
            .or_else(|| std::thread::available_parallelism().ok().map(|n| n.get()))
            .unwrap_or(1)
    })
}

/// The id of this process: pools built by another (the parent of a fork) have no threads here.
/// (`getpid`, a system call of well under a microsecond, once per call.)
fn process() -> u32 {
    std::process::id()
}

/// The pool of `n` workers shared by the calls that cannot use their own thread.
fn shared(n: usize) -> CoreResult<Arc<rayon::ThreadPool>> {
    // keyed by (process, size): a forked child finds none of its parent's pools (whose
    // threads it lacks) and builds its own; the parent's stay in the map, never dropped
    type Pools = HashMap<(u32, usize), Arc<rayon::ThreadPool>>;
    static POOLS: OnceLock<Mutex<Pools>> = OnceLock::new();
    let key = (process(), n);
    let mut map = POOLS
        .get_or_init(|| Mutex::new(HashMap::new()))
        .lock()
        .map_err(|_| CoreError::Internal("thread pool cache poisoned".into()))?;
    if let Some(p) = map.get(&key) {
        return Ok(p.clone());
    }
    let p = rayon::ThreadPoolBuilder::new()
        .num_threads(n)
        .build()
        .map_err(|e| CoreError::Internal(format!("cannot start {n} threads: {e}")))?;
    let p = Arc::new(p);
    map.insert(key, p.clone());
    Ok(p)
}

/// A thread's own pool: the process that built it, its size, the pool.
type Own = (u32, usize, Rc<rayon::ThreadPool>);

thread_local! {
    /// The pool this thread is worker 0 of (built on the first call that may).
    static OWN: RefCell<Option<Own>> = const { RefCell::new(None) };
}

/// This thread's own pool of `n` workers, if it has or may build one.
fn own(n: usize) -> Option<Rc<rayon::ThreadPool>> {
    // (not borrowed while work runs: the work may call back into Python and here again)
    OWN.with(|cell| {
        if let Some((pid, size, p)) = &*cell.borrow() {
            // inherited through a fork, its other workers do not exist: the shared pools then
            return (*pid == process() && *size == n).then(|| p.clone());
        }
        if n > 1 && !on_main_thread() {
            return None;
        }
        // fails where this thread is already a worker of another pool (a Python callback
        // running inside a call): the shared pool then
        let built = rayon::ThreadPoolBuilder::new()
            .num_threads(n)
            .use_current_thread()
            .build()
            .ok()?;
        let p = Rc::new(built);
        *cell.borrow_mut() = Some((process(), n, p.clone()));
        Some(p)
    })
}

/// The calling thread's nap while a pool it handed work to runs it ([`run_with`]).
pub const NAP: std::time::Duration = std::time::Duration::from_millis(20);

/// Run `f` with `n` workers (see the module notes for which threads they are); where the
/// calling thread only waits for them, it runs `on_wait` every [`NAP`].
pub fn run_with<T, F>(n: usize, on_wait: &(dyn Fn() + Sync), f: F) -> CoreResult<T>
where
    T: Send,
    F: FnOnce() -> CoreResult<T> + Send,
{
    if n == 0 {
        return Err(CoreError::InvalidInput("threads must be positive".into()));
    }
    match own(n) {
        // (the calling thread is worker 0: it polls between the tasks it runs)
        Some(p) => p.install(f),
        None => {
            let p = shared(n)?;
            if p.current_thread_index().is_some() {
                // already a worker of it (a callback of a call on this pool calling again):
                // it runs the work itself, polling between tasks; handing the work to its
                // own queue and napping would wait forever in a pool of one
                p.install(f)
            } else {
                handed_over(&p, on_wait, f)
            }
        }
    }
}

/// Run `f` on `pool`, whose workers this thread is not one of: `f` is spawned into the pool
/// and this thread naps until it is done, running `on_wait` after every nap. (`install`
/// would block this thread until the end, deaf to Ctrl-C.)
fn handed_over<T, F>(pool: &rayon::ThreadPool, on_wait: &(dyn Fn() + Sync), f: F) -> CoreResult<T>
where
    T: Send,
    F: FnOnce() -> CoreResult<T> + Send,
{
    /// marks the work done and wakes the caller, also when `f` panics (the scope then
    /// re-raises the panic on the caller)
    struct Done<'a>(&'a AtomicBool, std::thread::Thread);
    impl Drop for Done<'_> {
        fn drop(&mut self) {
            self.0.store(true, Ordering::Release);
            self.1.unpark();
        }
    }
    let out = Mutex::new(None);
    let done = AtomicBool::new(false);
    let caller = std::thread::current();
    pool.in_place_scope(|scope| {
        scope.spawn(|_| {
            let _done = Done(&done, caller);
            let r = f();
            *out.lock().unwrap_or_else(PoisonError::into_inner) = Some(r);
        });
        while !done.load(Ordering::Acquire) {
            std::thread::park_timeout(NAP);
            on_wait();
        }
    });
    out.into_inner()
        .unwrap_or_else(PoisonError::into_inner)
        .unwrap_or_else(|| {
            Err(CoreError::Internal(
                "the handed-over work did not run".into(),
            ))
        })
}

/// Run other work of the current pool (jobs this worker spawned, or stolen from the others)
/// until `done` is set, yielding the CPU between attempts when there is none: the worker does
/// not fall asleep at once, so the end of a short wait costs no wake-up (on a virtual machine
/// ~15 µs of an ~1.5 ms call). Meant for the waits at the end of a call, where the other
/// workers finish their last tasks; a job of this worker that no other has taken yet is run
/// here, so the wait ends even if no other worker comes. After ~1 ms without work (a long
/// Python callback on another worker, say) it naps 100 µs between attempts instead of
/// keeping a core busy, and runs `on_idle` between naps (the binding polls Ctrl-C there, so
/// a wait for another worker's long task still answers it).
pub fn help_until(done: &AtomicBool, on_idle: &dyn Fn()) {
    let mut idle = 0u32;
    while !done.load(Ordering::Acquire) {
        if rayon::yield_now() == Some(rayon::Yield::Executed) {
            idle = 0;
        } else if idle < IDLE_BEFORE_NAPS {
            idle += 1;
            std::thread::yield_now();
        } else {
            on_idle();
            std::thread::sleep(std::time::Duration::from_micros(100));
        }
    }
}

/// Attempts without work before [`help_until`] naps: ~1 ms of `sched_yield` on this machine.
const IDLE_BEFORE_NAPS: u32 = 2000;

#[cfg(test)]
mod tests {
    use super::*;

    fn nothing() {}

    /// (worker index of the thread that runs the body, pool size, whether it is the caller)
    fn probe(n: usize) -> (Option<usize>, usize, bool) {
        let caller = std::thread::current().id();
        run_with(n, &nothing, || {
            Ok((
                rayon::current_thread_index(),
                rayon::current_num_threads(),
                std::thread::current().id() == caller,
            ))
        })
        .unwrap()
    }

    #[test]
    fn zero_threads_is_an_error() {
        assert!(matches!(
            run_with(0, &nothing, || Ok(())),
            Err(CoreError::InvalidInput(_))
        ));
    }

    #[test]
    fn one_worker_is_the_calling_thread() {
        std::thread::spawn(|| assert_eq!(probe(1), (Some(0), 1, true)))
            .join()
            .unwrap();
    }

    #[test]
    fn other_threads_hand_larger_pools_over() {
        std::thread::spawn(|| {
            let (_, size, inline) = probe(2);
            assert_eq!(size, 2);
            assert!(
                !inline,
                "only the main thread joins a pool of several workers"
            );
        })
        .join()
        .unwrap();
    }

    #[test]
    fn main_thread_joins_its_first_pool_and_hands_other_sizes_over() {
        std::thread::spawn(|| {
            mark_main_thread();
            assert!(on_main_thread());
            assert_eq!(probe(3), (Some(0), 3, true));
            // both halves of a join run, whichever worker takes them
            let (a, b) = run_with(3, &nothing, || Ok(rayon::join(|| 1, || 2))).unwrap();
            assert_eq!(a + b, 3);
            let (_, size, inline) = probe(1);
            assert_eq!(size, 1);
            assert!(!inline, "a thread is a worker of one pool only");
            assert_eq!(probe(3), (Some(0), 3, true));
        })
        .join()
        .unwrap();
    }

    #[test]
    fn a_worker_of_a_shared_pool_hands_a_one_thread_call_over() {
        // a Python callback that runs on a shared worker and calls the core again: that
        // worker cannot join a pool of its own, so the shared one-worker pool takes the call
        std::thread::spawn(|| {
            let inner = run_with(2, &nothing, || Ok(probe(1))).unwrap();
            assert_eq!(inner.1, 1);
            assert!(!inner.2);
        })
        .join()
        .unwrap();
    }

    #[test]
    fn a_worker_of_a_shared_pool_calling_again_runs_the_call_itself() {
        // shared(2) worker → shared(1) (handed over) → its worker asks for 1 again: it is
        // the one worker of that pool, so it must run the call (a nap would wait forever)
        std::thread::spawn(|| {
            let r = run_with(2, &nothing, || {
                run_with(1, &nothing, || run_with(1, &nothing, || Ok(probe(1))))
            });
            assert_eq!(r.unwrap().1, 1);
        })
        .join()
        .unwrap();
    }

    #[test]
    fn a_handed_over_call_hears_its_caller_while_the_caller_waits() {
        // not the main thread: a call of 2 workers goes whole to the shared pool; the work
        // checks a stop flag like a kernel, which only the waiting caller can set (as the
        // binding's poll of Ctrl-C, which runs on the calling thread alone)
        std::thread::spawn(|| {
            let stop = AtomicBool::new(false);
            let waits = std::sync::atomic::AtomicUsize::new(0);
            let on = std::thread::current().id();
            let on_wait = || {
                assert_eq!(std::thread::current().id(), on, "run off the caller");
                if waits.fetch_add(1, Ordering::Relaxed) >= 1 {
                    stop.store(true, Ordering::Relaxed);
                }
            };
            let t0 = std::time::Instant::now();
            let r: CoreResult<()> = run_with(2, &on_wait, || {
                assert!(rayon::current_thread_index().is_some());
                while !stop.load(Ordering::Relaxed) {
                    assert!(
                        t0.elapsed() < std::time::Duration::from_secs(30),
                        "never stopped"
                    );
                    std::thread::sleep(std::time::Duration::from_millis(1));
                }
                Err(CoreError::Interrupted)
            });
            assert!(matches!(r, Err(CoreError::Interrupted)));
            assert!(t0.elapsed() < 10 * NAP, "stopped after {:?}", t0.elapsed());
        })
        .join()
        .unwrap();
    }

    #[test]
    fn a_handed_over_call_that_panics_raises_on_the_caller() {
        std::thread::spawn(|| {
            let r = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
                run_with(2, &nothing, || -> CoreResult<()> { panic!("boom") })
            }));
            assert!(r.is_err());
        })
        .join()
        .unwrap();
    }

    #[test]
    fn a_helping_worker_runs_its_spawned_job_when_no_other_takes_it() {
        // a pool of one: the job waited for can only run on the helping worker itself
        let done = AtomicBool::new(false);
        let pool = crate::exec::guided::tests::pool(1);
        let ran_on = pool.install(|| {
            let mut ran_on = None;
            rayon::scope(|s| {
                s.spawn(|_| {
                    ran_on = rayon::current_thread_index();
                    done.store(true, Ordering::Release);
                });
                help_until(&done, &nothing);
            });
            ran_on
        });
        assert_eq!(ran_on, Some(0));
    }

    #[test]
    fn a_helping_worker_takes_part_in_the_work_it_waits_for() {
        // the job waited for spawns many small tasks; the helping worker runs some of them
        // (two workers, each task long enough that one worker cannot run them all first)
        let done = AtomicBool::new(false);
        let pool = crate::exec::guided::tests::pool(2);
        let helped = pool.install(|| {
            let me = rayon::current_thread_index();
            let by_me = std::sync::atomic::AtomicUsize::new(0);
            rayon::scope(|s| {
                s.spawn(|_| {
                    rayon::scope(|inner| {
                        for _ in 0..200 {
                            inner.spawn(|_| {
                                std::thread::sleep(std::time::Duration::from_micros(200));
                                if rayon::current_thread_index() == me {
                                    by_me.fetch_add(1, Ordering::Relaxed);
                                }
                            });
                        }
                    });
                    done.store(true, Ordering::Release);
                });
                help_until(&done, &nothing);
            });
            by_me.load(Ordering::Relaxed)
        });
        assert!(helped > 0, "the helping worker ran none of the tasks");
    }
}
