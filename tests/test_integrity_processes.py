"""Processes that cannot hang (issue 20): forked children after calls of two thread counts,
and Ctrl-C inside one long core call.

Each case runs in a fresh interpreter with a timeout, so a regression fails instead of hanging
the test run (and the pools of this test process play no part).
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

FORK_SCRIPT = textwrap.dedent(
    """
    import multiprocessing as mp, os, sys
    import toposweep as ts

    def work(threads):
        ds = ts.invariants(ts.models.bhz(), 2, params={"mass": 1.0}, threads=threads,
                           loop_points=12, lines=7)
        return int(ds.nu0)

    if __name__ == "__main__":
        # the main thread joins a pool of 2; threads=1 then builds a shared pool of one
        assert work(2) == 1 and work(1) == 1
        pid = os.fork()
        if pid == 0:  # a child of os.fork with both sizes
            os._exit(0 if [work(1), work(2), work(3)] == [1, 1, 1] else 3)
        _, status = os.waitpid(pid, 0)
        assert os.waitstatus_to_exitcode(status) == 0, status
        for method in ("fork", "forkserver", "spawn"):
            with mp.get_context(method).Pool(2) as pool:
                assert pool.map(work, [1, 2, 1, 2]) == [1] * 4, method
            print(method, "ok", flush=True)
    """
)


def test_forked_children_do_not_hang(tmp_path: Path) -> None:
    script = tmp_path / "fork_matrix.py"
    script.write_text(FORK_SCRIPT)
    try:
        done = subprocess.run(
            [sys.executable, str(script)], capture_output=True, text=True, timeout=120
        )
    except subprocess.TimeoutExpired as exc:
        pytest.fail(f"a forked child hung (output so far: {exc.stdout!r})")
    assert done.returncode == 0, done.stderr
    assert done.stdout.split() == ["fork", "ok", "forkserver", "ok", "spawn", "ok"]


LONG_CALL = textwrap.dedent(
    """
    import sys, toposweep as ts
    m = ts.models.wilson_dirac()
    ts.invariants(m, 2, loop_points=24, lines=7, threads=int(sys.argv[1]))  # warm up
    print("ready", flush=True)
    # minutes of work in ONE core call
    ts.invariants(m, 2, loop_points=1000, lines=20000, max_lines=20000, threads=int(sys.argv[1]))
    print("finished", flush=True)
    """
)


@pytest.mark.parametrize("threads", [1, 2])
def test_ctrl_c_stops_one_long_core_call(tmp_path: Path, threads: int) -> None:
    script = tmp_path / "long_call.py"
    script.write_text(LONG_CALL)
    proc = subprocess.Popen(
        [sys.executable, str(script), str(threads)],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    try:
        assert proc.stdout is not None and proc.stdout.readline().strip() == "ready"
        time.sleep(0.5)  # inside the long call
        os.kill(proc.pid, signal.SIGINT)
        sent = time.monotonic()
        _, err = proc.communicate(timeout=30)
        took = time.monotonic() - sent
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.communicate()
    assert proc.returncode != 0
    assert err.strip().splitlines()[-1].startswith("KeyboardInterrupt"), err
    # polled every 40 ms; a generous bound for a busy shared host (the call takes minutes)
    assert took < 5.0, f"Ctrl-C took {took:.1f} s to stop the call"
