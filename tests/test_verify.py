"""Tests for sizer.verify: load flow, fault currents and motor-start dip.

Network values here are invented test networks; the check values come from closed
forms (each stated and cited beside it), never from another program.
"""

from __future__ import annotations

import cmath
import dataclasses
import itertools
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sizer.errors import InternalError
from sizer.verify import (
    S_BASE_VA,
    LoadFlowResult,
    Network,
    fault_currents_a,
    load_flow,
    motor_start_dip_pct,
)

SQRT3 = math.sqrt(3.0)


def make_net(parent, z_ohm, circuit_v, phases=3, load_va=0j, rating_va=0.0,
             z_pct=0j, secondary_v=0.0) -> Network:
    """Network with scalars broadcast to every node."""
    n = len(parent)

    def full(value, dtype):
        return np.broadcast_to(np.asarray(value, dtype=dtype), (n,)).copy()

    return Network(
        parent=np.asarray(parent),
        z_ohm=full(z_ohm, complex),
        circuit_v=full(circuit_v, float),
        phases=full(phases, int),
        load_va=full(load_va, complex),
        xfmr_rating_va=full(rating_va, float),
        xfmr_z_pct=full(z_pct, complex),
        xfmr_secondary_v=full(secondary_v, float),
    )


def pf_load(va: float, power_factor: float, leading: bool = False) -> complex:
    """Complex load P + jQ from apparent power and power factor (lagging unless told)."""
    q = va * math.sqrt(1.0 - power_factor**2)
    return complex(va * power_factor, -q if leading else q)


# ---------------------------------------------------------------------------
# 1. One impedance feeding a constant-power load: exact closed form.
#
# With V1 = V2 + Z·I and I = conj(S/V2) (per phase; for three-phase use the
# line-to-line voltage and the total S, for a two-wire single-phase circuit the loop
# impedance 2·z), eliminating the angle gives the biquadratic
#     U2⁴ − (U1² − 2(R·P + X·Q))·U2² + (R² + X²)(P² + Q²) = 0,
# whose larger root is the operating point: the two-bus "nose curve" of voltage
# stability (e.g. Kundur, Power System Stability and Control, 1994, ch. 14 — from
# memory; the algebra is two lines and is re-derived here).
# ---------------------------------------------------------------------------

def closed_form_u2(u1: float, r: float, x: float, p: float, q: float) -> float:
    b = u1**2 - 2.0 * (r * p + x * q)
    return math.sqrt((b + math.sqrt(b**2 - 4.0 * (r**2 + x**2) * (p**2 + q**2))) / 2.0)


CLOSED_FORM_CASES = [
    # (phases, circuit V, z per conductor ohm, load S VA)
    pytest.param(3, 480.0, 0.012 + 0.008j, pf_load(250e3, 0.9), id="480V-feeder"),
    pytest.param(3, 208.0, 0.05 + 0.01j, pf_load(60e3, 0.8), id="208V-heavy"),
    pytest.param(3, 400.0, 0.02 + 0.015j, pf_load(150e3, 0.9, leading=True), id="400V-leading"),
    pytest.param(1, 120.0, 0.25 + 0.005j, pf_load(1.8e3, 1.0), id="120V-branch"),
    pytest.param(1, 240.0, 0.3 + 0.01j, pf_load(9e3, 0.95), id="240V-near-nose"),
    pytest.param(3, 480.0, 0.2 + 0.2j, pf_load(200e3, 0.7), id="480V-30pct-drop"),
]


@pytest.mark.parametrize(("phases", "volts", "z", "s"), CLOSED_FORM_CASES)
def test_single_impedance_matches_closed_form(phases, volts, z, s):
    net = make_net([-1], z, volts, phases=phases, load_va=s)
    res = load_flow(net, tol_pu=1e-13)
    loop = 2.0 if phases == 1 else 1.0
    u2 = closed_form_u2(volts, loop * z.real, loop * z.imag, s.real, s.imag)
    assert res.converged
    assert abs(res.v_bus_pu[0]) == pytest.approx(u2 / volts, abs=1e-9)
    assert res.drop_pct[0] == pytest.approx(100.0 * (1.0 - u2 / volts), abs=1e-7)
    # the cable current follows from the same operating point: I = S / (√3·U2) or S / U2
    i_expected = abs(s) / ((SQRT3 if phases == 3 else 1.0) * u2)
    assert res.current_a[0] == pytest.approx(i_expected, rel=1e-9)
    assert res.v_far_pu[0] == res.v_bus_pu[0]  # no transformer: far end is the bus


