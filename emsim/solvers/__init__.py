"""Time integrators for assembled problems (see :mod:`emsim.solvers.base` for the contract)."""
