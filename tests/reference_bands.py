"""Independent NumPy/SciPy references for tests near gap closings.

Nothing here calls the Rust core: Bloch Hamiltonians are written out from the published
formulas (or summed with NumPy from a hopping list, ``random_models.bloch_hamiltonian``),
diagonalised with ``numpy.linalg.eigvalsh``/``eigh`` and minimised with ``scipy.optimize``.

What it offers
--------------
- ``kane_mele_h``, ``bhz_h``, ``wilson_dirac_h``: Bloch Hamiltonians H(κ) in reduced
  coordinates κ, typed in from the papers (sources beside each).
- ``tight_binding_h``: H(κ) of any ``TightBinding`` by a NumPy Bloch sum of its hopping list.
- ``min_direct_gap``: min over the Brillouin zone of E_filling − E_filling−1 (dense grid, then
  Nelder–Mead from the smallest grid values) and the bandwidth.
- ``locate_closing``: the parameter value where the direct gap closes, by minimising the gap
  jointly over (κ, parameter); a gap closing is a cone in that space, so the minimum is an
  exact zero and Nelder–Mead converges to it.
- ``fu_kane_indices``: Fu–Kane parity indices at the TRIMs (Fu & Kane, Phys. Rev. B 76,
  045302 (2007)).
"""

from __future__ import annotations

import itertools
from collections.abc import Callable, Mapping
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from random_models import bloch_hamiltonian

__all__ = [
    "Closing",
    "GapMinimum",
    "bhz_h",
    "fu_kane_indices",
    "kane_mele_h",
    "locate_closing",
    "min_direct_gap",
    "path_stays_gapped",
    "tight_binding_h",
    "trims",
    "wilson_dirac_h",
]

Floats = NDArray[np.float64]
Matrices = NDArray[np.complex128]
#: H(κ) for κ of shape (N, dim) → (N, n, n)
HamiltonianFn = Callable[[Floats], Matrices]

S0 = np.eye(2, dtype=complex)
SX = np.array([[0, 1], [1, 0]], dtype=complex)
SY = np.array([[0, -1j], [1j, 0]], dtype=complex)
SZ = np.array([[1, 0], [0, -1]], dtype=complex)
TAU = 2 * np.pi


def _mat(coeff: Floats, matrix: Matrices) -> Matrices:
    return coeff[:, None, None] * matrix[None, :, :]


# -- published Bloch Hamiltonians ------------------------------------------------------------------
#: honeycomb lattice of the builtin ``kane_mele`` (a₁ = (1, 0), a₂ = (1/2, √3/2), a = 1): the
#: Cartesian k of a reduced κ is 2π κ·B with B the reciprocal basis (rows b_i, a_i·b_j = δ_ij)
_HONEYCOMB = np.array([[1.0, 0.0], [0.5, np.sqrt(3.0) / 2.0]])
_HONEYCOMB_B = np.linalg.inv(_HONEYCOMB).T
# Kane & Mele, Phys. Rev. Lett. 95, 226801 (2005), Table I: Γ^(1..5) = (σx⊗1, σz⊗1, σy⊗sx,
# σy⊗sy, σy⊗sz) (σ sublattice, s spin) and Γ^(ab) = [Γ^a, Γ^b]/(2i)
_KM_G = [np.kron(SX, S0), np.kron(SZ, S0), np.kron(SY, SX), np.kron(SY, SY), np.kron(SY, SZ)]


def _km_g2(a: int, b: int) -> Matrices:
    ga, gb = _KM_G[a - 1], _KM_G[b - 1]
    return (ga @ gb - gb @ ga) / 2j


