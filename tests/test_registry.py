"""The entry-point registry: every built-in listed in pyproject.toml is found by name.

Outside reference: the project's own pyproject.toml read with the standard library's
tomllib, and importlib.metadata's entry points (the packaging mechanism plugins use).
"""
from __future__ import annotations

import tomllib
from importlib.metadata import entry_points
from pathlib import Path

import pytest

import emsim

PYPROJECT = Path(__file__).resolve().parents[1] / "pyproject.toml"
BUILTINS = tomllib.loads(PYPROJECT.read_text())["project"]["entry-points"]["emsim.components"]


def test_pyproject_lists_builtins():
    assert len(BUILTINS) >= 10


@pytest.mark.parametrize("name", sorted(BUILTINS))
def test_builtin_found_by_name(name):
    cls = emsim.component_class(name)
    assert isinstance(cls, type) and issubclass(cls, emsim.Component)
    module, _, attr = BUILTINS[name].partition(":")
    assert (cls.__module__, cls.__qualname__) == (module, attr)
    assert name in emsim.available()
    # and the registry is the one packaging sees (an installed entry point, as a plugin's would be)
    assert [ep.value for ep in entry_points(group="emsim.components") if ep.name == name] == [BUILTINS[name]]


def test_create_builds_an_instance_by_name():
    motor = emsim.create("dc_motor", "m1", resistance="0.5 ohm", inductance="1 mH", torque_constant=0.05)
    assert isinstance(motor, emsim.component_class("dc_motor"))
    assert motor.values["inductance"] == pytest.approx(1e-3)


def test_unknown_name_suggests_close_matches():
    with pytest.raises(emsim.PluginError, match=r"no component registered as 'dc_moter'.*did you mean.*'dc_motor'"):
        emsim.component_class("dc_moter")
    with pytest.raises(emsim.PluginError, match=r"'gearbx'.*did you mean.*'gearbox'"):
        emsim.create("gearbx", "g", ratio=3)


def test_unknown_name_without_close_match_lists_the_registered_names():
    with pytest.raises(emsim.PluginError, match=r"registered: \[.*'inertia'.*\]"):
        emsim.component_class("zzzzqqq")
