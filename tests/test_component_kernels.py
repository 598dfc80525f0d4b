"""Kernel-level tests of the built-in components.

Each kernel is called directly (plain Python and numba-compiled) with float64
arrays laid out as the component contract says. Every check compares with a
reference outside emsim: a closed-form result with its source named beside it,
numpy/scipy, or CPython running the same function (for numba compilation).
"""
from __future__ import annotations

import math

import numba
import numpy as np
import pytest
from scipy import integrate, optimize, signal

import emsim
from emsim.components import (AveragedBridge, Battery, CompliantShaft, ConstantTorque, CoulombFriction, Damper,
                              DCMotor, FanLoad, Gearbox, Inertia, RepeatingRamp, SampledPISpeed, SwitchedDCSource,
                              TableTorque)
from emsim.components import friction as fr
from emsim.errors import ParameterError, UnitError


# --------------------------------------------------------------------------------------- harness
class Bench:
    """Arrays for one component instance, and calls of its kernels (optionally numba-compiled)."""

    def __init__(self, comp, *, x=None, a=None, u=None, m=None, d=None, jit=False):
        self.c = comp
        self.jit = jit
        self.p = comp.parameter_vector()
        self.x = np.array([comp.initial_values[s.name] for s in comp.states] if x is None else x, dtype=float)
        self.a = np.zeros(len(comp.ports)) if a is None else np.array(a, dtype=float)
        self.u = np.array([i.default for i in comp.inputs] if u is None else u, dtype=float)
        self.m = np.zeros(len(comp.modes), dtype=np.int64) if m is None else np.array(m, dtype=np.int64)
        self.d = np.array([comp.discrete_initial[s.name] for s in comp.discrete] if d is None else d, dtype=float)
        self.dx = np.full(len(comp.states), np.nan)
        self.f = np.full(len(comp.ports), np.nan)
        self.s = np.full(len(comp.signals), np.nan)
        self.out = np.full(len(comp.outputs), np.nan)
        self.g = np.full(len(comp.events), np.nan)

    def k(self, name):
        fn = getattr(type(self.c), name)
        return numba.njit(fn) if self.jit else fn

    def eq(self, t=0.0):
        self.k("equations")(t, self.x, self.a, self.u, self.p, self.m, self.d, self.dx, self.f, self.s)
        return self

    def mon(self, t=0.0):
        self.eq(t)
        self.k("monitor")(t, self.x, self.a, self.f, self.u, self.p, self.m, self.d, self.out)
        return dict(zip([o.name for o in self.c.outputs], self.out))

    def events(self, t=0.0):
        self.k("event_values")(t, self.x, self.a, self.f, self.u, self.p, self.m, self.d, self.g)
        return self.g.copy()

    def fire(self, k, t=0.0):
        self.k("on_event")(k, t, self.x, self.a, self.f, self.u, self.p, self.m, self.d)

    def start(self, t=0.0):
        self.k("start")(t, self.x, self.a, self.f, self.u, self.p, self.m, self.d)

    def at_time(self, t):
        self.k("at_time")(t, self.x, self.a, self.f, self.u, self.p, self.m, self.d)

    def next_time(self, t):
        return self.k("next_time")(t, self.p, self.m, self.d)


def motor(**kw):
    base = dict(resistance=0.8, inductance=2e-3, torque_constant=0.05)
    base.update(kw)
    return DCMotor("m", **base)


EXAMPLES = [
    lambda: SwitchedDCSource("src", times=[0.1, 0.3], levels=[12.0, 0.0]),
    lambda: Battery("bat", open_circuit_voltage=24.0, internal_resistance=0.05, capacity="2 A*h",
                    voltage_per_soc=3.0),
    lambda: motor(coulomb_friction=0.01, breakaway_torque=0.015, viscous_friction=1e-4, rotor_inertia=1e-4),
    lambda: Inertia("j", inertia=0.02),
    lambda: Damper("c", damping=0.01),
    lambda: Gearbox("g", ratio=5.0, efficiency=0.9),
    lambda: CompliantShaft("k", stiffness=200.0, damping=0.3),
    lambda: CoulombFriction("fr", coulomb_torque=0.2, viscous=0.01),
    lambda: ConstantTorque("tl", torque=0.4),
    lambda: FanLoad("fan", coefficient=1e-5),
    lambda: TableTorque("tab", speeds=[0.0, 100.0, 200.0], torques=[0.1, 0.3, 0.2]),
    lambda: AveragedBridge("br"),
    lambda: SampledPISpeed("pi", period=1e-3, kp=0.02, ki=0.5),
    lambda: RepeatingRamp("ref", high=100.0, ramp_up=0.5, hold=1.0, ramp_down=0.5, dwell=1.0),
]


