"""Models whose Hamiltonian comes from the user's own vectorised function."""

from __future__ import annotations

import hashlib
import importlib
import importlib.util
import inspect
import sys
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from . import _core
from .errors import ModelError
from .model import Model

__all__ = ["CallableModel", "file_module_name", "function_label"]

#: module-name prefix of Python files toposweep imports by path (:func:`file_module_name`);
#: an internal name, never shown: :func:`function_label` names such functions by their file
FILE_MODULE_PREFIX = "toposweep_user_"


class CallableModel(Model):
    """A model defined by ``func(kappa, **params) -> H`` from another code.

    ``func`` receives reduced coordinates ``kappa`` of shape ``(N, dim)`` and the parameters as
    keyword arguments, and returns ``(N, norb, norb)`` complex Hermitian matrices. toposweep
    calls it with large batches (all κ points of many Wilson loops at once), never per κ point.

    Parameters
    ----------
    func : callable
        The vectorised Hamiltonian. Keyword parameters with defaults in its signature become
        the model's :attr:`defaults`.
    dim, norb : int
        Spatial dimension (2 or 3) and number of orbitals.
    parameters : sequence of str, optional
        Parameter names; by default every keyword parameter of ``func`` after ``kappa``.
    lipschitz : float, sequence of float or callable, optional
        Constants L_i such that ‖H(κ) − H(κ′)‖₂ ≤ Σ_i L_i |κ_i − κ′_i| for all κ, κ′ (reduced
        coordinates; spectral norm) — one number for every axis, one per axis, or a function
        of the parameters (keywords) returning either. With it the direct gap is proven over
        the whole zone and Wilson loops are resolved to the gap near a closing, as for a
        :class:`TightBinding` (docs/near-closings.md); a constant that is too small can make
        those proofs wrong. Without it ``gap_proven`` is NaN. For H = Σ_R T_R e^{2πiκ·R},
        L_i = 2π Σ_R |R_i| ‖T_R‖₂ will do.
    **kwargs
        ``lattice``, ``positions``, ``time_reversal``, ``inversion``, ``energy_unit``, ``name``
        as for :class:`TightBinding`.

    Examples
    --------
    >>> import numpy as np
    >>> from toposweep import CallableModel
    >>> def square(kappa, m=0.5):
    ...     d = m + np.cos(2 * np.pi * kappa).sum(axis=1)
    ...     h = np.zeros((len(kappa), 2, 2), complex)
    ...     h[:, 0, 0], h[:, 1, 1] = d, -d
    ...     return h
    >>> model = CallableModel(square, dim=2, norb=2)
    >>> model.parameters, model.defaults
    (('m',), {'m': 0.5})
    """

    def __init__(
        self,
        func: Callable[..., Any],
        dim: int,
        norb: int,
        *,
        parameters: Sequence[str] | None = None,
        lipschitz: float | Sequence[float] | Callable[..., Any] | None = None,
        **kwargs: Any,
    ) -> None:
        if not callable(func):
            raise ModelError(f"func must be callable, got {type(func).__name__}")
        super().__init__(dim, norb, **kwargs)
        self.func = func
        if lipschitz is not None and not callable(lipschitz):
            self._lipschitz_row(lipschitz)  # (a bad constant fails here, not at the first run)
        self.lipschitz = lipschitz
        sig_params = self._signature_parameters(func)
        if parameters is None:
            self._parameters = tuple(sig_params)
        else:
            self._parameters = tuple(str(p) for p in parameters)
        self.defaults = {
            k: float(v)
            for k, v in sig_params.items()
            if k in self._parameters and isinstance(v, int | float) and not isinstance(v, bool)
        }
        if not self.name:
            self.name = getattr(func, "__qualname__", "callable model")

    @staticmethod
    def _signature_parameters(func: Callable[..., Any]) -> dict[str, Any]:
        try:
            sig = inspect.signature(func)
        except (TypeError, ValueError):
            return {}
        out: dict[str, Any] = {}
        for i, p in enumerate(sig.parameters.values()):
            if i == 0 or p.kind in (p.VAR_POSITIONAL, p.VAR_KEYWORD):
                continue
            out[p.name] = None if p.default is p.empty else p.default
        return out

    @property
    def parameters(self) -> tuple[str, ...]:
        """Parameter names passed to ``func`` as keywords."""
        return self._parameters

    def prepare(self, points: Sequence[Mapping[str, float]]) -> tuple[Any, NDArray[np.float64]]:
        """A core model whose callback evaluates ``func`` at the parameters of each point."""
        pts = [dict(p) for p in points]
        func, norb = self.func, self.norb

        def evaluate(kappa: NDArray[np.float64], point: int) -> NDArray[np.complex128]:
            h = np.asarray(func(kappa, **pts[point]))
            if h.shape != (len(kappa), norb, norb):
                raise ModelError(
                    f"{self.name}: func returned shape {h.shape}, expected "
                    f"({len(kappa)}, {norb}, {norb}) for {len(kappa)} κ points"
                )
            try:
                h = np.ascontiguousarray(h, dtype=np.complex128)
            except (TypeError, ValueError) as exc:
                raise ModelError(
                    f"{self.name}: func must return complex numbers, got dtype {h.dtype} ({exc})"
                ) from None
            # (on the float view: no complex modulus, no temporary for isfinite; one pass for
            # the scale, which is NaN or infinite exactly when an entry is; see
            # benches/callable_cost.py and docs/callable-models.md)
            scale = float(np.max(np.abs(h.view(np.float64)), initial=0.0))
            if not np.isfinite(scale):
                raise ModelError(f"{self.name}: func returned NaN or infinity at {pts[point]}")
            diff = (h - h.conj().swapaxes(1, 2)).view(np.float64)
            herm = float(np.max(np.abs(diff), initial=0.0))  # (largest |Re| or |Im| of H − H†)
            if herm > 1e-8 * max(1.0, scale):
                raise ModelError(
                    f"{self.name}: func returned non-Hermitian matrices (max |H − H†| = {herm:.2e})"
                )
            return h

        bounds = None
        if self.lipschitz is not None:
            given = self.lipschitz
            bounds = np.array(
                [self._lipschitz_row(given(**p) if callable(given) else given) for p in pts],
                dtype=np.float64,
            ).reshape(len(pts), self.dim)
        core = _core.CoreModel.callable(self.dim, self.norb, evaluate, bounds)
        return core, np.zeros((len(pts), 0))

    def _lipschitz_row(self, value: Any) -> NDArray[np.float64]:
        """One row of Lipschitz constants (one per axis), checked."""
        try:
            row = np.broadcast_to(np.asarray(value, dtype=np.float64), (self.dim,))
        except (TypeError, ValueError):
            raise ModelError(
                f"lipschitz must be a number or {self.dim} numbers (one per axis), got {value!r}"
            ) from None
        if not np.all(np.isfinite(row)) or np.any(row < 0):
            raise ModelError(f"lipschitz constants must be finite and non-negative, got {value!r}")
        return np.array(row)

    def to_dict(self) -> dict[str, Any]:
        """JSON-able description; the function is recorded by its import path.

        The path is ``module:qualified_name`` — for a function of a file toposweep loaded by
        path (a ``toposweep run`` model file) ``/path/to/file.py:qualified_name`` — and the
        function's source file is recorded too, so it can be found again.
        """
        d = self._base_dict()
        d["kind"] = "callable"
        d["parameters"] = list(self._parameters)
        d["function"] = function_label(self.func)
        d["function_file"] = _source_file(self.func)
        given = self.lipschitz
        if callable(given):
            d["lipschitz"] = f"function {function_label(given)}"
        elif given is not None:
            d["lipschitz"] = self._lipschitz_row(given).tolist()
        return d

    @classmethod
    def from_dict(cls, d: Mapping[str, Any]) -> CallableModel:
        """Rebuild from :meth:`to_dict` output by importing the recorded function.

        This imports and runs the module or file the description names: call it only on
        descriptions you trust (:func:`toposweep.model_from_dict` refuses them by default).
        """
        ref = str(d.get("function", ""))
        func = _import_function(ref, d.get("function_file"))
        try:
            m = cls(
                func,
                d["dim"],
                d["norb"],
                parameters=d.get("parameters"),
                # (a recorded function of the parameters is not imported again: no bound)
                lipschitz=d["lipschitz"] if isinstance(d.get("lipschitz"), list) else None,
                **cls._base_kwargs(d),
            )
            m.defaults.update({str(k): float(v) for k, v in d.get("defaults", {}).items()})
            m.parameter_info = {str(k): dict(v) for k, v in d.get("parameter_info", {}).items()}
        except (KeyError, TypeError, AttributeError) as exc:
            raise ModelError(f"not a valid callable model description: {exc!r}") from None
        return m


