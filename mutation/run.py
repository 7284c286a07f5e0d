"""Mutation testing of the modules where a silent bug means a wrong published result.

``make mutants`` runs this script. It plants one small bug at a time (a mutant) in

- Python (cosmic-ray): the builtin models, the phase/reason/flag tables of the Dataset, the
  Python-side reason codes of ``evaluation.py``;
- Rust (cargo-mutants): index assembly (``src/topology/indices.rs``), Fu–Kane parity
  (``src/topology/parity.rs``) and Z2 flow counting (``src/topology/flow.rs``),

runs the tests that guard that module against each mutant, and writes the summary to
``docs/mutants.md``. A mutant the tests do not notice ("survived", "missed") is either a hole in
the tests — add a test that kills it — or equivalent to the original code (no input tells them
apart); equivalent ones are listed with the reason in ``mutation/equivalent.toml``. The script
exits non-zero when a survivor is neither killed nor listed.

Why cosmic-ray for Python: it mutates the module files in place and runs any command per
mutant, so it works with the editable install and the compiled extension as they are (mutmut 3
runs the tests from a copied tree and its trampolines only reach code inside functions, not the
module-level tables — phase names, reason codes — that matter most here), and its session
database records every mutant with its enclosing function, which the scoping below uses.

The groups are scoped (functions, operators, test files) so that the whole run takes well under
an hour on 2 cores: the Python groups and the Rust groups run side by side, one core each, and
cargo-mutants works in place on the warm ``target/`` (a few seconds of build per mutant). The
report ends with the time of a full run, from the measured times of the groups and the CPU
time per mutant. Everything runs under ``nice``. Options: ``--only python|rust``,
``--group NAME`` (repeatable), ``--recheck`` (only the last survivors, after new tests),
``--definitions`` (a partial run), ``--one-lane``, ``--report``.
"""

from __future__ import annotations

import argparse
import json
import os
import re
import shlex
import shutil
import subprocess
import sys
import tempfile
import time
from collections import Counter
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path

import tomllib

ROOT = Path(__file__).resolve().parent.parent
PY = Path(os.environ.get("VIRTUAL_ENV", ROOT / ".venv")) / "bin" / "python"
OUT = ROOT / "docs" / "mutants.md"
STATE = ROOT / "mutation" / "last_run.json"  # every group's last result; the report is made from it
EQUIVALENT = ROOT / "mutation" / "equivalent.toml"

# operators whose mutants are almost all trivially equivalent or unviable for numeric array code
# (bit operations, shifts, powers and floor division never appear in these modules' sums;
# replacing an operator by them only produces TypeErrors that any test catches)
EXCLUDED_OPERATORS = [
    r"core/ReplaceBinaryOperator_.*_(BitOr|BitAnd|BitXor|LShift|RShift|FloorDiv|Pow|Mod)$",
    r"core/ReplaceBinaryOperator_(BitOr|BitAnd|BitXor|LShift|RShift|Pow|Mod)_.*",
    r"core/RemoveDecorator",
    r"core/ExceptionReplacer",
    r"core/ReplaceComparisonOperator_(Is|IsNot|In|NotIn)_.*",
    r"core/ReplaceComparisonOperator_.*_(Is|IsNot|In|NotIn)$",
    # -x → ~x or not x on floats: a TypeError or a bool where an array is built, caught by the
    # first test that touches the line; they only cost time
    r"core/ReplaceUnaryOperator_.*_(Invert|Not)$",
]


@dataclass
class PythonGroup:
    """Modules mutated by cosmic-ray and the tests run against each of their mutants."""

    name: str
    modules: list[str]
    tests: list[str]
    definitions: list[str] | None = None  # enclosing functions to keep (None: all); "" = module
    why: str = ""


