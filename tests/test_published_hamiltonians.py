"""Every builtin model's H(κ) against its published formula, written out here independently.

The catalogue builds its models from bond lists it finds from the geometry
(``toposweep.models._bonds``) or from hand-written hopping matrices; here each model is written
again, straight from the formula of its source, with NumPy and neighbour vectors typed in by
hand, and compared matrix by matrix at random κ and random parameter values. A check at the
TRIMs alone is not enough: there the spin–orbit terms of the honeycomb and diamond models
vanish, so a wrong prefactor would go unseen.

Sources (one per model):
- ``wilson_dirac``: Qi, Hughes & Zhang, Phys. Rev. B 78, 195424 (2008), the cubic lattice
  Dirac model H(k) = t Σ_i sin k_i Γ_i + (m + t Σ_i cos k_i) Γ_4.
- ``bhz``: Qi, Wu & Zhang, Phys. Rev. B 74, 085308 (2006) and its time-reversed partner
  (Bernevig, Hughes & Zhang, Science 314, 1757 (2006)): h(k) ⊕ h*(−k) with
  h(k) = t sin k_x σ_x + t sin k_y σ_y + (m + t cos k_x + t cos k_y) σ_z.
- ``kane_mele``: Kane & Mele, Phys. Rev. Lett. 95, 226801 (2005), eq. (1):
  H = t Σ⟨ij⟩ c†_i c_j + iλ_SO Σ⟨⟨ij⟩⟩ ν_ij c†_i s_z c_j + iλ_R Σ⟨ij⟩ c†_i (s × d̂_ij)_z c_j
  + λ_v Σ_i ξ_i c†_i c_i.
- ``fu_kane_mele``: Fu, Kane & Mele, Phys. Rev. Lett. 98, 106803 (2007), eq. (1):
  H = Σ⟨ij⟩ t_ij c†_i c_j + i (8λ_SO/a²) Σ⟨⟨ij⟩⟩ c†_i s·(d¹_ij × d²_ij) c_j.
- ``df_lattice``: no published form (a model of our own, common practice, no source); the
  reference is the formula of its module docstring.

Conventions of the sums (common practice, no source): Σ⟨ij⟩ runs over ordered pairs, so a
bond's matrix element ⟨i|H|j⟩ is the summand itself (this is what gives Kane & Mele's bulk
gap 6√3 λ_SO at K, which ``test_physics_kane_mele.py`` checks); d¹, d² are the two
nearest-neighbour legs of the path from j to i and d̂_ij points from j to i, as in the
sources. The catalogue's Bloch convention is periodic (H_ij(κ) = Σ_R e^{2πiκ·R} ⟨i,0|H|j,R⟩);
the references are summed in the position gauge, Σ e^{ik·(r_j − r_i)}, and turned into the
periodic one by the diagonal phases e^{ik·r_i}, which is exact.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
import toposweep as ts

S0 = np.eye(2, dtype=complex)
SX = np.array([[0, 1], [1, 0]], dtype=complex)
SY = np.array([[0, -1j], [1j, 0]], dtype=complex)
SZ = np.array([[1, 0], [0, -1]], dtype=complex)
SPIN = (SX, SY, SZ)


def cartesian_k(kappa: np.ndarray, lattice: np.ndarray) -> np.ndarray:
    """k with k·R = 2π κ·n for R = Σ n_i a_i (lattice vectors as rows): k = 2π A⁻¹ κ."""
    return 2 * np.pi * np.linalg.solve(lattice, np.asarray(kappa).T).T


def bloch_from_bonds(
    kappa: np.ndarray,
    lattice: np.ndarray,
    sites: np.ndarray,
    bonds: list[tuple[int, int, np.ndarray, np.ndarray]],
    onsite: np.ndarray,
) -> np.ndarray:
    """H(κ) in the periodic convention from ordered bonds (i, j, r_j − r_i, ⟨i|H|j⟩ 2×2 spin).

    ``sites`` are Cartesian positions; basis site ⊗ spin (site slowest).
    """
    k = cartesian_k(kappa, lattice)
    nsite = len(sites)
    h = np.zeros((len(k), 2 * nsite, 2 * nsite), dtype=complex)
    h += onsite
    for i, j, d, amp in bonds:
        phase = np.exp(1j * k @ d)
        h[:, 2 * i : 2 * i + 2, 2 * j : 2 * j + 2] += phase[:, None, None] * amp
    # position gauge → periodic gauge: H_per = D H_pos D†, D = diag(e^{ik·r_i})
    d = np.repeat(np.exp(1j * k @ sites.T), 2, axis=1)  # (N, 2 nsite)
    return d[:, :, None] * h * d.conj()[:, None, :]


def assert_hermitian_bond_list(bonds) -> None:
    """Every ordered bond has its reverse with the conjugate amplitude (a Hermitian H)."""
    for i, j, d, amp in bonds:
        back = [a for i2, j2, d2, a in bonds if (i2, j2) == (j, i) and np.allclose(d2, -d)]
        assert len(back) == 1 and np.allclose(back[0], amp.conj().T), (i, j, d)


# -- Wilson–Dirac (Qi, Hughes & Zhang, Phys. Rev. B 78, 195424 (2008)) ------------------------
def wilson_dirac_reference(kappa: np.ndarray, mass: float, hopping: float) -> np.ndarray:
    gamma = [np.kron(SX, s) for s in SPIN]  # orbital ⊗ spin, Γ_i = σ_x ⊗ s_i
    gamma4 = np.kron(SZ, S0)
    k = 2 * np.pi * np.asarray(kappa)  # simple cubic, a = 1
    h = hopping * sum(np.sin(k[:, i])[:, None, None] * gamma[i] for i in range(3))
    return h + (mass + hopping * np.cos(k).sum(axis=1))[:, None, None] * gamma4


# -- Kane–Mele (Kane & Mele, Phys. Rev. Lett. 95, 226801 (2005)) ------------------------------
KM_LATTICE = np.array([[1.0, 0.0], [0.5, np.sqrt(3) / 2]])
KM_SITES = np.array([[0.0, 0.0], [0.5, np.sqrt(3) / 6]])  # A, B (Cartesian); nn distance 1/√3
# the three B neighbours of A, typed in: r_B − r_A, r_B − r_A − a₁, r_B − r_A − a₂
KM_NN = np.array([[0.5, np.sqrt(3) / 6], [-0.5, np.sqrt(3) / 6], [0.0, -np.sqrt(3) / 3]])


def _cross_z(a: np.ndarray, b: np.ndarray) -> float:
    return float(a[0] * b[1] - a[1] * b[0])


def kane_mele_bonds(t: float, lso: float, lr: float) -> list:
    bonds = []
    legs = {0: KM_NN, 1: -KM_NN}  # nearest-neighbour vectors from an A site and from a B site
    for i in (0, 1):
        j = 1 - i
        for d in legs[i]:  # nearest neighbours: hopping and Rashba
            dhat = -d / np.linalg.norm(d)  # from j to i
            rashba = 1j * lr * (SX * dhat[1] - SY * dhat[0])  # iλ_R (s × d̂_ij)_z
            bonds.append((i, j, d, t * S0 + rashba))
        for a, b in itertools.permutations(range(3), 2):  # second neighbours via site r_i + δ_a
            # j = r_i + δ_a − δ_b; path j → middle → i: d¹ = δ_b, d² = −δ_a
            d1, d2 = legs[i][b], -legs[i][a]
            nu = (2 / np.sqrt(3)) * _cross_z(d1, d2) / (np.linalg.norm(d1) * np.linalg.norm(d2))
            assert abs(abs(nu) - 1) < 1e-12
            bonds.append((i, i, legs[i][a] - legs[i][b], 1j * lso * nu * SZ))
    return bonds


def kane_mele_reference(kappa, hopping, spin_orbit, rashba, staggered) -> np.ndarray:
    bonds = kane_mele_bonds(hopping, spin_orbit, rashba)
    assert_hermitian_bond_list(bonds)
    onsite = staggered * np.kron(np.diag([1.0, -1.0]), S0)  # ξ = +1 on A, −1 on B
    return bloch_from_bonds(kappa, KM_LATTICE, KM_SITES, bonds, onsite)


# -- Fu–Kane–Mele diamond (Fu, Kane & Mele, Phys. Rev. Lett. 98, 106803 (2007)) ---------------
FKM_LATTICE = 0.5 * np.array([[0.0, 1.0, 1.0], [1.0, 0.0, 1.0], [1.0, 1.0, 0.0]])  # fcc, a = 1
FKM_SITES = np.array([[0.0, 0.0, 0.0], [0.25, 0.25, 0.25]])  # A, B (Cartesian)
# the four B neighbours of A, typed in; the first is the [111] bond that δt dimerises
FKM_NN = 0.25 * np.array([[1, 1, 1], [1, -1, -1], [-1, 1, -1], [-1, -1, 1]], dtype=float)


def diamond_bonds(t: float, lso: float, dt: float) -> list:
    bonds = []
    legs = {0: FKM_NN, 1: -FKM_NN}
    for i in (0, 1):
        j = 1 - i
        for n, d in enumerate(legs[i]):
            bonds.append((i, j, d, (t + (dt if n == 0 else 0.0)) * S0))
        for a, b in itertools.permutations(range(4), 2):
            d1, d2 = legs[i][b], -legs[i][a]  # legs of the path from j to i (see Kane–Mele)
            c = (8 * lso) * np.cross(d1, d2)  # 8 λ_SO / a², a = 1
            bonds.append(
                (i, i, legs[i][a] - legs[i][b], 1j * sum(c[m] * SPIN[m] for m in range(3)))
            )
    return bonds


def fu_kane_mele_reference(kappa, hopping, spin_orbit, dimerisation) -> np.ndarray:
    bonds = diamond_bonds(hopping, spin_orbit, dimerisation)
    assert_hermitian_bond_list(bonds)
    return bloch_from_bonds(kappa, FKM_LATTICE, FKM_SITES, bonds, np.zeros((4, 4)))


# -- d–f lattice (our own form, module docstring; common practice, no source) ----------------
def df_lattice_reference(kappa, d_hopping, f_hopping, f_level, hybridisation) -> np.ndarray:
    k = 2 * np.pi * np.asarray(kappa)
    c, s = np.cos(k), np.sin(k)
    g = -2 * c.sum(axis=1) + 1.5 * sum(c[:, i] * c[:, j] for i, j in ((0, 1), (1, 2), (0, 2)))
    hyb = hybridisation * sum(s[:, i, None, None] * SPIN[i] for i in range(3))
    h = np.zeros((len(k), 4, 4), dtype=complex)
    h[:, :2, :2] = (d_hopping * g)[:, None, None] * S0
    h[:, 2:, 2:] = (f_level + f_hopping * g)[:, None, None] * S0
    h[:, :2, 2:] = h[:, 2:, :2] = hyb
    return h


# -- BHZ type (Qi, Wu & Zhang, PRB 74, 085308 (2006); Bernevig, Hughes & Zhang (2006)) --------
def bhz_reference(kappa, mass, hopping) -> np.ndarray:
    """h(k) ⊕ h*(−k), h(k) = t sin k_x σ_x + t sin k_y σ_y + (m + t cos k_x + t cos k_y) σ_z;
    spin ⊗ orbital, spin slowest."""
    k = 2 * np.pi * np.asarray(kappa)

    def h(kx, ky):
        return (
            hopping * (np.sin(kx)[:, None, None] * SX + np.sin(ky)[:, None, None] * SY)
            + (mass + hopping * (np.cos(kx) + np.cos(ky)))[:, None, None] * SZ
        )

    out = np.zeros((len(k), 4, 4), dtype=complex)
    out[:, :2, :2] = h(k[:, 0], k[:, 1])
    out[:, 2:, 2:] = h(-k[:, 0], -k[:, 1]).conj()
    return out


REFERENCES = {
    "bhz": bhz_reference,
    "df_lattice": df_lattice_reference,
    "fu_kane_mele": fu_kane_mele_reference,
    "kane_mele": kane_mele_reference,
    "wilson_dirac": wilson_dirac_reference,
}


def test_every_builtin_model_has_a_reference():
    assert set(REFERENCES) == set(ts.models.__all__)


@pytest.mark.parametrize("name", sorted(REFERENCES))
def test_hamiltonian_is_the_published_formula_at_random_kappa(name, rng):
    model = getattr(ts.models, name)()
    kappa = rng.random((64, model.dim)) * 2 - 0.5  # also outside the unit cell
    for _ in range(4):
        # every term at a random value of either sign, so each one is seen on its own
        params = {p: float(rng.uniform(0.2, 1.5) * rng.choice([-1, 1])) for p in model.parameters}
        got = model.hamiltonian(kappa, params)
        want = REFERENCES[name](kappa, **params)
        np.testing.assert_allclose(got, want, atol=1e-12, err_msg=f"{name} {params}")


@pytest.mark.parametrize("name", sorted(REFERENCES))
def test_each_term_alone_is_the_published_term(name, rng):
    """One term at a time (the others zero): a term cannot hide behind another's error."""
    model = getattr(ts.models, name)()
    kappa = rng.random((16, model.dim))
    for p in model.parameters:
        params = dict.fromkeys(model.parameters, 0.0)
        params[p] = 0.7
        want = REFERENCES[name](kappa, **params)
        assert np.abs(want).max() > 0.1, (name, p)  # the term does something at random κ
        np.testing.assert_allclose(model.hamiltonian(kappa, params), want, atol=1e-12)