def _source_file(func: Any) -> str | None:
    """Absolute path of the file defining ``func``, if it has one."""
    try:
        path = inspect.getsourcefile(func)
    except TypeError:  # builtins, partials, callable instances without source
        return None
    return str(Path(path).resolve()) if path else None


def function_label(func: Any) -> str:
    """How results and messages name a function: ``module:qualname``, or ``file.py:qualname``.

    A function of a Python file toposweep imported by path (a run configuration's
    ``"path/to/file.py:function"``) lives in a module of an internal name; it is named by
    the file's absolute path instead, which is what the user wrote and fixed the same way.

    Examples
    --------
    >>> import math
    >>> function_label(math.floor)
    'math:floor'
    """
    module = getattr(func, "__module__", None)
    qualname = getattr(func, "__qualname__", None)
    if not module or not qualname:
        return repr(func)
    if str(module).startswith(FILE_MODULE_PREFIX):
        loaded = sys.modules.get(str(module))
        path = getattr(loaded, "__file__", None)
        if path:
            return f"{Path(path).resolve()}:{qualname}"
    return f"{module}:{qualname}"


def _import_function(ref: str, file: Any) -> Callable[..., Any]:
    """The function recorded as ``module:qualname`` or ``/path/file.py:qualname``.

    Imported by its module name, else loaded from its source file ``file``.
    """
    module, _, qualname = ref.rpartition(":")
    by_path = module.endswith(".py") or module.startswith(FILE_MODULE_PREFIX)
    if module.endswith(".py"):  # a file loaded by path: its path is the reference
        file = module
    where = Path(file) if isinstance(file, str) and file else None
    if by_path and where is not None:  # (older results recorded the internal module name)
        ref = f"{where}:{qualname}"
    if not module or not qualname or "<" in qualname:
        raise ModelError(
            f"cannot rebuild callable model: function {ref!r} is not importable (lambdas and "
            "functions defined inside other functions cannot be found again; define it at "
            "module level)"
        )
    first: Exception | None = None
    if not by_path:
        try:
            return _attribute(importlib.import_module(module), qualname)
        except (ImportError, AttributeError) as exc:
            first = exc
    if module == "__main__" or where is None or not where.is_file():
        if by_path:
            why = f"the file {where} is gone (moved or deleted?)"
        else:
            why = str(first)
        hint = (
            " It was defined in a script run as __main__: move it into a module file so results "
            "can rebuild the model."
            if module == "__main__"
            else ""
        )
        raise ModelError(f"cannot import model function {ref!r}: {why}.{hint}") from None
    # A file loaded by path (its module name existed only in the process that loaded it):
    # load it again under the name fixed by its path, once per process.
    loaded = load_file_module(where)
    if loaded is None:
        raise ModelError(f"cannot import model function {ref!r} from {where}") from None
    try:
        return _attribute(loaded, qualname)
    except AttributeError:
        raise ModelError(
            f"cannot import model function {ref!r}: {where} has no function {qualname!r}"
        ) from None


