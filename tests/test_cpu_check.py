"""The import-time guard against an extension compiled for CPU features this machine lacks."""

from __future__ import annotations

from pathlib import Path

import pytest
from toposweep._cpu_check import V3_FLAGS, check_cpu, missing_features

# /proc/cpuinfo as Linux prints it (one block per CPU; only the first flags line is read)
HASWELL = "processor : 0\nflags : fpu sse2 " + " ".join(V3_FLAGS) + "\n\nprocessor : 1\n"
OLD_CPU = "processor : 0\nflags : fpu sse2 sse4_2 avx popcnt\n"


def write(tmp_path: Path, flags: str, cpuinfo: str) -> tuple[Path, Path]:
    (tmp_path / "flags").write_text(flags + "\n")
    (tmp_path / "cpuinfo").write_text(cpuinfo)
    return tmp_path / "flags", tmp_path / "cpuinfo"


def test_a_v3_build_on_an_older_cpu_is_refused_with_what_to_do(tmp_path: Path) -> None:
    flags, cpuinfo = write(tmp_path, "-C target-cpu=x86-64-v3", OLD_CPU)
    with pytest.raises(ImportError, match=r"lacks avx2, bmi1, .*make build"):
        check_cpu(flags, cpuinfo)


@pytest.mark.parametrize(
    ("flags", "cpuinfo"),
    [
        ("-C target-cpu=x86-64-v3", HASWELL),  # the CPU has every feature
        ("", OLD_CPU),  # portable build
        ("-C target-cpu=x86-64-v3", "no flags line here\n"),  # nothing to compare with
    ],
)
def test_builds_the_cpu_can_run_load(tmp_path: Path, flags: str, cpuinfo: str) -> None:
    check_cpu(*write(tmp_path, flags, cpuinfo))


def test_no_record_of_the_build_means_no_check(tmp_path: Path) -> None:
    check_cpu(tmp_path / "absent", tmp_path / "absent too")


def test_this_machine_can_run_this_build() -> None:
    info = Path("/proc/cpuinfo")
    flags = Path(__file__).parents[1] / "python" / "toposweep" / "_build_flags.txt"
    if not (info.exists() and flags.exists()):
        pytest.skip("no /proc/cpuinfo or no record of a make build")
    assert missing_features(flags.read_text(), info.read_text()) == []