# --------------------------------------------------------------------------------------- compile
@pytest.mark.parametrize("make", EXAMPLES, ids=lambda mk: type(mk()).__name__)
def test_every_kernel_compiles_with_numba_and_matches_python(make):
    comp = make()

    def state(jit):
        b = Bench(comp, jit=jit)
        b.x[:] = np.linspace(0.3, 0.9, b.x.size)
        b.a[:] = np.linspace(1.5, 3.5, b.a.size)
        b.u[:] = 0.4
        b.d[:] = np.linspace(0.1, 0.2, b.d.size)
        b.m[:] = 1
        return b

    results = []
    for jit in (False, True):
        b = state(jit)
        b.eq(0.2)
        row = [b.dx.copy(), b.f.copy(), b.s.copy()]
        if comp.monitor is not None:
            b.mon(0.2)
            row.append(b.out.copy())
        if comp.event_values is not None:
            row.append(b.events(0.2))
            b.fire(0, 0.2)
            row.append(b.m.copy())
        if comp.start is not None:
            b.start(0.0)
            row += [b.m.copy(), b.d.copy()]
        if comp.next_time is not None:
            row.append(np.array([b.next_time(0.2)]))
        if comp.at_time is not None:
            b.at_time(0.3)
            row.append(b.d.copy())
        results.append(row)
    # reference: CPython running the same kernel functions; numba must reproduce them
    for py, nb in zip(*results):
        np.testing.assert_allclose(nb, py, rtol=1e-13, atol=0)
    # the equations write every entry (contract rule 2)
    assert np.all(np.isfinite(results[0][0])) and np.all(np.isfinite(results[0][1]))


# --------------------------------------------------------------------------------------- DC motor
def test_motor_at_stall_current_rises_at_v_over_l_and_torque_is_k_i():
    mo = motor()
    b = Bench(mo, x=[0.0], a=[12.0, 0.0]).eq()
    # L di/dt = v - R i - k w (armature circuit of a DC motor, Nise, Control Systems Engineering, ch. 2)
    assert b.dx[0] == pytest.approx(12.0 / 2e-3, rel=1e-12)
    b = Bench(mo, x=[3.0], a=[12.0, 0.0])
    out = b.mon()
    assert out["torque"] == pytest.approx(0.05 * 3.0, rel=1e-12)  # T = k_t i (Nise ch. 2)
    assert b.f[1] == pytest.approx(-0.05 * 3.0, rel=1e-12)  # a driving motor takes negative torque (our convention)
    assert b.f[0] == pytest.approx(3.0)  # current into + terminal equals armature current


def test_motor_back_emf_and_power_balance():
    mo = motor(viscous_friction=2e-4)
    w, i, v = 150.0, 2.5, 9.0
    b = Bench(mo, x=[i], a=[v, w])
    out = b.mon()
    assert out["back_emf"] == pytest.approx(0.05 * w)  # e = k_e w, k_e = k_t in SI (Nise ch. 2)
    assert b.dx[0] == pytest.approx((v - 0.8 * i - 0.05 * w) / 2e-3)
    # power balance, common practice: v i = R i^2 + L i di/dt + k i w ; k i w = (shaft power) + friction loss
    assert v * b.f[0] == pytest.approx(out["copper_loss"] + 2e-3 * i * b.dx[0] + out["torque"] * w, rel=1e-12)
    assert out["torque"] * w == pytest.approx(-b.f[1] * w + out["friction_loss"], rel=1e-12)
    assert out["copper_loss"] == pytest.approx(0.8 * i * i)
    assert out["magnetic_energy"] == pytest.approx(0.5 * 2e-3 * i * i)  # W = L i^2 / 2 (common practice)