def test_load_beyond_the_nose_is_reported_not_raised():
    # 240 V loop of 0.6 ohm: maximum transfer at unity pf is U1²/(4R) = 24 kW; ask for 60 kW.
    net = make_net([-1], 0.3, 240.0, phases=1, load_va=60e3)
    res = load_flow(net, max_iter=50)
    assert isinstance(res, LoadFlowResult)
    assert not res.converged
    assert res.iterations <= 50


def test_no_load_converges_at_once_to_one_pu():
    net = make_net([-1, 0, 0, 1], 0.01 + 0.01j, 480.0)
    res = load_flow(net)
    assert res.converged and res.iterations == 1
    np.testing.assert_allclose(res.v_bus_pu, 1.0)
    np.testing.assert_allclose(res.drop_pct, 0.0)


# ---------------------------------------------------------------------------
# 2. Transformer regulation, IEC 60076-1 informative annex on voltage drop
# (shared/reference README, status [C]; edition not pinned):
#     ε% = R%·cosφ + X%·sinφ + (X%·cosφ − R%·sinφ)² / 200, at load fraction n: nR%, nX%
# (reference README [C]). Writing a = n(R cosφ + X sinφ), b = n(X cosφ − R sinφ) in pu,
# the exact drop with the primary at rated voltage is 1 − √(1 − b²) + a
# = a + b²/2 + b⁴/8 + …, so the published formula is exact to second order and
# misses b⁴/8 (+ higher terms): that is the tolerance.
# ---------------------------------------------------------------------------

def iec60076_regulation_pct(r_pct: float, x_pct: float, power_factor: float,
                            lagging: bool) -> float:
    sin_phi = math.sqrt(1.0 - power_factor**2) * (1.0 if lagging else -1.0)
    return (r_pct * power_factor + x_pct * sin_phi
            + (x_pct * power_factor - r_pct * sin_phi) ** 2 / 200.0)


@pytest.mark.parametrize(("z_pct", "x_r", "fraction", "power_factor", "lagging"), [
    (5.2, 4.0, 1.0, 0.8, True),
    (5.2, 4.0, 1.0, 1.0, True),
    (5.2, 4.0, 0.6, 0.9, False),
    (4.5, 2.5, 1.2, 0.85, True),
    (8.0, 10.0, 1.0, 0.3, True),    # motor-start-like low pf
    (5.75, 6.0, 1.0, 0.9, False),
])
def test_transformer_regulation_matches_iec_60076_1(z_pct, x_r, fraction, power_factor,
                                                    lagging):
    rating = 500e3
    angle = math.atan(x_r)
    r_pct, x_pct = z_pct * math.cos(angle), z_pct * math.sin(angle)
    load = pf_load(fraction * rating, power_factor, leading=not lagging)
    net = make_net([-1], 0.0, 480.0, load_va=load, rating_va=rating,
                   z_pct=complex(r_pct, x_pct), secondary_v=208.0)
    res = load_flow(net, tol_pu=1e-13)
    assert res.converged
    # The annex formula is for a load current of n × rated; a constant-power load draws
    # S/|V2|, so evaluate it at the current actually flowing (primary side, 480 V).
    n_eff = res.current_a[0] / (rating / (SQRT3 * 480.0))
    eps = iec60076_regulation_pct(n_eff * r_pct, n_eff * x_pct, power_factor, lagging)
    sin_phi = math.sqrt(1.0 - power_factor**2) * (1.0 if lagging else -1.0)
    b = n_eff * (x_pct * power_factor - r_pct * sin_phi) / 100.0
    assert res.drop_pct[0] == pytest.approx(eps, abs=100.0 * b**4 / 8.0 * 1.5 + 1e-9)
    assert res.far_drop_pct[0] == pytest.approx(0.0, abs=1e-12)  # no cable impedance


