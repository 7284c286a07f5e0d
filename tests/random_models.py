"""Random time-reversal-symmetric tight-binding models and NumPy reference tools for tests.

Shared by the acceptance tests (``test_random_models.py``) and the property tests. Everything
here is plain NumPy/SciPy and independent of the Rust core, so it can serve as the outside
reference the core is checked against.

Construction of a random model (``random_model``)
-------------------------------------------------
1. One or two four-orbital Dirac blocks H = Σ_i t_i sin(2πκ_i) Γ_i + M(κ) Γ_4 with
   Γ_i = σ_x⊗s_i, Γ_4 = σ_z⊗s_0, time reversal U_T = 1⊗iσ_y and inversion P = σ_z⊗1
   (the Wilson–Dirac form, Qi, Hughes & Zhang, Phys. Rev. B 78, 195424 (2008)). The mass
   M(κ) = Σ_S a_S Π_{i∈S} cos(2πκ_i) is a polynomial in the cosines whose 2^dim coefficients
   are fixed by a random value of M at every TRIM (a Walsh–Hadamard transform), so every TRIM
   region gets its own random mass sign and the block reaches every phase: trivial, weak and
   strong. Spinful s-like orbital pairs (parity ±1, level far below or above zero) fill the
   model up to its size (4–8 orbitals by default; any even norb ≥ 4 on request).
2. Random hoppings on every bond R with |R_i| ≤ 1 (on-site, nearest, next and third
   neighbours of the cubic/square lattice) couple everything, projected exactly onto the
   time-reversal-symmetric (and, with ``inversion=True``, inversion-symmetric) subspace. They
   form the model's one scalable term ``"coupling"`` (default 1.0).
3. The direct gap at the filling is estimated with ``numpy.linalg.eigh`` on a grid refined by
   a local minimiser; models whose gap is below ``min_gap_fraction`` × bandwidth are redrawn
   with a weaker coupling.

Symmetry projections (hopping T at R, its conjugate T† at −R implied): time reversal
Θ = U_T K requires U_T T* U_T† = T, inversion P requires P T† P† = T. Both maps are
involutions that commute when Θ and P commute, so averaging T with its image projects exactly.

Examples
--------
>>> import numpy as np
>>> case = random_model(np.random.default_rng(1), dim=2)
>>> case.model.norb in (4, 6, 8), case.filling % 2, case.gap > 0
(True, 0, True)
"""

from __future__ import annotations

import itertools
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy.optimize import minimize
from toposweep import TightBinding

__all__ = [
    "PHASES",
    "RandomModel",
    "bloch_hamiltonian",
    "change_basis",
    "direct_gap",
    "inversion_breaking_perturbation",
    "norm_bound",
    "parity_indices",
    "phase_of",
    "random_model",
    "random_unitary",
    "trims",
]

Array = NDArray[np.complex128]

_S0 = np.eye(2, dtype=complex)
_SX = np.array([[0, 1], [1, 0]], dtype=complex)
_SY = np.array([[0, -1j], [1j, 0]], dtype=complex)
_SZ = np.array([[1, 0], [0, -1]], dtype=complex)
#: Dirac matrices of one block (orbital ⊗ spin): Γ_1..Γ_3 odd, Γ_4 the mass matrix
_GAMMA = [np.kron(_SX, s) for s in (_SX, _SY, _SZ)]
_GAMMA4 = np.kron(_SZ, _S0)
_DIRAC_T = np.kron(_S0, 1j * _SY)
_DIRAC_P = np.kron(_SZ, _S0)

PHASES = ("trivial", "weak", "strong")


