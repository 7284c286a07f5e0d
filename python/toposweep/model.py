"""The model interface shared by :class:`TightBinding` and :class:`CallableModel`.

A model knows its dimension, number of orbitals, optional symmetry operators (time reversal
Θ = U_T K with U_T U_T* = −1, inversion P with P H(κ) P† = H(−κ)), its named parameters with
defaults, and how to hand itself to the Rust core for a list of parameter points.
"""

from __future__ import annotations

import functools
import json
import math
from abc import ABC, abstractmethod
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from . import _core
from .errors import ModelError, ParameterError
from .sampling import check_threads
from .symmetry import as_operator, symmetry_residual

__all__ = ["Model"]

Params = Mapping[str, float]


@functools.cache
def _symmetry_kappa(dim: int) -> NDArray[np.float64]:
    """Four fixed pseudo-random κ points (read-only) where symmetries are checked.

    Made once per dimension: a new generator costs ~15 µs, a large part of one point's checks.
    """
    kappa = np.random.default_rng(7).random((4, dim))
    kappa.flags.writeable = False
    return kappa


def _read_only(m: NDArray[np.complex128] | None) -> NDArray[np.complex128] | None:
    """A read-only copy of an operator matrix (None stays None)."""
    if m is None:
        return None
    out = np.array(m, dtype=complex)
    out.setflags(write=False)
    return out


def matrix_to_json(m: NDArray[np.complex128] | None) -> dict[str, list[list[float]]] | None:
    """Complex matrix → ``{"re": [[...]], "im": [[...]]}`` (JSON has no complex numbers)."""
    if m is None:
        return None
    return {"re": np.real(m).tolist(), "im": np.imag(m).tolist()}


def matrix_from_json(d: Mapping[str, Any] | None) -> NDArray[np.complex128] | None:
    """Inverse of :func:`matrix_to_json`.

    The parts are set, not combined as re + 1j·im: 1j·inf would turn an infinite imaginary part
    into NaN + inf·i (0·inf), and the error raised for the matrix would name the wrong value.

    Examples
    --------
    >>> matrix_from_json({"re": [[1.0, float("inf")]], "im": [[float("inf"), 0.0]]})
    array([[ 1.+infj, inf +0.j]])
    """
    if d is None:
        return None
    re, im = np.asarray(d["re"], dtype=float), np.asarray(d["im"], dtype=float)
    out = np.empty(np.broadcast_shapes(re.shape, im.shape), dtype=complex)
    out.real, out.imag = re, im
    return out