def test_transformer_node_cable_drop_then_transformer_drop():
    # 480 V cable to a 75 kVA 480/208 V transformer: v_far is the primary terminal,
    # v_bus the secondary bus; the same pu current flows through both impedances.
    z_pct = 5.2 * cmath.exp(1j * math.atan(4.0))
    net = make_net([-1], 0.02 + 0.01j, 480.0, load_va=pf_load(60e3, 0.9), rating_va=75e3,
                   z_pct=z_pct, secondary_v=208.0)
    res = load_flow(net, tol_pu=1e-13)
    i_pu = np.conj(net.load_va[0] / S_BASE_VA / res.v_bus_pu[0])
    z_cable_pu = (0.02 + 0.01j) * S_BASE_VA / 480.0**2
    z_xfmr_pu = z_pct / 100.0 * S_BASE_VA / 75e3
    assert res.v_far_pu[0] == pytest.approx(1.0 - z_cable_pu * i_pu, abs=1e-12)
    assert res.v_bus_pu[0] == pytest.approx(res.v_far_pu[0] - z_xfmr_pu * i_pu, abs=1e-12)
    assert res.drop_pct[0] > res.far_drop_pct[0] > 0.0


# ---------------------------------------------------------------------------
# A naive node-by-node sweep (plain Python loops over the parents-first order) as a
# second implementation of the same equations, for random trees of any shape.
# ---------------------------------------------------------------------------

def naive_sweep(net: Network, tol: float = 1e-13, max_iter: int = 200):
    n = net.n
    z_c = net.cable_z_pu()
    z_x = net.xfmr_z_pu()
    s = net.load_va / S_BASE_VA
    v_bus = np.ones(n, complex)
    for _ in range(max_iter):
        j = np.conj(s / v_bus)
        for i in range(n - 1, -1, -1):
            if net.parent[i] >= 0:
                j[net.parent[i]] += j[i]
        v_far = np.empty(n, complex)
        v_new = np.empty(n, complex)
        for i in range(n):
            up = 1.0 if net.parent[i] < 0 else v_new[net.parent[i]]
            v_far[i] = up - z_c[i] * j[i]
            v_new[i] = v_far[i] - z_x[i] * j[i]
        done = np.max(np.abs(v_new - v_bus)) < tol
        v_bus = v_new
        if done:
            break
    return v_far, v_bus


@st.composite
def random_trees(draw, max_nodes: int = 40, transformers: bool = True,
                 single_phase: bool = True):
    """Parents-first trees of 480 V three-phase segments, 208 V after transformers,
    single-phase circuits at the bus's line-to-neutral or line-to-line voltage."""
    n = draw(st.integers(1, max_nodes))
    parent, bus_v, volts, phases, rating, sec = [], [], [], [], [], []
    z, load, zt = [], [], []
    unit = st.floats(0.0, 1.0)
    for i in range(n):
        p = draw(st.integers(-1, i - 1))
        if p >= 0 and phases[p] == 1:
            ph = 1
            v = volts[p]
        else:
            ph = 3 if not single_phase else draw(st.sampled_from([3, 3, 1]))
            up = 480.0 if p < 0 else bus_v[p]
            v = up if ph == 3 else draw(st.sampled_from([up / SQRT3, up]))
        has_x = transformers and ph == 3 and v == 480.0 and draw(st.booleans())
        parent.append(p)
        phases.append(ph)
        volts.append(v)
        rating.append(draw(st.sampled_from([45e3, 75e3, 150e3])) if has_x else 0.0)
        sec.append(208.0 if has_x else 0.0)
        bus_v.append(208.0 if has_x else v)
        zt.append(complex(draw(st.floats(0.5, 2.0)), draw(st.floats(2.0, 6.0))))
        z.append(complex(0.05 * draw(unit), 0.01 * draw(unit)) * (v / 480.0) ** 2)
        load.append(complex(3e3 * draw(unit), 1.5e3 * draw(unit)))
    return Network(np.array(parent), np.array(z), np.array(volts), np.array(phases),
                   np.array(load), np.array(rating), np.array(zt), np.array(sec))


@settings(max_examples=60, deadline=None)
@given(random_trees())
def test_vectorised_sweep_equals_naive_sweep(net):
    res = load_flow(net, tol_pu=1e-13)
    v_far, v_bus = naive_sweep(net)
    assert res.converged
    np.testing.assert_allclose(res.v_bus_pu, v_bus, rtol=0, atol=1e-10)
    np.testing.assert_allclose(res.v_far_pu, v_far, rtol=0, atol=1e-10)


