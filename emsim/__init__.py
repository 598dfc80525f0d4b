"""emsim: electromechanical co-simulation of motor drives.

Build a drive from components, assemble it into one stiff compiled system,
run it with events, and stream the results to HDF5. This module is the whole
public surface; everything else may move.
"""
__version__ = "0.1.0"

from .errors import (AssemblyError, EmsimError, ParameterError, PluginError, ResultsError, SolverError,
                     UnitError, WiringError)
from .units import Quantity, ureg
from .model import (Component, Discrete, Energy, Event, Input, Output, Param, Port, RigidCoupling, Signal,
                    State, System, Table, available, component_class, create)
from .assembly.assemble import assemble
from .assembly.problem import Problem
from .run import RunResult, simulate
from .results import Results, open_results

__all__ = [
    "__version__", "AssemblyError", "EmsimError", "ParameterError", "PluginError", "ResultsError",
    "SolverError", "UnitError", "WiringError", "Quantity", "ureg", "Component", "Discrete", "Energy",
    "Event", "Input", "Output", "Param", "Port", "RigidCoupling", "Signal", "State", "System", "Table",
    "available", "component_class", "create", "assemble", "Problem", "RunResult", "simulate", "Results",
    "open_results",
]