def kane_mele_h(
    kappa: Floats, *, t: float = 1.0, lso: float = 0.0, lr: float = 0.0, lv: float = 0.0
) -> Matrices:
    """Kane–Mele H(κ) from Table I of Kane & Mele, PRL 95, 226801 (2005).

    With x = k_x a/2, y = √3 k_y a/2 (a = 1): d1 = t(1 + 2 cos x cos y), d2 = λ_v,
    d3 = λ_R(1 − cos x cos y), d4 = −√3 λ_R sin x sin y, d12 = −2t cos x sin y,
    d15 = λ_SO(2 sin 2x − 4 sin x cos y), d23 = −λ_R cos x sin y, d24 = √3 λ_R sin x cos y;
    H = Σ d_a Γ^a + Σ d_ab Γ^ab. (Typed from the paper's table as remembered, "from
    memory"; ``test_near_transitions`` checks its spectrum against the builtin model, whose
    form is the real-space sum of the same paper, at random κ.)
    """
    k = TAU * np.atleast_2d(kappa) @ _HONEYCOMB_B
    x, y = k[:, 0] / 2, np.sqrt(3.0) * k[:, 1] / 2
    cx, sx_, cy, sy_ = np.cos(x), np.sin(x), np.cos(y), np.sin(y)
    h = _mat(t * (1 + 2 * cx * cy), _KM_G[0])
    h = h + _mat(np.full_like(x, lv), _KM_G[1])
    h = h + _mat(lr * (1 - cx * cy), _KM_G[2])
    h = h + _mat(-np.sqrt(3.0) * lr * sx_ * sy_, _KM_G[3])
    h = h + _mat(-2 * t * cx * sy_, _km_g2(1, 2))
    h = h + _mat(lso * (2 * np.sin(2 * x) - 4 * sx_ * cy), _km_g2(1, 5))
    h = h + _mat(-lr * cx * sy_, _km_g2(2, 3))
    h = h + _mat(np.sqrt(3.0) * lr * sx_ * cy, _km_g2(2, 4))
    return h


def bhz_h(kappa: Floats, *, m: float, t: float = 1.0) -> Matrices:
    """Spinful square-lattice model: diag(h(k), h*(−k)) (Bernevig, Hughes & Zhang, Science
    314, 1757 (2006)) with the two-band h(k) = t sin k_x σx + t sin k_y σy
    + (m + t cos k_x + t cos k_y) σz of Qi, Wu & Zhang, PRB 74, 085308 (2006); k = 2πκ.
    Z2 = 1 for 0 < |m/t| < 2, 0 for |m/t| > 2: closings at m/t = −2, 0, 2."""
    k = TAU * np.atleast_2d(kappa)
    sx_, sy_ = np.sin(k[:, 0]), np.sin(k[:, 1])
    mz = m + t * np.cos(k[:, 0]) + t * np.cos(k[:, 1])
    up = _mat(t * sx_, SX) + _mat(t * sy_, SY) + _mat(mz, SZ)
    down = _mat(-t * sx_, SX) + _mat(t * sy_, SY) + _mat(mz, SZ)  # h*(−k)
    h = np.zeros((len(k), 4, 4), complex)
    h[:, :2, :2], h[:, 2:, 2:] = up, down
    return h


#: inversion of ``bhz_h``: σz on the orbital (the mass matrix), spin untouched
BHZ_P = np.kron(S0, SZ)
_WD_GAMMA = [np.kron(SX, s) for s in (SX, SY, SZ)]
_WD_GAMMA4 = np.kron(SZ, S0)
#: inversion of ``wilson_dirac_h``: Γ₄
WD_P = _WD_GAMMA4


def wilson_dirac_h(kappa: Floats, *, m: float, t: float = 1.0) -> Matrices:
    """Wilson–Dirac H(k) = t Σ sin k_i Γ_i + (m + t Σ cos k_i) Γ_4 with Γ_i = σx⊗s_i,
    Γ_4 = σz⊗1 (Qi, Hughes & Zhang, PRB 78, 195424 (2008)); k = 2πκ. Gapless at
    m/t = −3, −1, 1, 3 (a TRIM with n coordinates π has mass m + t(3 − 2n))."""
    k = TAU * np.atleast_2d(kappa)
    h = _mat(m + t * np.cos(k).sum(axis=1), _WD_GAMMA4)
    for i in range(3):
        h = h + _mat(t * np.sin(k[:, i]), _WD_GAMMA[i])
    return h


def tight_binding_h(model, params: Mapping[str, float]) -> HamiltonianFn:  # noqa: ANN001
    """H(κ) of a ``TightBinding`` summed with NumPy from its hopping list (not the core)."""
    return lambda kappa: bloch_hamiltonian(model, np.atleast_2d(kappa), params)


# -- gaps ------------------------------------------------------------------------------------------
def trims(dim: int) -> Floats:
    """The 2^dim time-reversal-invariant momenta (entries 0 or 1/2)."""
    return 0.5 * np.array(list(itertools.product((0, 1), repeat=dim)), dtype=float)


@dataclass(frozen=True)
class GapMinimum:
    """Smallest direct gap found, where, and the bandwidth (max − min of all bands)."""

    gap: float
    kappa: Floats
    bandwidth: float

    @property
    def relative(self) -> float:
        return self.gap / self.bandwidth


def _gap_of(h: HamiltonianFn, filling: int) -> Callable[[Floats], Floats]:
    def gaps(kappa: Floats) -> Floats:
        e = np.linalg.eigvalsh(h(np.atleast_2d(kappa)))
        return e[:, filling] - e[:, filling - 1]

    return gaps