@settings(max_examples=40, deadline=None)
@given(random_trees(transformers=False, single_phase=False))
def test_drop_grows_down_every_path_with_lagging_loads(net):
    # Loads here draw P ≥ 0 and Q ≥ 0 and impedances have R, X ≥ 0: every segment
    # lowers the voltage magnitude (first-quadrant Z·I against a voltage near 1 pu).
    res = load_flow(net)
    has_parent = net.parent >= 0
    child_drop = res.drop_pct[has_parent]
    parent_drop = res.drop_pct[net.parent[has_parent]]
    assert np.all(child_drop >= parent_drop - 1e-9)
    assert np.all(res.drop_pct >= -1e-9)


# ---------------------------------------------------------------------------
# 3. Fault currents.
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("x_r", [0.0, 1.0, 6.6, math.inf])
def test_fault_at_the_source_equals_the_source_level(x_r):
    # a node with no impedance between it and the source bus sees the source's level
    net = make_net([-1, 0], [0j, 0.01 + 0.005j], 480.0)
    i_a = fault_currents_a(net, 35e3, 480.0, x_r)
    assert i_a[0] == pytest.approx(35e3, rel=1e-12)
    assert i_a[1] < i_a[0]


def ohmic_source(i_fault_a: float, volts: float, x_r: float) -> complex:
    """Per-phase source impedance (ohm) from a three-phase available fault current."""
    return volts / (SQRT3 * i_fault_a) * cmath.exp(1j * math.atan(x_r))


def test_fault_through_cable_and_transformer_by_ohms():
    # Independent calculation in ohms, referred to the secondary through the turns
    # ratio squared (the ohmic method, e.g. IEEE Std 141 "Red Book", ch. 4 — from
    # memory): I = V2 / (√3·|(Zs + Zc)·(V2/V1)² + Zt|), Zt = z%/100 · V2²/S.
    z_s = ohmic_source(35e3, 480.0, 6.0)
    z_c1 = 0.004 + 0.006j            # switchboard feeder, 480 V
    z_c2 = 0.012 + 0.004j            # cable to the transformer primary, 480 V
    z_pct = complex(1.26, 5.04)      # 75 kVA, 5.2 %, X/R 4
    z_c3 = 0.02 + 0.003j             # 208 V feeder from the secondary
    net = Network(
        parent=np.array([-1, 0, 1]),
        z_ohm=np.array([z_c1, z_c2, z_c3]),
        circuit_v=np.array([480.0, 480.0, 208.0]),
        phases=np.array([3, 3, 3]),
        load_va=np.zeros(3, complex),
        xfmr_rating_va=np.array([0.0, 75e3, 0.0]),
        xfmr_z_pct=np.array([0j, z_pct, 0j]),
        xfmr_secondary_v=np.array([0.0, 208.0, 0.0]),
    )
    i_a = fault_currents_a(net, 35e3, 480.0, 6.0)
    assert i_a[0] == pytest.approx(480.0 / (SQRT3 * abs(z_s + z_c1)), rel=1e-12)
    z_t = z_pct / 100.0 * 208.0**2 / 75e3
    z_sec = (z_s + z_c1 + z_c2) * (208.0 / 480.0) ** 2 + z_t
    assert i_a[1] == pytest.approx(208.0 / (SQRT3 * abs(z_sec)), rel=1e-12)
    assert i_a[2] == pytest.approx(208.0 / (SQRT3 * abs(z_sec + z_c3)), rel=1e-12)
    # transformer let-through cannot exceed rated current / z (infinite-bus limit)
    assert i_a[1] < 75e3 / (SQRT3 * 208.0) / 0.052


def test_infinite_bus_when_the_source_level_is_absent():
    z = 0.01 + 0.02j
    net = make_net([-1, 0], [0j, z], 480.0)
    i_a = fault_currents_a(net, None, 480.0, 0.0)
    assert math.isinf(i_a[0])                     # nothing limits it at the source bus
    assert i_a[1] == pytest.approx(480.0 / (SQRT3 * abs(z)), rel=1e-12)