@dataclass(frozen=True)
class RandomModel:
    """A random model with what a test needs to evaluate it.

    Attributes
    ----------
    model : TightBinding
        The model; ``time_reversal`` is set, ``inversion`` when requested.
    filling : int
        Number of occupied bands (even).
    gap : float
        Direct gap at the filling estimated with NumPy (grid + local minimisation).
    bandwidth : float
        Spread of all band energies on the estimation grid.
    seed : int or None
        Seed that reproduces the model with ``random_model(seed, ...)`` (None for a Generator).
    """

    model: TightBinding
    filling: int
    gap: float
    bandwidth: float
    seed: int | None

    @property
    def params(self) -> dict[str, float]:
        """The model's default parameters (``{"coupling": 1.0}``)."""
        return dict(self.model.defaults)


# -- reference evaluation (NumPy only) ------------------------------------------------------------
def bloch_hamiltonian(
    model: TightBinding, kappa: NDArray[np.float64], params: Mapping[str, float] | None = None
) -> Array:
    """H(κ) = Σ c_term Σ_R [T e^{2πiκ·R} + (R≠0) T† e^{−2πiκ·R}] summed with NumPy.

    ``kappa`` has shape (N, dim); returns (N, norb, norb). Parameters missing from ``params``
    come from ``model.defaults``. This is the periodic-convention Bloch sum of the design notes,
    written independently of the Rust core.
    """
    values = {**model.defaults, **(params or {})}
    folded: dict[tuple[int, ...], Array] = {}  # one matrix per distinct R
    for r, t, term in model.hoppings():
        c = 1.0 if term is None else float(values[term])
        folded[r] = folded.get(r, 0.0) + c * t
    rs = np.array(list(folded), dtype=float).reshape(len(folded), model.dim)
    ts_ = np.array(list(folded.values()), dtype=complex)
    onsite = ~rs.any(axis=1)
    k = np.atleast_2d(np.asarray(kappa, dtype=float))
    phase = np.exp(2j * np.pi * (k @ rs.T))  # (N, nR)
    h = np.einsum("kr,rij->kij", phase, ts_)
    # the implied T† at −R, for R ≠ 0 only
    h += np.einsum("kr,rji->kij", phase[:, ~onsite].conj(), ts_[~onsite].conj())
    return h


def trims(dim: int) -> NDArray[np.float64]:
    """The 2^dim time-reversal-invariant momenta in reduced coordinates (entries 0 or 1/2)."""
    return 0.5 * np.array(list(itertools.product((0, 1), repeat=dim)), dtype=float)


