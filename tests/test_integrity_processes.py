"""Processes that cannot hang (issue 20): forked children after calls of two thread counts,
and Ctrl-C inside one long core call — on every path a call can take to its workers.

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


# Every way a call reaches its workers (src/pools.rs), each with minutes of work in ONE core
# call: the SIGINT goes to the process printed on the "ready" line, which prints the time it
# caught KeyboardInterrupt (CLOCK_MONOTONIC is one clock for all processes of the host).
PATHS_SETUP = textwrap.dedent(
    """
    import os, sys, time
    import numpy as np
    import toposweep as ts
    from toposweep import _core
    m = ts.models.wilson_dirac()
    LONG = dict(loop_points=1000, lines=20000, max_lines=20000, prove_gap="never")

    def report(call):
        print("ready", os.getpid(), flush=True)
        try:
            call()
        except KeyboardInterrupt:
            print("caught", time.monotonic(), flush=True)
            raise
        print("finished", flush=True)
    """
)
PATHS = {
    # the main thread joined a pool of one; a second size is handed whole to a shared pool
    "second_size": """
        ts.invariants(m, 2, threads=1, loop_points=12, lines=7)
        report(lambda: ts.invariants(m, 2, threads=2, **LONG))
    """,
    # the same through the call without the Python job beside it
    "second_size_flow": """
        ts.invariants(m, 2, threads=1, loop_points=12, lines=7)
        core, c = m.prepare([m.resolve({})])
        pump = np.linspace(0.0, 0.5, 200000)
        report(lambda: _core.flow(core, np.ascontiguousarray(c[0]), 2, 0, 1000, pump,
                                  threads=2))
    """,
    # a child of os.fork: the pools it inherited have no threads, its calls are handed over
    "forked_child": """
        ts.invariants(m, 2, loop_points=12, lines=7)
        if os.fork() == 0:
            report(lambda: ts.invariants(m, 2, **LONG))
            os._exit(0)
        os.wait()
    """,
    # the flow that decided a plane (centre_flow's second call): watched like the others
    "decided_flow": """
        core, c = m.prepare([m.resolve({})])
        report(lambda: _core.decided_flow(core, np.ascontiguousarray(c[0]), 2, 0,
                                          loop_points=1000, lines=20000, max_lines=20000,
                                          step_limit=0.08))
    """,
}


@pytest.mark.parametrize("path", sorted(PATHS))
def test_ctrl_c_stops_a_long_call_on_every_path(tmp_path: Path, path: str) -> None:
    script = tmp_path / "path.py"
    script.write_text(PATHS_SETUP + textwrap.dedent(PATHS[path]))
    proc = subprocess.Popen(
        [sys.executable, str(script)], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True
    )
    try:
        assert proc.stdout is not None
        ready = proc.stdout.readline().split()
        assert ready[:1] == ["ready"], proc.communicate(timeout=60)
        time.sleep(0.5)  # inside the long call
        sent = time.monotonic()
        os.kill(int(ready[1]), signal.SIGINT)
        try:
            out, err = proc.communicate(timeout=30)
        except subprocess.TimeoutExpired:
            pytest.fail(f"{path}: Ctrl-C did not stop the call within 30 s")
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.communicate()
    caught = [float(line.split()[1]) for line in out.splitlines() if line.startswith("caught")]
    assert caught, (out, err)
    took = caught[0] - sent
    print(f"{path}: stopped {took * 1000:.0f} ms after SIGINT")
    # polled every 40 ms; a generous bound for a busy shared host (the call takes minutes)
    assert took < 2.0, f"{path}: Ctrl-C took {took:.2f} s to stop the call"
