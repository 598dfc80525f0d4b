"""The one exception tree of emsim.

Every class also inherits the builtin it resembles, so callers may catch either
(``except emsim.ParameterError`` or ``except ValueError``).
"""
from __future__ import annotations


class EmsimError(Exception):
    """Root of every error raised by emsim."""


class ParameterError(EmsimError, ValueError):
    """A component parameter is missing, out of bounds or inconsistent."""


class UnitError(EmsimError, TypeError):
    """A value has the wrong physical dimension or an unreadable unit."""


class ConnectionError_(EmsimError, ValueError):
    """Ports were joined wrongly (unknown port, domain mismatch, duplicate name)."""


class AssemblyError(EmsimError, ValueError):
    """The system cannot be assembled into a well-posed index-1 problem."""


class PluginError(EmsimError, TypeError):
    """A component plugin is malformed, fails to compile or misbehaves."""


class SolverError(EmsimError, RuntimeError):
    """Integration failed: step size underflow, Newton divergence, NaN, chattering."""


class ResultsError(EmsimError, OSError):
    """A results file cannot be written or read."""


# The public name; the trailing underscore above only avoids shadowing the builtin inside this module.
WiringError = ConnectionError_
del ConnectionError_

__all__ = [
    "EmsimError", "ParameterError", "UnitError", "WiringError", "AssemblyError",
    "PluginError", "SolverError", "ResultsError",
]