PYTHON_GROUPS = [
    PythonGroup(
        "models-geometry",
        [
            "python/toposweep/models/honeycomb.py",
            "python/toposweep/models/diamond.py",
            "python/toposweep/models/_bonds.py",
        ],
        ["tests/test_published_hamiltonians.py", "tests/test_physics_catalogue.py"],
        definitions=["", "kane_mele", "fu_kane_mele", "add_spin_bond"],
        why="Kane–Mele and diamond models, built from bonds found from the geometry",
    ),
    PythonGroup(
        "models-closed-form",
        [
            "python/toposweep/models/cubic.py",
            "python/toposweep/models/square.py",
            "python/toposweep/models/df_lattice.py",
            "python/toposweep/models/_matrices.py",
        ],
        ["tests/test_published_hamiltonians.py", "tests/test_physics_catalogue.py"],
        definitions=["", "wilson_dirac", "bhz", "df_lattice", "_band_hoppings", "kron"],
        why="Wilson–Dirac, BHZ and d–f models, hoppings written by hand",
    ),
    PythonGroup(
        "dataset-flags",
        ["python/toposweep/results/dataset.py"],
        ["tests/test_flag_meanings.py"],
        definitions=["", "_flags"],
        why="phase and reason codes and names, the CF flag tables",
    ),
    PythonGroup(
        "dataset-schema",
        ["python/toposweep/results/dataset.py"],
        ["tests/test_flag_meanings.py", "tests/test_parity_independent.py"],
        definitions=["_fields"],
        why="which variables a result has, with which flags",
    ),
    PythonGroup(
        "python-reasons",
        ["python/toposweep/evaluation.py"],
        [
            "tests/test_flag_meanings.py",
            "tests/test_parity_independent.py",
            "tests/test_symmetry_rule.py",
            "tests/test_bad_input.py::test_wrong_model_inversion_leaves_only_parity_undefined",
        ],
        definitions=[
            "",
            "_mark",
            "_symmetry_breaks",
            "run_points",
            "python_side",
            "run_points.python_side",
        ],
        why="reason codes 7 and 8 set on the Python side (symmetry broken at a point)",
    ),
]


@dataclass
class RustGroup:
    """Source files mutated by cargo-mutants (tests: the crate's unit tests)."""

    name: str
    files: list[str]
    test_filter: list[str] = field(default_factory=list)
    why: str = ""


RUST_GROUPS = [
    RustGroup(
        "rust-indices",
        ["src/topology/indices.rs"],
        ["indices::"],
        why="plane Z2s → (ν0; ν1ν2ν3) and reason; phase and agreement codes",
    ),
    RustGroup(
        "rust-parity",
        ["src/topology/parity.rs"],
        ["parity::"],
        why="Fu–Kane parity indices at the TRIMs and their reason codes",
    ),
    RustGroup(
        "rust-flow",
        ["src/topology/flow.rs"],
        ["flow::"],
        why="largest-gap tracking: the Z2 count of a flow, the refinement test",
    ),
]


# CPU seconds per mutant (user + system of the whole process tree), which do not depend on how
# busy the host is; measured on 5 December 2026 with `time`: cosmic-ray on models-closed-form
# (258 mutants, 11.3 CPU-minutes: pytest start, imports and the two test files per mutant);
# cargo-mutants in place on 12 rust-flow mutants and the baseline (32 CPU-seconds: an
# incremental debug build of the crate and the flow unit tests per mutant)
CPU_SECONDS_PER_MUTANT = {"cosmic-ray": 2.6, "cargo-mutants": 2.4}


@dataclass
class Survivor:
    """A mutant no test noticed; ``key`` identifies it across runs (no line numbers)."""

    group: str
    where: str
    what: str
    key: str
    reason: str | None = None
    name: str = ""  # the tool's own name of the mutant (cargo-mutants: with line and column)


@dataclass
class GroupResult:
    """Outcome counts and survivors of one group."""

    name: str
    tool: str
    why: str
    counts: dict[str, int]
    survivors: list[Survivor]
    seconds: float  # the full run of the group (a recheck adds recheck_seconds)
    finished: str = ""
    command: str = ""
    recheck_seconds: float = 0.0
    rechecked: str = ""  # when and how the survivors were last run again
    load: str = ""  # the host's 1-minute load average at the start and at the end


def nice(cmd: list[str]) -> list[str]:
    """``cmd`` at low priority: the host is shared."""
    return ["nice", "-n", "15", *cmd]


def load_now() -> float:
    """The host's 1-minute load average (times on a shared host mean little without it)."""
    return os.getloadavg()[0]


def key_without_folders(key: str) -> str:
    """A survivor key with its file's folders dropped: keys stay valid when files move."""
    path, sep, rest = key.partition("|")
    return Path(path).name + sep + rest


def _python_key(module_path: str, op: str, line: str, plus: list[str]) -> str:
    return f"{module_path}|{op}|{line.strip()}|{plus[0] if plus else ''}"


