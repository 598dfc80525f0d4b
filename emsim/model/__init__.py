"""Model layer: declarations, the component base, the system container, the plugin registry."""
from .component import Component
from .declarations import (DOMAINS, Discrete, Energy, Event, Input, Output, Param, Port, RigidCoupling, Signal,
                           State, Table)
from .registry import available, component_class, create
from .system import System

__all__ = ["Component", "DOMAINS", "Discrete", "Energy", "Event", "Input", "Output", "Param", "Port",
           "RigidCoupling", "Signal", "State", "Table", "System", "available", "component_class", "create"]
