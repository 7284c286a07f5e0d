"""Exceptions raised by toposweep.

Every error caused by bad input is a :class:`ValueError` subclass (so ``except ValueError``
works), and its message says what is wrong and how to fix it.
"""

from __future__ import annotations

__all__ = [
    "ToposweepError",
    "ModelError",
    "SymmetryError",
    "ParameterError",
    "SamplingError",
    "FillingError",
    "StoreError",
    "ConfigError",
    "ExecutorError",
    "SymmetryWarning",
]


class ToposweepError(Exception):
    """Base class of every toposweep exception."""


class ModelError(ToposweepError, ValueError):
    """A model definition is inconsistent (shapes, Hermiticity, NaN/inf, lattice vectors)."""


class SymmetryError(ModelError):
    """A declared time-reversal or inversion operator does not hold for the Hamiltonian."""


class ParameterError(ToposweepError, ValueError):
    """A parameter name is unknown, missing, or has a non-finite value."""


class SamplingError(ToposweepError, ValueError):
    """A sampling option (``loop_points``, ``lines``, ...) is out of range."""


class FillingError(ToposweepError, ValueError):
    """The filling is outside 1 … norb−1 or odd although time reversal holds."""


class StoreError(ToposweepError, ValueError):
    """A result file is unreadable, corrupt, or belongs to a different run."""


class ConfigError(ToposweepError, ValueError):
    """A run configuration file is malformed or names something that does not exist."""


class ExecutorError(ToposweepError, RuntimeError):
    """Work sent to other processes failed.

    A task failed again and again, the executor broke, or the run cannot be sent to (or loaded
    on) the workers.
    """


class SymmetryWarning(UserWarning):
    """The declared time reversal does not hold at the points of a call: they are undefined.

    Such points are results, not errors: their indices are −1 with reason 8
    (``time_reversal_broken_at_this_point``), in :func:`toposweep.invariants` and in sweeps
    alike. The warning carries the residual and how to fix a model that is only nearly
    symmetric.
    """
