"""Models from other codes' hopping lists, and our model files (.npz, HDF5): round trips.

The reference for a hopping list is plain NumPy: H(κ) = Σ_i T_i exp(2πi κ·R_i) summed over a
full list (each bond with its partner −R, the on-site block once).
"""

from __future__ import annotations

from pathlib import Path

import h5py
import numpy as np
import pytest
import toposweep as ts
from toposweep.errors import ModelError
from toposweep.model_files import FORMAT


def full_list(model: ts.TightBinding, params: dict[str, float]):
    """(R, T) of a model at ``params`` as a full list: every bond and its conjugate partner."""
    coeff = {None: 1.0, **params}
    R, T = [], []
    for r, t, term in model.hoppings():
        t = coeff[term] * t
        R.append(r)
        T.append(t)
        if any(r):
            R.append(tuple(-x for x in r))
            T.append(t.conj().T)
    return np.array(R), np.array(T)


def numpy_h(R: np.ndarray, T: np.ndarray, kappa: np.ndarray) -> np.ndarray:
    phases = np.exp(2j * np.pi * kappa @ R.T)  # (nk, nR)
    return np.einsum("kr,rab->kab", phases, T)


@pytest.mark.parametrize("name", ["wilson_dirac", "kane_mele", "fu_kane_mele"])
def test_full_and_half_lists_give_the_numpy_hamiltonian(name: str, rng) -> None:
    model = getattr(ts.models, name)()
    params = model.resolve({})
    R, T = full_list(model, params)
    kappa = rng.random((7, model.dim))
    want = numpy_h(R, T, kappa)
    full = ts.TightBinding.from_hoppings(R, T)
    np.testing.assert_allclose(full.hamiltonian(kappa), want, atol=1e-12)
    order = rng.permutation(len(R))  # any order, and partners anywhere in the list
    np.testing.assert_allclose(
        ts.TightBinding.from_hoppings(R[order], T[order]).hamiltonian(kappa), want, atol=1e-12
    )
    keep = [i for i, r in enumerate(R) if not any(r) or next(x for x in r if x) > 0]
    half = ts.TightBinding.from_hoppings(R[keep], T[keep])
    np.testing.assert_allclose(half.hamiltonian(kappa), want, atol=1e-12)
    assert len(list(half.hoppings())) == len(list(full.hoppings()))


def test_terms_weights_and_repeated_entries() -> None:
    sz = np.diag([1.0, -1.0])
    R = [(0, 0), (1, 0), (1, 0), (-1, 0), (0, 1), (0, -1)]
    T = [sz] * 6  # (1, 0) listed twice with weight 2: one bond t·sz
    m = ts.TightBinding.from_hoppings(
        R, T, terms=["m", "t", "t", "t", "t", "t"], weights=[1, 2, 2, 1, 1, 1]
    )
    assert m.terms == ("m", "t")
    # κ = 0: m + t·(2·cos 0 + 2·cos 0) on the diagonal
    h = m.hamiltonian([[0.0, 0.0]], {"m": 0.5, "t": 1.0})[0]
    np.testing.assert_allclose(h.real, np.diag([4.5, -4.5]), atol=1e-12)


def test_lists_that_are_not_hermitian_or_ambiguous_are_refused() -> None:
    sz, sx = np.diag([1.0, -1.0]), np.array([[0, 1], [1, 0]])
    with pytest.raises(ModelError, match=r"not Hermitian.*R = \(1, 0\)"):
        ts.TightBinding.from_hoppings([(0, 0), (1, 0), (-1, 0)], [sz, sz, sz + 0.1 * sx])
    with pytest.raises(ModelError, match="has no partner"):
        ts.TightBinding.from_hoppings([(1, 0), (-1, 0), (0, 1)], [sz, sz, sz])
    with pytest.raises(ModelError, match="has no partner"):
        ts.TightBinding.from_hoppings([(0, 1)], [sz], half=False)
    with pytest.raises(ModelError, match="integers"):
        ts.TightBinding.from_hoppings([(0.5, 0)], [sz])
    with pytest.raises(ModelError, match=r"\(nR, norb, norb\)"):
        ts.TightBinding.from_hoppings([(1, 0)], [sz, sz])
    with pytest.raises(ModelError, match="Hermitian"):  # the on-site block, once, Hermitian
        ts.TightBinding.from_hoppings([(0, 0)], [[[0, 1], [0, 0]]])


