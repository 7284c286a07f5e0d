"""The benchmarks' reading of the host's steal (benches/timing.py), which every threads gain of
``make bench`` is printed beside."""

from __future__ import annotations

import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benches"))
from timing import HostSteal, cpu_ticks  # noqa: E402


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
