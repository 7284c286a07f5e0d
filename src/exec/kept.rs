//! Scratch a thread keeps from one line to the next (a Wilson line's buffers, a folded line):
//! allocating it per line, or per rayon split, cost the most with both cores at work
//! (benches/RESULTS.md, measurement history).

use std::cell::Cell;
use std::thread::LocalKey;

/// Scratch is kept only up to this size: a thread would otherwise hold a large model's buffers
/// for the rest of the process, and at that size allocating them costs nothing next to the
/// line's eigensolves.
pub(crate) const KEPT_SCRATCH_BYTES: usize = 1 << 20;

/// Run `f` on the scratch this thread keeps in `slot`, taken out of the slot while `f` runs (a
/// line started inside another line — never in this crate — finds the slot empty and starts
/// afresh), and put back after unless `bytes` of it exceed [`KEPT_SCRATCH_BYTES`]. A thread
/// being torn down has no slot any more, and then works on fresh scratch.
pub(crate) fn with_kept<S: Default, T>(
    slot: &'static LocalKey<Cell<S>>,
    bytes: impl FnOnce(&S) -> usize,
    f: impl FnOnce(&mut S) -> T,
) -> T {
    let mut s = slot.try_with(Cell::take).unwrap_or_default();
    let out = f(&mut s);
    if bytes(&s) <= KEPT_SCRATCH_BYTES {
        let _ = slot.try_with(|c| c.set(s));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    thread_local! {
        static SLOT: Cell<Vec<u8>> = const { Cell::new(Vec::new()) };
    }

    /// Kept unless larger than the limit, and a nested use finds the slot empty.
    #[test]
    fn kept_unless_large() {
        let kept_len = |len: usize| {
            std::thread::spawn(move || {
                with_kept(&SLOT, Vec::capacity, |v| v.resize(len, 0));
                with_kept(&SLOT, Vec::capacity, |v| {
                    let inner = with_kept(&SLOT, Vec::capacity, |w| w.capacity());
                    assert_eq!(inner, 0, "a nested use starts on empty scratch");
                    v.capacity()
                })
            })
            .join()
            .unwrap()
        };
        assert!(kept_len(KEPT_SCRATCH_BYTES) >= KEPT_SCRATCH_BYTES);
        assert_eq!(kept_len(KEPT_SCRATCH_BYTES + 1), 0);
    }
}