def parity_indices(
    model: TightBinding,
    filling: int,
    params: Mapping[str, float] | None = None,
    inversion: Array | None = None,
) -> tuple[int, tuple[int, ...]]:
    """Fu–Kane parity indices from ``numpy.linalg.eigh`` at the TRIMs.

    Fu & Kane, Phys. Rev. B 76, 045302 (2007): δ_a = Π over occupied Kramers pairs of the
    parity eigenvalue at TRIM a; (−1)^ν0 = Π_a δ_a and (−1)^ν_i = Π over TRIMs with κ_i = 1/2.
    Returns ``(nu0, (nu_1, ..., nu_dim))``; in 2D ``nu0`` is the plane's Z2 index and the weak
    tuple has two entries. Raises ``AssertionError`` where the criterion does not apply
    (degenerate at the filling, P mixing occupied and empty states, odd parity count).
    """
    p = model.inversion if inversion is None else np.asarray(inversion, dtype=complex)
    assert p is not None, "model has no inversion matrix"
    if np.abs(p @ p + np.eye(len(p))).max() < 1e-8:  # P² = −1 convention → scale to P² = 1
        p = 1j * p
    pts = trims(model.dim)
    odd_pairs = []
    for h in bloch_hamiltonian(model, pts, params):
        e, v = np.linalg.eigh(h)
        assert e[filling] - e[filling - 1] > 1e-8, "degenerate at the filling at a TRIM"
        occ = v[:, :filling]
        xi = np.linalg.eigvalsh(occ.conj().T @ p @ occ)
        assert np.abs(np.abs(xi) - 1).max() < 1e-6, f"P mixes occupied and empty states: {xi}"
        n_odd = int(np.sum(xi < 0))
        assert n_odd % 2 == 0, "odd number of odd-parity states in a Kramers-degenerate set"
        odd_pairs.append(n_odd // 2)
    odd = np.array(odd_pairs)
    nu0 = int(odd.sum() % 2)
    weak = tuple(int(odd[pts[:, i] == 0.5].sum() % 2) for i in range(model.dim))
    return nu0, weak


def _band_energies(
    model: TightBinding, kappa: NDArray[np.float64], params: Mapping[str, float] | None
) -> NDArray[np.float64]:
    return np.linalg.eigvalsh(bloch_hamiltonian(model, kappa, params))


def direct_gap(
    model: TightBinding,
    filling: int,
    params: Mapping[str, float] | None = None,
    *,
    points: int | None = None,
    starts: int = 4,
) -> tuple[float, float]:
    """Direct gap min_κ (E_filling − E_{filling−1}) and bandwidth, with NumPy and SciPy.

    A uniform grid of ``points`` per axis (default 12 in 3D, 40 in 2D) plus the TRIMs is
    searched, then Nelder–Mead refines the ``starts`` smallest grid values (the gap is periodic,
    so the minimiser may leave the unit cell). Returns ``(gap, bandwidth)``.
    """
    n = points or (12 if model.dim == 3 else 40)
    axes = [np.arange(n) / n] * model.dim
    grid = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, model.dim)
    grid = np.vstack([grid, trims(model.dim)])
    e = _band_energies(model, grid, params)
    gaps = e[:, filling] - e[:, filling - 1]
    bandwidth = float(e.max() - e.min())

    def gap_at(k: NDArray[np.float64]) -> float:
        ek = _band_energies(model, k[None, :], params)[0]
        return float(ek[filling] - ek[filling - 1])

    best = float(gaps.min())
    for i in np.argsort(gaps)[:starts]:
        res = minimize(gap_at, grid[i], method="Nelder-Mead", options={"xatol": 1e-4})
        best = min(best, float(res.fun))
    return best, bandwidth


# -- symmetry projections ----------------------------------------------------------------------
def _project(t: Array, u_t: Array, p: Array | None) -> Array:
    """Project a hopping onto U_T T* U_T† = T (and P T† P† = T when ``p`` is given)."""
    t = 0.5 * (t + u_t @ t.conj() @ u_t.conj().T)
    if p is not None:
        t = 0.5 * (t + p @ t.conj().T @ p.conj().T)
    return t


def _bonds(dim: int) -> list[tuple[int, ...]]:
    """On-site plus one of each ±R pair with |R_i| ≤ 1 (3D: 1 + 13 bonds; 2D: 1 + 4)."""
    out = [(0,) * dim]
    for r in itertools.product((-1, 0, 1), repeat=dim):
        if any(r) and r > tuple(-x for x in r):
            out.append(r)
    return out


def norm_bound(hoppings: Sequence[tuple[tuple[int, ...], Array]]) -> float:
    """Upper bound of max_κ ‖ΔH(κ)‖₂ for a hopping list: ‖T_0‖ + 2 Σ_{R≠0} ‖T_R‖."""
    return float(sum((2.0 if any(r) else 1.0) * np.linalg.norm(t, 2) for r, t in hoppings))


def _random_hoppings(
    rng: np.random.Generator, dim: int, u_t: Array, p: Array | None, odd_under: Array | None = None
) -> list[tuple[tuple[int, ...], Array]]:
    norb = len(u_t)
    out = []
    for r in _bonds(dim):
        t = rng.normal(size=(norb, norb)) + 1j * rng.normal(size=(norb, norb))
        if not any(r):
            t = t + t.conj().T
        t = _project(t, u_t, p)
        if odd_under is not None:  # keep only the part that inversion flips
            t = 0.5 * (t - odd_under @ t.conj().T @ odd_under.conj().T)
        out.append((r, t))
    return out