def _added_lines(diff: str) -> list[str]:
    lines = diff.splitlines()
    return [d[1:].strip() for d in lines if d.startswith("+") and not d.startswith("++")]


def _python_mutant_key(m) -> str:
    """The key of a cosmic-ray mutation spec, computed without running it (for a recheck)."""
    import difflib

    import cosmic_ray.plugins
    from cosmic_ray.mutating import mutate_code

    source = (ROOT / m.module_path).read_text()
    operator = cosmic_ray.plugins.get_operator(m.operator_name)(**(m.operator_args or {}))
    mutated = mutate_code(source, operator, m.occurrence) or source
    diff = "\n".join(difflib.unified_diff(source.split("\n"), mutated.split("\n"), lineterm=""))
    line = source.splitlines()[m.start_pos[0] - 1]
    return _python_key(
        str(m.module_path), m.operator_name.removeprefix("core/"), line, _added_lines(diff)
    )


# -- Python: cosmic-ray ---------------------------------------------------------------------------
def run_python_group(g: PythonGroup, work: Path, only: set[str] | None = None) -> GroupResult:
    """Initialise a cosmic-ray session, skip what is out of scope, run it, collect it.

    ``only``: run just the mutants with these keys (a recheck of the last run's survivors).
    """
    from cosmic_ray.work_db import WorkDB, use_db
    from cosmic_ray.work_item import TestOutcome, WorkerOutcome, WorkResult

    start, load_start = time.monotonic(), load_now()
    config = work / f"{g.name}.toml"
    session = work / f"{g.name}.sqlite"
    tests = " ".join(g.tests)
    config.write_text(
        "[cosmic-ray]\n"
        f"module-path = {json.dumps(g.modules)}\n"
        "timeout = 120.0\n"
        "excluded-modules = []\n"
        f'test-command = "{PY} -m pytest -x -q -p no:cacheprovider -p no:randomly {tests}"\n'
        '[cosmic-ray.distributor]\nname = "local"\n'
    )
    subprocess.run(
        [str(PY.parent / "cosmic-ray"), "init", str(config), str(session)], cwd=ROOT, check=True
    )
    pattern = re.compile("|".join(f"(?:{e})" for e in EXCLUDED_OPERATORS))
    with use_db(str(session), WorkDB.Mode.open) as db:
        for item in list(db.pending_work_items):
            m = item.mutations[0]
            outside = g.definitions is not None and (m.definition_name or "") not in g.definitions
            skip = pattern.match(m.operator_name) or outside
            if not skip and only is not None:
                line = (ROOT / m.module_path).read_text().splitlines()[m.start_pos[0] - 1]
                op = m.operator_name.removeprefix("core/")
                # (keys compared without folders: a file may have moved since the last run)
                prefix = key_without_folders(_python_key(str(m.module_path), op, line, []))
                maybe = any(key_without_folders(k).startswith(prefix) for k in only)
                skip = not maybe or key_without_folders(_python_mutant_key(m)) not in {
                    key_without_folders(k) for k in only
                }
            if skip:
                db.set_result(
                    item.job_id,
                    WorkResult(output="not in scope", worker_outcome=WorkerOutcome.SKIPPED),
                )
    subprocess.run(
        nice([str(PY.parent / "cosmic-ray"), "exec", str(config), str(session)]),
        cwd=ROOT,
        check=True,
    )
    dirty = subprocess.run(
        ["git", "status", "--porcelain", "--", *g.modules], cwd=ROOT, capture_output=True, text=True
    ).stdout
    assert not dirty, f"cosmic-ray left a module changed:\n{dirty}"

    counts: dict[str, int] = {}
    survivors: list[Survivor] = []
    with use_db(str(session), WorkDB.Mode.open) as db:
        for item, result in db.completed_work_items:
            if result.worker_outcome == WorkerOutcome.SKIPPED:
                continue
            if result.worker_outcome != WorkerOutcome.NORMAL:
                outcome = f"error ({result.worker_outcome.value})"
            else:
                outcome = {
                    TestOutcome.KILLED: "killed",
                    TestOutcome.SURVIVED: "survived",
                    TestOutcome.INCOMPETENT: "killed",  # timeout or crash of the run: noticed
                }[result.test_outcome]
            counts[outcome] = counts.get(outcome, 0) + 1
            if outcome == "survived":
                m = item.mutations[0]
                line = (ROOT / m.module_path).read_text().splitlines()[m.start_pos[0] - 1]
                op = m.operator_name.removeprefix("core/")
                plus = _added_lines(result.diff or "")
                became = f" → `{plus[0]}`" if plus else ""
                survivors.append(
                    Survivor(
                        g.name,
                        f"{m.module_path}:{m.start_pos[0]} ({m.definition_name or 'module'})",
                        f"{op}: `{line.strip()}`{became}",
                        _python_key(str(m.module_path), op, line, plus),
                    )
                )
    r = GroupResult(g.name, "cosmic-ray", g.why, counts, survivors, time.monotonic() - start)
    r.load = f"{load_start:.1f}–{load_now():.1f}"
    return r


