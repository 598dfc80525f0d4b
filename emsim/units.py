"""The one pint registry of emsim and conversion of user values to SI floats.

Units live only here, at the boundary: every parameter is converted once, at
construction, to a float in SI base units; compiled kernels never see pint.
"""
from __future__ import annotations

import math
from numbers import Real

import pint

from .errors import UnitError

ureg = pint.UnitRegistry()
Quantity = ureg.Quantity


def _parse_unit(unit: str) -> pint.Unit:
    return ureg.parse_units(unit) if unit not in ("", "1") else ureg.dimensionless


def to_si(value, unit: str, *, owner: str, name: str) -> float:
    """Convert ``value`` to a float in the SI unit equivalent to ``unit``.

    Parameters
    ----------
    value : float, str or pint.Quantity
        A bare number is taken as already in SI; a string such as
        ``"0.35 ohm"`` or ``"1200 rpm"`` is parsed by the registry.
    unit : str
        The unit the parameter is declared in, e.g. ``"ohm"``, ``"rad/s"``.
    owner, name : str
        Component and parameter name, used only in error messages.

    Returns
    -------
    float
        The magnitude in the base-SI form of ``unit`` (rpm becomes rad/s).

    Raises
    ------
    UnitError
        The value has another dimension or cannot be read.
    """
    target = _parse_unit(unit)
    if isinstance(value, bool):
        raise UnitError(f"{owner}: parameter '{name}' got {value!r}; expected a number or a quantity in {unit or 'no unit'}")
    if isinstance(value, Real):
        return float(value)  # declared units are SI (checked at class creation), so a bare number is SI
    if isinstance(value, str):
        try:
            value = ureg.Quantity(value)
        except Exception as exc:  # pint raises several kinds for unreadable text
            raise UnitError(f"{owner}: parameter '{name}' = {value!r} is not a readable quantity "
                            f"(expected something like '1.5 {unit}')") from exc
    if isinstance(value, pint.Quantity):
        if value._REGISTRY is not ureg:
            raise UnitError(f"{owner}: parameter '{name}' uses a quantity from another pint registry; "
                            "build it with emsim.ureg")
        if not value.check(target.dimensionality) and not (value.dimensionless and target.dimensionless):
            raise UnitError(f"{owner}: parameter '{name}' expects a quantity in {unit} "
                            f"(dimension {target.dimensionality}); got {value} (dimension {value.dimensionality})")
        magnitude = value.to_base_units().magnitude
        if not isinstance(magnitude, Real):
            raise UnitError(f"{owner}: parameter '{name}' must be a scalar; got {value!r}")
        return float(magnitude)
    raise UnitError(f"{owner}: parameter '{name}' got {type(value).__name__} {value!r}; "
                    f"expected a number (SI), a string like '1.5 {unit}' or an emsim.ureg Quantity")


def si_unit_label(unit: str) -> str:
    """The SI base-unit label of ``unit``, as stored in result files (e.g. ``'rpm'`` -> ``'radian / second'``)."""
    if unit in ("", "1"):
        return ""
    return str(ureg.Quantity(1.0, _parse_unit(unit)).to_base_units().units)


def check_si(unit: str, *, owner: str, name: str) -> None:
    """Raise if a declared unit is not coherent SI (a factor other than 1 to its base units)."""
    try:
        factor = ureg.Quantity(1.0, _parse_unit(unit)).to_base_units().magnitude
    except Exception as exc:
        raise UnitError(f"{owner}: '{name}' declares unreadable unit {unit!r}") from exc
    if not math.isclose(factor, 1.0, rel_tol=1e-12):
        raise UnitError(f"{owner}: '{name}' declares unit {unit!r}; declare coherent SI units (e.g. rad/s, not rpm)")