def test_typed_neighbour_vectors_are_the_lattices_own(rng):
    """The hand-typed legs are nearest neighbours of the stated lattices: honeycomb legs of
    length 1/√3 at 120°, tetrahedral diamond legs of length √3/4 with cos θ = −1/3, and each
    leg joins the A site to a B site (r_B − r_A minus a lattice vector)."""
    for legs, lattice, sites, length, cos in (
        (KM_NN, KM_LATTICE, KM_SITES, 1 / np.sqrt(3), -0.5),
        (FKM_NN, FKM_LATTICE, FKM_SITES, np.sqrt(3) / 4, -1 / 3),
    ):
        np.testing.assert_allclose(np.linalg.norm(legs, axis=1), length)
        for a, b in itertools.combinations(legs, 2):
            assert a @ b / length**2 == pytest.approx(cos)
        for leg in legs:
            n = np.linalg.solve(lattice.T, sites[1] - sites[0] - leg)  # integer cell offset
            np.testing.assert_allclose(n, np.round(n), atol=1e-12)


# the defaults each builder documents (its docstring; the README table of the catalogue and the
# models module's doctest are computed at them)
DOCUMENTED_DEFAULTS = {
    "bhz": {"mass": -1.0, "hopping": 1.0},
    "df_lattice": {"d_hopping": 0.25, "f_hopping": -0.05, "f_level": -0.75, "hybridisation": 0.25},
    "fu_kane_mele": {"hopping": 1.0, "spin_orbit": 0.1, "dimerisation": 0.4},
    "kane_mele": {"hopping": 1.0, "spin_orbit": 0.1, "rashba": 0.0, "staggered": 0.0},
    "wilson_dirac": {"mass": -2.0, "hopping": 1.0},
}


