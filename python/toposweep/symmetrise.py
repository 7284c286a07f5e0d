"""Projecting a nearly symmetric tight-binding model onto its symmetric part.

Hoppings fitted to a band structure or taken from Wannier functions respect time reversal and
inversion only to a few digits, and toposweep refuses a symmetry that holds only to 1e-5.
:func:`symmetrise` returns the model whose every term is the average of the term and its image
under the declared operators — the nearest symmetric model in the Frobenius norm of the hoppings
(common practice, no source) — so its indices are those of the symmetric model the data were
meant to describe, and the removed part is reported.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from .errors import ModelError
from .tightbinding import TightBinding

__all__ = ["symmetrise"]

Bonds = dict[tuple[str | None, tuple[int, ...]], NDArray[np.complex128]]


def symmetrise(
    model: TightBinding,
    *,
    time_reversal: bool = True,
    inversion: bool = False,
    max_change: float = 1e-2,
) -> TightBinding:
    r"""The model with every term projected onto its symmetric part.

    With Θ = U_T K, time reversal holds when U_T H(κ)* U_T† = H(−κ), i.e. U_T M_R* U_T† = M_R for
    the full hopping M_R on every bond R; inversion holds when P M_R P† = M_{−R}. Each term's
    M_R is replaced by the average over the operators asked for, term by term, so the result is
    symmetric at every parameter value. Symmetric models come back unchanged (to rounding).

    Parameters
    ----------
    model : TightBinding
        The model; its ``time_reversal`` (and ``inversion``, if asked for) operator is used.
    time_reversal, inversion : bool
        Which symmetries to impose.
    max_change : float
        Largest accepted change, max |ΔM| / max |M| over all bonds. A model that far from
        symmetric is more likely paired with the wrong operator than noisy: raises ModelError.

    Returns
    -------
    TightBinding
        A new model with the same terms, operators, defaults and metadata; its ``name`` notes
        the symmetrisation.

    Examples
    --------
    A Wilson–Dirac model with a small time-reversal-breaking hopping added, as fitted data
    might have:

    >>> import numpy as np
    >>> import toposweep as ts
    >>> m = ts.models.wilson_dirac()
    >>> _ = m.add((1, 0, 0), 1e-5 * np.diag([1j, 0, 0, 0]))
    >>> import warnings
    >>> with warnings.catch_warnings(record=True) as caught:  # undefined, reason 8, a warning
    ...     warnings.simplefilter("always")
    ...     int(ts.invariants(m, 2, {"mass": -2.0}).undefined_reason)
    8
    >>> "nearly symmetric" in str(caught[0].message)
    True
    >>> clean = ts.symmetrise(m)
    >>> int(ts.invariants(clean, 2, {"mass": -2.0}).nu0)
    1
    """
    if not isinstance(model, TightBinding):
        raise ModelError(
            f"symmetrise works on tight-binding models, got {type(model).__name__}; for a "
            "callable model, symmetrise H(κ) in your function"
        )
    if not (time_reversal or inversion):
        raise ModelError("nothing to do: ask for time_reversal and/or inversion")
    bonds = _canonical_bonds(model)
    before = {key: m.copy() for key, m in bonds.items()}
    if time_reversal:
        u = _operator(model.time_reversal, "time_reversal")
        for key, m in bonds.items():
            bonds[key] = 0.5 * (m + u @ m.conj() @ u.conj().T)
    if inversion:
        p = _operator(model.inversion, "inversion")
        for (term, r), m in bonds.items():
            # M_{−R} = M_R† for a bond stored once; the on-site block maps to itself
            image = p @ (m if not any(r) else m.conj().T) @ p.conj().T
            bonds[(term, r)] = 0.5 * (m + image)
    scale = max((np.abs(m).max() for m in before.values()), default=0.0)
    change = max((np.abs(bonds[k] - before[k]).max() for k in bonds), default=0.0)
    if change > max_change * scale:
        raise ModelError(
            f"symmetrising changes the hoppings by {change / scale:.2e} of their largest entry "
            f"(max_change = {max_change:g}): far more than noise, so the operator is likely "
            "wrong for this model (check U_T / P and the orbital order)"
        )
    out = TightBinding(
        model.dim,
        model.norb,
        lattice=model.lattice,
        positions=model.positions,
        time_reversal=model.time_reversal,
        inversion=model.inversion,
        energy_unit=model.energy_unit,
        name=f"{model.name or 'model'} (symmetrised)",
    )
    # insertion order follows the original hoppings, so terms keep their order
    for (term, r), m in bonds.items():
        if not any(r):
            m = 0.5 * (m + m.conj().T)  # exactly Hermitian on site
        out.add(r, m, term)
    out.defaults = dict(model.defaults)
    out.parameter_info = {k: dict(v) for k, v in model.parameter_info.items()}
    return out


def _operator(op: NDArray[np.complex128] | None, what: str) -> NDArray[np.complex128]:
    if op is None:
        raise ModelError(f"the model has no {what} operator to symmetrise with")
    return np.asarray(op, dtype=complex)


def _canonical_bonds(model: TightBinding) -> Bonds:
    """Full hopping M_R per (term, R), each pair ±R once.

    A pair is stored at the R whose first non-zero component is positive; a bond added at −R
    contributes its conjugate there.
    """
    bonds: Bonds = {}
    for r, t, term in model.hoppings():
        first = next((x for x in r if x != 0), 0)
        key, m = (r, t) if first >= 0 else (tuple(-x for x in r), t.conj().T)
        if (term, key) in bonds:
            bonds[(term, key)] = bonds[(term, key)] + m
        else:
            bonds[(term, key)] = np.array(m, dtype=complex)
    return bonds
