"""Dataset variables of the second Z2 method and of the convergence certificate.

Kept apart from :mod:`toposweep.dataset` so the headline schema stays readable: this module
adds the lattice (Fukui–Hatsugai) indices, ``methods_agree`` and the certificate's loop
sampling, when the run produced them.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import Any

import numpy as np
from numpy.typing import NDArray

__all__ = ["AGREE_FLAGS", "method_variables"]

#: CF flags of the comparison variables
AGREE_FLAGS: dict[str, Any] = {
    "flag_values": np.array([-1, 0, 1], np.int8),
    "flag_meanings": "not_comparable disagree agree",
}


def method_variables(
    raw: Mapping[str, NDArray],
    grid: Callable[..., NDArray],
    dims: tuple[str, ...],
    *,
    three_d: bool,
    method: str,
    index_flags: Mapping[str, Any],
    reason_flags: Mapping[str, Any],
) -> dict[str, tuple]:
    """Variables for the lattice result (``method`` ``"lattice"`` or ``"both"``).

    ``grid(a, extra)`` reshapes a flat per-point array onto the grid. With ``"both"``,
    ``methods_agree`` compares the lattice indices with the headline (Wilson-loop) ones where
    both are defined.

    Examples
    --------
    >>> import toposweep as ts
    >>> ds = ts.invariants(ts.models.bhz(), 2, {"mass": -1.0}, method="both")
    >>> int(ds.nu0), int(ds.nu0_lattice), int(ds.methods_agree)
    (1, 1, 1)
    """
    data: dict[str, tuple] = {}
    data["loop_points_used"] = (
        dims,
        grid(raw["loop_points_used"]).astype(np.int32),
        {
            "long_name": "kappa points per Wilson loop in the finest run that decided "
            "(twice loop_points where the certificate recomputed a tight flow; 0: no loops)",
            "units": "1",
        },
    )
    if method not in ("lattice", "both") or "nu0_lattice" not in raw:
        return data
    label = "strong Z2 index nu0" if three_d else "Z2 index"
    nu0l = grid(raw["nu0_lattice"]).astype(np.int8)
    data["nu0_lattice"] = (
        dims,
        nu0l,
        {"long_name": f"{label} from the lattice Z2 (Fukui-Hatsugai)", "units": "1", **index_flags},
    )
    if three_d:
        data["nu_lattice"] = (
            dims + ("axis",),
            grid(raw["nu_lattice"], (3,)).astype(np.int8),
            {
                "long_name": "weak Z2 indices from the lattice Z2 (Fukui-Hatsugai)",
                "units": "1",
                **index_flags,
            },
        )
    data["lattice_undefined_reason"] = (
        dims,
        grid(raw["lattice_reason"]).astype(np.int8),
        {"long_name": "why the lattice Z2 indices are undefined", "units": "1", **reason_flags},
    )
    data["lattice_max_field"] = (
        dims,
        grid(raw["lattice_max_field"]),
        {
            "long_name": "largest lattice field strength |F| on a plaquette of the finest mesh",
            "units": "rad",
        },
    )
    data["lattice_min_link"] = (
        dims,
        grid(raw["lattice_min_link"]),
        {
            "long_name": "smallest |link variable| (overlap of neighbouring occupied spaces) "
            "on the finest mesh",
            "units": "1",
        },
    )
    mesh = grid(raw["lattice_mesh"], (2,)).astype(np.int32)
    data["lattice_loop_points"] = (
        dims,
        mesh[..., 0],
        {
            "long_name": "kappa points along the loop axis of the finest lattice mesh used "
            "(doubled where the field or links were too rough)",
            "units": "1",
        },
    )
    data["lattice_pump_steps"] = (
        dims,
        mesh[..., 1],
        {
            "long_name": "steps from 0 to 1/2 along the pump axis of the finest lattice mesh used",
            "units": "1",
        },
    )
    if method == "both":
        nu0w = grid(raw["nu0"]).astype(np.int8)
        agree = nu0w == nu0l
        if three_d:
            agree &= np.all(grid(raw["nu"], (3,)) == grid(raw["nu_lattice"], (3,)), axis=-1)
        both = (nu0w >= 0) & (nu0l >= 0)
        data["methods_agree"] = (
            dims,
            np.where(both, agree.astype(np.int8), -1).astype(np.int8),
            {
                "long_name": "Wilson-loop and lattice Z2 indices are equal",
                "units": "1",
                **AGREE_FLAGS,
            },
        )
    return data