def test_single_phase_line_to_neutral_estimate():
    # 120 V branch on a 208Y/120 V panel: I = 120 / |Z1 + 2·z|, Z1 the panel's per-phase
    # upstream impedance; at zero length the line-to-neutral estimate equals the panel's
    # three-phase level (common practice for a bolted L-N fault at a panel).
    z_feeder = 0.003 + 0.002j
    z_branch = 0.15 + 0.004j
    net = make_net([-1, 0, 0], [z_feeder, z_branch, 0j], [208.0, 120.0, 120.0],
                   phases=[3, 1, 1])
    i_a = fault_currents_a(net, 22e3, 208.0, 4.0)
    z1 = ohmic_source(22e3, 208.0, 4.0) + z_feeder
    assert i_a[0] == pytest.approx(208.0 / (SQRT3 * abs(z1)), rel=1e-12)
    assert i_a[1] == pytest.approx(120.0 / abs(z1 + 2.0 * z_branch), rel=1e-12)
    # (120 V nominal against 208/√3 = 120.09 V: the nominal ratio enters exactly)
    assert i_a[2] == pytest.approx(i_a[0] * 120.0 / (208.0 / SQRT3), rel=1e-12)


def test_single_phase_source_level_is_a_loop_level():
    # 240 V single-phase service, 10 kA available: Zs = 240 V / 10 kA as a loop, so a
    # 240 V circuit sees I = 240 / |Zs + 2·z| and, at zero length, the service level.
    z_branch = 0.05 + 0.002j
    net = make_net([-1, -1], [0j, z_branch], 240.0, phases=1)
    i_a = fault_currents_a(net, 10e3, 240.0, 2.0, source_phases=1)
    z_s = 240.0 / 10e3 * cmath.exp(1j * math.atan(2.0))
    assert i_a[0] == pytest.approx(10e3, rel=1e-12)
    assert i_a[1] == pytest.approx(240.0 / abs(z_s + 2.0 * z_branch), rel=1e-12)


def test_single_phase_line_to_line_circuit():
    # 208 V single-phase circuit across two lines of the panel: loop = 2·Z1 + 2·z, which
    # at zero length is √3/2 of the three-phase level (line-to-line bolted fault).
    z_feeder = 0.003 + 0.002j
    z_branch = 0.08 + 0.003j
    net = make_net([-1, 0, 0], [z_feeder, z_branch, 0j], 208.0, phases=[3, 1, 1])
    i_a = fault_currents_a(net, 22e3, 208.0, 4.0)
    z1 = ohmic_source(22e3, 208.0, 4.0) + z_feeder
    assert i_a[1] == pytest.approx(208.0 / abs(2.0 * z1 + 2.0 * z_branch), rel=1e-12)
    assert i_a[2] == pytest.approx(SQRT3 / 2.0 * i_a[0], rel=1e-12)


def test_nested_single_phase_adds_loops():
    # 277 V single-phase panel (fed line-to-neutral from 480Y/277) feeding 277 V circuits
    z_feeder, z_sub, z_branch = 0.002 + 0.003j, 0.05 + 0.01j, 0.3 + 0.005j
    net = make_net([-1, 0, 1], [z_feeder, z_sub, z_branch], [480.0, 277.0, 277.0],
                   phases=[3, 1, 1])
    i_a = fault_currents_a(net, 50e3, 480.0, 8.0)
    z1 = ohmic_source(50e3, 480.0, 8.0) + z_feeder
    # I = 277 V / |Z1 + 2·z_sub + 2·z_branch|: the per-phase upstream impedance once,
    # then both conductors of every single-phase segment on the way
    assert i_a[1] == pytest.approx(277.0 / abs(z1 + 2 * z_sub), rel=1e-12)
    assert i_a[2] == pytest.approx(277.0 / abs(z1 + 2 * z_sub + 2 * z_branch), rel=1e-12)


