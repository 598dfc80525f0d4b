"""State layout: where every component's states, parameters, modes and buffers live in flat arrays."""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..model.declarations import DOMAINS
from .structure import Structure

QUAD_NAMES = ("energy.supplied", "energy.loss", "energy.delivered")


@dataclass
class CompSlots:
    x: tuple       # (start, stop) in y
    p: tuple       # in p
    m: tuple       # in m
    d: tuple       # in d (declared discrete states only)
    ports: tuple   # global port range (start, stop)
    u: tuple       # input buffer range (relative to U)
    s: tuple       # signal buffer range (relative to S)
    out: tuple     # monitor output range (relative to OUT)
    g: tuple       # event range in g
    slot: int = -1  # hidden d index of the next time-event instant (-1: none)


@dataclass
class Layout:
    n_main: int
    n_quad: int
    comp: list
    node_row: dict                 # electrical/thermal node -> y row
    group_row: dict                # group -> y row
    mass: np.ndarray
    nominal: np.ndarray
    state_names: list
    row_owner: list
    p: np.ndarray
    m_size: int
    d0: np.ndarray
    coupling_mode: dict            # coupling index -> m slot
    coupling_event: dict           # coupling index -> g index
    n_events: int
    event_direction: np.ndarray
    event_owner: list
    event_comp: list               # g index -> component index
    work: dict = field(default_factory=dict)   # region name -> offset
    n_work: int = 0
    y0: np.ndarray = None


def lay_out(st: Structure) -> Layout:
    comps = st.components
    rows_names, owner, mass, nominal, y0 = [], [], [], [], []
    slots = []
    p_parts, d_init = [], []
    pi = mi = di = ui = si = oi = gi = 0
    port_i = 0
    event_direction, event_owner, event_comp = [], [], []
    for ci, comp in enumerate(comps):
        nx = len(comp.states)
        x0 = len(rows_names)
        for s in comp.states:
            rows_names.append(f"{comp.name}.{s.name}")
            owner.append(comp.name)
            mass.append(0.0 if s.algebraic else 1.0)
            nominal.append(abs(s.nominal) or 1.0)
            y0.append(comp.initial_values[s.name])
        pv = comp.parameter_vector()
        p_parts.append(pv)
        d_init += [comp.discrete_initial[s.name] for s in comp.discrete]
        for e in comp.events:
            event_direction.append(int(e.direction))
            event_owner.append(f"{comp.name}.{e.name}")
            event_comp.append(ci)
        slots.append(CompSlots(
            x=(x0, x0 + nx), p=(pi, pi + pv.size), m=(mi, mi + len(comp.modes)),
            d=(di, di + len(comp.discrete)), ports=(port_i, port_i + len(comp.ports)),
            u=(ui, ui + len(comp.inputs)), s=(si, si + len(comp.signals)),
            out=(oi, oi + len(comp.outputs)), g=(gi, gi + len(comp.events))))
        pi += pv.size
        mi += len(comp.modes)
        di += len(comp.discrete)
        port_i += len(comp.ports)
        ui += len(comp.inputs)
        si += len(comp.signals)
        oi += len(comp.outputs)
        gi += len(comp.events)

    node_row, group_row = {}, {}
    for node in st.nodes:
        if node.domain == "rotational":
            continue
        node_row[node.index] = len(rows_names)
        across = DOMAINS[node.domain][0]
        rows_names.append(f"{node.name}.{across}")
        owner.append(f"node '{node.name}'")
        mass.append(1.0 if node.capacities else 0.0)
        nominal.append(st.system.nominal_across.get(node.name, 1.0))
        y0.append(0.0)
    for g in st.groups:
        group_row[g.index] = len(rows_names)
        rows_names.append(f"{g.name}.speed")
        owner.append(f"rigid group '{g.name}'")
        has_inertia = any(st.nodes[n].capacities for n in g.nodes)
        mass.append(1.0 if has_inertia else 0.0)
        nominal.append(st.system.nominal_across.get(g.name, 1.0))
        y0.append(0.0)

    coupling_mode, coupling_event = {}, {}
    for k, c in enumerate(st.couplings):
        if c.efficiency is not None:
            coupling_mode[k] = mi
            mi += 1
            coupling_event[k] = gi
            gi += 1
            event_direction.append(0)
            event_owner.append(f"{comps[c.comp].name}.power_flow")
            event_comp.append(c.comp)

    # hidden discrete slots for time events: [next instant, count, origin] per timed component
    for ci, comp in enumerate(comps):
        if comp.sample_period is not None or comp.next_time is not None:
            slots[ci].slot = di
            d_init += [np.inf, 0.0, 0.0]
            di += 3

    n_main = len(rows_names)
    for q in QUAD_NAMES:
        rows_names.append(q)
        owner.append("energy audit")
        nominal.append(1.0)
        y0.append(0.0)
    lay = Layout(
        n_main=n_main, n_quad=len(QUAD_NAMES), comp=slots, node_row=node_row, group_row=group_row,
        mass=np.array(mass), nominal=np.array(nominal), state_names=rows_names, row_owner=owner,
        p=np.concatenate(p_parts) if p_parts else np.zeros(0), m_size=mi, d0=np.array(d_init, dtype=float),
        coupling_mode=coupling_mode, coupling_event=coupling_event, n_events=gi,
        event_direction=np.array(event_direction, dtype=np.int64), event_owner=event_owner, event_comp=event_comp,
        y0=np.array(y0, dtype=float))
    # work-array regions
    n_ports = port_i
    # FRESH: 1.0 while the integrator vouches that w holds system_rhs at the call's inputs (abi.py)
    regions = [("FRESH", 1), ("PA", n_ports), ("PF", n_ports), ("S", si), ("U", ui), ("OUT", oi), ("DX", n_main),
               ("SC", len(st.nodes)), ("ACC", len(st.groups)), ("GX", max(1, len(st.couplings))),
               # one component's jacobian matrices at a time: (states + ports) rows, as many columns
               ("JS", max([(s.x[1] - s.x[0] + s.ports[1] - s.ports[0]) ** 2 for s in slots] + [1]))]
    off = 0
    for name, size in regions:
        lay.work[name] = off
        off += size
    lay.n_work = off
    return lay