def _grid(dim: int, n: int) -> Floats:
    axes = [np.arange(n) / n] * dim
    pts = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, dim)
    return np.vstack([pts, trims(dim)])


def _stencil(d: int) -> Floats:
    """The 3^d − 1 neighbours of a cube's centre (faces, edges and corners)."""
    pts = np.array(list(itertools.product((-1.0, 0.0, 1.0), repeat=d)))
    return pts[np.any(pts != 0, axis=1)]


def pattern_search(
    f: Callable[[Floats], Floats],
    starts: Floats,
    step: float,
    *,
    smallest_step: float = 1e-13,
    max_rounds: int = 600,
) -> tuple[Floats, Floats]:
    """Minimise ``f`` (a function of a batch of points, (N, d) → (N,)) from several starts.

    A pattern search with the 3^d − 1 cube neighbours as its stencil, every start advanced
    in lock step so that each round is one batch: move to the best neighbour if it is lower
    (and double the step, up to its start value, to stride along valleys), else halve the
    step, until it is under ``smallest_step``. The direct gap is smooth except where it
    vanishes, and near a closing it is a cone |A x| (convex, with a half-space of descent
    directions at every other point), so the search converges to the closing
    (common practice, no source). Returns the points and their values.
    """
    x = np.array(starts, dtype=float, ndmin=2)
    fx = f(x)
    h = np.full(len(x), float(step))
    stencil = _stencil(x.shape[1])
    for _ in range(max_rounds):
        active = h >= smallest_step
        if not active.any():
            break
        xa, ha = x[active], h[active]
        trial = xa[:, None, :] + ha[:, None, None] * stencil[None]
        values = f(trial.reshape(-1, x.shape[1])).reshape(len(xa), len(stencil))
        best = np.argmin(values, axis=1)
        lowest = values[np.arange(len(xa)), best]
        better = lowest < fx[active]
        idx = np.flatnonzero(active)
        x[idx[better]] = trial[better, best[better]]
        fx[idx[better]] = lowest[better]
        h[idx[~better]] *= 0.5
        h[idx[better]] = np.minimum(2.0 * h[idx[better]], step)  # stride along valleys
    return x, fx


def min_direct_gap(
    h: HamiltonianFn,
    dim: int,
    filling: int,
    *,
    points: int | None = None,
    starts: int = 12,
    extra_starts: Floats | None = None,
) -> GapMinimum:
    """Smallest direct gap over the Brillouin zone at this filling.

    A uniform grid (``points`` per axis, default 72 in 2D and 14 in 3D) plus the TRIMs, then
    a pattern search from the ``starts`` smallest grid values and from ``extra_starts`` (the
    gap is periodic in κ, so the search may leave the unit cell). The result is the gap at a κ
    that exists, an upper bound of the true minimum; near a closing it converges to it.
    """
    n = points or (72 if dim == 2 else 14)
    grid = _grid(dim, n)
    e = np.linalg.eigvalsh(h(grid))
    gaps = e[:, filling] - e[:, filling - 1]
    bandwidth = float(e.max() - e.min())
    begin = [grid[np.argsort(gaps)[:starts]]]
    if extra_starts is not None:
        begin.append(np.array(extra_starts, dtype=float, ndmin=2))
    if not sum(len(b) for b in begin):
        return GapMinimum(float(gaps.min()), grid[int(np.argmin(gaps))], bandwidth)
    x, fx = pattern_search(_gap_of(h, filling), np.vstack(begin), 0.5 / n)
    i = int(np.argmin(fx))
    if fx[i] >= gaps.min():
        return GapMinimum(float(gaps.min()), grid[int(np.argmin(gaps))], bandwidth)
    return GapMinimum(float(fx[i]), np.mod(x[i], 1.0), bandwidth)


@dataclass(frozen=True)
class Closing:
    """A gap closing: parameter value, κ of the closing and the gap left there."""

    value: float
    kappa: Floats
    gap: float


