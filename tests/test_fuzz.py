"""Fuzzing (hypothesis) of everything that reads user input: the model builder
(``TightBinding``/``add``), ``model_from_dict``, the configuration loader and the result-file
reader, and a small run of ``invariants`` on whatever model survives.

The contract: bad input raises a ``ValueError`` or ``TypeError`` subclass — nothing else
escapes (no ``RuntimeError`` from the core, no Rust panic reaching the interpreter, which would
be a ``BaseException``), and nothing hangs (hypothesis' per-example deadline).
"""

from __future__ import annotations

import json
import string
from collections import Counter
from datetime import timedelta
from pathlib import Path

import numpy as np
import pytest
import toposweep as ts
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp
from toposweep.config import load_config, parse_config
from toposweep.results.dataset import PHASES, REASONS
from toposweep.results.store import open_result

FUZZ = settings(
    max_examples=150,
    deadline=timedelta(seconds=10),
    derandomize=True,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture],
)
ALLOWED = (ValueError, TypeError)


def survives(fn, *args, **kwargs):
    """Call ``fn``; return its result, or None if it raised an allowed error. Anything else
    (including ``BaseException`` subclasses such as a Rust panic) propagates and fails."""
    try:
        return fn(*args, **kwargs)
    except ALLOWED:
        return None


# -- junk values ---------------------------------------------------------------------------------
floats = st.floats(allow_nan=True, allow_infinity=True, width=64)
scalars = st.one_of(
    st.none(),
    st.booleans(),
    st.integers(-(2**70), 2**70),
    floats,
    st.complex_numbers(allow_nan=True, allow_infinity=True),
    st.text(max_size=8),
    st.binary(max_size=8),
)
junk = st.recursive(
    scalars,
    lambda inner: st.one_of(
        st.lists(inner, max_size=4), st.dictionaries(st.text(max_size=6), inner, max_size=4)
    ),
    max_leaves=12,
)
arrays = hnp.arrays(
    dtype=st.sampled_from([np.float64, np.complex128, np.int64, np.bool_, np.object_]),
    shape=hnp.array_shapes(min_dims=0, max_dims=3, min_side=0, max_side=5),
    elements=None,
)
U_T = {2: np.array([[0, 1], [-1, 0]], complex), 4: np.kron(np.array([[0, 1], [-1, 0]]), np.eye(2))}


def _symmetric_hopping(r, t, u):
    """T projected onto time reversal (U_T T* U_T† = T) and, on site, onto Hermitian matrices:
    the two projections commute, so the result is exactly symmetric."""
    t = 0.5 * (t + u @ t.conj() @ u.conj().T)
    return 0.5 * (t + t.conj().T) if not any(r) else t


def _drawn_model(data):
    """A model drawn in one of three ways: symmetric (valid hoppings, so the run reaches the
    core), raw (valid shapes, random values: mostly refused as not symmetric) or junk."""
    how = data.draw(st.sampled_from(["symmetric", "symmetric", "raw", "junk"]), label="how")
    if how == "junk":
        dim = data.draw(st.one_of(st.sampled_from([2, 3]), st.integers(-1, 4), junk))
        norb = data.draw(st.one_of(st.sampled_from([2, 4]), junk))
        hops = data.draw(
            st.lists(
                st.tuples(
                    st.one_of(st.lists(st.integers(-2, 2), max_size=4), junk, arrays),
                    st.one_of(arrays, junk),
                    st.one_of(st.none(), st.text(max_size=4), junk),
                ),
                max_size=4,
            )
        )
        return how, dim, norb, hops, data.draw(st.one_of(st.just(2), st.integers(-1, 5), junk))
    dim = data.draw(st.sampled_from([2, 3]), label="dim")
    norb = 4
    u = U_T[norb]
    entries = st.complex_numbers(max_magnitude=4.0, allow_nan=False, allow_infinity=False)
    hops = []
    for _ in range(data.draw(st.integers(1, 5), label="bonds")):
        r = tuple(data.draw(st.lists(st.integers(-1, 1), min_size=dim, max_size=dim)))
        t = data.draw(hnp.arrays(np.complex128, (norb, norb), elements=entries))
        if how == "symmetric":
            t = _symmetric_hopping(r, t, u)
        hops.append((r, t, data.draw(st.sampled_from([None, "x", "y"]))))
    return how, dim, norb, hops, data.draw(st.sampled_from([2, 2, 2, 1, 3]), label="filling")


