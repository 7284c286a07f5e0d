//! A flat list of independent tasks shared by the workers of the current pool through one
//! counter: guided self-scheduling (Polychronopoulos & Kuck, IEEE Trans. Comput. C-36, 1425
//! (1987); from memory). Each worker takes the next chunk of task indices, a share of what is
//! left, so chunks shrink towards the end and the last ones are single tasks.
//!
//! Why not nested `rayon::join`/`par_iter`: a point's TRIMs, bulk grid rows and pump lines were
//! three nested parallel phases. Rayon splits a slice into a few long runs and splits further
//! only when a run is stolen, so at the end of each nested phase one worker waited for the
//! other's run of several lines; timed leaf by leaf (a scratch build, benches/RESULTS.md), two
//! workers stood idle ~9 % of a 4-band point, one ~3.5 %. One list ends with one wait, for one
//! task, and costs a shared counter update per chunk (a few dozen per point) instead of a
//! deque operation per split.
//!
//! Results come back in index order whatever worker ran each task, so everything computed from
//! them is the same on any number of workers, bit for bit.

use crate::error::{CoreError, CoreResult};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::OnceLock;

/// `f(scratch, i)` for every `i` in `0..count` on the workers of the current rayon pool; the
/// results in index order, or the error of the first task (by index) that failed.
///
/// `init` makes the scratch of a worker when it takes its first chunk (so at most once per
/// worker and call). The calling thread takes part; the other workers are asked through one
/// spawned job each, so a worker that is slow to come costs nothing — whatever it has not
/// started is done by the others.
pub fn map_guided<S, T: Send + Sync>(
    count: usize,
    init: impl Fn() -> S + Sync,
    f: impl Fn(&mut S, usize) -> CoreResult<T> + Sync,
) -> CoreResult<Vec<T>> {
    let slots: Vec<OnceLock<CoreResult<T>>> = (0..count).map(|_| OnceLock::new()).collect();
    let next = AtomicUsize::new(0);
    // the smallest index of a task that failed: tasks above it are skipped, since the list's
    // result is that error whatever they give (a stopped call — Ctrl-C, src/point/cancel.rs — then
    // ends at once instead of preparing every remaining task); every task below it runs, so
    // the error reported is still the first by index
    let failed = AtomicUsize::new(usize::MAX);
    let workers = rayon::current_num_threads().clamp(1, count.max(1));
    let work = || {
        let mut scratch: Option<S> = None;
        loop {
            // (a stale `left` only changes the chunk's size: the range itself comes from
            // fetch_add, so no index is taken twice or skipped)
            let left = count.saturating_sub(next.load(Ordering::Relaxed));
            if left == 0 {
                return;
            }
            // half a worker's share of what is left: the first chunks leave enough behind for
            // a worker that comes late, the last are single tasks
            let chunk = (left / (2 * workers)).max(1);
            let start = next.fetch_add(chunk, Ordering::Relaxed);
            if start >= count {
                return;
            }
            let s = scratch.get_or_insert_with(&init);
            for (i, slot) in slots
                .iter()
                .enumerate()
                .take(count.min(start + chunk))
                .skip(start)
            {
                if i > failed.load(Ordering::Relaxed) {
                    return;
                }
                let r = f(s, i);
                if r.is_err() {
                    failed.fetch_min(i, Ordering::Relaxed);
                }
                // (each index is taken once, so the slot is empty)
                let _ = slot.set(r);
            }
        }
    };
    rayon::scope(|sc| {
        for _ in 1..workers {
            sc.spawn(|_| work());
        }
        work();
    });
    let first_failed = failed.into_inner();
    slots
        .into_iter()
        .take(first_failed.saturating_add(1))
        .map(|s| {
            s.into_inner().unwrap_or_else(|| {
                Err(CoreError::Internal("a task of the list was not run".into()))
            })
        })
        .collect()
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use std::sync::atomic::AtomicUsize;
    use std::sync::Mutex;

    /// A pool of `n` workers for tests that compare results on different numbers of workers.
    pub(crate) fn pool(n: usize) -> rayon::ThreadPool {
        rayon::ThreadPoolBuilder::new()
            .num_threads(n)
            .build()
            .unwrap()
    }

    #[test]
    fn every_task_once_results_in_order() {
        for workers in [1, 2, 3, 5] {
            for count in [0, 1, 2, 7, 1000] {
                let runs: Vec<AtomicUsize> = (0..count).map(|_| AtomicUsize::new(0)).collect();
                let out = pool(workers)
                    .install(|| {
                        map_guided(
                            count,
                            || (),
                            |_, i| {
                                runs[i].fetch_add(1, Ordering::Relaxed);
                                Ok(i * i)
                            },
                        )
                    })
                    .unwrap();
                assert_eq!(out, (0..count).map(|i| i * i).collect::<Vec<_>>());
                assert!(runs.iter().all(|r| r.load(Ordering::Relaxed) == 1));
            }
        }
    }

    #[test]
    fn scratch_made_at_most_once_per_worker() {
        let made = AtomicUsize::new(0);
        let threads = Mutex::new(Vec::new());
        pool(3)
            .install(|| {
                map_guided(
                    500,
                    || {
                        made.fetch_add(1, Ordering::Relaxed);
                        threads.lock().unwrap().push(std::thread::current().id());
                        0usize
                    },
                    |seen, i| {
                        *seen += 1; // scratch carries over between a worker's tasks
                        std::hint::black_box(i);
                        Ok(*seen)
                    },
                )
            })
            .unwrap();
        let t = threads.into_inner().unwrap();
        let mut distinct = t.clone();
        distinct.sort_by_key(|id| format!("{id:?}"));
        distinct.dedup();
        assert_eq!(made.load(Ordering::Relaxed), t.len());
        assert_eq!(distinct.len(), t.len(), "one scratch per worker");
        assert!((1..=3).contains(&t.len()));
    }

    #[test]
    fn first_error_by_index_wins() {
        let out: CoreResult<Vec<usize>> = pool(2).install(|| {
            map_guided(
                100,
                || (),
                |_, i| {
                    if i % 30 == 17 {
                        Err(CoreError::InvalidInput(format!("task {i}")))
                    } else {
                        Ok(i)
                    }
                },
            )
        });
        match out {
            Err(CoreError::InvalidInput(m)) => assert_eq!(m, "task 17"),
            other => panic!("expected the error of task 17, got {other:?}"),
        }
    }

    #[test]
    fn tasks_after_a_failed_one_are_skipped() {
        // one worker: tasks run in order, so exactly those up to the failed one run
        let ran = std::sync::atomic::AtomicUsize::new(0);
        let out: CoreResult<Vec<usize>> = pool(1).install(|| {
            map_guided(
                1000,
                || (),
                |_, i| {
                    ran.fetch_add(1, Ordering::Relaxed);
                    if i == 3 {
                        Err(CoreError::Interrupted)
                    } else {
                        Ok(i)
                    }
                },
            )
        });
        assert!(matches!(out, Err(CoreError::Interrupted)));
        assert_eq!(ran.load(Ordering::Relaxed), 4);
    }

    #[test]
    fn nested_lists_finish() {
        // a task that runs a list of its own (a point of a sweep running its lines)
        let out = pool(2)
            .install(|| {
                map_guided(
                    6,
                    || (),
                    |_, i| {
                        let inner = map_guided(40, || (), |_, j| Ok(i * 100 + j))?;
                        Ok(inner.iter().sum::<usize>())
                    },
                )
            })
            .unwrap();
        let want: Vec<usize> = (0..6).map(|i| (0..40).map(|j| i * 100 + j).sum()).collect();
        assert_eq!(out, want);
    }
}
