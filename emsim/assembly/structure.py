"""Structural analysis: nodes from joined ports, rigid groups, signal order, and the checks.

Everything here works on names and declarations (no arrays, no numba). It
rejects ill-posed systems with messages that name the node, component and port.
"""
from __future__ import annotations

from dataclasses import dataclass, field

from ..errors import AssemblyError, WiringError
from ..model.declarations import DOMAINS
from ..model.system import System


@dataclass
class PortRef:
    comp: int          # component index
    local: int         # port index within the component
    glob: int          # global port index
    ref: str           # "component.port"
    domain: str


@dataclass
class Node:
    index: int
    name: str
    domain: str
    members: list            # global port indices
    capacities: list = field(default_factory=list)   # (component index, capacity name)
    group: int = -1          # rigid group (rotational only)


@dataclass
class Coupling:
    comp: int
    node_a: int
    node_b: int
    ratio: str
    efficiency: str | None
    child: int = -1          # node on the side away from the group's reference
    lossy_index: int = -1    # index among lossy couplings (mode slot, event)


@dataclass
class Group:
    index: int
    name: str
    reference: int                              # node index
    nodes: list                                 # node indices
    scale: dict = field(default_factory=dict)   # node -> list of (coupling, +1 multiply ratio | -1 divide)
    path: dict = field(default_factory=dict)    # node -> couplings from the node up to the reference
    couplings: list = field(default_factory=list)


@dataclass
class Structure:
    system: System
    components: list
    ports: list                 # PortRef by global index
    port_node: list             # global port -> node index, or -1 if left open (optional)
    nodes: list
    groups: list
    couplings: list
    order: list                 # component evaluation order (signal dependencies first)
    signal_source: dict         # (comp, input index) -> (comp, signal index)

    def node_by_name(self, name: str) -> Node:
        for node in self.nodes:
            if node.name == name:
                return node
        for port in self.ports:
            if port.ref == name and self.port_node[port.glob] >= 0:
                return self.nodes[self.port_node[port.glob]]
        raise AssemblyError(f"system '{self.system.name}': no node or port named {name!r}; nodes are "
                            f"{[n.name for n in self.nodes]}")


def analyse(system: System) -> Structure:
    """Build nodes, rigid groups and the evaluation order; raise on any structural fault."""
    comps = list(system.components.values())
    if not comps:
        raise AssemblyError(f"system '{system.name}' has no components")
    cindex = {c.name: i for i, c in enumerate(comps)}
    ports: list[PortRef] = []
    by_ref: dict[str, PortRef] = {}
    for ci, comp in enumerate(comps):
        for li, decl in enumerate(comp.ports):
            pr = PortRef(ci, li, len(ports), f"{comp.name}.{decl.name}", decl.domain)
            ports.append(pr)
            by_ref[pr.ref] = pr

    # union-find over physical joins
    parent = list(range(len(ports)))

    def find(i):
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    joined = set()
    for refs, name in system.links:
        first = by_ref[refs[0]].glob
        for r in refs:
            g = by_ref[r].glob
            joined.add(g)
            ra, rb = find(first), find(g)
            if ra != rb:
                parent[rb] = ra
    root_name: dict[int, str] = {}
    for refs, name in system.links:
        if name:
            r = find(by_ref[refs[0]].glob)
            if r in root_name and root_name[r] != name:
                raise WiringError(f"system '{system.name}': one node was given two names, "
                                  f"'{root_name[r]}' and '{name}'")
            root_name[r] = name

    # open ports
    for pr in ports:
        decl = comps[pr.comp].ports[pr.local]
        if pr.glob not in joined and decl.required:
            raise AssemblyError(f"system '{system.name}': port '{pr.ref}' ({pr.domain}) is not connected; "
                                f"join it with system.connect('{pr.ref}', ...)")

    nodes: list[Node] = []
    root_node: dict[int, int] = {}
    port_node = [-1] * len(ports)
    for pr in ports:
        if pr.glob not in joined:
            continue
        r = find(pr.glob)
        if r not in root_node:
            name = root_name.get(r) or pr.ref.replace(".", "_")
            root_node[r] = len(nodes)
            nodes.append(Node(len(nodes), name, pr.domain, []))
        node = nodes[root_node[r]]
        node.members.append(pr.glob)
        port_node[pr.glob] = node.index
        decl = comps[pr.comp].ports[pr.local]
        if decl.capacity is not None and comps[pr.comp].scalar(decl.capacity) != 0.0:
            node.capacities.append((pr.comp, decl.capacity))
    seen = {}
    for node in nodes:
        if node.name in seen:
            raise WiringError(f"system '{system.name}': two nodes are named '{node.name}'")
        seen[node.name] = node

    for node in nodes:
        fixers = [ports[g].ref for g in node.members
                  if comps[ports[g].comp].ports[ports[g].local].fixes_across]
        if len(fixers) > 1:
            across = DOMAINS[node.domain][0]
            raise AssemblyError(f"system '{system.name}': node '{node.name}' is over-determined: {fixers} each "
                                f"impose its {across}; put an impedance between them or remove one")
        # a node nothing determines is found by the numeric rank check at assembly (assemble.py)

    couplings = _couplings(system, comps, ports, by_ref, port_node, nodes)
    groups = _groups(system, nodes, couplings)
    order, signal_source = _signal_order(system, comps, cindex)
    return Structure(system, comps, ports, port_node, nodes, groups, couplings, order, signal_source)


