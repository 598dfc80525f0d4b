"""Time integrators for assembled problems (see :mod:`emsim.solvers.base` for the contract)."""

import warnings as _warnings

from numba.core.errors import NumbaExperimentalFeatureWarning as _Experimental

# The integrator takes the system functions as first-class function arguments, a numba feature
# still labelled experimental; emsim pins its use with tests, so the notice is not the user's concern.
_warnings.filterwarnings("ignore", category=_Experimental, message=".*First-class function type.*")
