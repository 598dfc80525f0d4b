"""Run every benchmarks/bench_*.py module's ``run()`` (``make bench``).

Modules are imported by file path.  If benchmarks/emsim_side.py exists and
defines ``make_runner()``, its result is passed as ``emsim_runner`` to the
modules whose ``run`` accepts it; otherwise they print baseline figures only.
"""

from __future__ import annotations

import importlib.util
import inspect
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
if str(HERE) not in sys.path:
    sys.path.insert(0, str(HERE))


def _load(path: Path):
    spec = importlib.util.spec_from_file_location(path.stem, path)
    mod = importlib.util.module_from_spec(spec)
    sys.modules[path.stem] = mod
    spec.loader.exec_module(mod)
    return mod


def _emsim_runner():
    side = HERE / "emsim_side.py"
    if not side.exists():
        print("benchmarks/emsim_side.py not found: baseline figures only")
        return None
    mod = _load(side)
    make = getattr(mod, "make_runner", None)
    if make is None:
        print("benchmarks/emsim_side.py has no make_runner(): baseline figures only")
        return None
    return make()


def main() -> int:
    runner = _emsim_runner()
    t0 = time.perf_counter()
    for path in sorted(HERE.glob("bench_*.py")):
        mod = _load(path)
        fn = getattr(mod, "run", None)
        if fn is None:
            continue
        print(f"\n##### {path.name}", flush=True)
        if "emsim_runner" in inspect.signature(fn).parameters:
            fn(emsim_runner=runner)
        else:
            fn()
    print(f"\nall benchmarks done in {time.perf_counter() - t0:.0f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
