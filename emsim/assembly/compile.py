"""Compilation policy: generated kernel source goes to an on-disk cache keyed by its hash.

Numba's own cache (``cache=True``) keeps the machine code beside each generated
file, so a second run of the same system structure loads it instead of
compiling. The key hashes the generated source together with the numba and
emsim versions; kernel sources of every component are part of the generated
text's hash input (see :func:`structure_key`).
"""
from __future__ import annotations

import hashlib
import importlib.util
import os
import sys
from collections.abc import Sequence
from pathlib import Path
from types import ModuleType

import numba

from .. import __version__

_loaded: dict[str, ModuleType] = {}


def cache_dir() -> Path:
    """Folder for generated kernels: ``$EMSIM_CACHE_DIR`` or ``~/.cache/emsim``."""
    root = os.environ.get("EMSIM_CACHE_DIR") or os.path.join(os.path.expanduser("~"), ".cache", "emsim")
    path = Path(root) / f"numba-{numba.__version__}"
    path.mkdir(parents=True, exist_ok=True)
    return path


def structure_key(*parts: str) -> str:
    """A short stable hash of the texts that define a compiled system."""
    digest = hashlib.sha256()
    for part in (__version__, numba.__version__, *parts):
        digest.update(part.encode())
        digest.update(b"\0")
    return digest.hexdigest()[:20]


def load_generated(prefix: str, source: str, extra_key: str = "") -> ModuleType:
    """Write ``source`` once under its hash and import it as a real module.

    The module is registered in ``sys.modules`` because numba's cache re-imports
    the defining module by name when it loads machine code.
    """
    key = structure_key(source, extra_key)
    name = f"emsim_generated_{prefix}_{key}"
    if name in _loaded:
        return _loaded[name]
    path = cache_dir() / f"{name}.py"
    if not path.exists() or path.read_text() != source:
        tmp = path.with_suffix(f".tmp{os.getpid()}")
        tmp.write_text(source)
        os.replace(tmp, path)  # atomic: a concurrent run never imports half a file
    spec = importlib.util.spec_from_file_location(name, path)
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module
    try:
        spec.loader.exec_module(module)
    except BaseException:
        sys.modules.pop(name, None)  # never leave a half-imported module behind
        raise
    _loaded[name] = module
    return module


def load_with_callbacks(prefix: str, source: str, extra_key: str = "", *, mass: Sequence[float],
                        n_quad: int) -> ModuleType:
    """``source`` plus its exported callbacks, loaded as a module: lean callbacks when its code allows.

    ``mass`` and ``n_quad`` are the row layout some callbacks are written out for (see
    :func:`emsim.solvers.abi.export_source`); they join the cache key.

    The lean export (:func:`emsim.solvers.abi.export_source`) fails to compile
    when a kernel allocates an array; the module is then loaded again, under
    another name (so with fresh dispatchers: numba remembers a failed typing in
    the dispatcher), with the runtime. A marker file remembers that choice, so
    later runs do not repeat the failed attempt. A kernel that does not compile
    at all fails both ways: the second error is the one raised.
    """
    from ..errors import EmsimError
    from ..solvers.abi import export_source

    # the export text depends on the layout: two layouts with one source are two modules
    extra_key = f"{extra_key}\0mass {[float(v) != 0.0 for v in mass]} quad {int(n_quad)}"
    marker = cache_dir() / f"emsim_generated_{prefix}_{structure_key(source, extra_key)}.needs-runtime"
    if not marker.exists():
        try:
            return load_generated(prefix, source + export_source(mass, n_quad, lean=True), extra_key)
        except EmsimError:
            raise
        except Exception:  # noqa: BLE001 - numba typing/lowering errors; the retry reports real faults
            pass
    module = load_generated(prefix, source + export_source(mass, n_quad, lean=False), extra_key)
    marker.touch()
    return module