@pytest.mark.parametrize("name", sorted(DOCUMENTED_DEFAULTS))
def test_defaults_are_the_documented_ones(name):
    assert getattr(ts.models, name)().defaults == DOCUMENTED_DEFAULTS[name]


# the lattice (Cartesian rows, a = 1) and the sites each reference above is written on: simple
# cubic for the Wilson–Dirac and d–f models and square for BHZ (k = 2πκ, one site per cell,
# every orbital on it), and the honeycomb and fcc lattices typed in for Kane–Mele and diamond
REFERENCE_GEOMETRY = {
    "bhz": (np.eye(2), np.zeros((1, 2))),
    "df_lattice": (np.eye(3), np.zeros((1, 3))),
    "fu_kane_mele": (FKM_LATTICE, FKM_SITES),
    "kane_mele": (KM_LATTICE, KM_SITES),
    "wilson_dirac": (np.eye(3), np.zeros((1, 3))),
}


def test_every_builtin_model_has_a_reference_geometry():
    assert set(REFERENCE_GEOMETRY) == set(ts.models.__all__)


@pytest.mark.parametrize("name", sorted(REFERENCE_GEOMETRY))
def test_lattice_and_orbital_sites_are_the_references(name):
    """H(κ) in reduced coordinates does not show the lattice, but the model carries it into
    every result's provenance (``to_dict``) and its orbital positions place the Wannier
    centres: both must be the geometry the published formula is written on (two orbitals,
    spin up and down or two orbitals of one atom, per site)."""
    model = getattr(ts.models, name)()
    lattice, sites = REFERENCE_GEOMETRY[name]
    np.testing.assert_allclose(model.lattice, lattice, atol=1e-15)
    assert model.to_dict()["lattice"] == model.lattice.tolist()
    reduced = np.zeros((model.norb, model.dim)) if model.positions is None else model.positions
    want = np.repeat(sites, model.norb // len(sites), axis=0)
    np.testing.assert_allclose(reduced @ model.lattice, want, atol=1e-12)