def recheck_python_group(g: PythonGroup, work: Path) -> GroupResult:
    """Run again only the group's last survivors (after new tests); see ``recheck``."""
    state = json.loads(STATE.read_text())[g.name]
    keys = {entry[2] for entry in state["survivors"]}
    again = run_python_group(g, work, only=keys)
    if sum(again.counts.values()) != len(keys):
        raise SystemExit(f"{g.name}: {len(keys)} survivors to recheck, found others (edited?)")
    return _after_recheck(g.name, state, again)


def _after_recheck(name: str, state: dict, again: GroupResult) -> GroupResult:
    """The last full run's counts with the rechecked survivors that are now caught as killed.

    A recheck may run a few more mutants than the survivors (cargo-mutants is told them by
    description, which some share); one of those surviving now is counted as a survivor too.
    """
    counts = dict(state["counts"])
    # (a Counter: mutants at two places of one line share a key)
    old = Counter(key_without_folders(entry[2]) for entry in state["survivors"])
    now = Counter(key_without_folders(s.key) for s in again.survivors)
    still = sum(min(n, old[k]) for k, n in now.items())
    extra = len(again.survivors) - still
    caught = sum(old.values()) - still
    counts["survived"] = counts.get("survived", 0) - caught + extra
    counts["killed"] = counts.get("killed", 0) + caught - extra
    r = GroupResult(name, again.tool, again.why, counts, again.survivors, state["seconds"])
    r.recheck_seconds = state.get("recheck_seconds", 0) + again.seconds
    r.load = state.get("load", "")
    r.command = state.get("command", "")  # the full run's; the recheck is noted beside it
    return r


# -- Rust: cargo-mutants --------------------------------------------------------------------------
def recheck_rust_group(g: RustGroup, work: Path) -> GroupResult:
    """Run again only the group's last survivors (after new tests).

    The caught ones count as killed from then on; the rest of the last run's counts stand.
    """
    state = json.loads(STATE.read_text())[g.name]
    names = [entry[3] for entry in state["survivors"]]
    again = run_rust_group(g, work, only=names)
    return _after_recheck(g.name, state, again)