def test_from_datasheet_recovers_ideal_motor_constants():
    V, w_nl, T_s = 24.0, 3000 * 2 * math.pi / 60, 1.2  # 1 rpm = 2*pi/60 rad/s (SI definition)
    mo = DCMotor.from_datasheet("m", rated_voltage="24 V", no_load_speed="3000 rpm", stall_torque="1.2 N*m",
                                inductance="1.5 mH")
    k = V / w_nl  # ideal DC motor: no-load speed V/k (from memory; Ogata / Nise ch. 2)
    R = k * V / T_s  # ideal DC motor: stall torque k V / R (from memory; Ogata / Nise ch. 2)
    assert mo.values["torque_constant"] == pytest.approx(k, rel=1e-12)
    assert mo.values["resistance"] == pytest.approx(R, rel=1e-12)
    assert mo.values["inductance"] == pytest.approx(1.5e-3)
    # the built motor's own kernel reproduces the data sheet: no-load steady state and stall torque
    b = Bench(mo, x=[0.0], a=[V, w_nl]).eq()
    assert b.dx[0] == pytest.approx(0.0, abs=1e-9) and b.f[1] == pytest.approx(0.0, abs=1e-12)
    b = Bench(mo, x=[V / R], a=[V, 0.0]).eq()
    assert b.dx[0] == pytest.approx(0.0, abs=1e-9) and -b.f[1] == pytest.approx(T_s, rel=1e-12)


def test_from_datasheet_with_no_load_current_reproduces_no_load_point():
    V, w_nl, i0, T_s = 24.0, 300.0, 0.15, 1.0
    mo = DCMotor.from_datasheet("m", rated_voltage=V, no_load_speed=w_nl, stall_torque=T_s, inductance=1e-3,
                                no_load_current=i0)

    def unloaded(z):  # steady state with nothing on the shaft: di/dt = 0 and shaft torque 0
        b = Bench(mo, x=[z[0]], a=[V, z[1]]).eq()
        return [b.dx[0] * 1e-3, b.f[1]]

    i, w = optimize.fsolve(unloaded, [0.0, 250.0], xtol=1e-13)  # scipy root finder as the reference solver
    assert w == pytest.approx(w_nl, rel=1e-9) and i == pytest.approx(i0, rel=1e-9)
    R, k = mo.values["resistance"], mo.values["torque_constant"]
    assert k * V / R == pytest.approx(T_s, rel=1e-12)  # electromagnetic stall torque k V / R (Nise ch. 2)


def test_from_datasheet_inconsistent_stall_torque_and_resistance_names_both():
    # k = 24/300 = 0.08; stall 1.2 N*m implies R = 0.08*24/1.2 = 1.6 ohm; 2.0 ohm is 20 % off
    with pytest.raises(ParameterError, match=r"stall_torque = 1\.2 N\*m and terminal_resistance = 2 ohm.*1\.6 ohm"):
        DCMotor.from_datasheet("m", rated_voltage=24, no_load_speed=300, stall_torque=1.2, terminal_resistance=2.0,
                               inductance=1e-3)
    ok = DCMotor.from_datasheet("m", rated_voltage=24, no_load_speed=300, stall_torque=1.2,
                                terminal_resistance=1.62, inductance=1e-3)  # 1.2 % off: accepted, R as given
    assert ok.values["resistance"] == 1.62
    with pytest.raises(ParameterError, match="stall_torque.*terminal_resistance"):
        DCMotor.from_datasheet("m", rated_voltage=24, no_load_speed=300, inductance=1e-3)