@settings(max_examples=80, deadline=None)
@given(random_trees(), st.floats(5e3, 100e3), st.floats(0.5, 15.0))
def test_fault_level_falls_down_every_path(net, source_a, x_r):
    i_a = fault_currents_a(net, source_a, 480.0, x_r)
    # compare short-circuit power (V·I, √3·V·I three-phase), which is continuous across
    # transformers; amperes rise on a step-down transformer's secondary
    s_va = i_a * net.bus_v * np.where(net.phases == 1, 1.0, SQRT3)
    source_va = SQRT3 * 480.0 * source_a
    up = np.where(net.parent >= 0, s_va[np.maximum(net.parent, 0)], source_va)
    assert np.all(s_va <= up * (1.0 + 1e-12))
    assert np.all(np.isfinite(i_a)) and np.all(i_a > 0)


@settings(max_examples=40, deadline=None)
@given(random_trees(transformers=False), st.floats(5e3, 100e3), st.floats(0.5, 15.0))
def test_fault_amperes_fall_down_every_path_without_transformers(net, source_a, x_r):
    i_a = fault_currents_a(net, source_a, 480.0, x_r)
    up = np.where(net.parent >= 0, i_a[np.maximum(net.parent, 0)], source_a)
    assert np.all(i_a <= up * (1.0 + 1e-12))


@pytest.mark.parametrize(("kwargs", "field"), [
    ({"source_fault_a": -1.0}, "source_fault_a"),
    ({"source_fault_a": math.nan}, "source_fault_a"),
    ({"source_v": 0.0}, "source_v"),
    ({"source_x_r": -2.0}, "source_x_r"),
])
def test_fault_rejects_bad_source(kwargs, field):
    net = make_net([-1], 0.01, 480.0)
    args = {"source_fault_a": 10e3, "source_v": 480.0, "source_x_r": 5.0} | kwargs
    with pytest.raises(InternalError) as err:
        fault_currents_a(net, **args)
    assert err.value.field == field


# ---------------------------------------------------------------------------
# 5. Motor-start dip.
# ---------------------------------------------------------------------------

def test_motor_start_on_an_unloaded_feeder_is_a_voltage_divider():
    # Constant impedance Zm = U²/conj(S_start) behind z: V = Zm / (Zm + z) exactly.
    z = 0.02 + 0.015j
    start = pf_load(6 * 75e3 / 0.9, 0.3)  # 75 kW motor, 6 × current at pf 0.3
    net = make_net([-1], z, 480.0)
    z_m = 480.0**2 / np.conj(start)
    expected = 100.0 * (1.0 - abs(z_m / (z_m + z)))
    assert motor_start_dip_pct(net, 0, start) == pytest.approx(expected, abs=1e-9)


def test_motor_start_dip_grows_with_starting_demand_and_running_load():
    net = make_net([-1, 0, 0, 1], [0.004 + 0.006j, 0.02 + 0.006j, 0.01 + 0.004j,
                                   0.03 + 0.005j], 480.0,
                   load_va=[0j, pf_load(40e3, 0.9), pf_load(120e3, 0.85), pf_load(30e3, 0.8)])
    dips = [motor_start_dip_pct(net, 3, pf_load(k * 20e3, 0.3)) for k in (1, 3, 6, 9)]
    assert all(a < b for a, b in itertools.pairwise(dips))
    assert dips[0] > 0


def test_running_demand_taken_out_while_starting():
    # No starting demand and the running motor switched off: the "dip" is the rise the
    # bus sees when its own load goes, which a load flow without that load gives.
    load = pf_load(30e3, 0.85)
    net = make_net([-1, 0, 0], [0.004 + 0.006j, 0.05 + 0.01j, 0.01 + 0.01j], 480.0,
                   load_va=[0j, load, pf_load(100e3, 0.9)])
    off = dataclasses.replace(net, load_va=np.array([0j, 0j, pf_load(100e3, 0.9)]))
    expected = 100.0 * (abs(load_flow(net, tol_pu=1e-13).v_bus_pu[1])
                        - abs(load_flow(off, tol_pu=1e-13).v_bus_pu[1]))
    got = motor_start_dip_pct(net, 1, 0j, running_va=load, tol_pu=1e-13)
    assert got == pytest.approx(expected, abs=1e-9)
    assert got < 0


