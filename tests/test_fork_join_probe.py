"""The benchmarks' fork–join probe (``_core.fork_join_probe``, used by benches/fork_join_gain.py)
really does the work it is timed for."""

from __future__ import annotations

import time

from toposweep import _core


def test_fork_join_probe_does_its_work_on_any_number_of_threads():
    """The benchmarks' probe (benches/fork_join_gain.py): the same checksum on one and two
    threads, a different one for a different amount of work, and a time that grows with it."""
    one = _core.fork_join_probe(64, 2000, threads=1)
    assert _core.fork_join_probe(64, 2000, threads=2) == one
    assert _core.fork_join_probe(64, 2001, threads=1) != one

    def seconds(iterations: int) -> float:
        t0 = time.perf_counter()
        _core.fork_join_probe(16, iterations, threads=1)
        return time.perf_counter() - t0

    seconds(1000)
    assert min(seconds(400_000) for _ in range(3)) > 20 * min(seconds(1000) for _ in range(3))