def test_wrong_units_and_bad_values_name_the_parameter():
    with pytest.raises(UnitError, match="DCMotor 'm'.*resistance"):
        motor(resistance="2 H")
    with pytest.raises(UnitError, match="no_load_speed"):
        DCMotor.from_datasheet("m", rated_voltage=24, no_load_speed="3000 V", stall_torque=1, inductance=1e-3)
    with pytest.raises(ParameterError, match="DCMotor 'm'.*'inductance'.*positive"):
        motor(inductance=0.0)
    with pytest.raises(ParameterError, match="'breakaway_torque'.*'coulomb_friction'"):
        motor(coulomb_friction=0.2, breakaway_torque=0.1)
    with pytest.raises(ParameterError, match="Battery 'b'.*'capacity'"):
        Battery("b", open_circuit_voltage=12, internal_resistance=0.1, capacity=0)
    with pytest.raises(UnitError, match="capacity"):
        Battery("b", open_circuit_voltage=12, internal_resistance=0.1, capacity="2 A")
    with pytest.raises(ParameterError, match="Gearbox 'g'.*'efficiency'"):
        Gearbox("g", ratio=3, efficiency=1.2)
    with pytest.raises(ParameterError, match="'times'.*'levels'"):
        SwitchedDCSource("s", times=[0.1, 0.2], levels=[1.0])
    with pytest.raises(ParameterError, match="'times' must increase"):
        SwitchedDCSource("s", times=[0.2, 0.1], levels=[1.0, 2.0])
    with pytest.raises(ParameterError, match="'output_min'.*'output_max'"):
        SampledPISpeed("pi", period=1e-3, kp=1, ki=1, output_min=1, output_max=-1)
    with pytest.raises(ParameterError, match="'speeds'.*'torques'"):
        TableTorque("t", speeds=[0, 1], torques=[1, 2, 3])


# --------------------------------------------------------------------------------------- friction
def test_friction_torque_by_mode_and_hold_coefficient():
    fc = CoulombFriction("fr", coulomb_torque="0.2 N*m", breakaway_torque=0.3, viscous=0.01)
    c_h = 0.3 / 1e-6
    assert fc.derived_values["hold_coefficient"] == pytest.approx(c_h)
    # Coulomb friction: magnitude T_c opposing the motion (common practice), plus viscous b*w
    assert Bench(fc, a=[5.0], m=[fr.SLIP_FORWARD]).eq().f[0] == pytest.approx(0.2 + 0.05)
    assert Bench(fc, a=[-5.0], m=[fr.SLIP_BACKWARD]).eq().f[0] == pytest.approx(-0.2 - 0.05)
    assert Bench(fc, a=[4e-7], m=[fr.STUCK]).eq().f[0] == pytest.approx(c_h * 4e-7 + 0.01 * 4e-7)
    b = Bench(fc, a=[5.0], m=[fr.SLIP_FORWARD])
    assert b.mon()["loss"] == pytest.approx((0.2 + 0.05) * 5.0)  # dissipated power = torque * speed
    assert CoulombFriction("f2", coulomb_torque=0.2).values["breakaway_torque"] == 0.2  # default = Coulomb


def test_friction_events_stick_at_zero_speed_and_break_away_at_the_breakaway_torque():
    fc = CoulombFriction("fr", coulomb_torque=0.2, breakaway_torque=0.3, creep_speed=1e-5)
    b = Bench(fc, a=[2.0])
    b.start()
    assert b.m[0] == fr.SLIP_FORWARD
    g = b.events()
    assert g[0] == 2.0  # speed_zero tracks the speed while slipping
    assert g[1] < 0  # breakaway inactive
    b.a[0] = 0.0
    b.fire(fr.EVENT_SPEED_ZERO)
    assert b.m[0] == fr.STUCK
    # stuck: the hold torque reaches the breakaway torque exactly at the creep speed
    b.a[0] = -1e-5
    assert b.events()[1] == pytest.approx(0.0, abs=1e-12)
    assert b.eq().f[0] == pytest.approx(-0.3, rel=1e-12)
    b.fire(fr.EVENT_BREAKAWAY)
    assert b.m[0] == fr.SLIP_BACKWARD
    # from rest: stuck; with no Coulomb friction at all, events stay idle
    z = Bench(fc, a=[0.0])
    z.start()
    assert z.m[0] == fr.STUCK
    none = Bench(CoulombFriction("none", coulomb_torque=0.0), a=[0.0])
    none.start()
    for mode in (0, 1, 2):
        none.m[0] = mode
        assert list(none.events()) == [1.0, -1.0]