def run_rust_group(g: RustGroup, work: Path, only: list[str] | None = None) -> GroupResult:
    """Run cargo-mutants on the group's files with the kernels' unit tests."""
    start, load_start = time.monotonic(), load_now()
    out = work / g.name
    # In place, one mutant at a time: the worktree's warm target/ is rebuilt incrementally (a
    # few seconds per mutant); two jobs in copies of the tree each start with a cold build of
    # every dependency and took ~30 s per mutant on this host (rust-indices, rust-parity).
    # The group's files are restored by cargo-mutants when it ends (checked below).
    cmd = [
        "cargo",
        "mutants",
        "--no-shuffle",
        "--in-place",  # (one job: cargo-mutants refuses --jobs with it)
        "--timeout",
        "300",
        "--output",
        str(out),
        "--no-default-features",
    ]
    for f in g.files:
        cmd += ["--file", f]
    for name in only or []:
        # by file name and description, not by folder and line: both may have changed since
        # the run that found the survivor (tests added above, files moved)
        file, desc = re.match(r"^(\S+?):\d+:\d+:\s*(.*)$", name).groups()
        pattern = rf"^src/(?:.*/)?{_regex_escape(Path(file).name)}:\d+:\d+: {_regex_escape(desc)}$"
        cmd += ["--re", pattern]
    cmd += ["--", "--lib"]
    if g.test_filter:
        cmd += ["--", *g.test_filter]
    done = subprocess.run(nice(cmd), cwd=ROOT)
    dirty = subprocess.run(
        ["git", "status", "--porcelain", "--", *g.files], cwd=ROOT, capture_output=True, text=True
    ).stdout
    assert not dirty, f"cargo-mutants left a file changed:\n{dirty}"
    if done.returncode not in (0, 2, 3):  # 2: missed mutants, 3: timeouts (judged below)
        raise SystemExit(f"cargo mutants failed ({done.returncode})")
    outcomes = json.loads((out / "mutants.out" / "outcomes.json").read_text())
    counts: dict[str, int] = {}
    survivors: list[Survivor] = []
    names = {
        "CaughtMutant": "killed",
        "MissedMutant": "survived",
        "Timeout": "killed",
        "Unviable": "unviable",
    }
    for o in outcomes["outcomes"]:
        if o["scenario"] == "Baseline":
            continue
        summary = names.get(o["summary"], o["summary"])
        counts[summary] = counts.get(summary, 0) + 1
        if summary == "survived":
            mutant = o["scenario"]["Mutant"]
            line = mutant.get("span", {}).get("start", {}).get("line", "?")
            func = (mutant.get("function") or {}).get("function_name", "")
            what = _rust_description(mutant)
            diff = (out / "mutants.out" / o["diff_path"]).read_text().splitlines()
            was = [d[1:].strip() for d in diff if d.startswith("-") and not d.startswith("--")]
            now = [d[1:].strip() for d in diff if d.startswith("+") and not d.startswith("++")]
            was_now = f"`{was[0] if was else ''}` → `{now[0] if now else ''}`"
            survivors.append(
                Survivor(
                    g.name,
                    f"{mutant['file']}:{line} ({func})",
                    f"{what}: {was_now}",
                    f"{mutant['file']}|{func}|{what}|{was[0] if was else ''}",
                    name=mutant["name"],
                )
            )
    r = GroupResult(g.name, "cargo-mutants", g.why, counts, survivors, time.monotonic() - start)
    r.load = f"{load_start:.1f}–{load_now():.1f}"
    return r


def _regex_escape(text: str) -> str:
    """Escape the metacharacters only (Rust's regex refuses escapes such as a backslash-space)."""
    return re.sub(r"([\\.+*?()|\[\]{}^$#&~-])", r"\\\1", text)


def _rust_description(mutant: dict) -> str:
    """cargo-mutants' own one-line description without the file and line (stable key)."""
    name = mutant.get("name", "")
    return re.sub(r"^src/[^:]+:\d+:\d+:\s*", "", name)


# -- report ---------------------------------------------------------------------------------------
def load_equivalent() -> dict[str, str]:
    """Survivor key → why it is equivalent (``mutation/equivalent.toml``)."""
    if not EQUIVALENT.exists():
        return {}
    data = tomllib.loads(EQUIVALENT.read_text())
    return {key_without_folders(e["key"]): e["reason"] for e in data.get("mutant", [])}


def remember(results: list[GroupResult], argv: list[str]) -> list[GroupResult]:
    """Merge this run's groups into ``mutation/last_run.json``; return every group's last run."""
    state = json.loads(STATE.read_text()) if STATE.exists() else {}
    stamp = time.strftime("%Y-%m-%d %H:%M UTC", time.gmtime())
    command = shlex.join(["python", "mutation/run.py", *argv])
    for r in results:
        entry = {
            "tool": r.tool,
            "why": r.why,
            "counts": r.counts,
            "seconds": round(r.seconds),
            "load": r.load,
            "finished": stamp,
            "command": command,
            "survivors": [[s.where, s.what, s.key, s.name] for s in r.survivors],
        }
        if r.recheck_seconds:  # a recheck: the full run's command and time stand
            entry["command"] = r.command
            entry["finished"] = state[r.name]["finished"]
            entry["recheck_seconds"] = round(r.recheck_seconds)
            entry["rechecked"] = f"{stamp}, `{command}`"
        state[r.name] = entry
    STATE.write_text(json.dumps(state, indent=1, sort_keys=True, ensure_ascii=False) + "\n")
    out = []
    for name, g in state.items():
        survivors = [
            Survivor(name, *entry[:3], name=entry[3] if len(entry) > 3 else "")
            for entry in g["survivors"]
        ]
        out.append(GroupResult(name, g["tool"], g["why"], g["counts"], survivors, g["seconds"]))
        out[-1].finished = g["finished"]
        out[-1].command = g.get("command", "")
        out[-1].recheck_seconds = g.get("recheck_seconds", 0)
        out[-1].load = g.get("load", "")
        out[-1].rechecked = g.get("rechecked", "")
    return out