def test_model_builder_and_a_small_run():
    """Build models from drawn input and run them at small sampling. A share of the examples
    must reach the core and come back with a result whose codes are in range: a builder that
    refused everything, or a core that always raised, would fail here."""
    seen = Counter()

    @FUZZ
    @given(data=st.data())
    def run(data):
        how, dim, norb, hops, filling = _drawn_model(data)
        seen["examples", how] += 1
        tr = U_T.get(norb) if isinstance(norb, int) and not isinstance(norb, bool) else None
        model = survives(ts.TightBinding, dim, norb, time_reversal=tr)
        if model is None:
            return
        for r, t, term in hops:
            survives(model.add, r, t, term)
        survives(model.hamiltonian, data.draw(st.one_of(arrays, junk), label="kappa"))
        values = data.draw(st.floats(-2.0, 2.0), label="value")
        ds = survives(
            ts.invariants,
            model,
            filling,
            {p: values for p in model.parameters},
            loop_points=8,
            lines=3,
            max_lines=6,
            gap_points=2,
            method="both",
        )
        if ds is None:
            return
        seen["results", how] += 1
        assert int(ds.nu0) in (-1, 0, 1) and int(ds.nu0_lattice) in (-1, 0, 1)
        reason = int(ds.undefined_reason)
        assert reason in REASONS and (reason == 0) == (int(ds.nu0) >= 0)
        assert int(ds.phase) in PHASES
        gap = float(ds.gap_direct)
        assert np.isnan(gap) or gap >= 0.0
        if reason == 0:
            seen["defined"] += 1

    run()
    print("fuzzed runs:", dict(seen))
    examples = sum(v for k, v in seen.items() if k[0] == "examples")
    results = sum(v for k, v in seen.items() if k[0] == "results")
    # symmetric draws are about half of the examples; most of them must be run by the core
    assert results >= 0.3 * examples, dict(seen)
    assert seen["results", "symmetric"] >= 0.6 * seen["examples", "symmetric"], dict(seen)
    assert seen["defined"] >= 5, dict(seen)  # some gapped models get an index, too


