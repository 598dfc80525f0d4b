"""Kernel-level test of the hoist plugin (system-level tests come with assembly)."""
import sys
from pathlib import Path

import numba
import numpy as np
import pytest

try:
    import emsim_hoist
except ImportError:  # running from a checkout without `pip install -e plugins/hoist`
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    import emsim_hoist

from emsim.errors import ParameterError, UnitError

STANDARD_GRAVITY = 9.80665  # m/s^2, standard gravity (ISO 80000-3; CGPM 1901)


def run(drum, w, h=0.0, jit=False):
    eq = numba.njit(drum.equations) if jit else drum.equations
    mon = numba.njit(drum.monitor) if jit else drum.monitor
    x, a, p = np.array([h]), np.array([w]), drum.parameter_vector()
    u, m, d = np.zeros(0), np.zeros(0, dtype=np.int64), np.zeros(0)
    dx, f, s, out = np.full(1, np.nan), np.full(1, np.nan), np.zeros(0), np.full(3, np.nan)
    eq(0.0, x, a, u, p, m, d, dx, f, s)
    mon(0.0, x, a, f, u, p, m, d, out)
    return dx, f, out


@pytest.mark.parametrize("jit", [False, True])
def test_gravity_torque_rope_speed_and_lifting_power(jit):
    drum = emsim_hoist.HoistDrum("drum", mass="250 kg", drum_radius="150 mm", drum_inertia=0.4)
    w = 3.0
    dx, f, out = run(drum, w, h=2.0, jit=jit)
    T = 250.0 * STANDARD_GRAVITY * 0.15  # weight m*g acting at lever arm r (statics, common practice)
    assert f[0] == pytest.approx(T, rel=1e-12)
    assert dx[0] == pytest.approx(0.15 * w)  # rope speed = r*w (rolling without slip, common practice)
    assert out[0] == pytest.approx(0.15 * w)
    assert out[1] == pytest.approx(250.0 * STANDARD_GRAVITY * 0.15 * w)  # P = m g v (common practice)
    assert out[2] == pytest.approx(250.0 * STANDARD_GRAVITY * 2.0)  # E_p = m g h (common practice)
    # the load resists in both directions of travel: lowering returns power (negative delivered)
    _, f_down, out_down = run(drum, -w, jit=jit)
    assert f_down[0] == pytest.approx(T) and out_down[1] == pytest.approx(-out[1])


def test_reflected_inertia_is_port_capacity():
    drum = emsim_hoist.HoistDrum("drum", mass=250.0, drum_radius=0.15, drum_inertia=0.4)
    # a mass m on a rope of radius r adds m*r^2 at the drum (reflected inertia, common practice)
    assert drum.derived_values["reflected_inertia"] == pytest.approx(0.4 + 250.0 * 0.15 ** 2)
    assert drum.port("shaft").capacity == "reflected_inertia"


def test_bad_input_names_the_parameter():
    with pytest.raises(ParameterError, match="HoistDrum 'd'.*'drum_radius'"):
        emsim_hoist.HoistDrum("d", mass=10.0, drum_radius=0.0)
    with pytest.raises(UnitError, match="mass"):
        emsim_hoist.HoistDrum("d", mass="10 m", drum_radius=0.1)