def _coast_down(component, J, w0, T_app, t_end, index_w):
    """Integrate J dw/dt = T_app - f(w) with scipy Radau, restarting at each friction event."""
    comp = Bench(component, a=np.zeros(len(component.ports)))
    comp.a[index_w] = w0
    comp.start()
    t, w, fired_at, ws, ts = 0.0, w0, [], [], []

    def rhs(_, y):
        comp.a[index_w] = y[0]
        comp.eq()
        return [(T_app - comp.f[index_w]) / J]

    def ev(kk):
        def g(_, y):
            comp.a[index_w] = y[0]
            return comp.events()[kk]
        g.terminal = True
        g.direction = component.events[kk].direction
        return g

    while t < t_end:
        sol = integrate.solve_ivp(rhs, (t, t_end), [w], method="Radau", events=[ev(0), ev(1)],
                                  rtol=1e-8, atol=1e-10, dense_output=False)
        ts.append(sol.t)
        ws.append(sol.y[0])
        t, w = sol.t[-1], sol.y[0, -1]
        fired = [kk for kk in (0, 1) if sol.t_events[kk].size]
        if not fired:
            break
        comp.a[index_w] = w
        comp.fire(fired[0])
        fired_at.append(t)
        assert len(fired_at) < 10, "friction chatters"
    return np.concatenate(ts), np.concatenate(ws), fired_at, comp


def test_friction_stops_and_holds_an_inertia_without_chatter():
    J, w0, Tc, T_app = 0.01, 5.0, 0.2, 0.05
    fc = CoulombFriction("fr", coulomb_torque=Tc, breakaway_torque=0.25)
    ts, ws, fired_at, b = _coast_down(fc, J, w0, T_app, 2.0, 0)
    t_stop = J * w0 / (Tc - T_app)  # constant net deceleration (Tc - T_app)/J: Newton's 2nd law (common practice)
    assert len(fired_at) == 1 and b.m[0] == fr.STUCK  # one switch, then held: no chatter
    assert fired_at[0] == pytest.approx(t_stop, rel=1e-6)
    after = ws[ts > t_stop]
    assert ts[-1] == 2.0 and after.size > 0
    assert np.all(np.abs(after) <= 1e-6 * 1.0001)  # held within the creep speed
    assert len(ts[ts > t_stop]) < 100  # and without forcing tiny steps
    # the same with the motor's friction (own shaft, no current): same stop time
    mo = motor(coulomb_friction=Tc, breakaway_torque=0.25)
    ts, ws, fired_at, b = _coast_down(mo, J, w0, T_app, 2.0, 1)
    assert len(fired_at) == 1 and fired_at[0] == pytest.approx(t_stop, rel=1e-6)


def test_friction_breaks_away_when_the_applied_torque_exceeds_breakaway():
    J, Tc, Tbr, T_app = 0.01, 0.2, 0.25, 0.3
    fc = CoulombFriction("fr", coulomb_torque=Tc, breakaway_torque=Tbr)
    ts, ws, fired_at, b = _coast_down(fc, J, 0.0, T_app, 1.0, 0)
    assert len(fired_at) == 1 and b.m[0] == fr.SLIP_FORWARD
    # breakaway when the hold torque c_h*w reaches T_br: w = T_app/c_h*(1 - exp(-c_h t/J)) (first-order lag)
    c_h = Tbr / 1e-6
    assert fired_at[0] == pytest.approx(-J / c_h * math.log(1 - Tbr / T_app), rel=1e-3)
    # after breakaway: constant acceleration (T_app - Tc)/J (Newton's 2nd law, common practice)
    assert ws[-1] == pytest.approx((T_app - Tc) / J * 1.0, rel=1e-4)