def full_run_time(results: list[GroupResult]) -> list[str]:
    """The report's paragraph on how long ``make mutants`` takes (whole groups, both lanes)."""
    lanes: dict[str, list[float]] = {"cosmic-ray": [0.0, 0.0], "cargo-mutants": [0.0, 0.0]}
    for r in results:  # [wall seconds as measured, mutants]
        lanes[r.tool][0] += r.seconds
        lanes[r.tool][1] += sum(r.counts.values())
    py, rust = lanes["cosmic-ray"], lanes["cargo-mutants"]
    idle = {t: lanes[t][1] * CPU_SECONDS_PER_MUTANT[t] / 60 for t in lanes}
    return [
        "",
        "## How long a full run takes",
        "",
        f"All groups: {py[1]:.0f} Python mutants and {rust[1]:.0f} Rust mutants. As measured "
        f"(the minutes above, summed; a group's partial runs add up to the group), the Python "
        f"lane takes {py[0] / 60:.0f} min and the Rust lane {rust[0] / 60:.0f} min at the "
        "loads shown; `make mutants` runs the two side by side, so about the longer of them. "
        "(The Rust groups run in place, on the warm target/: 4–11 s per mutant at these "
        "loads; in copies of the tree, two jobs each starting from a cold build, they took "
        "~30 s per mutant before 5 December.)",
        "",
        "CPU time per mutant does not depend on the load: "
        f"{CPU_SECONDS_PER_MUTANT['cosmic-ray']} s (cosmic-ray) and "
        f"{CPU_SECONDS_PER_MUTANT['cargo-mutants']} s (cargo-mutants in place) "
        f"(`mutation/run.py`, CPU_SECONDS_PER_MUTANT). On an idle 2-core machine that is "
        f"{idle['cosmic-ray']:.0f} min for the Python lane and {idle['cargo-mutants']:.0f} min "
        f"for the Rust lane: about {max(idle.values()):.0f} min for `make mutants`. On a host "
        "shared by several busy people it takes several times as long: run it before a "
        "release and after changes to these modules, not in `make test`.",
    ]


def write_report(results: list[GroupResult], argv: list[str]) -> int:
    """Write docs/mutants.md; return the number of unexplained survivors."""
    results = sorted(remember(results, argv), key=lambda r: (r.tool != "cosmic-ray", r.name))
    equivalent = load_equivalent()
    unexplained = 0
    lines = [
        "# Mutation testing: last run",
        "",
        "Written by `make mutants` (`mutation/run.py`; what it mutates and why is in its",
        "docstring). A *killed* mutant made some test fail; a *survived* one did not and is",
        "either listed as equivalent below, with the reason, or a hole to close with a new test.",
        "",
        "Each group's row is its last run (`mutation/last_run.json`); `make mutants` runs them",
        "all, `python mutation/run.py --group NAME` one.",
        "",
        "Minutes are the group's full run (a recheck of its survivors after new tests is",
        "timed apart); seconds per mutant and the host's load (1-minute average at start and",
        "end; 2 cores shared by several people) say how far a time can be trusted.",
        "",
        "| group | tool | what | mutants run | killed | survived | other | minutes | "
        "s per mutant | load | run |",
        "|---|---|---|---|---|---|---|---|---|---|---|",
    ]
    for r in results:
        run = sum(r.counts.values())
        other = {k: v for k, v in r.counts.items() if k not in ("killed", "survived")}
        recheck = f" (+{r.recheck_seconds / 60:.1f} recheck)" if r.recheck_seconds else ""
        lines.append(
            f"| {r.name} | {r.tool} | {r.why} | {run} | {r.counts.get('killed', 0)} | "
            f"{r.counts.get('survived', 0)} | "
            f"{', '.join(f'{k} {v}' for k, v in sorted(other.items())) or '–'} | "
            f"{r.seconds / 60:.1f}{recheck} | {r.seconds / max(run, 1):.0f} | "
            f"{r.load or '–'} | {r.finished}, `{r.command}`"
            f"{f'; survivors rechecked {r.rechecked}' if r.rechecked else ''} |"
        )
    done = {r.name.split(" [")[0] for r in results}  # a group run in parts counts as run
    for g in [*PYTHON_GROUPS, *RUST_GROUPS]:
        if g.name not in done:
            tool = "cosmic-ray" if isinstance(g, PythonGroup) else "cargo-mutants"
            lines.append(f"| {g.name} | {tool} | {g.why} | not run yet | | | | | | | |")
    lines += full_run_time(results)
    lines += ["", "## Survivors", ""]
    any_survivor = False
    for r in results:
        for s in r.survivors:
            any_survivor = True
            s.reason = equivalent.get(key_without_folders(s.key))
            if s.reason is None:
                unexplained += 1
            verdict = f"equivalent: {s.reason}" if s.reason else "**UNEXPLAINED: add a test**"
            lines.append(f"- `{s.where}` — {s.what} — {verdict}")
    if not any_survivor:
        lines.append("None.")
    lines.append("")
    OUT.write_text("\n".join(lines))
    print(f"wrote {OUT.relative_to(ROOT)}; unexplained survivors: {unexplained}")
    return unexplained


