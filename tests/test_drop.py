"""Voltage drop, reach and transformer regulation: hand values, properties, errors."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import assume, given
from hypothesis import strategies as st

from sizer import catalogue as cat
from sizer import conductors as k
from sizer import drop
from sizer.errors import ScenarioError

currents = st.floats(0.1, 5000.0)
lengths = st.floats(0.1, 2000.0)
r_per_m = st.floats(1e-6, 2e-2)
x_per_m = st.floats(0.0, 3e-4)
pfs = st.floats(0.05, 1.0)
phase_counts = st.sampled_from([1, 3])
voltages = st.sampled_from([120.0, 208.0, 230.0, 240.0, 400.0, 480.0, 600.0])


# --- hand values (DESIGN.md / reference README formulas [C]) ---------------------------


def test_three_phase_hand_value() -> None:
    # √3 x 100 A x 100 m x (0.2e-3 x 0.8 + 0.1e-3 x 0.6) ohm/m = 1.7320508 x 1e4 x 2.2e-4
    # = 3.8105 V; on 400 V: 0.95263 %
    v = drop.drop_v(100.0, 100.0, 0.2e-3, 0.1e-3, 0.8, 3)
    assert float(v) == pytest.approx(3.8105117, rel=1e-7)
    assert float(drop.drop_pct(100.0, 100.0, 0.2e-3, 0.1e-3, 0.8, 3, 400.0)) == pytest.approx(
        0.95262794, rel=1e-7)


def test_single_phase_hand_value_and_sets() -> None:
    # 2 x 100 A x 100 m x 2.2e-4 ohm/m = 4.4 V; two parallel sets halve it: 2.2 V
    assert float(drop.drop_v(100.0, 100.0, 0.2e-3, 0.1e-3, 0.8, 1)) == pytest.approx(4.4)
    assert float(drop.drop_v(100.0, 100.0, 0.2e-3, 0.1e-3, 0.8, 1, sets=2)) == pytest.approx(2.2)


def test_exact_drop_hand_value() -> None:
    # 1-phase 230 V, 100 A, 100 m, R 0.2e-3, X 0.1e-3 ohm/m, pf 0.8 lagging:
    # k I L = 2 x 100 x 100 = 2e4; a = 2e4 x 2.2e-4 = 4.4 V;
    # b = 2e4 x (0.1e-3 x 0.8 − 0.2e-3 x 0.6) = −0.8 V
    # |230 + 4.4 − 0.8j| = sqrt(234.4² + 0.64) = 234.401365; − 230 = 4.401365 V
    got = drop.exact_drop_v(100.0, 100.0, 0.2e-3, 0.1e-3, 0.8, 1, 230.0)
    assert float(got) == pytest.approx(4.401365, rel=1e-6)


def test_vectorised_over_a_million_rows() -> None:
    n = 1_000_000
    rng = np.random.default_rng(7)
    i = rng.uniform(1, 500, n)
    got = drop.drop_pct(i, 50.0, rng.uniform(1e-5, 1e-2, n), 1.3e-4, 0.9,
                        np.where(i > 100, 3, 1), 480.0, sets=rng.integers(1, 5, n))
    assert got.shape == (n,) and np.isfinite(got).all()


# --- properties ------------------------------------------------------------------------


@given(currents, lengths, r_per_m, x_per_m, pfs, phase_counts, voltages, st.integers(1, 6))
def test_approximation_never_overestimates_exact(i: float, length: float, r: float, x: float,
                                                 pf: float, phases: int, v: float,
                                                 sets: int) -> None:
    approx = float(drop.drop_v(i, length, r, x, pf, phases, sets))
    exact = float(drop.exact_drop_v(i, length, r, x, pf, phases, v, sets))
    assert approx <= exact * (1 + 1e-12) + 1e-12


@given(currents, lengths, r_per_m, x_per_m, pfs, phase_counts, st.floats(1.01, 10.0))
def test_drop_grows_with_length_and_current(i: float, length: float, r: float, x: float,
                                            pf: float, phases: int, more: float) -> None:
    base = drop.drop_v(i, length, r, x, pf, phases)
    assert drop.drop_v(i, more * length, r, x, pf, phases) > base
    assert drop.drop_v(more * i, length, r, x, pf, phases) > base


@given(st.sampled_from(["awg", "metric"]), st.sampled_from(["Cu", "Al"]),
       st.sampled_from(["conduit", "steel_conduit", "tray", "buried", "free_air"]),
       st.floats(0.1, 1.0), st.floats(20.0, 90.0))
def test_drop_falls_with_size(name: str, metal: str, where: str, pf: float,
                              temp: float) -> None:
    # catalogue impedances (R_ac and X at one temperature) — larger size, smaller drop
    c = cat.load_catalogue(name)
    idx = np.flatnonzero(c.made_in(metal))
    f_hz = 60.0 if name == "awg" else 50.0
    r, x = k.impedance_ohm_per_m(c, metal, idx, temp, where, f_hz)
    d = drop.drop_v(100.0, 50.0, r, x, pf, 3)
    assert np.all(np.diff(d) < 0)


@given(currents, r_per_m, x_per_m, pfs, phase_counts, voltages, st.floats(0.5, 8.0),
       st.floats(1.1, 20.0))
def test_reach_times_current_is_constant_at_fixed_temperature(i: float, r: float, x: float,
                                                              pf: float, phases: int, v: float,
                                                              limit: float,
                                                              more: float) -> None:
    a = drop.reach_m(i, r, x, pf, phases, v, limit)
    b = drop.reach_m(more * i, r, x, pf, phases, v, limit)
    assert float(a * i) == pytest.approx(float(b * more * i), rel=1e-9)
    # and the reach is the length at which the drop is exactly the limit
    assert float(drop.drop_pct(i, a, r, x, pf, phases, v)) == pytest.approx(limit, rel=1e-9)


def test_reach_hand_value() -> None:
    # 3 % of 480 V = 14.4 V; per metre √3 x 100 x 2.2e-4 = 0.03810512 V/m -> 377.9020 m
    assert float(drop.reach_m(100.0, 0.2e-3, 0.1e-3, 0.8, 3, 480.0, 3.0)) == pytest.approx(
        377.9020, rel=1e-6)
    assert math.isinf(float(drop.reach_m(0.0, 0.2e-3, 0.1e-3, 0.8, 3, 480.0, 3.0)))


def test_lightly_loaded_conductor_reaches_further() -> None:
    # 4 AWG Cu, 90 degC insulation, ampacity 95 A (common practice), 30 degC ambient, 50 A:
    # θ = 30 + 60 x (50/95)² = 46.6 degC, so R and the drop are lower than at 90 degC
    c = cat.load_catalogue("awg")
    i = c.index("4 AWG")
    theta = k.operating_temperature_c(30.0, 90.0, 50.0, 95.0)
    assert float(theta) == pytest.approx(46.62, abs=0.01)
    reach = []
    for t in (theta, 90.0):
        r, x = k.impedance_ohm_per_m(c, "Cu", i, t, "conduit", 60.0)
        reach.append(float(drop.reach_m(50.0, r, x, 0.9, 1, 240.0, 3.0)))
    assert reach[0] > 1.1 * reach[1]


@given(st.floats(20.0, 150.0), st.floats(1.0, 100.0))
def test_hotter_conductor_drops_more(temp: float, dt: float) -> None:
    c = cat.load_catalogue("metric")
    i = np.arange(len(c.sizes))
    r1, x1 = k.impedance_ohm_per_m(c, "Cu", i, temp, "tray", 50.0)
    r2, x2 = k.impedance_ohm_per_m(c, "Cu", i, temp + dt, "tray", 50.0)
    assert np.all(r2 > r1)
    assert np.all(drop.drop_v(100.0, 30.0, r2, x2, 0.85, 3) > drop.drop_v(100.0, 30.0, r1, x1,
                                                                         0.85, 3))


# --- transformer regulation ------------------------------------------------------------


def test_transformer_regulation_hand_value() -> None:
    # Z = 5.2 %, X/R = 4, full load, pf 0.8 lagging:
    # R = 5.2/sqrt(17) = 1.26118 %, X = 5.04473 %
    # R cos + X sin = 1.00895 + 3.02684 = 4.03578
    # (X cos − R sin)²/200 = (4.03578 − 0.75671)²/200 = 3.27908²/200 = 0.05376
    # ε = 4.08955 %  (IEC 60076-1 formula, reference README [C])
    got = drop.transformer_regulation_pct(1.0, 5.2, 4.0, 0.8)
    assert float(got) == pytest.approx(4.08955, abs=1e-4)


def test_transformer_regulation_at_unity_pf_and_no_load() -> None:
    # pf 1: ε = R + X²/200; R = 4/sqrt(10) = 1.26491, X = 3.79473: 1.26491 + 0.07200 = 1.33691
    assert float(drop.transformer_regulation_pct(1.0, 4.0, 3.0, 1.0)) == pytest.approx(
        1.33691, abs=1e-4)
    assert float(drop.transformer_regulation_pct(0.0, 4.0, 3.0, 0.8)) == 0.0


@given(st.floats(0.0, 1.5), st.floats(1.0, 10.0), st.floats(0.5, 15.0), st.floats(0.1, 1.0))
def test_transformer_regulation_matches_the_exact_phasor(n: float, z: float, x_r: float,
                                                         pf: float) -> None:
    # the formula is the series expansion of the exact drop with the primary at 100 %:
    # Vr = sqrt(100² − b²) − a, a = nR cos + nX sin, b = nX cos − nR sin;
    # 100 − sqrt(100² − b²) = b²/200 + b⁴/(8·100³) + ..., so the formula is low by about
    # b⁴/8e6 (at most 0.006 % point at 150 % load on a 10 % transformer)
    r_pct = n * z / math.hypot(1, x_r)
    x_pct = r_pct * x_r
    cos, sin = pf, math.sqrt(1 - pf * pf)
    a = r_pct * cos + x_pct * sin
    b = x_pct * cos - r_pct * sin
    exact = 100.0 - (math.sqrt(100.0**2 - b * b) - a)
    got = float(drop.transformer_regulation_pct(n, z, x_r, pf))
    assert -1e-12 <= exact - got <= 1.1 * b**4 / 8e6 + 1e-12


@given(st.floats(0.1, 1.0), st.floats(1.0, 10.0), st.floats(0.5, 15.0), st.floats(0.1, 1.0))
def test_transformer_regulation_grows_with_load(n: float, z: float, x_r: float,
                                                pf: float) -> None:
    assume(n < 0.99)
    assert drop.transformer_regulation_pct(n + 0.01, z, x_r, pf) > drop.transformer_regulation_pct(
        n, z, x_r, pf)


# --- bad input -------------------------------------------------------------------------


@pytest.mark.parametrize(("kwargs", "match"), [
    ({"phases": 2}, "phases must be 1 or 3"),
    ({"power_factor": 0.0}, "power factor"),
    ({"power_factor": 1.2}, "power factor"),
    ({"sets": 0}, "sets"),
    ({"voltage_v": 0.0}, "voltage"),
])
def test_bad_input_is_a_scenario_error(kwargs: dict[str, float], match: str) -> None:
    args = {"current_a": 10.0, "length_m": 10.0, "r_ohm_per_m": 1e-3, "x_ohm_per_m": 1e-4,
            "power_factor": 0.9, "phases": 3, "voltage_v": 400.0, "sets": 1} | kwargs
    with pytest.raises(ScenarioError, match=match):
        drop.drop_pct(**args)
    with pytest.raises(ScenarioError, match=match):
        drop.exact_drop_v(**args)