def own_model() -> ts.TightBinding:
    """A model with everything a file must keep, and no defaults for one term."""
    m = ts.models.kane_mele()
    positions = np.random.default_rng(1).random((4, 2))
    out = ts.TightBinding(
        2, 4, lattice=[[1.0, 0.0], [0.5, 0.75**0.5]], positions=positions,
        time_reversal=m.time_reversal, inversion=m.inversion, energy_unit="eV", name="mine",
    )  # fmt: skip
    for r, t, term in m.hoppings():
        out.add(r, t, term)
    out.defaults = {"hopping": 1.0, "spin_orbit": 0.1}
    out.parameter_info = {"spin_orbit": {"long_name": "spin-orbit coupling", "units": "eV"}}
    return out


@pytest.mark.parametrize("suffix", [".npz", ".h5", ".hdf5"])
def test_save_and_load_round_trip(tmp_path: Path, suffix: str) -> None:
    m = own_model()
    path = ts.save_model(m, tmp_path / f"model{suffix}")
    back = ts.load_model(path)
    assert back.to_dict() == m.to_dict()
    assert back.defaults == m.defaults and back.parameter_info == m.parameter_info
    params = {"rashba": 0.05, "staggered": 0.1}
    a, b = ts.invariants(m, 2, params), ts.invariants(back, 2, params)
    assert int(a.nu0) == int(b.nu0) == 1  # Kane & Mele, PRL 95, 226801 (2005): odd phase
    assert float(a.gap_direct) == float(b.gap_direct)


def test_hdf5_layout_is_the_documented_one(tmp_path: Path) -> None:
    path = ts.save_model(own_model(), tmp_path / "m.h5")
    with h5py.File(path, "r") as f:
        assert f["format"].asstr()[()] == FORMAT and int(f["format_version"][()]) == 1
        assert f["R"].dtype == np.int64 and f["R"].shape[1] == 2
        assert f["T"].dtype == np.complex128 and f["T"].shape[1:] == (4, 4)
        assert list(f["terms"].asstr()[()]) == ["hopping", "spin_orbit", "rashba", "staggered"]
        assert f["positions"].shape == (4, 2) and f["time_reversal"].shape == (4, 4)
    doc = (Path(__file__).parents[1] / "docs" / "model-files.md").read_text()
    with h5py.File(path, "r") as f:
        for key in f:
            assert f"`{key}`" in doc, key


def test_what_cannot_be_saved_or_read_is_refused(tmp_path: Path) -> None:
    def square(kappa, m=1.0):
        return np.zeros((len(kappa), 2, 2)) + m * np.eye(2)

    with pytest.raises(ModelError, match="only tight-binding"):
        ts.save_model(ts.CallableModel(square, 2, 2), tmp_path / "c.npz")
    with pytest.raises(ModelError, match=r"\.npz, \.h5 or \.hdf5"):
        ts.save_model(ts.models.bhz(), tmp_path / "m.txt")
    np.savez(tmp_path / "other.npz", R=np.zeros((1, 2)))
    with pytest.raises(ModelError, match="not a toposweep model file"):
        ts.load_model(tmp_path / "other.npz")
    (tmp_path / "junk.h5").write_bytes(b"not hdf5 at all")
    with pytest.raises(ModelError, match="not a readable model file"):
        ts.load_model(tmp_path / "junk.h5")


def test_a_newer_layout_is_refused_with_a_message(tmp_path: Path) -> None:
    path = ts.save_model(ts.models.bhz(), tmp_path / "m.npz")
    with np.load(path, allow_pickle=False) as z:
        arrays = {k: z[k] for k in z.files}
    arrays["format_version"] = np.array(2)
    np.savez(tmp_path / "newer.npz", **arrays)
    with pytest.raises(ModelError, match="version 2 is newer"):
        ts.load_model(tmp_path / "newer.npz")