# --------------------------------------------------------------------------------------- sources
def test_battery_thevenin_current_charge_and_energy():
    bat = Battery("bat", open_circuit_voltage=24.0, internal_resistance=0.05, capacity="2.5 A*h",
                  voltage_per_soc="3 V", initial_soc=0.8)
    assert bat.values["capacity"] == pytest.approx(2.5 * 3600.0)  # 1 A*h = 3600 C (SI definition of the coulomb)
    assert bat.initial_values["soc"] == 0.8
    v = 22.5
    b = Bench(bat, a=[v])
    out = b.mon()
    voc = 24.0 + 3.0 * (0.8 - 1.0)
    i = (voc - v) / 0.05  # Thevenin model, terminal current (V_oc - v)/R (common practice)
    assert out["current"] == pytest.approx(i) and b.f[0] == pytest.approx(-i)
    assert b.dx[0] == pytest.approx(-i / 9000.0)  # charge counting: dQ/dt = -i
    assert out["chemical_power"] == pytest.approx(v * i + out["loss"])  # V_oc i = v i + R i^2 (energy conservation)
    assert out["loss"] == pytest.approx(0.05 * i * i)
    with pytest.raises(ParameterError, match="initial_soc"):
        Battery("b", open_circuit_voltage=12, internal_resistance=0.1, capacity=1, initial_soc=1.5)


def test_switched_source_follows_schedule_like_searchsorted():
    times, levels = np.array([0.1, 0.25, 0.4]), np.array([12.0, 0.0, -6.0])
    src = SwitchedDCSource("src", times=list(times), levels=list(levels), initial_level=3.0)

    def expected(t):  # reference: numpy.searchsorted (last entry with time <= t)
        j = np.searchsorted(times, t, side="right")
        return 3.0 if j == 0 else levels[j - 1]

    for jit in (False, True):
        b = Bench(src, jit=jit)
        b.start(0.0)
        assert b.d[0] == expected(0.0)
        t = 0.0
        seen = []
        while True:
            t = b.next_time(t)
            if not math.isfinite(t):
                break
            seen.append(t)
            b.at_time(t)
            assert b.d[0] == expected(t)
        assert seen == list(times)
        b.start(0.25)  # an entry exactly at the start applies
        assert b.d[0] == expected(0.25) == 0.0
    b = Bench(src, x=[4.0], a=[11.0], d=[12.0])
    out = b.mon()
    assert b.dx[0] == pytest.approx(-1.0) and b.f[0] == -4.0  # residual v - level; delivering -> negative flow
    assert out["power"] == pytest.approx(44.0)


# --------------------------------------------------------------------------------------- mechanics
def test_compliant_shaft_newton_third_law_and_power_balance():
    sh = CompliantShaft("k", stiffness="200 N*m/rad", damping=0.3)
    b = Bench(sh, x=[0.02], a=[10.0, 7.0])
    out = b.mon()
    T = 200.0 * 0.02 + 0.3 * 3.0  # spring + damper in parallel (common practice)
    assert b.f[0] == pytest.approx(T) and b.f[1] == pytest.approx(-T)  # action = reaction (Newton's 3rd law)
    assert b.dx[0] == pytest.approx(3.0)
    # power in = d/dt(k theta^2 / 2) + c dw^2 (energy conservation, common practice)
    assert b.f[0] * 10.0 + b.f[1] * 7.0 == pytest.approx(200.0 * 0.02 * b.dx[0] + out["loss"])
    assert out["elastic_energy"] == pytest.approx(0.5 * 200 * 0.02 ** 2)


def test_inertia_damper_gearbox():
    j = Inertia("j", inertia="0.5 kg*m^2")
    b = Bench(j, a=[4.0])
    assert b.mon()["kinetic_energy"] == pytest.approx(0.5 * 0.5 * 16.0) and b.f[0] == 0.0  # E = J w^2/2
    assert j.port("shaft").capacity == "inertia" and j.energy.stored == ()
    dmp = Bench(Damper("c", damping=0.2), a=[-3.0])
    assert dmp.mon()["loss"] == pytest.approx(0.2 * 9.0) and dmp.f[0] == pytest.approx(-0.6)  # T = c w (common practice)
    g = Gearbox("g", ratio=4.0, efficiency=0.95, input_inertia=1e-4)
    b = Bench(g, a=[400.0, 100.0]).eq()
    assert list(b.f) == [0.0, 0.0]
    (c,) = g.couplings
    assert (c.port_a, c.port_b, c.ratio, c.efficiency) == ("input", "output", "ratio", "efficiency")
    assert g.parameter_vector()[[0, 1, 2]].tolist() == [4.0, 0.95, 1e-4]


