"""Conductor physics against published formulas, tables and worked numbers.

Each check value names its source; [C] corroborated, [M] from memory (see
/work/shared/reference/README.md for the status words).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from sizer import catalogue as cat
from sizer import conductors as k
from sizer.errors import ScenarioError

M_PER_KFT = 304.8


@pytest.fixture(scope="module")
def awg() -> cat.Catalogue:
    return cat.load_catalogue("awg")


@pytest.fixture(scope="module")
def metric() -> cat.Catalogue:
    return cat.load_catalogue("metric")


# --- area and DC resistance ------------------------------------------------------------


@pytest.mark.parametrize(("gauge", "cmil"), [(14, 4110), (10, 10380), (0, 105600), (-3, 211600)])
def test_awg_area_formula(gauge: int, cmil: float) -> None:
    # NEC Chapter 9 Table 8 areas, 4 significant figures [C]
    assert float(k.awg_area_mm2(gauge)) / k.MM2_PER_CMIL == pytest.approx(cmil, rel=1e-3)


def test_r_dc_at_20c_is_r20_and_at_75c_matches_hand_value() -> None:
    assert float(k.r_dc_ohm_per_m(1e-3, 0.00393, 20.0)) == 1e-3
    # 1 + 0.00393 x 55 = 1.21615
    assert float(k.r_dc_ohm_per_m(1e-3, 0.00393, 75.0)) == pytest.approx(1.21615e-3, rel=1e-12)


@given(st.floats(1e-6, 1.0), st.sampled_from([0.00393, 0.00403]),
       st.floats(-40.0, 250.0), st.floats(0.1, 100.0))
def test_resistance_rises_with_temperature(r20: float, alpha: float, t: float,
                                           dt: float) -> None:
    assert k.r_dc_ohm_per_m(r20, alpha, t + dt) > k.r_dc_ohm_per_m(r20, alpha, t)


def test_r_dc_broadcasts() -> None:
    r = k.r_dc_ohm_per_m(np.array([1.0, 2.0])[:, None], 0.00393, np.array([20.0, 75.0, 90.0]))
    assert r.shape == (2, 3)


# --- AC resistance (IEC 60287-1-1 §2.1) ------------------------------------------------


def test_ac_factor_hand_value_1000_kcmil() -> None:
    # 1000 kcmil Cu at 75 degC, 60 Hz, in conduit (awg.csv, installations.toml):
    # R' = 0.034706 ohm/km x 1.21615 = 4.2208e-5 ohm/m
    # xs² = 8π·60·1e-7 / 4.2208e-5 = 3.5727; xs⁴ = 12.764; ys = 12.764/(192 + 10.211) = 0.06312
    # dc = 29.269 mm, s = 1.7 x 33.28 = 56.576 mm, (dc/s)² = 0.26764
    # yp = 0.06312 x 0.26764 x (0.312 x 0.26764 + 1.18/(0.06312 + 0.27)) = 0.06125
    # R_ac/R_dc = 1 + 0.06312 + 0.06125 = 1.12437
    f = k.ac_resistance_factor(4.2208e-5, 29.269e-3, 1.7 * 33.28e-3, 60.0)
    assert float(f) == pytest.approx(1.12437, abs=2e-4)


def test_ac_factor_1000_kcmil_in_conduit_as_nec_table9_implies(awg: cat.Catalogue) -> None:
    # NEC Chapter 9 Table 9: 1000 kcmil Cu in PVC conduit, AC 0.015 ohm/kft against DC
    # 0.0129 (Table 8) -> about 1.1-1.2 (Table 9 value from memory [M], ratio range from the brief)
    i = awg.index("1000 kcmil")
    r_ac, _ = k.impedance_ohm_per_m(awg, "Cu", i, 75.0, "conduit", 60.0)
    r_dc = k.r_dc_ohm_per_m(awg.r20_cu_ohm_per_m[i], 0.00393, 75.0)
    assert 1.1 <= float(r_ac / r_dc) <= 1.2


def test_ac_factor_small_sizes_near_one(awg: cat.Catalogue, metric: cat.Catalogue) -> None:
    # NEC Chapter 9 Table 9 lists AC = DC resistance up to about 4 AWG [M]
    for c, last, f_hz in ((awg, "4 AWG", 60.0), (metric, "25 mm2", 50.0)):
        i = np.arange(c.index(last) + 1)
        r_ac, _ = k.impedance_ohm_per_m(c, "Cu", i, 75.0, "tray", f_hz)
        r_dc = k.r_dc_ohm_per_m(c.r20_cu_ohm_per_m[i], 0.00393, 75.0)
        assert np.all(r_ac / r_dc < 1.001)
        assert np.all(r_ac / r_dc >= 1.0)


def test_skin_factor_ranges_join_up() -> None:
    # IEC 60287-1-1 §2.1.2 gives ys in three ranges of xs (ranges above 2.8 from memory [M]);
    # they must meet at xs = 2.8 and 3.8 within 1 %
    for x in (2.8, 3.8):
        lo = k._skin_y(np.array(x - 1e-9))
        hi = k._skin_y(np.array(x + 1e-9))
        assert float(hi) == pytest.approx(float(lo), rel=0.01)


@given(st.floats(1e-5, 1e-2), st.floats(10.0, 400.0))
def test_ac_factor_grows_with_frequency_and_proximity(r: float, f_hz: float) -> None:
    d, s = 0.02, 0.03
    base = k.ac_resistance_factor(r, d, s, f_hz)
    assert base >= 1.0
    assert k.ac_resistance_factor(r, d, s, 1.5 * f_hz) >= base
    assert k.ac_resistance_factor(r, d, 2 * s, f_hz) <= base


def test_spacing_below_diameter_is_refused() -> None:
    with pytest.raises(ScenarioError, match="spacing"):
        k.ac_resistance_factor(1e-4, 0.02, 0.01, 60.0)
    with pytest.raises(ScenarioError, match="spacing"):
        k.reactance_ohm_per_m(0.02, 0.01, 60.0, 7)


# --- reactance -------------------------------------------------------------------------


def test_reactance_hand_value() -> None:
    # solid conductor d = 10 mm at s = 20 mm, 50 Hz:
    # L = 0.05 + 0.2 ln(2 x 20/10) = 0.05 + 0.27726 = 0.32726 mH/km
    # X = 2π x 50 x 0.32726e-3 = 0.10281 ohm/km
    x = k.reactance_ohm_per_m(0.010, 0.020, 50.0, 1)
    assert float(x) * 1e3 == pytest.approx(0.10281, rel=1e-4)


def test_strand_k_table() -> None:
    # K = 0.2 ln(r/GMR), mH/km: solid 0.0500, 7 wires 0.0642, 19 0.0554, 37 0.0528,
    # 61 and more 0.0514 (cable-engineering table, from memory [M]; solid and 61+ in the
    # reference README [M])
    got = k.strand_k_mh_per_km(np.array([1, 7, 19, 37, 61, 91, 127]))
    np.testing.assert_allclose(got, [0.05, 0.0642, 0.0554, 0.0528, 0.0514, 0.0514, 0.0514])
    # the solid value is exact: 0.2 x 1/4 (GMR of a solid round wire r e^(-1/4))
    assert float(k.strand_k_mh_per_km(1)) == pytest.approx(0.2 * 0.25)


def test_conduit_reactance_in_published_range(awg: cat.Catalogue) -> None:
    # three single conductors in conduit at 60 Hz: 0.12-0.19 ohm/km
    # (NEC Chapter 9 Table 9 range, reference README [C]); every size 14 AWG-1000 kcmil
    i = np.arange(len(awg.sizes))
    _, x = k.impedance_ohm_per_m(awg, "Cu", i, 75.0, "conduit", 60.0)
    assert np.all((x * 1e3 >= 0.12) & (x * 1e3 <= 0.19))
    # steel conduit: about 25 % higher (reference README [C])
    _, x_steel = k.impedance_ohm_per_m(awg, "Cu", i, 75.0, "steel_conduit", 60.0)
    np.testing.assert_allclose(x_steel, 1.25 * x)


@pytest.mark.parametrize(("size", "x_ohm_per_kft"), [
    # NEC Chapter 9 Table 9, XL for PVC and aluminium conduits, ohm/kft (from memory [M])
    ("1/0 AWG", 0.044), ("4/0 AWG", 0.041), ("250 kcmil", 0.041), ("500 kcmil", 0.039),
    ("750 kcmil", 0.038), ("1000 kcmil", 0.037),
])
def test_conduit_reactance_near_nec_table9(awg: cat.Catalogue, size: str,
                                           x_ohm_per_kft: float) -> None:
    # 1/0 AWG and larger, where X matters for drop, within 10 %; smaller sizes come out up to
    # about 20 % under Table 9, where R is 3-20 times X and the drop hardly sees it
    _, x = k.impedance_ohm_per_m(awg, "Cu", awg.index(size), 75.0, "conduit", 60.0)
    assert float(x) * M_PER_KFT == pytest.approx(x_ohm_per_kft, rel=0.10)


def test_reactance_grows_with_spacing_falls_with_diameter() -> None:
    assert k.reactance_ohm_per_m(0.01, 0.03, 60, 7) > k.reactance_ohm_per_m(0.01, 0.02, 60, 7)
    assert k.reactance_ohm_per_m(0.015, 0.03, 60, 7) < k.reactance_ohm_per_m(0.01, 0.03, 60, 7)
    # X is proportional to frequency
    assert float(k.reactance_ohm_per_m(0.01, 0.02, 60, 19)) == pytest.approx(
        1.2 * float(k.reactance_ohm_per_m(0.01, 0.02, 50, 19)))


# --- impedance of catalogue conductors -------------------------------------------------


def test_impedance_vectorised_over_many_rows(awg: cat.Catalogue) -> None:
    rng = np.random.default_rng(1)
    n = 200_000
    idx = rng.integers(0, len(awg.sizes), n)
    temp = rng.uniform(30.0, 90.0, n)
    r, x = k.impedance_ohm_per_m(awg, "Al", idx, temp, "tray", 60.0)
    assert r.shape == x.shape == (n,)
    not_made = idx == awg.index("14 AWG")
    assert np.isnan(r[not_made]).all() and np.isfinite(r[~not_made]).all()
    # a row equals the same size computed alone
    j = int(np.flatnonzero(~not_made)[0])
    r1, x1 = k.impedance_ohm_per_m("awg", "Al", idx[j], temp[j], cat.installation("tray"), 60.0)
    assert float(r1) == pytest.approx(r[j]) and float(x1) == pytest.approx(x[j])


def test_impedance_rises_with_temperature(metric: cat.Catalogue) -> None:
    i = np.arange(len(metric.sizes))
    r70, _ = k.impedance_ohm_per_m(metric, "Cu", i, 70.0, "conduit", 50.0)
    r90, _ = k.impedance_ohm_per_m(metric, "Cu", i, 90.0, "conduit", 50.0)
    assert np.all(r90 > r70)


# --- operating temperature -------------------------------------------------------------


def test_operating_temperature_formula() -> None:
    # θ = θa + (θmax − θa)(I/Iz)²: 30 + (90 − 30) x 0.5² = 45 degC
    got = k.operating_temperature_c(30.0, 90.0, np.array([0.0, 50.0, 100.0, 150.0]), 100.0)
    np.testing.assert_allclose(got, [30.0, 45.0, 90.0, 90.0])  # capped at θmax on overload


@given(st.floats(-20.0, 50.0), st.floats(0.0, 1000.0), st.floats(1.0, 1000.0))
def test_operating_temperature_between_ambient_and_max(ta: float, i: float, iz: float) -> None:
    t = float(k.operating_temperature_c(ta, 90.0, i, iz))
    assert ta <= t <= 90.0


# --- short-circuit withstand -----------------------------------------------------------


def test_icea_4_0_cu_90_to_250_one_second() -> None:
    # ICEA P-32-382 [C]: (I/A)² t = 0.0297 log10((T2 + 234)/(T1 + 234)), A = 211 600 cmil
    # log10(484/324) = 0.174301; x 0.0297 = 0.0051767; sqrt = 0.071949; x 211 600 = 15 224 A
    area_mm2 = 211_600 * k.MM2_PER_CMIL
    assert float(k.icea_withstand_a(area_mm2, 1.0, "Cu", 90.0, 250.0)) == pytest.approx(
        15_224, rel=1e-3)


@pytest.mark.parametrize(("metal", "initial", "final", "k_value"), [
    # IEC 60364-4-43 Table 43A k (S >= I√t / k) [C]
    ("Cu", 70.0, 160.0, 115.0),  # PVC, copper
    ("Cu", 90.0, 250.0, 143.0),  # XLPE/EPR, copper
    ("Al", 70.0, 160.0, 76.0),   # PVC, aluminium
    ("Al", 90.0, 250.0, 94.0),   # XLPE/EPR, aluminium
])
def test_iec60949_reproduces_iec60364_k(metal: str, initial: float, final: float,
                                        k_value: float) -> None:
    # k = K sqrt(ln((θf + β)/(θi + β))): Cu PVC 226 x sqrt(ln(394.5/304.5)) = 226 x 0.50890 = 115.0;
    # Cu XLPE 226 x sqrt(ln(484.5/324.5)) = 226 x 0.63311 = 143.1
    got = float(k.adiabatic_withstand_a(1.0, 1.0, metal, initial, final))
    assert got == pytest.approx(k_value, rel=0.01)


@pytest.mark.parametrize("metal", ["Cu", "Al"])
def test_iec_and_icea_agree(awg: cat.Catalogue, metal: str) -> None:
    # two adiabatic forms of the same physics: within 3 % (Cu 0.8 %, Al 1.8 % measured)
    area = awg.area_mm2[1:]
    iec = k.adiabatic_withstand_a(area, 0.5, metal, 75.0, 150.0)
    icea = k.icea_withstand_a(area, 0.5, metal, 75.0, 150.0)
    np.testing.assert_allclose(iec, icea, rtol=0.03)


@given(st.floats(1.0, 1000.0), st.floats(0.01, 5.0))
def test_withstand_scales_with_area_and_root_time(area: float, t: float) -> None:
    base = float(k.adiabatic_withstand_a(area, t, "Cu", 90.0, 250.0))
    assert float(k.adiabatic_withstand_a(2 * area, t, "Cu", 90.0, 250.0)) == pytest.approx(2 * base)
    assert float(k.icea_withstand_a(area, 4 * t, "Al", 75.0, 150.0)) == pytest.approx(
        float(k.icea_withstand_a(area, t, "Al", 75.0, 150.0)) / 2)
    assert math.isfinite(base)


def test_withstand_refuses_bad_input() -> None:
    with pytest.raises(ScenarioError, match="final"):
        k.adiabatic_withstand_a(100.0, 1.0, "Cu", 250.0, 90.0)
    with pytest.raises(ScenarioError, match="duration"):
        k.icea_withstand_a(100.0, 0.0, "Cu", 90.0, 250.0)