class Model(ABC):
    """Common base of toposweep models; see :class:`TightBinding` and :class:`CallableModel`."""

    def __init__(
        self,
        dim: int,
        norb: int,
        *,
        lattice: ArrayLike | None = None,
        positions: ArrayLike | None = None,
        time_reversal: ArrayLike | None = None,
        inversion: ArrayLike | None = None,
        energy_unit: str = "1",
        name: str = "",
    ) -> None:
        if isinstance(dim, bool) or not isinstance(dim, int | np.integer) or dim not in (2, 3):
            raise ModelError(
                f"dim must be 2 or 3, got {dim!r}: Z2 indices are defined for two- and "
                "three-dimensional models (a 1D chain has no Z2 index of this kind)"
            )
        if isinstance(norb, bool) or not isinstance(norb, int | np.integer) or norb < 1:
            raise ModelError(f"norb must be a positive integer, got {norb!r}")
        self.dim = int(dim)
        self.norb = int(norb)
        self.lattice = self._real_matrix(lattice, (self.dim, self.dim), "lattice")
        if self.lattice is not None:
            # rows are the primitive vectors: they must span space (relative to their length,
            # so that any unit works); a zero or repeated row is a typo, not a lattice
            lengths = np.linalg.norm(self.lattice, axis=1)
            volume = abs(float(np.linalg.det(self.lattice)))
            if not lengths.all() or volume <= 1e-10 * float(np.prod(lengths)):
                raise ModelError(
                    "lattice rows (the primitive vectors) must be linearly independent; got "
                    f"{self.lattice.tolist()}"
                )
        self.positions = self._real_matrix(positions, (self.norb, self.dim), "positions")
        self.time_reversal = _read_only(as_operator(time_reversal, self.norb, "time_reversal"))
        self.inversion = _read_only(as_operator(inversion, self.norb, "inversion"))
        #: the operators as made here; a run's checked request is reused only while both are
        #: still these (read-only) arrays (see ``evaluation.prepare_request``)
        self._own_operators = (self.time_reversal, self.inversion)
        #: (filling, threads, sampling, request) of the last run prepared for this model
        self._request_memo: tuple[Any, Any, Any, Any] | None = None
        self.energy_unit = str(energy_unit)
        self.name = str(name)
        #: default parameter values, used for every parameter a call does not set
        self.defaults: dict[str, float] = {}
        #: optional ``{"long_name": ..., "units": ...}`` per parameter, for dataset coordinates
        self.parameter_info: dict[str, dict[str, str]] = {}
        self._json_cache: tuple[Any, str] | None = None

    def __getstate__(self) -> dict[str, Any]:
        # (for pickling, e.g. to worker processes: the copy checks its own first run; kinds
        # that keep a compiled core model drop it here too)
        state = self.__dict__.copy()
        state["_request_memo"] = None
        return state

    def __setstate__(self, state: dict[str, Any]) -> None:
        self.__dict__.update(state)
        for op in self._own_operators:  # (they arrive writable)
            if op is not None:
                op.setflags(write=False)

    @staticmethod
    def _real_matrix(a: ArrayLike | None, shape: tuple[int, int], what: str) -> NDArray | None:
        if a is None:
            return None
        try:
            m = np.asarray(a, dtype=float)
        except (TypeError, ValueError) as exc:
            raise ModelError(f"{what} must be a real array of shape {shape}: {exc}") from None
        if m.shape != shape:
            raise ModelError(f"{what} must have shape {shape}, got {m.shape}")
        if not np.all(np.isfinite(m)):
            raise ModelError(f"{what} contains NaN or infinity")
        return m

    # -- parameters ---------------------------------------------------------------------------
    @property
    @abstractmethod
    def parameters(self) -> tuple[str, ...]:
        """Names of the parameters this model accepts."""

    def resolve(self, params: Params | None = None) -> dict[str, float]:
        """Full parameter dict: ``params`` on top of :attr:`defaults`, checked.

        Examples
        --------
        >>> from toposweep import models
        >>> m = models.bhz()
        >>> m.resolve({"mass": -1.0})["mass"]
        -1.0
        """
        if params is not None and not isinstance(params, Mapping):
            raise ParameterError(
                f"params must be a dict of parameter name → value, got {type(params).__name__}; "
                f"this model's parameters are {list(self.parameters)}"
            )
        given = dict(params or {})
        known = self.parameters
        unknown = sorted(set(given) - set(known))
        if unknown:
            raise ParameterError(
                f"unknown parameter(s) {unknown} for model {self.name or type(self).__name__!r}; "
                f"its parameters are {list(known)}"
            )
        out: dict[str, float] = {}
        for name in known:
            if name in given:
                value = given[name]
            elif name in self.defaults:
                value = self.defaults[name]
            else:
                raise ParameterError(
                    f"no value for parameter {name!r}: pass params={{{name!r}: ...}} "
                    f"or set model.defaults[{name!r}]"
                )
            try:
                if isinstance(value, bool | np.bool_ | str):  # float() would accept these
                    raise TypeError
                value = float(value)
            except (TypeError, ValueError):
                raise ParameterError(
                    f"parameter {name!r} must be a real number, got {value!r}"
                ) from None
            if not math.isfinite(value):
                raise ParameterError(f"parameter {name!r} must be finite, got {value!r}")
            out[name] = value
        return out

    # -- Hamiltonian ----------------------------------------------------------------------------
    def hamiltonian(
        self, kappa: ArrayLike, params: Params | None = None, *, threads: int | None = None
    ) -> NDArray[np.complex128]:
        """H(κ) at reduced coordinates ``kappa`` (shape ``(..., dim)``).

        Returns an array of shape ``(..., norb, norb)``. ``threads`` are the worker threads
        for a batch of more than 64 κ points (None: one per core); smaller batches are built
        on the calling thread. As with :func:`toposweep.invariants`, a thread keeps the pool
        of the first thread count it asks for: a program that runs ``threads=1`` calls (one
        process per core, say) should pass ``threads=1`` here too.
        """
        threads = check_threads(threads)
        try:
            if np.iscomplexobj(kappa):  # a cast would drop the imaginary parts silently
                raise TypeError("complex values given")
            k = np.asarray(kappa, dtype=float)
        except (TypeError, ValueError) as exc:
            raise ModelError(
                f"kappa must be real reduced coordinates of shape (..., {self.dim}): {exc}"
            ) from None
        if k.ndim == 0 or k.shape[-1] != self.dim:
            raise ModelError(f"kappa must have shape (..., {self.dim}), got {k.shape}")
        if not np.all(np.isfinite(k)):
            raise ModelError("kappa contains NaN or infinity")
        flat = np.ascontiguousarray(k.reshape(-1, self.dim))
        core, coeffs = self.prepare([self.resolve(params)])
        h = _core.hamiltonian(core, np.ascontiguousarray(coeffs[0]), flat, threads=threads)
        return h.reshape(*k.shape[:-1], self.norb, self.norb)

    @abstractmethod
    def prepare(self, points: Sequence[dict[str, float]]) -> tuple[Any, NDArray[np.float64]]:
        """Core model and coefficient rows (npoints, nterms) for resolved parameter dicts."""

    # -- symmetry -------------------------------------------------------------------------------
    def symmetry_residuals(
        self, points: Sequence[Mapping[str, float]], operator: NDArray[np.complex128], kind: str
    ) -> NDArray[np.float64]:
        """Relative residual of a symmetry at each parameter point, sampled at random κ.

        ``kind`` is ``"time_reversal"`` (U_T H(κ)* U_T† = H(−κ)) or ``"inversion"``
        (P H(κ) P† = H(−κ)). The residual is max|lhs − H(−κ)| / max|H(κ)|; values near machine
        precision mean the symmetry holds.
        """
        kappa = self._symmetry_kappa()
        out = np.empty(len(points))
        for i, p in enumerate(points):
            h = self.hamiltonian(np.concatenate([kappa, -kappa]), p)
            hp, hm = h[: len(kappa)], h[len(kappa) :]
            out[i] = symmetry_residual(operator, hp, hm, kind)
        return out

    def _symmetry_kappa(self) -> NDArray[np.float64]:
        return _symmetry_kappa(self.dim)

    # -- serialisation --------------------------------------------------------------------------
    def to_json(self) -> str:
        """:meth:`to_dict` as JSON text with sorted keys (the ``model`` attribute of results).

        Encoding the floats of a large model's hoppings takes far longer than building the
        description, so the text is kept and reused while :meth:`to_dict` stays equal.

        Examples
        --------
        >>> import json
        >>> from toposweep import models
        >>> m = models.bhz()
        >>> json.loads(m.to_json()) == m.to_dict()
        True
        """
        key = self._json_key()
        if self._json_cache is not None and self._json_cache[0] == key:
            return self._json_cache[1]
        text = json.dumps(self.to_dict(), sort_keys=True)
        self._json_cache = (key, text)
        return text

    def _json_key(self) -> Any:
        """What :meth:`to_json`'s cached text depends on.

        :meth:`to_dict` itself here; kinds whose description has a large part that changes only
        through their own methods return something cheaper to build and compare.
        """
        return self.to_dict()

    def _base_dict(self) -> dict[str, Any]:
        return {
            "dim": self.dim,
            "norb": self.norb,
            "name": self.name,
            "energy_unit": self.energy_unit,
            "lattice": None if self.lattice is None else self.lattice.tolist(),
            "positions": None if self.positions is None else self.positions.tolist(),
            "time_reversal": matrix_to_json(self.time_reversal),
            "inversion": matrix_to_json(self.inversion),
            # plain floats and strings: numpy scalars (np.float32 …) are not JSON-able
            "defaults": {str(k): self._default_value(k, v) for k, v in self.defaults.items()},
            "parameter_info": {
                str(k): {str(a): str(b) for a, b in v.items()}
                for k, v in self.parameter_info.items()
            },
        }

    @staticmethod
    def _base_kwargs(d: Mapping[str, Any]) -> dict[str, Any]:
        """Constructor keywords shared by every model kind, from a :meth:`to_dict` description."""
        return {
            "lattice": d.get("lattice"),
            "positions": d.get("positions"),
            "time_reversal": matrix_from_json(d.get("time_reversal")),
            "inversion": matrix_from_json(d.get("inversion")),
            "energy_unit": d.get("energy_unit", "1"),
            "name": d.get("name", ""),
        }

    @staticmethod
    def _default_value(name: Any, value: Any) -> float:
        try:
            if isinstance(value, bool | np.bool_ | str):
                raise TypeError
            return float(value)
        except (TypeError, ValueError):
            raise ParameterError(
                f"model.defaults[{name!r}] must be a real number, got {value!r}"
            ) from None

    @abstractmethod
    def to_dict(self) -> dict[str, Any]:
        """JSON-able description from which :func:`toposweep.model_from_dict` rebuilds the model."""

    def describe(self, name: str) -> dict[str, str]:
        """``long_name`` and ``units`` of a parameter (defaults: its name, the energy unit)."""
        info = self.parameter_info.get(name, {})
        return {
            "long_name": info.get("long_name", name),
            "units": info.get("units", self.energy_unit),
        }

    def __repr__(self) -> str:
        label = f" {self.name!r}" if self.name else ""
        params = list(self.parameters)
        return f"<{type(self).__name__}{label} dim={self.dim} norb={self.norb} parameters={params}>"