# --------------------------------------------------------------------------------------- loads
def test_constant_and_fan_loads():
    b = Bench(ConstantTorque("tl", torque=-0.5), a=[20.0])
    assert b.mon()["power"] == pytest.approx(-10.0) and b.f[0] == -0.5  # P = T w; negative torque drives
    fan = FanLoad("fan", coefficient="2e-5 N*m*s**2/rad**2")
    p1 = Bench(fan, a=[100.0]).mon()["power"]
    p2 = Bench(fan, a=[200.0]).mon()["power"]
    assert p2 / p1 == pytest.approx(8.0)  # fan affinity law: power ~ speed^3 (common practice)
    b = Bench(fan, a=[-100.0]).eq()
    assert b.f[0] == pytest.approx(-2e-5 * 1e4)  # resists in both directions
    rated = FanLoad.from_rated("f2", rated_speed="1500 rpm", rated_torque="3 N*m")
    w = 1500 * 2 * math.pi / 60  # 1 rpm = 2*pi/60 rad/s (SI definition)
    assert Bench(rated, a=[w]).eq().f[0] == pytest.approx(3.0, rel=1e-12)
    assert FanLoad("f3", coefficient="1e-4 N*m/rpm**2").values["coefficient"] == pytest.approx(1e-4 / (2 * math.pi / 60) ** 2)


def test_table_torque_matches_numpy_interp():
    speeds, torques = [-50.0, 0.0, 80.0, 200.0], [-0.2, 0.05, 0.4, 0.3]
    tab = TableTorque("tab", speeds=speeds, torques=torques)
    for jit in (False, True):
        for w in [-120.0, -50.0, -10.0, 0.0, 33.3, 80.0, 150.0, 200.0, 500.0]:
            b = Bench(tab, a=[w], jit=jit)
            out = b.mon()
            ref = np.interp(w, speeds, torques)  # numpy's linear interpolation, constant beyond the ends
            assert b.f[0] == pytest.approx(ref, rel=1e-12, abs=1e-15)
            assert out["power"] == pytest.approx(ref * w, rel=1e-12, abs=1e-12)
    one = TableTorque("one", speeds=[10.0], torques=[0.7])
    assert Bench(one, a=[-3.0]).eq().f[0] == 0.7 == np.interp(-3.0, [10.0], [0.7])


# --------------------------------------------------------------------------------------- bridge
def test_averaged_bridge_is_lossless_and_clips_duty():
    br = AveragedBridge("br")
    b = Bench(br, x=[5.0], a=[48.0, 20.0], u=[0.5])
    out = b.mon()
    assert b.dx[0] == pytest.approx(20.0 - 0.5 * 48.0)  # averaged converter: v_out = d v_in (Mohan et al., ch. 7)
    assert b.f[1] == -5.0 and out["bus_current"] == pytest.approx(2.5)
    # ideal switches: power drawn from the bus = power delivered at d*v_bus (energy conservation)
    b = Bench(br, x=[5.0], a=[48.0, 24.0], u=[0.5]).eq()
    assert b.dx[0] == 0.0 and b.f[0] * 48.0 == pytest.approx(-b.f[1] * 24.0)
    assert Bench(br, x=[1.0], a=[48.0, 0.0], u=[-3.0]).mon()["applied_duty"] == -1.0


# --------------------------------------------------------------------------------------- controller
def test_pi_unsaturated_matches_scipy_lfilter():
    kp, ki, T = 0.02, 0.5, 1e-3
    pi = SampledPISpeed("pi", period=T, kp=kp, ki=ki, output_min=-1e9, output_max=1e9)
    rng = np.random.default_rng(3)
    speeds = rng.uniform(0, 100, 40)
    ref = 60.0
    b = Bench(pi, u=[ref], a=[speeds[0]])
    b.at_time(0.0)  # assembly takes the first sample at t0 through at_time
    ys = [b.d[1]]
    for k in range(1, speeds.size):
        b.a[0] = speeds[k]
        b.at_time(k * T)
        ys.append(b.eq().s[0])
    e = ref - speeds
    # y_k = kp e_k + I_k, I_{k+1} = I_k + ki T e_k  <=>  Y/E = (kp + (ki T - kp) z^-1) / (1 - z^-1)
    expected = signal.lfilter([kp, ki * T - kp], [1.0, -1.0], e)  # scipy.signal as the reference
    np.testing.assert_allclose(ys, expected, rtol=1e-12, atol=1e-15)