def main(argv: list[str]) -> int:
    """Run the chosen groups and write the report; non-zero if a survivor is unexplained."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--only", choices=["python", "rust"])
    ap.add_argument("--group", action="append", help="run only these groups (by name)")
    ap.add_argument(
        "--recheck",
        action="store_true",
        help="run only the chosen groups' last survivors again (after adding tests)",
    )
    ap.add_argument(
        "--one-lane",
        action="store_true",
        help="run the Python and the Rust groups one after the other, not side by side",
    )
    ap.add_argument(
        "--report", action="store_true", help="only rewrite docs/mutants.md from the last runs"
    )
    ap.add_argument(
        "--definitions",
        nargs="+",
        help="a partial run: mutate only inside these functions of the chosen Python groups",
    )
    args = ap.parse_args(argv)
    if args.report:
        return 1 if write_report([], argv) else 0
    chosen_py = [
        g
        for g in PYTHON_GROUPS
        if args.only in (None, "python") and (not args.group or g.name in args.group)
    ]
    if args.definitions:  # a partial run is reported apart from the group's full runs
        for g in chosen_py:
            g.definitions = list(args.definitions)
            g.name = f"{g.name} [{', '.join(d or 'module level' for d in args.definitions)}]"
    chosen_rust = [
        g
        for g in RUST_GROUPS
        if args.only in (None, "rust") and (not args.group or g.name in args.group)
    ]
    paths = [m for g in chosen_py for m in g.modules] + [f for g in chosen_rust for f in g.files]
    dirty = subprocess.run(
        ["git", "status", "--porcelain", "--", *paths], cwd=ROOT, capture_output=True, text=True
    ).stdout
    if dirty:
        raise SystemExit(f"commit or stash changes to the mutated files first:\n{dirty}")
    if chosen_rust and shutil.which("cargo-mutants") is None:
        raise SystemExit("cargo-mutants missing: cargo install --locked cargo-mutants")

    def python_lane(work: Path) -> list[GroupResult]:
        run = recheck_python_group if args.recheck else run_python_group
        return [run(g, work) for g in chosen_py]

    def rust_lane(work: Path) -> list[GroupResult]:
        run = recheck_rust_group if args.recheck else run_rust_group
        return [run(g, work) for g in chosen_rust]

    with tempfile.TemporaryDirectory(prefix="mutants-") as tmp:
        work = Path(tmp)
        if args.one_lane or not (chosen_py and chosen_rust):
            results = python_lane(work) + rust_lane(work)
        else:
            # Side by side, one core each: cosmic-ray changes only python/ and its tests use
            # the installed (release) extension; cargo-mutants changes only src/ and builds
            # the debug test binary in target/debug. Neither ever sees the other's mutant.
            # (Measured times per group, one lane each: docs/mutants.md.)
            with ThreadPoolExecutor(max_workers=2) as pool:
                py, rust = pool.submit(python_lane, work), pool.submit(rust_lane, work)
                results = py.result() + rust.result()
    return 1 if write_report(results, argv) else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
