"""``toposweep plot --at``: every value given is used, a parameter given twice is refused."""

from __future__ import annotations

from pathlib import Path

import pytest
import toposweep as ts
from toposweep.cli import _parser, _point, main
from toposweep.errors import ParameterError


def test_repeated_and_listed_at_accumulate() -> None:
    args = _parser().parse_args(["plot", "r.nc", "--flow", "--at", "a=1", "--at", "b=2"])
    assert _point(args.at) == {"a": 1.0, "b": 2.0}
    args = _parser().parse_args(["plot", "r.nc", "--at", "a=1", "b=2", "--at", "c=-3.5"])
    assert _point(args.at) == {"a": 1.0, "b": 2.0, "c": -3.5}


def test_one_parameter_twice_is_refused() -> None:
    with pytest.raises(ParameterError, match="'a' twice"):
        _point(["a=1", "a=2"])


@pytest.fixture(scope="module")
def two_dim_result(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("at") / "bhz.nc"
    grid = {"mass": [-3.0, -1.0, 1.0], "hopping": [0.5, 1.0, 2.0]}
    ts.sweep(ts.models.bhz(), grid, 2, out=out, progress=False, loop_points=12, lines=7).close()
    return out


def test_flow_at_two_parameters_uses_both(two_dim_result: Path, capsys, monkeypatch) -> None:
    import toposweep.flowplot as flowplot

    seen = []
    real = flowplot.point_of

    def spy(ds, at, **kw):
        out = real(ds, at, **kw)
        seen.append(out[2])
        return out

    monkeypatch.setattr(flowplot, "point_of", spy)
    png = two_dim_result.with_name("flow.png")
    argv = ["plot", str(two_dim_result), "--flow", "--at", "mass=1", "--at", "hopping=2"]
    assert main([*argv, "--out", str(png)]) == 0
    # the nearest grid point of both values, not the middle hopping 1.0
    assert seen == [{"mass": 1.0, "hopping": 2.0}]
    assert png.stat().st_size > 10_000
    assert main(["plot", str(two_dim_result), "--flow", "--at", "mass=1", "--at", "mass=2"]) == 2
    err = capsys.readouterr().err
    assert "'mass' twice" in err and err.count("\n") == 1
