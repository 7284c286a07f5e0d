"""The benchmarks' reading of the host's steal (benches/timing.py), which every threads gain of
``make bench`` is printed beside, and the interval given with each gain."""

from __future__ import annotations

import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benches"))
import numpy as np  # noqa: E402
import pytest  # noqa: E402
from timing import HostSteal, cpu_ticks, gain_interval, paired_gain  # noqa: E402


def test_cpu_ticks_reads_the_steal_field_of_the_cpu_line(tmp_path):
    """proc(5): the first line is "cpu" then user nice system idle iowait irq softirq steal
    guest guest_nice, in clock ticks (a handbook fact; guest time is already in user)."""
    stat = tmp_path / "stat"
    stat.write_text("cpu  100 2 30 400 5 6 7 50 11 0\ncpu0 50 1 15 200 2 3 3 25 5 0\n")
    assert cpu_ticks(str(stat)) == (50, 100 + 2 + 30 + 400 + 5 + 6 + 7 + 50)
    stat.write_text("intr 1 2 3\n")
    assert cpu_ticks(str(stat)) is None
    assert cpu_ticks(str(tmp_path / "missing")) is None


def test_host_steal_is_a_share_or_not_available():
    with HostSteal() as steal:
        sum(range(10**6))
    text = steal.text()
    if steal.share is None:
        assert text == "n/a"
    else:
        assert 0.0 <= steal.share <= 1.0
        assert text.endswith(" %")


def test_gain_interval_agrees_with_scipys_bootstrap():
    """The interval of a median of per-round ratios against scipy.stats.bootstrap (percentile
    method) on the same ratios: a reference library's resampling, with its own random stream,
    so the ends agree to the resampling noise only."""
    stats = pytest.importorskip("scipy.stats")
    rng = np.random.default_rng(3)
    one = rng.lognormal(np.log(3.0), 0.15, 60)  # (ms: noisy one-thread rounds, ...)
    many = rng.lognormal(np.log(1.6), 0.15, 60)  # (... and all-core rounds)
    times = [[a, b] for a, b in zip(one, many, strict=True)]
    lo, hi = gain_interval(times, 0, 1)
    ref = stats.bootstrap(
        (one / many,), np.median, method="percentile", n_resamples=20000, random_state=1
    ).confidence_interval
    assert lo < paired_gain(times, 0, 1) < hi
    assert abs(lo - ref.low) < 0.05 and abs(hi - ref.high) < 0.05, (lo, hi, ref)


def test_gain_interval_narrows_with_more_rounds():
    rng = np.random.default_rng(4)

    def width(rounds: int) -> float:
        ratios = rng.lognormal(np.log(1.9), 0.2, rounds)
        lo, hi = gain_interval([[r, 1.0] for r in ratios], 0, 1)
        return hi - lo

    assert width(300) < 0.6 * width(30)