# -- model construction ---------------------------------------------------------------------------
def _mass_coefficients(m_trim: NDArray[np.float64], dim: int) -> dict[tuple[int, ...], float]:
    """a_S of M(κ) = Σ_S a_S Π_{i∈S} cos 2πκ_i from the values of M at the TRIMs."""
    pts = trims(dim)
    signs = np.cos(2 * np.pi * pts)  # ±1 per TRIM and axis
    out = {}
    for subset in itertools.product((0, 1), repeat=dim):
        walsh = np.prod(np.where(np.array(subset) == 1, signs, 1.0), axis=1)
        out[subset] = float(walsh @ m_trim) / len(pts)
    return out


def _dirac_block(
    rng: np.random.Generator, dim: int, masses: NDArray[np.float64]
) -> list[tuple[tuple[int, ...], Array]]:
    """Hoppings of Σ t_i sin(2πκ_i) Γ_i + M(κ) Γ_4 with M fixed by its TRIM values."""
    hops: list[tuple[tuple[int, ...], Array]] = []
    for i in range(dim):
        r = tuple(int(j == i) for j in range(dim))
        hops.append((r, -0.5j * rng.uniform(0.7, 1.3) * _GAMMA[i]))  # t sin k Γ
    for subset, a in _mass_coefficients(masses, dim).items():
        axes = [i for i in range(dim) if subset[i]]
        if not axes:
            hops.append(((0,) * dim, a * _GAMMA4))
            continue
        # Π cos k_i = 2^{-n} Σ_{signs} cos(Σ ± k_i); keep the first sign +, each bond once
        # (T e^{ik·R} + h.c. = 2 T cos k·R, hence T = a / 2^n for each of the 2^{n−1} bonds)
        for rest in itertools.product((1, -1), repeat=len(axes) - 1):
            r = [0] * dim
            for ax, s in zip(axes, (1, *rest), strict=True):
                r[ax] = s
            hops.append((tuple(r), a / 2 ** len(axes) * _GAMMA4))
    return hops


def _indices_of(masses: NDArray[np.float64], dim: int) -> tuple[int, tuple[int, ...]]:
    """Parity indices of one Dirac block: the occupied pair at TRIM a has parity −sign M_a."""
    odd = (np.asarray(masses) > 0).astype(int)  # parity −1 where M > 0
    pts = trims(dim)
    return int(odd.sum() % 2), tuple(int(odd[pts[:, i] == 0.5].sum() % 2) for i in range(dim))


def phase_of(nu0: int, weak: Sequence[int], dim: int) -> str:
    """``"trivial"``, ``"weak"`` or ``"strong"`` (2D: ``"strong"`` means Z2-odd)."""
    if nu0 == 1:
        return "strong"
    return "weak" if dim == 3 and any(weak) else "trivial"


def _block_diag(blocks: Sequence[Array]) -> Array:
    n = sum(len(b) for b in blocks)
    out = np.zeros((n, n), dtype=complex)
    i = 0
    for b in blocks:
        out[i : i + len(b), i : i + len(b)] = b
        i += len(b)
    return out