def test_motor_start_collapse_and_bad_input():
    heavy = make_net([-1, 0], [0.01, 0.3], 240.0, phases=[3, 1],
                     load_va=[0j, 60e3])
    with pytest.raises(InternalError):
        motor_start_dip_pct(heavy, 1, 1e3)  # cannot carry its running load
    weak = make_net([-1, 0], [0.01, 0.3], 240.0, phases=[3, 1], load_va=[0j, 8e3])
    assert load_flow(weak).converged
    # a start so heavy that the constant-power load beside it collapses
    assert motor_start_dip_pct(weak, 1, 1e6) == 100.0
    with pytest.raises(InternalError):
        motor_start_dip_pct(weak, 2, 1e3)


# ---------------------------------------------------------------------------
# Network validation
# ---------------------------------------------------------------------------

@pytest.mark.parametrize(("change", "field"), [
    ({"parent": np.array([-1, 1])}, "parent"),
    ({"parent": np.array([-1, -2])}, "parent"),
    ({"parent": np.array([-1.0, 0.5])}, "parent"),
    ({"z_ohm": np.array([0.01, -0.01])}, "z_ohm"),
    ({"z_ohm": np.array([0.01])}, "z_ohm"),
    ({"circuit_v": np.array([480.0, 0.0])}, "circuit_v"),
    ({"phases": np.array([3, 2])}, "phases"),
    ({"load_va": np.array([0j, complex(math.nan, 0)])}, "load_va"),
    ({"xfmr_rating_va": np.array([0.0, -5.0])}, "xfmr_rating_va"),
    ({"xfmr_rating_va": np.array([0.0, 75e3])}, "xfmr_secondary_v"),
    ({"xfmr_rating_va": np.array([0.0, 75e3]), "xfmr_secondary_v": np.array([0.0, 208.0]),
      "xfmr_z_pct": np.array([0j, -1 + 5j])}, "xfmr_z_pct"),
    ({"load_va": np.zeros((2, 1))}, "load_va"),
])
def test_network_rejects_bad_arrays(change, field):
    good = {
        "parent": np.array([-1, 0]), "z_ohm": np.array([0.01, 0.01]),
        "circuit_v": np.array([480.0, 480.0]), "phases": np.array([3, 3]),
        "load_va": np.zeros(2, complex), "xfmr_rating_va": np.zeros(2),
        "xfmr_z_pct": np.zeros(2, complex), "xfmr_secondary_v": np.zeros(2),
    }
    with pytest.raises(InternalError) as err:
        Network(**(good | change))
    assert err.value.field == field


def test_network_is_frozen_and_read_only():
    net = make_net([-1, 0], 0.01, 480.0)
    with pytest.raises(dataclasses.FrozenInstanceError):
        net.z_ohm = np.zeros(2)  # type: ignore[misc]
    with pytest.raises(ValueError, match="read-only"):
        net.z_ohm[0] = 1.0
    res = load_flow(net)
    with pytest.raises(ValueError, match="read-only"):
        res.drop_pct[0] = 0.0


def test_iteration_settings_are_checked():
    net = make_net([-1], 0.01, 480.0)
    with pytest.raises(InternalError):
        load_flow(net, tol_pu=0.0)
    with pytest.raises(InternalError):
        load_flow(net, max_iter=0)


# ---------------------------------------------------------------------------
# Size: 20,000 random nodes (no timing assert; it runs in tens of milliseconds).
# ---------------------------------------------------------------------------

def random_network(n: int, seed: int, chain: bool = False) -> Network:
    rng = np.random.default_rng(seed)
    if chain:
        parent = np.arange(n) - 1
    else:
        parent = np.concatenate([[-1], (rng.random(n - 1) * np.arange(1, n)).astype(int)])
    z = rng.random(n) * 2e-3 + 1j * rng.random(n) * 1e-3
    if chain:  # 20,000 segments in series: keep the total path impedance realistic
        z /= 2000.0
    load = rng.random(n) * 60.0 + 1j * rng.random(n) * 30.0
    return make_net(parent, z, 480.0, load_va=load)


@pytest.mark.parametrize("chain", [False, True], ids=["random-tree", "deep-chain"])
def test_twenty_thousand_nodes_converge(chain):
    net = random_network(20_000, seed=7, chain=chain)
    res = load_flow(net)
    assert res.converged
    assert res.mismatch_pu <= 1e-8
    assert np.all(np.isfinite(res.v_bus_pu))
    assert 0.0 < np.max(res.drop_pct) < 20.0