def locate_closing(
    h_at: Callable[[float], HamiltonianFn],
    dim: int,
    filling: int,
    bracket: tuple[float, float],
    *,
    scan: int = 21,
    points: int | None = None,
) -> Closing:
    """Parameter value in ``bracket`` where the direct gap closes.

    ``h_at(p)`` gives H(κ) at parameter p. A scan of ``scan`` values picks the smallest grid
    gap; then the gap is minimised jointly over (κ, p) from there. Near a closing the gap is a
    cone in (κ, p) (a Dirac or Weyl point), so its minimum is an exact zero, reached to
    ~1e-13 of the bracket in p.
    """
    values = np.linspace(*bracket, scan)
    found = [min_direct_gap(h_at(p), dim, filling, points=points, starts=0) for p in values]
    order = np.argsort([g.gap for g in found])[:3]
    width = bracket[1] - bracket[0]

    def gaps(x: Floats) -> Floats:
        out = np.empty(len(x))
        ps = bracket[0] + x[:, -1] * width
        for p in np.unique(ps):  # one batch per parameter value
            rows = ps == p
            e = np.linalg.eigvalsh(h_at(float(p))(x[rows, :-1]))
            out[rows] = e[:, filling] - e[:, filling - 1]
        return out

    starts = np.array([np.append(found[i].kappa, (values[i] - bracket[0]) / width) for i in order])
    x, fx = pattern_search(gaps, starts, 0.5 / (scan - 1), smallest_step=1e-14)
    i = int(np.argmin(fx))
    return Closing(float(bracket[0] + x[i, -1] * width), np.mod(x[i, :-1], 1.0), float(fx[i]))


def path_stays_gapped(
    h_along: Callable[[float], HamiltonianFn],
    dim: int,
    filling: int,
    lipschitz: float,
    *,
    max_points: int = 400,
) -> tuple[bool, tuple[float, float], int]:
    """Whether the direct gap stays open along a path t ∈ [0, 1] of Hamiltonians.

    ``lipschitz`` bounds how fast the gap can change: by Weyl's inequality each eigenvalue
    moves by at most ‖ΔH‖, so the gap by at most 2 max_κ ‖dH/dt‖ per unit t. A segment
    [a, b] counts as open when g(a) + g(b) > L (b − a) (the gap cannot reach zero inside);
    otherwise it is split in two. The gaps are NumPy minima over κ (upper bounds of the true
    minima), so this is a sampled check, dense where the gap is small, not a proof. Returns
    (open, (smallest gap sampled, its t), points used).
    """

    def gap(t: float) -> float:
        points = 36 if dim == 2 else 10
        return min_direct_gap(h_along(t), dim, filling, points=points, starts=4).gap

    todo = [(0.0, 1.0, gap(0.0), gap(1.0))]
    smallest, used = (min(todo[0][2:]), 0.0 if todo[0][2] < todo[0][3] else 1.0), 2
    while todo:
        a, b, ga, gb = todo.pop()
        if ga + gb > lipschitz * (b - a):
            continue
        if used >= max_points or ga <= 0 or gb <= 0:
            return False, smallest, used
        mid = 0.5 * (a + b)
        gm = gap(mid)
        smallest, used = min(smallest, (gm, mid)), used + 1
        todo += [(a, mid, ga, gm), (mid, b, gm, gb)]
    return True, smallest, used


# -- Fu–Kane parity --------------------------------------------------------------------------------
def fu_kane_indices(
    h: HamiltonianFn, inversion: Matrices, dim: int, filling: int
) -> tuple[int, tuple[int, ...]]:
    """(ν0, (ν_1, …)) from parity eigenvalues of the occupied states at the TRIMs.

    Fu & Kane, Phys. Rev. B 76, 045302 (2007): δ_a = Π over occupied Kramers pairs of the
    parity at TRIM a; (−1)^ν0 = Π_a δ_a, (−1)^ν_i = Π over the TRIMs with κ_i = 1/2. In 2D ν0
    is the Z2 index of the plane. Raises ``AssertionError`` where the criterion cannot be
    applied (degenerate at the filling, or P mixing occupied and empty states).
    """
    pts = trims(dim)
    odd_pairs = []
    for hk in h(pts):
        np.testing.assert_allclose(inversion @ hk @ inversion.conj().T, hk, atol=1e-10)
        e, v = np.linalg.eigh(hk)
        assert e[filling] - e[filling - 1] > 1e-9, "degenerate at the filling at a TRIM"
        occ = v[:, :filling]
        xi = np.linalg.eigvalsh(occ.conj().T @ inversion @ occ)
        assert np.abs(np.abs(xi) - 1).max() < 1e-6, f"P mixes occupied and empty states: {xi}"
        n_odd = int(np.sum(xi < 0))
        assert n_odd % 2 == 0, "odd count of odd-parity states in Kramers pairs"
        odd_pairs.append(n_odd // 2)
    odd = np.array(odd_pairs)
    return int(odd.sum() % 2), tuple(int(odd[pts[:, i] == 0.5].sum() % 2) for i in range(dim))
