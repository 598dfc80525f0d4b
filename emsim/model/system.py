"""The system container: named component instances and the connections between their ports."""
from __future__ import annotations

import difflib

from ..errors import WiringError
from .component import Component
from .declarations import DOMAINS


class System:
    """A drive train under construction.

    Examples
    --------
    >>> sys = System("bench")
    >>> sys.add(battery, motor, load)
    >>> sys.connect("battery.terminal", "motor.armature", name="bus")
    """

    def __init__(self, name: str = "system"):
        self.name = name
        self.components: dict[str, Component] = {}
        self.links: list[tuple[list[str], str | None]] = []   # physical joins
        self.signal_links: list[tuple[str, str]] = []        # (source "c.signal", target "c.input")
        self.nominal_across: dict[str, float] = {}
        self.initial_across: dict[str, object] = {}

    def add(self, *components: Component) -> "System":
        """Add component instances; names must be unique."""
        for comp in components:
            if not isinstance(comp, Component):
                raise WiringError(f"system '{self.name}': add() takes emsim components; got {comp!r}")
            if comp.name in self.components:
                raise WiringError(f"system '{self.name}': a component named '{comp.name}' is already added "
                                  f"({self.components[comp.name]!r}); names must be unique")
            self.components[comp.name] = comp
        return self

    def __getitem__(self, name: str) -> Component:
        return self.components[name]

    def resolve(self, ref: str):
        """Split ``"component.port"`` and return ``(component, kind, declaration)``.

        kind is ``"port"``, ``"signal"`` or ``"input"``.
        """
        if not isinstance(ref, str) or ref.count(".") != 1:
            raise WiringError(f"system '{self.name}': {ref!r} is not of the form 'component.port'")
        cname, pname = ref.split(".")
        comp = self.components.get(cname)
        if comp is None:
            close = difflib.get_close_matches(cname, self.components, n=3)
            raise WiringError(f"system '{self.name}': no component '{cname}' (in {ref!r})"
                              + (f"; did you mean {close}?" if close else f"; components are {sorted(self.components)}"))
        for kind, decls in (("port", comp.ports), ("signal", comp.signals), ("input", comp.inputs)):
            for decl in decls:
                if decl.name == pname:
                    return comp, kind, decl
        names = [d.name for d in (*comp.ports, *comp.signals, *comp.inputs)]
        raise WiringError(f"system '{self.name}': component '{cname}' ({type(comp).__name__}) has no port, "
                          f"signal or input '{pname}'; it has {names}")

    def connect(self, *refs: str, name: str | None = None) -> "System":
        """Join ports of one domain into a node, or a signal to inputs.

        Parameters
        ----------
        *refs : str
            ``"component.port"`` strings. Physical ports must share a domain; an
            electrical port is a terminal pair, so joining electrical ports puts them
            in parallel. For signals give one signal first, then the inputs it feeds.
        name : str, optional
            Name of the node in results (default: the first port's name).
        """
        if len(refs) < 2:
            raise WiringError(f"system '{self.name}': connect() needs at least two ports; got {refs}")
        resolved = [self.resolve(r) for r in refs]
        kinds = {k for _, k, _ in resolved}
        if kinds & {"signal", "input"}:
            if kinds == {"port"} or "port" in kinds:
                raise WiringError(f"system '{self.name}': cannot join physical ports with signals in {list(refs)}")
            if resolved[0][1] != "signal" or any(k != "input" for _, k, _ in resolved[1:]):
                raise WiringError(f"system '{self.name}': a signal link is one signal followed by inputs; "
                                  f"got {[f'{r} ({k})' for r, (_, k, _) in zip(refs, resolved)]}")
            for r in refs[1:]:
                self.signal_links.append((refs[0], r))
            return self
        domains = {d.domain for _, _, d in resolved}
        if len(domains) > 1:
            detail = ", ".join(f"{r} ({d.domain})" for r, (_, _, d) in zip(refs, resolved))
            raise WiringError(f"system '{self.name}': domain mismatch joining {detail}; "
                              "only ports of one domain can share a node")
        self.links.append((list(refs), name))
        return self

    def set_initial(self, node: str, value) -> "System":
        """Initial across value of a node, by node name or ``"component.port"``.

        For a rotational port inside a rigid group, the group speed is set so that this
        port turns at ``value``. Units are accepted (``"300 rpm"``, ``"12 V"``).
        """
        self.initial_across[node] = value
        return self

    def set_nominal(self, node: str, value: float) -> "System":
        """Typical magnitude (SI) of a node's across variable, for error weights (default 1)."""
        self.nominal_across[node] = float(value)
        return self
