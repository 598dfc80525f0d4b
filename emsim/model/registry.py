"""Find component classes by name through the entry-point group ``emsim.components``.

Built-ins register in emsim's own pyproject.toml exactly as a plugin package
does in its own, so both are found the same way.
"""
from __future__ import annotations

import difflib
from importlib.metadata import entry_points

from ..errors import PluginError

GROUP = "emsim.components"
_cache: dict[str, type] = {}


def available() -> list[str]:
    """Names of every registered component (built-in and plugin)."""
    return sorted({ep.name for ep in entry_points(group=GROUP)})


def component_class(name: str) -> type:
    """The component class registered under ``name``.

    Raises
    ------
    PluginError
        No such name (the message lists close matches), or the entry point fails
        to load or is not an ``emsim.Component`` subclass (the message names the plugin).
    """
    if name in _cache:
        return _cache[name]
    from .component import Component

    found = [ep for ep in entry_points(group=GROUP) if ep.name == name]
    if not found:
        close = difflib.get_close_matches(name, available(), n=3)
        hint = f"; did you mean {close}?" if close else ""
        raise PluginError(f"no component registered as {name!r} in entry-point group '{GROUP}'{hint} "
                          f"(registered: {available()})")
    ep = found[0]
    try:
        cls = ep.load()
    except Exception as exc:
        raise PluginError(f"component plugin {name!r} ({ep.value}) failed to load: {exc}") from exc
    if not (isinstance(cls, type) and issubclass(cls, Component)):
        raise PluginError(f"component plugin {name!r} ({ep.value}) is not an emsim.Component subclass")
    _cache[name] = cls
    return cls


def create(kind: str, name: str, **values):
    """Instantiate the component registered as ``kind``: ``create("dc_motor", "m1", resistance=0.5, ...)``."""
    return component_class(kind)(name, **values)
