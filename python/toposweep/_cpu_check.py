"""Refuse, with a clear message, an extension compiled for CPU features this machine lacks.

``make build`` compiles the Rust extension for x86-64-v3 (AVX2, FMA, ...) when the building
machine has every feature of that level, and records its ``RUSTFLAGS`` in ``_build_flags.txt``
beside the extension. Loaded on a CPU without them (a virtual environment copied to an older
machine), the extension would die with "illegal instruction" inside some later call; this check
runs before it is loaded and says what to do instead.
"""

from __future__ import annotations

from pathlib import Path

__all__ = ["check_cpu"]

#: /proc/cpuinfo flag names of the x86-64-v3 features (lzcnt is reported as "abm")
V3_FLAGS = ("avx", "avx2", "bmi1", "bmi2", "f16c", "fma", "abm", "movbe")

_HERE = Path(__file__).resolve().parent


def missing_features(build_flags: str, cpuinfo: str) -> list[str]:
    """CPU flags the build needs that ``cpuinfo`` (text of /proc/cpuinfo) does not list.

    Examples
    --------
    >>> missing_features("-C target-cpu=x86-64-v3", "flags : fpu sse2 avx avx2 fma")
    ['bmi1', 'bmi2', 'f16c', 'abm', 'movbe']
    >>> missing_features("", "flags : fpu sse2")  # a portable build needs nothing
    []
    """
    if "x86-64-v3" not in build_flags:
        return []
    have: set[str] = set()
    for line in cpuinfo.splitlines():
        key, _, value = line.partition(":")
        if key.strip() == "flags":
            have.update(value.split())
            break
    if not have:  # nothing to compare against: let the import go ahead
        return []
    return [f for f in V3_FLAGS if f not in have]


def check_cpu(
    flags_file: Path = _HERE / "_build_flags.txt", cpuinfo: Path = Path("/proc/cpuinfo")
) -> None:
    """Raise ImportError when the extension was built for features this CPU lacks."""
    try:
        build_flags = flags_file.read_text()
        if "x86-64-v3" not in build_flags:
            return  # a portable build runs anywhere
        info = cpuinfo.read_text()
    except OSError:  # no record of the build (pip install) or no /proc: nothing to check
        return
    missing = missing_features(build_flags, info)
    if missing:
        raise ImportError(
            "toposweep's extension was compiled for x86-64-v3 on another machine and this CPU "
            f"lacks {', '.join(missing)}; rebuild it here with `make build`, or build a portable "
            "one with `RUSTFLAGS= make build`"
        )