def random_model(
    seed: int | np.random.Generator,
    *,
    dim: int = 3,
    norb: int | None = None,
    inversion: bool = True,
    coupling: float | None = None,
    core_phase: str | None = None,
    min_gap_fraction: float = 0.04,
) -> RandomModel:
    """A random time-reversal-symmetric (optionally inversion-symmetric) insulator.

    Parameters
    ----------
    seed : int or numpy.random.Generator
        Randomness; an int makes the model reproducible.
    dim : {2, 3}
        Spatial dimension.
    norb : int, optional
        Number of orbitals, even and at least 4 (random among 4, 6, 8 by default). Up to 8
        orbitals hold one or two Dirac blocks; larger models hold up to norb // 4 blocks.
    inversion : bool
        Keep the couplings inversion-symmetric and attach P to the model.
    coupling : float, optional
        Size of the random couplings relative to the uncoupled core's gap, measured by the
        bound ‖ΔH(κ)‖ ≤ Σ‖T_R‖ (random in 0.3 … 1.5 by default: above 0.5 the couplings can
        change the phase of the core, so the final phase is not known beforehand).
    core_phase : {"trivial", "weak", "strong"}, optional
        Phase of the uncoupled core (the mass signs are drawn until it matches). Useful to
        spread the phases; the coupled model's phase is only guaranteed equal when
        ``coupling < 0.5``.
    min_gap_fraction : float
        Redraw with half the coupling until the direct gap ≥ this fraction of the bandwidth.

    Returns
    -------
    RandomModel
    """
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    if dim not in (2, 3):
        raise ValueError("dim must be 2 or 3")
    n = int(norb) if norb is not None else int(rng.choice([4, 6, 8]))
    if n < 4 or n % 2:
        raise ValueError("norb must be even and at least 4")
    if n <= 8:  # (kept apart so that seeds reproduce the models they always gave)
        nblocks = 2 if n == 8 and rng.random() < 0.5 else 1
    else:
        nblocks = int(rng.integers(1, n // 4 + 1))
    npairs = (n - 4 * nblocks) // 2

    for _ in range(1000):  # mass signs until the core has the requested phase
        masses = [
            rng.choice([-1.0, 1.0], size=2**dim) * rng.uniform(0.4, 1.5, size=2**dim)
            for _ in range(nblocks)
        ]
        idx = [_indices_of(m, dim) for m in masses]
        nu0 = sum(i[0] for i in idx) % 2
        weak = [sum(i[1][a] for i in idx) % 2 for a in range(dim)]
        if core_phase is None or phase_of(nu0, weak, dim) == core_phase:
            break
    else:  # pragma: no cover - every phase has probability ≥ 1/16 per draw
        raise RuntimeError(f"could not draw a core in phase {core_phase!r}")

    # core: Dirac blocks, then s-like Kramers pairs with random parity, far from zero energy
    core: dict[tuple[int, ...], Array] = {}
    filling = 2 * nblocks
    blocks_t, blocks_p = [], []
    offset = 0
    for m in masses:
        for r, t in _dirac_block(rng, dim, m):
            big = core.setdefault(r, np.zeros((n, n), complex))
            big[offset : offset + 4, offset : offset + 4] += t
        blocks_t.append(_DIRAC_T)
        blocks_p.append(_DIRAC_P)
        offset += 4
    for _ in range(npairs):
        level = rng.choice([-1.0, 1.0]) * rng.uniform(1.0, 3.0)
        filling += 2 if level < 0 else 0
        core.setdefault((0,) * dim, np.zeros((n, n), complex))[
            offset : offset + 2, offset : offset + 2
        ] += level * _S0
        r1 = tuple(int(j == 0) for j in range(dim))
        core.setdefault(r1, np.zeros((n, n), complex))[
            offset : offset + 2, offset : offset + 2
        ] += rng.uniform(-0.15, 0.15) * _S0
        blocks_t.append(1j * _SY)
        blocks_p.append(rng.choice([-1.0, 1.0]) * _S0)
        offset += 2
    u_t, p = _block_diag(blocks_t), _block_diag(blocks_p)

    base = TightBinding(dim, n, time_reversal=u_t, inversion=p if inversion else None)
    for r, t in core.items():
        base.add(r, t)
    core_gap, _ = direct_gap(base, filling, points=8 if dim == 3 else 24, starts=0)
    couplings = _random_hoppings(rng, dim, u_t, p if inversion else None)
    scale = (coupling if coupling is not None else rng.uniform(0.3, 1.5)) * core_gap
    scale /= norm_bound(couplings)

    for _ in range(8):
        model = TightBinding(
            dim,
            n,
            time_reversal=u_t,
            inversion=p if inversion else None,
            name=f"random {dim}D model ({n} orbitals)",
        )
        for r, t in core.items():
            model.add(r, t)
        for r, t in couplings:
            model.add(r, scale * t, term="coupling")
        model.defaults = {"coupling": 1.0}
        gap, width = direct_gap(model, filling, starts=2)
        if gap >= min_gap_fraction * width:
            return RandomModel(model, filling, gap, width, _seed(seed))
        scale *= 0.5
    raise RuntimeError("could not draw a gapped model")  # pragma: no cover


def _seed(seed: int | np.random.Generator) -> int | None:
    return None if isinstance(seed, np.random.Generator) else int(seed)


# -- transformations -------------------------------------------------------------------------------
def random_unitary(rng: np.random.Generator, n: int) -> Array:
    """A Haar-random n×n unitary (QR of a complex Gaussian matrix with the phases fixed)."""
    z = (rng.normal(size=(n, n)) + 1j * rng.normal(size=(n, n))) / np.sqrt(2)
    q, r = np.linalg.qr(z)
    d = np.diag(r)
    return q * (d / np.abs(d))


def _rebuild(
    model: TightBinding,
    transform: Callable[[Array], Array],
    *,
    time_reversal: Array | None,
    inversion: Array | None,
    name: str,
) -> TightBinding:
    out = TightBinding(
        model.dim,
        model.norb,
        lattice=model.lattice,
        time_reversal=time_reversal,
        inversion=inversion,
        energy_unit=model.energy_unit,
        name=name,
    )
    for r, t, term in model.hoppings():
        out.add(r, transform(t), term)
    out.defaults = dict(model.defaults)
    out.parameter_info = {k: dict(v) for k, v in model.parameter_info.items()}
    return out


def change_basis(model: TightBinding, w: Array) -> TightBinding:
    """The same model in the orbital basis rotated by unitary W.

    H → W H W†, U_T → W U_T Wᵀ (Θ' = W Θ W† = W U_T K W† = W U_T Wᵀ K), P → W P W†.
    Orbital positions are dropped (a general W mixes orbitals at different sites).
    """
    w = np.asarray(w, dtype=complex)
    u_t = None if model.time_reversal is None else w @ model.time_reversal @ w.T
    p = None if model.inversion is None else w @ model.inversion @ w.conj().T
    return _rebuild(
        model,
        lambda t: w @ t @ w.conj().T,
        time_reversal=u_t,
        inversion=p,
        name=f"{model.name} (rotated basis)",
    )


def inversion_breaking_perturbation(
    model: TightBinding,
    strength: float,
    rng: np.random.Generator,
    *,
    term: str = "perturbation",
) -> TightBinding:
    """``model`` plus random time-reversal-symmetric couplings that break its inversion.

    The couplings sit on every bond with |R_i| ≤ 1, keep only the part odd under the model's P
    (P T† P† = −T) and are scaled so that ‖ΔH(κ)‖₂ ≤ ``strength`` at every κ (rigorous bound,
    see :func:`norm_bound`). By Weyl's inequality no eigenvalue moves by more than ``strength``,
    so for ``strength`` < gap/2 the gap stays open along the whole path and the Z2 indices
    cannot change. They form the new term ``term`` (default value 1.0); the result carries no
    inversion matrix.
    """
    assert model.time_reversal is not None and model.inversion is not None
    hops = _random_hoppings(rng, model.dim, model.time_reversal, None, odd_under=model.inversion)
    scale = strength / norm_bound(hops)
    out = _rebuild(
        model,
        lambda t: t,
        time_reversal=model.time_reversal,
        inversion=None,
        name=f"{model.name} + inversion-breaking perturbation",
    )
    for r, t in hops:
        out.add(r, scale * t, term=term)
    out.defaults[term] = 1.0
    return out
