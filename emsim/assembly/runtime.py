"""Small helpers the generated modules import at load time."""
from __future__ import annotations

import importlib
import sys


def resolve_class(module: str, qualname: str):
    """The component class ``module.qualname``, from ``sys.modules`` first (scripts, test files)."""
    mod = sys.modules.get(module) or importlib.import_module(module)
    obj = mod
    for part in qualname.split("."):
        obj = getattr(obj, part)
    return obj
