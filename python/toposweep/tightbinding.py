"""Tight-binding models built from hoppings grouped into named, scalable terms."""

from __future__ import annotations

from collections.abc import Iterator, Mapping, Sequence
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from . import _core
from .errors import ModelError
from .hopping_lists import hopping_entries
from .model import Model, matrix_from_json, matrix_to_json

__all__ = ["TightBinding"]

#: Longest accepted bond, in unit cells along any axis (far beyond any real model; keeps
#: 2π κ·R well inside double precision)
MAX_BOND = 1_000_000


class TightBinding(Model):
    r"""A lattice model H(κ) = Σ_term c_term [T_0 + Σ_{R≠0} (T_R e^{2πiκ·R} + T_R† e^{−2πiκ·R})].

    κ are reduced coordinates. Each call to :meth:`add` puts a hopping matrix T on the bond to
    lattice vector R ≠ 0; its Hermitian conjugate at −R is implied, so add every bond once
    (adding both R and −R counts the bond twice). The on-site block T_0 (R = 0) is counted
    once, with no conjugate added, and must itself be Hermitian. ``term=None`` adds to the
    fixed part; ``term="x"`` scales the hopping by the parameter ``x``, so a parameter point
    costs only a linear combination.

    Parameters
    ----------
    dim, norb : int
        Spatial dimension (2 or 3) and number of orbitals (spin included).
    lattice : array (dim, dim), optional
        Real-space lattice vectors as rows (only reported, never needed).
    positions : array (norb, dim), optional
        Orbital positions in reduced coordinates, used to report Wannier centres in real space.
    time_reversal : array (norb, norb), optional
        U_T of Θ = U_T K, with U_T U_T* = −1. Needed for Z2 indices.
    inversion : array (norb, norb), optional
        P with P H(κ) P† = H(−κ); enables the Fu–Kane parity cross-check.
    energy_unit : str
        Unit of the energies (CF ``units`` string), ``"1"`` if dimensionless.
    name : str
        Human-readable name recorded in results.

    Examples
    --------
    A two-band square lattice with a scalable mass; the on-site block counts once, each bond
    twice (T and its conjugate), so at κ = 0 the diagonal is m + 2·(0.5 + 0.5):

    >>> import numpy as np
    >>> from toposweep import TightBinding
    >>> sz = np.diag([1.0, -1.0])
    >>> sq = TightBinding(2, 2).add((0, 0), sz, term="m")
    >>> sq = sq.add((1, 0), 0.5 * sz).add((0, 1), 0.5 * sz)
    >>> sq.hamiltonian([[0.0, 0.0]], {"m": 0.5}).real.round(3).tolist()
    [[[2.5, 0.0], [0.0, -2.5]]]
    """

    def __init__(self, dim: int, norb: int, **kwargs: Any) -> None:
        super().__init__(dim, norb, **kwargs)
        self._hops: list[tuple[tuple[int, ...], NDArray[np.complex128], str | None]] = []
        self._terms: list[str] = []
        self._core_cache: Any = None
        self._residual_cache: dict[tuple, tuple[NDArray, NDArray]] = {}
        #: hoppings added so far: stands for the hopping list in the key of the cached JSON text
        #: (add() is the only way to change the list; the stored matrices are read-only copies)
        self._hop_count = 0
        self._reach: int | None = None

    # -- building -------------------------------------------------------------------------------
    def add(self, R: Sequence[int], T: ArrayLike, term: str | None = None) -> TightBinding:
        """Add hopping matrix ``T`` to lattice vector ``R`` (its conjugate at −R is implied).

        Returns the model, so calls can be chained.
        """
        r = self._lattice_vector(R)
        t = self._hopping_matrix(T, r)
        if term is not None:
            if not isinstance(term, str) or not term.isidentifier():
                raise ModelError(f"term names must be Python identifiers, got {term!r}")
            if term not in self._terms:
                self._terms.append(term)
        self._hops.append((r, t, term))
        self._hop_count += 1
        self._reach = None
        self._core_cache = None
        self._request_memo = None  # (the reach checked for a run may have grown)
        self._residual_cache.clear()
        return self

    def _lattice_vector(self, R: Sequence[int]) -> tuple[int, ...]:
        try:
            # complex input would be cast to float with only a warning, dropping imaginary parts
            arr = np.asarray([]) if np.iscomplexobj(R) else np.asarray(R, dtype=float)
        except (TypeError, ValueError, OverflowError):  # ints beyond int64, strings, ...
            arr = np.asarray([])
        if arr.shape != (self.dim,) or not np.all(np.isfinite(arr)):
            raise ModelError(
                f"R must be {self.dim} integers (a lattice vector in units of the primitive "
                f"vectors), got {R!r}"
            )
        if not np.all(arr == np.round(arr)):
            raise ModelError(f"R must hold integers, got {R!r}")
        if np.abs(arr).max() > MAX_BOND:
            raise ModelError(
                f"R = {R!r} reaches beyond {MAX_BOND} unit cells; a tight-binding bond that "
                "long is almost surely a units mistake (R counts primitive lattice vectors)"
            )
        return tuple(int(x) for x in arr)

    def _hopping_matrix(self, T: ArrayLike, r: tuple[int, ...]) -> NDArray[np.complex128]:
        try:
            t = np.asarray(T, dtype=complex)
        except (TypeError, ValueError) as exc:
            raise ModelError(f"T must be a complex {self.norb}×{self.norb} matrix: {exc}") from None
        if t.ndim == 0 and self.norb == 1:
            t = t.reshape(1, 1)
        if t.shape != (self.norb, self.norb):
            raise ModelError(
                f"T must have shape ({self.norb}, {self.norb}) for this {self.norb}-orbital model, "
                f"got {t.shape}"
            )
        if not np.all(np.isfinite(t)):
            raise ModelError(f"T at R={r} contains NaN or infinity")
        if not any(r):
            err = np.abs(t - t.conj().T).max()
            if err > 1e-12 * max(1.0, np.abs(t).max()):
                raise ModelError(
                    f"the on-site block (R = 0) must be Hermitian; max |T − T†| = {err:.2e}. "
                    "It is added once, with no conjugate implied: give the whole block, e.g. "
                    "a coupling v between orbitals 0 and 1 of one cell is "
                    "[[0, v], [conj(v), 0]], not [[0, v], [0, 0]]"
                )
        t = t.copy()
        # read-only: the core model, the JSON text and the residual blocks are cached until the
        # next add(); a matrix changed in place through hoppings() would silently leave them stale
        t.setflags(write=False)
        return t

    @classmethod
    def from_hoppings(
        cls,
        R: ArrayLike,
        T: ArrayLike,
        *,
        terms: str | Sequence[str | None] | None = None,
        half: bool | None = None,
        weights: ArrayLike | None = None,
        tolerance: float = 1e-8,
        **kwargs: Any,
    ) -> TightBinding:
        """A model from lattice vectors ``R`` (nR, dim) and matrices ``T``.

        Codes write hoppings either as a **full** list — every bond R ≠ 0 together with its
        partner −R, whose matrix is T_R† — or as a **half** list with one of each pair (the
        conjugate implied, as :meth:`TightBinding.add` does). A full list is checked: every
        T_{−R} must equal T_R† to ``tolerance`` (relative to the largest entry), else
        :class:`~toposweep.ModelError` names the worst pair; then one of each pair is kept. The
        on-site block (R = 0) is counted once in both kinds and must be Hermitian. Entries with the
        same R (and term) are added together.

        Parameters
        ----------
        R : int array (nR, dim)
            Lattice vectors in units of the primitive vectors.
        T : complex array (nR, norb, norb)
            Hopping matrices: T[i][a, b] is the amplitude from orbital b in cell 0 to orbital a in
            cell R[i] (H(κ) = Σ_R T_R e^{2πiκ·R}).
        terms : str or sequence, optional
            A term name for every hopping (None or "" for the fixed part), or one name for all;
            default: all fixed.
        half : bool, optional
            True: a half list (every entry taken as given); False: a full list (checked); None:
            decided from the list — full if every R ≠ 0 has its −R, half if none has.
        weights : array (nR,), optional
            Each T is divided by its weight (e.g. how many times a lattice vector is listed in a
            Wigner–Seitz supercell).
        tolerance : float
            Relative tolerance of the full list's Hermitian pairs.
        **kwargs
            ``lattice``, ``positions``, ``time_reversal``, ``inversion``, ``energy_unit``, ``name``
            as for :class:`TightBinding`.

        Examples
        --------
        A full list of a 2D two-band model (R and −R both given):

        >>> import numpy as np, toposweep as ts
        >>> sz = np.diag([1.0, -1.0])
        >>> R = [(0, 0), (1, 0), (-1, 0), (0, 1), (0, -1)]
        >>> T = [0.5 * sz] + [0.25 * sz] * 4
        >>> m = ts.TightBinding.from_hoppings(R, T)
        >>> len(list(m.hoppings())), m.hamiltonian([[0.0, 0.0]])[0].real.tolist()
        (3, [[1.5, 0.0], [0.0, -1.5]])
        """
        dim, norb, entries = hopping_entries(
            R, T, terms=terms, half=half, weights=weights, tolerance=tolerance
        )
        model = cls(dim, norb, **kwargs)
        for vec, mat, name in entries:
            model.add(vec, mat, name)
        return model

    # -- model interface --------------------------------------------------------------------------
    @property
    def terms(self) -> tuple[str, ...]:
        """Term names, in the order they were first used."""
        return tuple(self._terms)

    @property
    def parameters(self) -> tuple[str, ...]:
        """A tight-binding model's parameters are its term coefficients."""
        return self.terms

    def hoppings(self) -> Iterator[tuple[tuple[int, ...], NDArray[np.complex128], str | None]]:
        """Iterate over ``(R, T, term)`` as added."""
        yield from self._hops

    @property
    def reach(self) -> int:
        """Largest |R_i| of any hopping, in cells along one primitive vector (0: on-site only).

        Examples
        --------
        >>> from toposweep import models
        >>> models.bhz().reach
        1
        """
        if self._reach is None:  # (kept until the next add())
            self._reach = max((abs(int(x)) for r, _, _ in self._hops for x in r), default=0)
        return self._reach

    def __getstate__(self) -> dict[str, Any]:
        # (the compiled model cannot be pickled: the copy compiles its own on first use)
        state = super().__getstate__()
        state["_core_cache"] = None
        return state

    def _core(self) -> Any:
        if self._core_cache is None:
            self._core_cache = _core.CoreModel.tight_binding(*self._core_arguments())
        return self._core_cache

    def _core_arguments(self) -> tuple[int, int, int, NDArray, NDArray, NDArray]:
        """The arguments of ``_core.CoreModel.tight_binding`` for this model.

        (dim, norb, number of terms, R (nhop, dim), t (nhop, norb, norb), term index of each
        hopping, −1 for the fixed part). Benchmarks use them to build the same model in
        another build of the extension.

        Examples
        --------
        >>> from toposweep import models
        >>> dim, norb, nterms, r, t, term = models.bhz()._core_arguments()
        >>> (dim, norb, nterms, r.shape[1], t.shape[1:])
        (2, 4, 2, 2, (4, 4))
        """
        if not self._hops:
            raise ModelError("the model has no hoppings; call add() first")
        nhop = len(self._hops)
        r = np.array([h[0] for h in self._hops], dtype=np.int64).reshape(nhop, self.dim)
        t = np.array([h[1] for h in self._hops], dtype=complex).reshape(nhop, self.norb, self.norb)
        idx = {name: i for i, name in enumerate(self._terms)}
        term = np.array([-1 if h[2] is None else idx[h[2]] for h in self._hops], dtype=np.int64)
        return self.dim, self.norb, len(self._terms), r, np.ascontiguousarray(t), term

    def prepare(self, points: Sequence[Mapping[str, float]]) -> tuple[Any, NDArray[np.float64]]:
        """Core model and coefficient rows for resolved parameter dicts."""
        coeffs = np.array([[p[name] for name in self._terms] for p in points], dtype=float).reshape(
            len(points), len(self._terms)
        )
        return self._core(), coeffs

    def symmetry_residuals(
        self, points: Sequence[Mapping[str, float]], operator: NDArray[np.complex128], kind: str
    ) -> NDArray[np.float64]:
        """Per-point residuals from per-term residual matrices (H is linear in the terms).

        The fixed part and every term are checked once at random κ; a parameter point then
        costs one small linear combination, so sweeps of any size check every point.
        """
        coeffs = np.array([[p[t] for t in self._terms] for p in points], float)
        return self.coefficient_residuals(
            coeffs.reshape(len(points), len(self._terms)), operator, kind
        )

    def coefficient_residuals(
        self, coeffs: NDArray[np.float64], operator: NDArray[np.complex128], kind: str
    ) -> NDArray[np.float64]:
        """:meth:`symmetry_residuals` of points given as rows of term coefficients."""
        resid, hp = self._term_residuals(operator, kind)
        nterm = len(self._terms)
        rows = np.concatenate([np.ones((len(coeffs), 1)), np.asarray(coeffs, float)], axis=1)
        # (one matrix product per quantity: points × terms times terms × every residual entry)
        res = np.abs(rows @ resid.reshape(nterm + 1, -1)).max(axis=1)
        scale = np.abs(rows @ hp.reshape(nterm + 1, -1)).max(axis=1)
        return res / np.maximum(scale, 1e-300)

    def _term_residuals(
        self, operator: NDArray[np.complex128], kind: str
    ) -> tuple[NDArray[np.complex128], NDArray[np.complex128]]:
        """Residual matrices and H(κ) of the fixed part and of each term alone at random κ.

        They depend on the hoppings and the operator only, so they are kept until the next
        :meth:`add` (a sweep or a loop of :func:`toposweep.invariants` calls checks many
        points against the same blocks).
        """
        key = (kind, operator.shape, operator.tobytes())
        cached = self._residual_cache.get(key)
        if cached is not None:
            return cached
        core = self._core()
        kappa = self._symmetry_kappa()
        both = np.ascontiguousarray(np.concatenate([kappa, -kappa]))
        nterm = len(self._terms)
        basis = np.vstack([np.zeros(nterm), np.eye(nterm)])  # fixed part, then each term alone
        blocks = np.array([_core.hamiltonian(core, np.ascontiguousarray(c), both) for c in basis])
        blocks[1:] -= blocks[0]
        hp, hm = blocks[:, : len(kappa)], blocks[:, len(kappa) :]
        h = hp.conj() if kind == "time_reversal" else hp
        resid = operator @ h @ operator.conj().T - hm
        if len(self._residual_cache) >= 8:  # a few operators per model at most; stay bounded
            self._residual_cache.clear()
        self._residual_cache[key] = (resid, hp)
        return resid, hp

    # -- serialisation ----------------------------------------------------------------------------
    def to_dict(self) -> dict[str, Any]:
        """JSON-able description (hoppings included) that round-trips exactly.

        Examples
        --------
        >>> from toposweep import models, model_from_dict
        >>> m = models.bhz()
        >>> model_from_dict(m.to_dict()).to_dict() == m.to_dict()
        True
        """
        d = self._base_dict()
        d["kind"] = "tight_binding"
        d["terms"] = list(self._terms)
        d["hoppings"] = [
            {"R": list(r), "term": term, "T": matrix_to_json(t)} for r, t, term in self._hops
        ]
        return d

    def _json_key(self) -> Any:
        # the hopping list changes only through add(): its count stands for it
        return (self._base_dict(), tuple(self._terms), self._hop_count)

    @classmethod
    def from_dict(cls, d: Mapping[str, Any]) -> TightBinding:
        """Rebuild from :meth:`to_dict` output."""
        try:
            m = cls(d["dim"], d["norb"], **cls._base_kwargs(d))
            for term in d.get("terms", []):
                m._terms.append(term)
            for h in d["hoppings"]:
                m.add(h["R"], matrix_from_json(h["T"]), h["term"])
            m.defaults = {str(k): float(v) for k, v in d.get("defaults", {}).items()}
            m.parameter_info = {str(k): dict(v) for k, v in d.get("parameter_info", {}).items()}
        except (KeyError, TypeError, AttributeError) as exc:
            raise ModelError(f"not a valid tight-binding model description: {exc!r}") from None
        return m