def test_pi_clamping_freezes_integral_only_when_pushing_further():
    pi = SampledPISpeed("pi", period=0.01, kp=0.1, ki=2.0, output_min=0.0, output_max=1.0)
    # saturated high with e > 0: integral frozen (conditional integration, Astrom & Hagglund, Advanced PID Control, 3.5)
    b = Bench(pi, u=[100.0], a=[0.0], d=[0.5, 0.0])
    b.at_time(0.01)
    assert b.d[1] == 1.0 and b.d[0] == 0.5
    # saturated high but e < 0 (speed above reference): integral unwinds by ki T e
    b = Bench(pi, u=[0.0], a=[5.0], d=[2.0, 1.0])  # v = 0.1*(-5) + 2 = 1.5 > 1
    b.at_time(0.01)
    assert b.d[1] == 1.0 and b.d[0] == pytest.approx(2.0 + 2.0 * 0.01 * -5.0)
    # saturated low with e < 0: frozen
    b = Bench(pi, u=[0.0], a=[50.0], d=[0.2, 0.0])
    b.at_time(0.01)
    assert b.d[1] == 0.0 and b.d[0] == 0.2
    # the held command is the output discrete state (zero-order hold)
    assert b.eq().s[0] == 0.0 and b.f[0] == 0.0


# --------------------------------------------------------------------------------------- profile
def test_repeating_ramp_against_numpy_interp_and_corner_times():
    lo, hi, ru, h, rd, dw, delay = 10.0, 100.0, 0.5, 1.0, 0.25, 0.75, 0.2
    prof = RepeatingRamp("ref", low=lo, high="100 rad/s", ramp_up=ru, hold=h, ramp_down=rd, dwell=dw,
                         start_delay=delay)
    P = ru + h + rd + dw
    knots_t = [0.0, ru, ru + h, ru + h + rd, P]
    knots_v = [lo, hi, hi, lo, lo]

    def expected(t):  # reference: numpy.interp over one cycle's corners, repeated
        return lo if t < delay else np.interp((t - delay) % P, knots_t, knots_v)

    b = Bench(prof)
    for t in np.linspace(0.0, 3 * P + delay, 301):
        assert b.eq(t).s[0] == pytest.approx(expected(t), rel=1e-12)
    corners = []
    t = 0.0
    for _ in range(9):
        t = b.next_time(t)
        corners.append(t)
    want = [delay] + [delay + c * P + k for c in range(2) for k in (ru, ru + h, ru + h + rd, P)]
    np.testing.assert_allclose(corners, want[:9], rtol=1e-12)
    assert b.eq(delay + ru).s[0] == pytest.approx(hi) and b.eq(delay + ru + h + rd).s[0] == pytest.approx(lo)
    with pytest.raises(ParameterError, match="ramp_up.*positive length"):
        RepeatingRamp("r", high=1, ramp_up=0, hold=0, ramp_down=0, dwell=0)


def test_motor_without_coulomb_friction_declares_no_events():
    # common practice: zero Coulomb friction means zero friction torque in every stick/slip mode,
    # so the assembled system carries no stick/slip event functions (as a lossless gear carries
    # no power-flow mode); with friction both events are present
    assert motor().events == ()
    assert [e.name for e in motor(coulomb_friction=0.01).events] == ["speed_zero", "breakaway"]
    assert [e.name for e in motor(breakaway_torque=0.01).events] == ["speed_zero", "breakaway"]
    for kw, n_events in (({}, 0), ({"coulomb_friction": 0.01}, 2)):
        drive = emsim.System("motor_on_inertia")
        drive.add(SwitchedDCSource("src", times=[0.1], levels=[12.0]), motor(rotor_inertia=1e-4, **kw),
                  Inertia("j", inertia=0.01))
        drive.connect("src.terminal", "m.armature")
        drive.connect("m.shaft", "j.shaft")
        assert emsim.assemble(drive).n_events == n_events
