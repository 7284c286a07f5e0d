"""Dataset fields of the second Z2 method and of the convergence certificate.

Kept apart from :mod:`toposweep.results.dataset` so the headline schema stays readable: this module
adds the lattice (Fukui–Hatsugai) indices, ``methods_agree`` and the certificate's loop
sampling, when the run produced them.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass
from functools import cached_property
from typing import Any

import numpy as np
from numpy.typing import NDArray

__all__ = ["AGREE_FLAGS", "Field", "Raw", "method_fields"]

#: CF flags of the comparison variables
AGREE_FLAGS: dict[str, Any] = {
    "flag_values": np.array([-1, 0, 1], np.int8),
    "flag_meanings": "not_comparable disagree agree",
}
AGREE_FLAGS["flag_values"].setflags(write=False)  # shared by every result's attrs

Raw = Mapping[str, NDArray[Any]]


@dataclass(frozen=True)
class Field:
    """One data variable of a result: its trailing dimensions, type, attributes and source.

    ``source`` is the key of the core's flat per-point array, or a function of all of them
    for a derived variable; either gives one row per point, reshaped onto the grid.
    """

    name: str
    extra: tuple[tuple[str, int], ...]
    dtype: type
    attrs: Mapping[str, Any]
    source: str | Callable[[Raw], NDArray[Any]]

    @cached_property
    def extra_dims(self) -> tuple[str, ...]:
        """Names of the trailing dimensions."""
        return tuple(d for d, _ in self.extra)

    @cached_property
    def extra_shape(self) -> tuple[int, ...]:
        """Lengths of the trailing dimensions."""
        return tuple(n for _, n in self.extra)


def method_fields(
    *,
    three_d: bool,
    method: str,
    index_flags: Mapping[str, Any],
    reason_flags: Mapping[str, Any],
) -> list[Field]:
    """Fields for the lattice result (``method`` ``"lattice"`` or ``"both"``).

    With ``"both"``, ``methods_agree`` compares the lattice indices with the headline
    (Wilson-loop) ones where both are defined.

    Examples
    --------
    >>> import toposweep as ts
    >>> ds = ts.invariants(ts.models.bhz(), 2, {"mass": -1.0}, method="both")
    >>> int(ds.nu0), int(ds.nu0_lattice), int(ds.methods_agree)
    (1, 1, 1)
    """
    fields = [
        Field(
            "loop_points_used",
            (),
            np.int32,
            {
                "long_name": "kappa points per Wilson loop in the finest run that decided "
                "(twice loop_points where the certificate recomputed a tight flow; 0: no loops)",
                "units": "1",
            },
            "loop_points_used",
        )
    ]
    if method not in ("lattice", "both"):
        return fields
    label = "strong Z2 index nu0" if three_d else "Z2 index"
    fields.append(
        Field(
            "nu0_lattice",
            (),
            np.int8,
            {
                "long_name": f"{label} from the lattice Z2 (Fukui-Hatsugai)",
                "units": "1",
                **index_flags,
            },
            "nu0_lattice",
        )
    )
    if three_d:
        fields.append(
            Field(
                "nu_lattice",
                (("axis", 3),),
                np.int8,
                {
                    "long_name": "weak Z2 indices from the lattice Z2 (Fukui-Hatsugai)",
                    "units": "1",
                    **index_flags,
                },
                "nu_lattice",
            )
        )
    fields += [
        Field(
            "lattice_undefined_reason",
            (),
            np.int8,
            {"long_name": "why the lattice Z2 indices are undefined", "units": "1", **reason_flags},
            "lattice_reason",
        ),
        Field(
            "lattice_max_field",
            (),
            np.float64,
            {
                "long_name": "largest lattice field strength |F| on a plaquette of the finest mesh",
                "units": "rad",
            },
            "lattice_max_field",
        ),
        Field(
            "lattice_min_link",
            (),
            np.float64,
            {
                "long_name": "smallest |link variable| (overlap of neighbouring occupied spaces) "
                "on the finest mesh",
                "units": "1",
            },
            "lattice_min_link",
        ),
        Field(
            "lattice_loop_points",
            (),
            np.int32,
            {
                "long_name": "kappa points along the loop axis of a uniform mesh of the finest "
                "lattice spacing used (cells are split where the field or links are too rough)",
                "units": "1",
            },
            lambda raw: raw["lattice_mesh"][:, 0],
        ),
        Field(
            "lattice_pump_steps",
            (),
            np.int32,
            {
                "long_name": "steps from 0 to 1/2 along the pump axis of a uniform mesh of the "
                "finest lattice spacing used",
                "units": "1",
            },
            lambda raw: raw["lattice_mesh"][:, 1],
        ),
        Field(
            "lattice_points",
            (),
            np.int32,
            {
                "long_name": "kappa points of the lattice meshes of all planes (refined locally "
                "where the field or links were too rough)",
                "units": "1",
            },
            "lattice_points",
        ),
    ]
    if method == "both":
        fields.append(
            Field(
                "methods_agree",
                (),
                np.int8,
                {
                    "long_name": "Wilson-loop and lattice Z2 indices are equal",
                    "units": "1",
                    **AGREE_FLAGS,
                },
                "methods_agree",
            )
        )
    return fields
