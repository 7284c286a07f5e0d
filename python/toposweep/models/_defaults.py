"""Checked default values for the builders of the catalogue."""

from __future__ import annotations

import math
from numbers import Real

from ..errors import ParameterError

__all__ = ["checked_defaults"]


def checked_defaults(model_name: str, **values: object) -> dict[str, float]:
    """The builder's keyword values as floats, or a :class:`ParameterError` naming the bad one.

    Examples
    --------
    >>> checked_defaults("demo", mass=1)
    {'mass': 1.0}
    >>> checked_defaults("demo", mass="heavy")
    Traceback (most recent call last):
    ...
    toposweep.errors.ParameterError: demo(mass=...) must be a finite real number, got 'heavy'
    """
    out: dict[str, float] = {}
    for name, value in values.items():
        if isinstance(value, bool) or not isinstance(value, Real) or not math.isfinite(value):
            raise ParameterError(
                f"{model_name}({name}=...) must be a finite real number, got {value!r}"
            )
        out[name] = float(value)
    return out
