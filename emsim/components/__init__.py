"""Built-in components. Each is also registered under the entry-point group
``emsim.components`` (see pyproject.toml), the same way a plugin registers.
"""
from .control import SampledPISpeed
from .loads import ConstantTorque, FanLoad, TableTorque
from .machines import DCMotor
from .mechanics import CompliantShaft, CoulombFriction, Damper, Gearbox, Inertia
from .power import AveragedBridge
from .profiles import RepeatingRamp
from .sources import Battery, SwitchedDCSource

__all__ = ["SwitchedDCSource", "Battery", "DCMotor", "Inertia", "Damper", "Gearbox", "CompliantShaft",
           "CoulombFriction", "ConstantTorque", "FanLoad", "TableTorque", "AveragedBridge", "SampledPISpeed",
           "RepeatingRamp"]
