"""A fingerprint of a model's own numbers, so that a resumed run notices a changed model.

A run's identity names the model (its description) and the coefficients mapping (its
``module:qualname``), but a :class:`~toposweep.CallableModel` or a ``coefficients=`` function
whose code was edited between an interrupt and a resume keeps its name. What cannot stay the
same when the model changes are its numbers, so the identity also records a digest of

* the coefficients mapping's output (the resolved model parameters) at a few fixed points of
  the grid — first, middle and last in C order — and
* H(κ) at a few fixed, generic κ points for each of those parameter points.

The same recipe serves every model kind (tight-binding, callable, catalogue), since it asks
only what every model answers: :meth:`~toposweep.Model.resolve` and
:meth:`~toposweep.Model.hamiltonian`. It costs a handful of small calls (three coefficient
evaluations, three Hamiltonian batches of five κ points), run on the calling thread.

Values are rounded to 9 decimals relative to a power-of-two scale of each array before they are
hashed, so the last-bit differences of another NumPy build or CPU do not count as a change,
while any change of a model's numbers beyond one part in ~10⁹ does.
"""

from __future__ import annotations

import hashlib
import math
from collections.abc import Callable, Iterable, Mapping

import numpy as np
from numpy.typing import ArrayLike

from .model import Model

__all__ = ["sample_indices", "numbers_fingerprint"]

#: generic κ points (reduced coordinates): no TRIM, no mirror line, different in every
#: coordinate, so a change of any hopping shows in H at one of them at least
KAPPA = np.array(
    [
        [0.1234, 0.3581, 0.7297],
        [0.6180, 0.2718, 0.1414],
        [0.4142, 0.8660, 0.5772],
        [0.9069, 0.0507, 0.3090],
        [0.2236, 0.6931, 0.9512],
    ]
)
#: decimals kept, relative to a power-of-two scale of each array
DECIMALS = 9


def sample_indices(size: int) -> list[int]:
    """Flat grid indices whose points the fingerprint samples: first, middle and last.

    Examples
    --------
    >>> sample_indices(60), sample_indices(1), sample_indices(2)
    ([0, 30, 59], [0], [0, 1])
    """
    return sorted({0, size // 2, size - 1})


def _rounded(values: ArrayLike) -> bytes:
    """Bytes of ``values`` rounded to :data:`DECIMALS` relative to a power-of-two scale."""
    a = np.asarray(values)
    parts = (a.real, a.imag) if np.iscomplexobj(a) else (a,)
    peak = max((float(np.max(np.abs(p), initial=0.0)) for p in parts), default=0.0)
    scale = 2.0 ** math.ceil(math.log2(peak)) if peak > 0 and math.isfinite(peak) else 1.0
    out = [np.round(np.asarray(p, dtype=float) / scale, DECIMALS) + 0.0 for p in parts]
    return repr(scale).encode() + b"".join(np.ascontiguousarray(o).tobytes() for o in out)


def numbers_fingerprint(
    model: Model,
    user_points: Iterable[Mapping[str, float]],
    model_point: Callable[[dict[str, float]], dict[str, float]],
) -> str:
    """Digest of the model parameters and H(κ) at the given grid points.

    ``model_point`` maps one grid point (the user's variables) to resolved model parameters —
    through the coefficients mapping where the sweep has one.

    Examples
    --------
    >>> import toposweep as ts
    >>> a = numbers_fingerprint(ts.models.bhz(), [{"mass": 1.0}], ts.models.bhz().resolve)
    >>> b = numbers_fingerprint(ts.models.bhz(hopping=1.5), [{"mass": 1.0}],
    ...                         ts.models.bhz(hopping=1.5).resolve)
    >>> len(a), a == b
    (16, False)
    """
    h = hashlib.sha256()
    kappa = np.ascontiguousarray(KAPPA[:, : model.dim])
    for user in user_points:
        params = model_point(dict(user))
        names = sorted(params)
        h.update(repr(names).encode())
        h.update(_rounded([params[k] for k in names]))
        h.update(_rounded(model.hamiltonian(kappa, params)))
    return h.hexdigest()[:16]