def _couplings(system, comps, ports, by_ref, port_node, nodes):
    out = []
    for ci, comp in enumerate(comps):
        for c in comp.couplings:
            na = port_node[by_ref[f"{comp.name}.{c.port_a}"].glob]
            nb = port_node[by_ref[f"{comp.name}.{c.port_b}"].glob]
            if na < 0 or nb < 0:
                raise AssemblyError(f"system '{system.name}': '{comp.name}' couples '{c.port_a}' and "
                                    f"'{c.port_b}'; both must be connected")
            if na == nb:
                raise AssemblyError(f"system '{system.name}': '{comp.name}.{c.port_a}' and "
                                    f"'{comp.name}.{c.port_b}' are joined to the same node '{nodes[na].name}'; "
                                    "a rigid coupling needs two different shafts")
            eff = c.efficiency
            if eff is not None and comp.scalar(eff) == 1.0:
                eff = None  # lossless: no power-flow mode needed
            out.append(Coupling(ci, na, nb, c.ratio, eff))
    return out


def _groups(system, nodes, couplings):
    rot = [n for n in nodes if n.domain == "rotational"]
    adj = {n.index: [] for n in rot}
    for k, c in enumerate(couplings):
        adj[c.node_a].append(k)
        adj[c.node_b].append(k)
    groups = []
    for node in rot:
        if node.group >= 0:
            continue
        g = Group(len(groups), node.name, node.index, [node.index])
        g.scale[node.index] = []
        g.path[node.index] = []
        node.group = g.index
        stack = [node.index]
        used = set()
        while stack:
            cur = stack.pop()
            for k in adj[cur]:
                if k in used:
                    continue
                used.add(k)
                c = couplings[k]
                other = c.node_b if cur == c.node_a else c.node_a
                if nodes[other].group >= 0:
                    raise AssemblyError(
                        f"system '{system.name}': rigid couplings form a closed loop through node "
                        f"'{nodes[other].name}' (coupling in '{system_comp_name(system, c.comp)}'); "
                        "a loop of rigid gears over-constrains the speeds — break it with a compliant shaft")
                # speed(a) = ratio * speed(b)
                step = (k, +1) if other == c.node_a else (k, -1)
                g.scale[other] = g.scale[cur] + [step]
                g.path[other] = [k] + g.path[cur]
                c.child = other
                nodes[other].group = g.index
                g.nodes.append(other)
                g.couplings.append(k)
                stack.append(other)
        groups.append(g)
    lossy = 0
    for c in couplings:
        if c.efficiency is not None:
            c.lossy_index = lossy
            lossy += 1
    return groups


def system_comp_name(system, ci):
    return list(system.components)[ci]


def _signal_order(system, comps, cindex):
    signal_source = {}
    deps = {i: set() for i in range(len(comps))}
    for src, dst in system.signal_links:
        sc, sn = src.split(".")
        dc, dn = dst.split(".")
        si = [s.name for s in comps[cindex[sc]].signals].index(sn)
        di = [s.name for s in comps[cindex[dc]].inputs].index(dn)
        key = (cindex[dc], di)
        if key in signal_source:
            raise WiringError(f"system '{system.name}': input '{dst}' is fed twice; an input takes one signal")
        signal_source[key] = (cindex[sc], si)
        if cindex[sc] != cindex[dc]:
            deps[cindex[dc]].add(cindex[sc])
    for ci, comp in enumerate(comps):
        for di, inp in enumerate(comp.inputs):
            if (ci, di) not in signal_source and inp.default is None:
                raise AssemblyError(f"system '{system.name}': input '{comp.name}.{inp.name}' is not connected "
                                    "and has no default; connect a signal to it")
    order, done, visiting = [], set(), set()

    def visit(i, trail):
        if i in done:
            return
        if i in visiting:
            loop = " -> ".join(comps[j].name for j in trail + [i])
            raise AssemblyError(f"system '{system.name}': signal loop without a state to break it: {loop}")
        visiting.add(i)
        for j in sorted(deps[i]):
            visit(j, trail + [i])
        visiting.discard(i)
        done.add(i)
        order.append(i)

    for i in range(len(comps)):
        visit(i, [])
    return order, signal_source