@FUZZ
@given(
    norb=st.sampled_from([2, 4]),
    values=st.lists(
        hnp.arrays(np.complex128, (4, 4), elements=st.complex_numbers(max_magnitude=1e3)),
        min_size=1,
        max_size=3,
    ),
    loop_points=st.one_of(st.integers(4, 12), st.integers(-2, 40)),
    lines=st.one_of(st.integers(2, 6), st.integers(-2, 12)),
    step=st.one_of(st.floats(0.01, 0.49), floats),
    floor=st.one_of(st.none(), st.floats(1e-9, 1.0), floats),
    method=st.sampled_from(["wilson", "lattice", "both"]),
    scale=st.sampled_from([1e-300, 1e-8, 1.0, 1e8, 1e150]),
)
def test_random_hoppings_and_sampling_options(
    norb, values, loop_points, lines, step, floor, method, scale
):
    """Valid shapes, random (often non-symmetric) values and random sampling options."""
    u = U_T[norb]
    model = ts.TightBinding(2, norb, time_reversal=u)
    for i, v in enumerate(values):
        r = (i % 2, (i + 1) // 2)
        block = scale * v[:norb, :norb]
        block = 0.5 * (block + u @ block.conj() @ u.conj().T)  # keep time reversal
        survives(model.add, r, block + block.conj().T if not any(r) else block, "x")
    survives(
        ts.invariants,
        model,
        2,
        {"x": 0.7},
        loop_points=loop_points,
        lines=lines,
        max_lines=max(lines, 2) * 2,
        step_limit=step,
        gap_floor=floor,
    )


@FUZZ
@given(doc=junk)
def test_model_from_arbitrary_json(doc):
    survives(ts.model_from_dict, doc)


VALID = ts.models.bhz().to_dict()


def _paths(d, prefix=()):
    if isinstance(d, dict):
        for k, v in d.items():
            yield prefix + (k,)
            yield from _paths(v, prefix + (k,))
    elif isinstance(d, list):
        for i, v in enumerate(d):
            yield prefix + (i,)
            yield from _paths(v, prefix + (i,))


PATHS = list(_paths(VALID))


@FUZZ
@given(
    edits=st.lists(st.tuples(st.sampled_from(PATHS), junk, st.booleans()), min_size=1, max_size=3)
)
def test_model_from_mutated_description(edits):
    doc = json.loads(json.dumps(VALID))
    for path, value, delete in edits:
        node = doc
        try:
            for key in path[:-1]:
                node = node[key]
            if delete and isinstance(node, dict):
                node.pop(path[-1], None)
            else:
                node[path[-1]] = value
        except (KeyError, IndexError, TypeError):
            continue
    model = survives(ts.model_from_dict, doc)
    if model is not None:
        survives(model.hamiltonian, [[0.1, 0.2]])


TOML_KEYS = [
    "model",
    "filling",
    "output",
    "grid",
    "params",
    "sampling",
    "run",
    "model_options",
    "coefficients",
    "junk",
]
toml_values = st.one_of(
    st.integers(-5, 10).map(str),
    st.floats(allow_nan=False).map(repr),
    st.sampled_from(
        [
            '"bhz"',
            '"wilson_dirac"',
            '"m.nc"',
            '"x.py:f"',
            "[1, 2]",
            "true",
            "{ start = -1.0, stop = 1.0, num = 3 }",
            "{ values = [1.0] }",
            "{ start = 0, stop = 1, num = -3 }",
            '"nan"',
            "inf",
            "nan",
        ]
    ),
    st.text(string.printable, max_size=12),
)


@FUZZ
@given(
    lines=st.lists(st.tuples(st.sampled_from(TOML_KEYS), toml_values), max_size=6),
    tables=st.lists(
        st.tuples(
            st.sampled_from(["grid", "sampling", "params", "run", "model_options"]),
            st.lists(
                st.tuples(
                    st.sampled_from(
                        [
                            "mass",
                            "hopping",
                            "loop_points",
                            "lines",
                            "threads",
                            "gap_floor",
                            "method",
                            "x",
                        ]
                    ),
                    toml_values,
                ),
                max_size=3,
            ),
        ),
        max_size=3,
    ),
)
def test_config_from_fragments(lines, tables, tmp_path_factory):
    text = "\n".join(f"{k} = {v}" for k, v in lines)
    for name, items in tables:
        text += f"\n[{name}]\n" + "\n".join(f"{k} = {v}" for k, v in items)
    base = tmp_path_factory.mktemp("cfg")
    survives(parse_config, text, "fuzz.toml", base)


@FUZZ
@given(data=st.binary(max_size=400))
def test_config_file_of_random_bytes(data, tmp_path_factory):
    path = tmp_path_factory.mktemp("cfg") / "c.toml"
    path.write_bytes(data)
    survives(load_config, path)


@pytest.fixture(scope="module")
def result_bytes(tmp_path_factory) -> bytes:
    out = tmp_path_factory.mktemp("res") / "r.nc"
    ts.sweep(
        ts.models.bhz(),
        {"mass": np.array([-1.0, 3.0])},
        2,
        out=out,
        progress=False,
        loop_points=8,
        lines=3,
    )
    return out.read_bytes()


def _read(path: Path) -> None:
    with open_result(path) as ds:
        ds.load()


@FUZZ
@given(
    cuts=st.lists(st.tuples(st.floats(0, 1), st.binary(min_size=1, max_size=16)), max_size=4),
    keep=st.floats(0.0, 1.0),
)
def test_result_reader_on_damaged_files(result_bytes, cuts, keep, tmp_path_factory):
    data = bytearray(result_bytes[: max(1, int(len(result_bytes) * keep))])
    for where, junk_bytes in cuts:
        i = int(where * (len(data) - 1))
        data[i : i + len(junk_bytes)] = junk_bytes
    path = tmp_path_factory.mktemp("res") / "damaged.nc"
    path.write_bytes(bytes(data))
    survives(_read, path)


@FUZZ
@given(data=st.binary(max_size=600))
def test_result_reader_on_random_bytes(data, tmp_path_factory):
    assume(len(data) > 0)
    path = tmp_path_factory.mktemp("res") / "random.nc"
    path.write_bytes(data)
    survives(_read, path)


def test_complex_lattice_vectors_and_kappa_are_rejected_not_truncated():
    """Found by fuzzing: numpy casts complex to float with only a warning."""
    m = ts.TightBinding(2, 2)
    with pytest.raises(ts.ModelError, match="R must be"):
        m.add(np.array([1 + 0.5j, 0]), np.eye(2))
    with pytest.raises(ts.ModelError, match="kappa must be real"):
        ts.models.bhz().hamiltonian(np.array([[0.1 + 0.3j, 0.2]]))
