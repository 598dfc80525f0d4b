"""Generated systems reuse one rhs evaluation per point: never a stale one.

``system_rhs`` stamps its inputs into the work array and the other system functions skip
their own evaluation when the stamp matches (emsim/assembly/codegen.py). Reference: the same
function evaluated from a zeroed work array (no reuse possible). Checked on every catalogue
system and the benchmark drive, after an rhs call at the same point (reuse) and at a
different point, a different time, other modes and other discrete states (must recompute).
"""
from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

import emsim
from helpers import CATALOGUE

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benchmarks"))


def systems():
    out = {name: entry[0] for name, entry in CATALOGUE.items()}
    import emsim_side
    out["bench_averaged"] = lambda: emsim_side.build("averaged-drive")
    return out


SYSTEMS = systems()


def outputs(prob, t, y, m, d, w):
    """(record row, event values) with the given work array."""
    mod = prob.module
    row = np.zeros(prob.n_record)
    g = np.zeros(max(prob.n_events, 1))
    mod.system_record(t, y, prob.p, m, d, w, row)
    mod.system_events(t, y, prob.p, m, d, w, g)
    return row, g


@pytest.mark.parametrize("name", sorted(SYSTEMS))
def test_reuse_matches_a_fresh_evaluation(name):
    prob = emsim.assemble(SYSTEMS[name]())
    mod, n = prob.module, prob.n_main
    rng = np.random.default_rng(5)
    y = prob.y0.copy()
    y[:n] += rng.normal(0.0, 0.3, n) * prob.nominal[:n]
    m, d, t = prob.m0.copy(), prob.d0.copy(), 0.013
    ref_row, ref_g = outputs(prob, t, y, m, d, np.zeros(prob.n_work))

    def stale(t2, y2, m2, d2):
        w = np.zeros(prob.n_work)
        mod.system_rhs(t2, y2, prob.p, m2, d2, w, np.zeros(n))
        return w

    y_other = y.copy()
    y_other[rng.integers(n)] += 0.5 * prob.nominal[0] + 1.0
    d_other = d + 0.25 if d.size else d
    m_other = m.copy()
    if m_other.size:
        m_other[0] = 1 - m_other[0]
    cases = {"same point": stale(t, y, m, d), "other state": stale(t, y_other, m, d),
             "other time": stale(t + 1e-3, y, m, d), "other discrete": stale(t, y, m, d_other),
             "other modes": stale(t, y, m_other, d)}
    for label, w in cases.items():
        row, g = outputs(prob, t, y, m, d, w)
        # exact: the same compiled arithmetic on the same inputs
        np.testing.assert_array_equal(row, ref_row, err_msg=f"{name}: record after rhs at {label}")
        np.testing.assert_array_equal(g, ref_g, err_msg=f"{name}: events after rhs at {label}")
