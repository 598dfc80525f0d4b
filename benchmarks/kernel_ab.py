"""Side-by-side timing of the compiled Radau kernel against the kernel of an earlier revision.

Both kernels run in one process, alternately, on the emsim benchmark drives; prints the
median of 7 wall times for 10 s simulated, the ratio new/base, and the solver statistics.
The base kernel is read from git (``python benchmarks/kernel_ab.py [REV]``, default HEAD)
into a temporary module, so no copy of the kernel lives in the repository. The method is
``EMSIM_AB_METHOD`` (radau5, the default, or dopri5); ``EMSIM_AB_VARIANTS`` (comma-separated) and
``EMSIM_AB_RTOLS`` choose the drives and tolerances, ``EMSIM_AB_REPS`` the runs per kernel (7). A base kernel from before a callback was
added to ``abi.ORDER`` (new ones are appended) is called without the callbacks it does not know.
It cannot compare across a change of an argument's meaning: ``explicit_stages``'s ``i_first``
(d2ac496) and the kernel's ``cols`` argument (b06f69c); compare whole trees in alternating
processes instead.
"""
from __future__ import annotations

import inspect
import os
import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

import emsim  # noqa: E402
import emsim.solvers.compiled as comp  # noqa: E402
from emsim.solvers import abi  # noqa: E402
from emsim.solvers import radau_kernel as new_k  # noqa: E402
import importlib.util  # noqa: E402
import subprocess  # noqa: E402
import tempfile  # noqa: E402


def _kernel_at(rev: str):
    """Import emsim/solvers/radau_kernel.py as it was at ``rev`` (a temporary module)."""
    root = Path(__file__).resolve().parents[1]
    text = subprocess.run(["git", "-C", str(root), "show", f"{rev}:emsim/solvers/radau_kernel.py"],
                          check=True, capture_output=True, text=True).stdout
    folder = Path(tempfile.mkdtemp(prefix="emsim_kernel_ab_"))
    path = folder / "emsim_kernel_base.py"
    path.write_text(text)
    spec = importlib.util.spec_from_file_location("emsim_kernel_base", path)
    mod = importlib.util.module_from_spec(spec)
    sys.modules["emsim_kernel_base"] = mod
    spec.loader.exec_module(mod)
    return mod


base_k = _kernel_at(sys.argv[1] if len(sys.argv) > 1 and __name__ == "__main__" else "HEAD")
import drive_model as dm  # noqa: E402
import emsim_side  # noqa: E402

REPS = int(os.environ.get("EMSIM_AB_REPS", "7"))
_method = os.environ.get("EMSIM_AB_METHOD", "radau5")
if _method not in emsim_side.SOLVERS:
    raise SystemExit(f"kernel_ab.py: EMSIM_AB_METHOD must be one of {sorted(emsim_side.SOLVERS)}, got {_method!r}")
METHOD = emsim_side.SOLVERS[_method]


def _drop_new_callbacks(fn, n_known):
    """``fn`` for a kernel that takes the first ``n_known`` callbacks of abi.ORDER only (new ones are appended)."""
    n_all = len(abi.ORDER)
    return lambda *args: fn(*args[:n_known], *args[n_all:])


def run(prob, rtol, kernel):
    n_known = sum(name.endswith("_fn") for name in inspect.signature(kernel.radau_integrate.py_func).parameters)
    comp.radau_scratch = kernel.radau_scratch
    # compiled._integrate calls the first kernel's compiled entry point directly once it has one:
    # point it at this kernel's (or clear it, so the first call compiles and dispatches)
    overloads = kernel.radau_integrate.overloads
    entry = next(iter(overloads.values())).entry_point if len(overloads) == 1 else None
    if n_known < len(abi.ORDER):
        wrapped = _drop_new_callbacks(kernel.radau_integrate, n_known)
        wrapped.overloads = {}    # so compiled._integrate never keeps the raw entry point itself
        comp.radau_integrate = wrapped
        entry = None if entry is None else _drop_new_callbacks(entry, n_known)
    else:
        comp.radau_integrate = kernel.radau_integrate
    comp._kernel_entry = entry
    solver = METHOD(rtol=rtol, batch_rows=16384)
    t0 = time.perf_counter()
    res = emsim.simulate(prob, dm.T_END, out_dt=dm.TS, solver=solver)
    return time.perf_counter() - t0, res


def main(variants=None, rtols=None):
    variants = variants or os.environ.get("EMSIM_AB_VARIANTS", "averaged-drive,stiff-drive").split(",")
    rtols = rtols or [float(r) for r in os.environ.get("EMSIM_AB_RTOLS", "1e-4,1e-6,1e-8").split(",")]
    for v in variants:
        prob = emsim.assemble(emsim_side.build(v))
        for k in (base_k, new_k):
            t0 = time.perf_counter(); run(prob, 1e-4, k)
            print(f"{v}: first run {k.__name__} {time.perf_counter() - t0:.2f} s", flush=True)
        for rtol in rtols:
            tb, tn = [], []
            for _ in range(REPS):
                a, rb = run(prob, rtol, base_k); tb.append(a)
                b, rn = run(prob, rtol, new_k); tn.append(b)
            wb, wn = rb["load_side.speed"], rn["load_side.speed"]
            diff = float(abs(wb - wn).max())
            mb, mn = statistics.median(tb), statistics.median(tn)
            # the minimum too: this machine's speed drifts by up to 2x between phases, and the
            # fastest of alternating runs is the least disturbed figure of each
            print(f"  {v} rtol {rtol:g}: base {mb*1e3:.2f} ms  new {mn*1e3:.2f} ms  ratio {mn/mb:.3f}  "
                  f"(minima {min(tb)*1e3:.2f} / {min(tn)*1e3:.2f} ms, ratio {min(tn)/min(tb):.3f})  "
                  f"max|dw| {diff:.2e}", flush=True)
            for name, r in (("base", rb), ("new", rn)):
                s = getattr(r, "solver_stats", None) or getattr(r, "stats", None)
                if s:
                    print(f"      {name} stats {s}")


if __name__ == "__main__":
    main()
