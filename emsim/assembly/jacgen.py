"""Generate the analytic system Jacobian from the components' ``jacobian`` kernels.

The system right-hand side is a fixed composition: port across values are node
states times speed scales, each component maps (x, a) to (dx, f), and each node
row is a fixed linear combination of the port flows (divided by the node's
capacity or the group's reflected inertia, both constant within a mode). So the
chain rule gives the whole Jacobian from the components' partials, with every
coefficient known at generation time. Signal inputs count as held between
steps (true for sampled controllers and time-only profiles); a system with a
signal whose source follows the continuous states, or with a component that
supplies no ``jacobian`` kernel, gets ``system_jacobian`` returning 0 and the
solver uses finite differences instead.
"""
from __future__ import annotations

from .layout import Layout
from .structure import Structure


def analytic_possible(st: Structure) -> tuple[bool, str]:
    """Whether every component allows an analytic Jacobian, and if not, why (for diagnostics)."""
    sources = {sc for (sc, _si) in st.signal_source.values()}
    for ci, comp in enumerate(st.components):
        cls = type(comp)
        if (comp.states or comp.ports) and cls.jacobian is None:
            return False, f"component '{comp.name}' ({cls.__name__}) supplies no jacobian kernel"
        if ci in sources and (comp.states or comp.ports) and not getattr(cls, "held_signals", False):
            return False, (f"component '{comp.name}' ({cls.__name__}) feeds signals that may follow the states "
                           "(set held_signals = True on the class if they only change at time events)")
    return True, ""


def generate_jacobian(st: Structure, lay: Layout, jit: str, kern, args_core, node_E, node_cap) -> str:
    """Source of ``system_jacobian(t, y, p, m, d, w, jac) -> int`` (1: filled analytically, 0: not available).

    ``kern``, ``args_core``, ``node_E`` and ``node_cap`` are the code generator's own helpers,
    so the Jacobian reads exactly the slices and factors the right-hand side uses.
    """
    W = lay.work
    n = lay.n_main
    ok, _why = analytic_possible(st)
    lines = [jit, "def system_jacobian(t, y, p, m, d, w, jac):"]
    if not ok:
        lines += ["    return 0", ""]
        return "\n".join(lines) + "\n"
    lines.append(f"    system_rhs(t, y, p, m, d, w, view(w, {W['DX']}, {W['DX'] + n}))")
    lines.append(f"    for i in range({n}):")
    lines.append(f"        for j in range({n}):")
    lines.append("            jac[i, j] = 0.0")
    for k, c in enumerate(st.couplings):
        if c.efficiency is not None:
            pe = lay.comp[c.comp].p[0] + st.components[c.comp].scalar_index(c.efficiency)
            lines.append(f"    e{k} = p[{pe}] if m[{lay.coupling_mode[k]}] == 0 else 1.0 / p[{pe}]")
    # speed scales were written by system_rhs into w[SC + node]
    for g in st.groups:
        jj = []
        for nidx in g.nodes:
            cap = node_cap(st.nodes[nidx])
            if cap:
                jj.append(f"{cap} * w[{W['SC']}+{nidx}] ** 2 * {node_E(nidx)}")
        lines.append(f"    inertia{g.index} = {' + '.join(jj) if jj else '1.0'}")

    def column_of_port(glob):
        """(y column, scale expression) of a port's across variable, or None when left open."""
        nidx = st.port_node[glob]
        if nidx < 0:
            return None
        node = st.nodes[nidx]
        if node.domain == "rotational":
            return lay.group_row[node.group], f"w[{W['SC']}+{nidx}]"
        return lay.node_row[nidx], "1.0"

    def flow_row(glob):
        """(y row, coefficient expression) of the node equation a port's through variable enters."""
        nidx = st.port_node[glob]
        if nidx < 0:
            return None
        node = st.nodes[nidx]
        if node.domain == "rotational":
            g = node.group
            has_inertia = any(st.nodes[q].capacities for q in st.groups[g].nodes)
            coef = f"(-w[{W['SC']}+{nidx}] * {node_E(nidx)}" + (f" / inertia{g})" if has_inertia else ")")
            return lay.group_row[g], coef
        cap = node_cap(node)
        return lay.node_row[nidx], (f"(-1.0 / {cap})" if cap else "1.0")

    for ci in st.order:
        comp, s = st.components[ci], lay.comp[ci]
        nx, npt = len(comp.states), len(comp.ports)
        if nx == 0 and npt == 0:
            continue
        x, a, f, u, pp, mm, dd = args_core(ci)
        js, size = W["JS"], (nx + npt) * (nx + npt)
        lines.append(f"    for i in range({js}, {js + size}):")
        lines.append("        w[i] = 0.0")
        lines.append(f"    jx = view2(w, {js}, {nx + npt}, {nx})")
        lines.append(f"    ja = view2(w, {js + (nx + npt) * nx}, {nx + npt}, {npt})")
        lines.append(f"    {kern(ci, 'jacobian')}(t, {x}, {a}, {u}, {pp}, {mm}, {dd}, jx, ja)")
        cols = [column_of_port(s.ports[0] + k) for k in range(npt)]
        # own state rows
        for i in range(nx):
            r = s.x[0] + i
            for j in range(nx):
                lines.append(f"    jac[{r}, {s.x[0] + j}] += jx[{i}, {j}]")
            for k, col in enumerate(cols):
                if col is not None:
                    lines.append(f"    jac[{r}, {col[0]}] += ja[{i}, {k}] * {col[1]}")
        # port flows into node rows
        for k in range(npt):
            target = flow_row(s.ports[0] + k)
            if target is None:
                continue
            r, coef = target
            for j in range(nx):
                lines.append(f"    jac[{r}, {s.x[0] + j}] += {coef} * jx[{nx + k}, {j}]")
            for l, col in enumerate(cols):
                if col is not None:
                    lines.append(f"    jac[{r}, {col[0]}] += {coef} * ja[{nx + k}, {l}] * {col[1]}")
    lines += ["    return 1", ""]
    return "\n".join(lines) + "\n"