def load_file_module(path: Path) -> Any:
    """Import a Python file under :func:`file_module_name`, once per process.

    Returns ``None`` when the file cannot be imported as Python; an exception raised by the
    file's own code propagates (and the half-loaded module is forgotten).
    """
    name = file_module_name(path)
    loaded = sys.modules.get(name)
    if loaded is not None:
        return loaded
    spec = importlib.util.spec_from_file_location(name, path)
    if spec is None or spec.loader is None:
        return None
    loaded = importlib.util.module_from_spec(spec)
    sys.modules[name] = loaded
    try:
        spec.loader.exec_module(loaded)
    except BaseException:
        del sys.modules[name]
        raise
    return loaded


def file_module_name(path: Path) -> str:
    """Module name under which toposweep loads a Python file given by path.

    Fixed by the file's absolute path (not by ``hash()``, which changes from process to
    process), so a model from the file records the same function reference in every process:
    results and resumed runs then identify the model alike.

    Examples
    --------
    >>> file_module_name(Path("/tmp/m.py")) == file_module_name(Path("/tmp/../tmp/m.py"))
    True
    """
    digest = hashlib.sha1(str(Path(path).resolve()).encode()).hexdigest()[:16]
    return f"{FILE_MODULE_PREFIX}{digest}"


def _attribute(obj: Any, qualname: str) -> Any:
    for part in qualname.split("."):
        obj = getattr(obj, part)
    return obj
