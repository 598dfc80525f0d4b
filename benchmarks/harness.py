"""Timing, accuracy and reporting helpers shared by the bench_*.py modules.

Machine-readable lines (one per line, exactly this shape)::

    RATIO <benchmark>/<baseline> <baseline time / emsim time>
    FLOOR <benchmark>/<floor> <emsim time / floor time>
    REALTIME <benchmark> <simulated s / emsim wall s>
    COMPILE <benchmark> <seconds>

Compile / JIT time is never part of a median: it is measured separately and
reported on its own COMPILE line.
"""

from __future__ import annotations

import gc
import statistics
import time

import numpy as np


def timed_runs(fn, repeats=5, warmup=1, budget=None):
    """Call ``fn()`` ``warmup`` times untimed, then up to ``repeats`` times timed.

    With ``budget`` (seconds), timing stops early once the timed runs so far
    add up to at least ``budget`` (always at least one timed run).
    Returns ``(list of wall seconds, result of the last call)``.
    """
    result = None
    for _ in range(warmup):
        result = fn()
    times = []
    for _ in range(max(repeats, 1)):
        gc.collect()
        t0 = time.perf_counter()
        result = fn()
        times.append(time.perf_counter() - t0)
        if budget is not None and sum(times) >= budget:
            break
    return times, result


def median_time(fn, repeats=5, warmup=1, budget=None):
    """Median wall time of ``fn()``: returns ``(median seconds, result)``.

    Warm-up calls (JIT compilation, caches) are not timed; see timed_runs.
    """
    times, result = timed_runs(fn, repeats, warmup, budget)
    return statistics.median(times), result


def first_call_time(fn):
    """Wall time of a single (e.g. first, compiling) call; returns (s, result)."""
    t0 = time.perf_counter()
    result = fn()
    return time.perf_counter() - t0, result


def _as_series(x):
    if isinstance(x, tuple) and len(x) == 2:
        return np.asarray(x[0], dtype=float), np.asarray(x[1], dtype=float)
    return None, np.asarray(x, dtype=float)


def rel_error(result, reference):
    """max |w - w_ref| / (max w_ref - min w_ref).

    ``result`` and ``reference`` are ``(t, w)`` tuples or bare arrays on the
    same grid.  If both carry time arrays and the grids differ, ``result`` is
    linearly interpolated onto the reference grid.  Non-finite values give inf.
    """
    t_r, w_r = _as_series(reference)
    t, w = _as_series(result)
    if t is not None and t_r is not None and (
            t.shape != t_r.shape or not np.allclose(t, t_r, rtol=0, atol=1e-12)):
        w = np.interp(t_r, t, w)
    if w.shape != w_r.shape:
        raise ValueError(f"result shape {w.shape} != reference shape {w_r.shape}")
    if not np.all(np.isfinite(w)):
        return float("inf")
    span = float(np.max(w_r) - np.min(w_r))
    return float(np.max(np.abs(w - w_r)) / span)


# --- printing ------------------------------------------------------------------
def print_header(title):
    print()
    print("=" * len(title))
    print(title)
    print("=" * len(title))


def print_table(rows, columns):
    """Print ``rows`` (list of dicts) as an aligned table with ``columns``.

    ``columns`` is a list of ``(key, heading, format)``; a missing value or
    None prints as '-'.
    """
    cells = []
    for r in rows:
        line = []
        for key, _, fmt in columns:
            v = r.get(key)
            line.append("-" if v is None else (format(v, fmt) if fmt else str(v)))
        cells.append(line)
    widths = [max([len(h)] + [len(c[i]) for c in cells])
              for i, (_, h, _) in enumerate(columns)]
    print("  ".join(h.ljust(w) for (_, h, _), w in zip(columns, widths)))
    print("  ".join("-" * w for w in widths))
    for line in cells:
        print("  ".join(c.ljust(w) for c, w in zip(line, widths)))


def print_ratio(benchmark, baseline, baseline_time, emsim_time):
    print(f"RATIO {benchmark}/{baseline} {baseline_time / emsim_time:.4g}")


def print_floor(benchmark, floor, emsim_time, floor_time):
    print(f"FLOOR {benchmark}/{floor} {emsim_time / floor_time:.4g}")


def print_realtime(benchmark, simulated_s, emsim_time):
    print(f"REALTIME {benchmark} {simulated_s / emsim_time:.4g}")


def print_compile(benchmark, seconds):
    print(f"COMPILE {benchmark} {seconds:.4g}")
