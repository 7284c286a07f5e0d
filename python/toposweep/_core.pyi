"""Type stubs of the Rust extension ``toposweep._core``.

Hand-written; keep in step with src/python/.
"""

from collections.abc import Callable
from typing import Any

import numpy as np
from numpy.typing import NDArray

__version__: str
#: instruction-set level the kernels were compiled for, e.g. "x86-64-v3 (AVX2, FMA)"
INSTRUCTION_SET: str

class CoreModel:
    """A model as the core sees it: a hopping list or a Python callable."""

    @staticmethod
    def tight_binding(
        dim: int,
        norb: int,
        nterms: int,
        r: NDArray[np.int64],
        t: NDArray[np.complex128],
        term: NDArray[np.int64],
    ) -> CoreModel: ...
    @staticmethod
    def callable(
        dim: int,
        norb: int,
        func: Callable[[NDArray[np.float64], int], NDArray[np.complex128]],
        lipschitz: NDArray[np.float64] | None = None,
    ) -> CoreModel: ...
    @property
    def dim(self) -> int: ...
    @property
    def norb(self) -> int: ...

def evaluate(
    model: CoreModel,
    coeffs: NDArray[np.float64],
    filling: int,
    *,
    inversion: NDArray[np.complex128] | None = None,
    time_reversal: NDArray[np.complex128] | None = None,
    loop_points: int,
    lines: int,
    max_lines: int,
    step_limit: float,
    gap_floor: float,
    gap_points: int,
    gap_starts: int = 3,
    method: str = "wilson",
    certify: bool = True,
    prove_gap: str = "auto",
    threads: int | None = None,
    alongside: Callable[[], object] | None = None,
) -> dict[str, NDArray[Any]]:
    """Per-point results by quantity, each an array of shape (points, ...).

    ``alongside`` runs while the points are computed (first, with one thread). If it returns a
    dict of arrays, a result whose key it holds is written into that array — C-contiguous,
    writable, of the result's size, of a type that holds its values exactly — and that very
    array is returned for it.
    """
    ...

def hamiltonian(
    model: CoreModel,
    coeff: NDArray[np.float64],
    kappa: NDArray[np.float64],
    *,
    threads: int | None = None,
) -> NDArray[np.complex128]: ...
def eigh(
    h: NDArray[np.complex128], *, threads: int | None = None
) -> tuple[NDArray[np.float64], NDArray[np.complex128]]: ...
def flow(
    model: CoreModel,
    coeff: NDArray[np.float64],
    filling: int,
    plane: int,
    loop_points: int,
    pump: NDArray[np.float64],
    *,
    positions: NDArray[np.float64] | None = None,
    threads: int | None = None,
) -> NDArray[np.float64]: ...
def prove_gaps(
    model: CoreModel,
    coeffs: NDArray[np.float64],
    filling: int,
    targets: NDArray[np.float64],
    floors: NDArray[np.float64],
    *,
    budget: int,
    threads: int | None = None,
) -> tuple[NDArray[np.float64], NDArray[np.int8], NDArray[np.int64]]:
    """Prove the direct gap ≥ ``targets[i]`` over the zone at every row of ``coeffs``.

    Returns (lower bounds, NaN where not proven; codes 0 proven, 1 not proven, 2 a κ point
    under the floor; Hamiltonians evaluated per point).
    """
    ...

def auto_proof_below(model: CoreModel, coeffs: NDArray[np.float64]) -> NDArray[np.float64]:
    """Per row of ``coeffs``: the gap under which ``prove_gap="auto"`` proves (NaN: never)."""
    ...

def probe_gaps(
    model: CoreModel,
    coeffs: NDArray[np.float64],
    filling: int,
    *,
    grid: int,
    starts: int,
    gap_floor: float,
    threads: int | None = None,
) -> dict[str, NDArray[Any]]:
    """Smallest direct gap per row of ``coeffs``, without Wilson loops.

    Keys ``gap_direct``, ``gap_kappa``, ``gap_floor``, ``gap_indirect``.
    """
    ...

def decided_flow(
    model: CoreModel,
    coeff: NDArray[np.float64],
    filling: int,
    plane: int,
    *,
    loop_points: int,
    lines: int,
    max_lines: int,
    step_limit: float,
    certify: bool = True,
    threads: int | None = None,
) -> tuple[NDArray[np.float64], NDArray[np.float64], int, int]: ...
