"""Economics: IEC 60287-3-2 loss cost factors, loss load factor, payback, NPV, economic ranges.

The formulas are IEC 60287-3-2:2012 clause 4 (total cost, F, Q, r) and clause 5.1
(economic current range), cited from memory (status [M] in shared/reference/README.md).
Every expected value below is worked by hand in the comment beside it; the standard
writes the rates in percent, sizer takes fractions (7 % -> 0.07).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from sizer.economics import (
    EconomicParams,
    annual_cost_per_w,
    annual_loss_kwh,
    demand_charge_per_w_year,
    economic_current_bounds_a,
    economic_size_index,
    growth_ratio,
    loss_load_factor,
    loss_pv_per_w,
    npv,
    q_factor,
    simple_payback_years,
)
from sizer.errors import ScenarioError

rates = st.floats(min_value=-0.05, max_value=0.15, allow_nan=False)
lifetimes = st.integers(min_value=1, max_value=60)


# --- r, Q, F: IEC 60287-3-2:2012 clause 4 (from memory) ----------------------------------


@pytest.mark.parametrize(("a", "b", "i", "expected"), [
    # r = (1 + a/100)²(1 + b/100)/(1 + i/100), IEC 60287-3-2:2012 cl. 4 (from memory):
    # a = 1 %, b = 2 %, i = 5 %: 1.01² = 1.0201; × 1.02 = 1.040502; / 1.05 = 0.990954285714
    (0.01, 0.02, 0.05, 0.990954285714),
    # a = 0, b = 2 %, i = 7 %: 1.02 / 1.07 = 0.953271028037
    (0.0, 0.02, 0.07, 0.953271028037),
    # a = 0, b = i = 5 %: r = 1 exactly
    (0.0, 0.05, 0.05, 1.0),
    # load growth enters squared (losses ∝ I²): a = 10 %, b = i = 0: 1.1² = 1.21
    (0.10, 0.0, 0.0, 1.21),
])
def test_growth_ratio_hand_values(a: float, b: float, i: float, expected: float) -> None:
    assert growth_ratio(a, b, i) == pytest.approx(expected, rel=1e-11)


@pytest.mark.parametrize(("r", "n", "expected"), [
    # Q = (1 − r^N)/(1 − r), IEC 60287-3-2:2012 cl. 4 (from memory); Q = Σ r^(n−1)
    (0.5, 3, 1.75),           # (1 − 0.125)/0.5 = 1.75 = 1 + 0.5 + 0.25
    (1.1, 2, 2.1),            # (1 − 1.21)/(−0.1) = 2.1 = 1 + 1.1
    (0.990954285714, 2, 1.990954285714),  # 1 + r
    (0.8, 1, 1.0),            # one year: only the first term
    (1.0, 25, 25.0),          # r = 1: Q = N
])
def test_q_factor_hand_values(r: float, n: int, expected: float) -> None:
    assert q_factor(r, n) == pytest.approx(expected, rel=1e-11)


def test_q_factor_is_continuous_at_r_equal_one() -> None:
    # The closed form is 0/0 at r = 1; Q → N from either side (limit of Σ r^(n−1)).
    for r in (1.0 - 1e-12, 1.0, 1.0 + 1e-12, 1.0 - 1e-7, 1.0 + 1e-7):
        assert q_factor(r, 30) == pytest.approx(30.0, rel=1e-5)
    # Vectorised, with r = 1 among other values, and no warnings (pytest: warnings are errors).
    q = q_factor(np.array([0.5, 1.0, 1.1]), 3)
    np.testing.assert_allclose(q, [1.75, 3.0, 1 + 1.1 + 1.21], rtol=1e-12)


@given(r=st.floats(min_value=0.5, max_value=1.5), n=lifetimes)
def test_q_factor_equals_its_series(r: float, n: int) -> None:
    series = math.fsum(r ** (k - 1) for k in range(1, n + 1))
    assert q_factor(r, n) == pytest.approx(series, rel=1e-9)


def test_f_factor_hand_example() -> None:
    # Energy 0.12 USD/kWh -> P = 0.00012 USD/W·h; demand 14 USD per kW per month ->
    # D = 14 × 12 / 1000 = 0.168 USD/W·year; ϑ = 0.4 over 8760 h -> T = 3504 h.
    # T·P + D = 3504 × 0.00012 + 0.168 = 0.42048 + 0.168 = 0.58848 USD per W of peak loss.
    # a = 1 %, b = 2 %, i = 5 %, N = 2: r = 0.990954285714 (above), Q = 1 + r = 1.990954285714
    # F = (T·P + D)·Q/(1 + i) = 0.58848 × 1.990954285714 / 1.05 = 1.115844550531
    # (IEC 60287-3-2:2012 cl. 4, from memory, with Np·Nc = 1)
    assert demand_charge_per_w_year(14.0) == pytest.approx(0.168, rel=1e-12)
    assert annual_cost_per_w(0.00012, 0.168, 0.4, 8760.0) == pytest.approx(0.58848, rel=1e-12)
    f = loss_pv_per_w(0.00012, 0.168, 0.4, 8760.0, 0.01, 0.02, 0.05, 2)
    assert f == pytest.approx(1.115844550531, rel=1e-10)


def test_f_factor_at_r_equal_one() -> None:
    # b = i = 5 %, a = 0 -> r = 1, Q = N = 2: F = 0.58848 × 2 / 1.05 = 1.120914285714
    f = loss_pv_per_w(0.00012, 0.168, 0.4, 8760.0, 0.0, 0.05, 0.05, 2)
    assert f == pytest.approx(1.120914285714, rel=1e-10)


def test_f_factor_design_example() -> None:
    # The DESIGN.md example tariff: 0.12 USD/kWh, 14 USD/kW-month, escalation 2 %,
    # discount 7 %, no load growth, 25 years, load factor 0.55.
    # ϑ = 0.3 × 0.55 + 0.7 × 0.3025 = 0.37675; T = 8760 × 0.37675 = 3300.33 h
    # T·P + D = 3300.33 × 0.00012 + 0.168 = 0.3960396 + 0.168 = 0.5640396
    # r = 1.02/1.07 = 0.9532710; r^25 = exp(25 ln r) = 0.3022803; Q = 0.6977197/0.0467290 = 14.93120
    # F = 0.5640396 × 14.93120 / 1.07 = 7.8708 USD per W of peak loss
    params = EconomicParams(energy_price_per_wh=0.00012, demand_per_w_year=0.168,
                            load_factor=0.55, escalation=0.02, discount=0.07, years=25)
    assert params.theta == pytest.approx(0.37675, rel=1e-12)
    assert params.equivalent_hours == pytest.approx(3300.33, rel=1e-9)
    assert params.growth_ratio == pytest.approx(0.9532710, rel=1e-6)
    assert params.q == pytest.approx(14.93120, rel=1e-6)
    assert params.loss_pv_per_w == pytest.approx(7.8708, rel=1e-4)


@given(p=st.floats(min_value=0.0, max_value=0.001), d=st.floats(min_value=0.0, max_value=1.0),
       theta=st.floats(min_value=0.01, max_value=1.0), a=rates, b=rates, i=rates, n=lifetimes)
def test_f_factor_equals_discounted_sum_of_yearly_costs(
    p: float, d: float, theta: float, a: float, b: float, i: float, n: int
) -> None:
    # The definition behind F: year k costs (T·P + D)(1 + a)^(2(k−1))(1 + b)^(k−1),
    # paid at the end of year k, discounted by (1 + i)^k.
    first = 8760.0 * theta * p + d
    total = math.fsum(first * (1 + a) ** (2 * (k - 1)) * (1 + b) ** (k - 1) / (1 + i) ** k
                      for k in range(1, n + 1))
    f = loss_pv_per_w(p, d, theta, 8760.0, a, b, i, n)
    assert f == pytest.approx(total, rel=1e-9, abs=1e-12)


# --- loss load factor (Buller–Woodrow) and loss energy --------------------------------


@pytest.mark.parametrize(("lf", "expected"), [
    (0.55, 0.37675),   # 0.3 × 0.55 + 0.7 × 0.55² = 0.165 + 0.21175 (Buller–Woodrow, from memory)
    (0.5, 0.325),      # 0.15 + 0.7 × 0.25 = 0.15 + 0.175
    (1.0, 1.0),        # a flat load: loss at peak all the time
    (0.0, 0.0),
])
def test_loss_load_factor_hand_values(lf: float, expected: float) -> None:
    assert loss_load_factor(lf) == pytest.approx(expected, rel=1e-12, abs=1e-15)


@given(st.floats(min_value=0.0, max_value=1.0))
def test_loss_load_factor_within_physical_bounds(lf: float) -> None:
    # Any load curve l(t) in [0, 1]: mean(l)² ≤ mean(l²) ≤ mean(l), i.e. LF² ≤ ϑ ≤ LF.
    theta = loss_load_factor(lf)
    assert lf * lf <= theta <= lf


def test_loss_load_factor_vectorised_and_checked() -> None:
    np.testing.assert_allclose(loss_load_factor(np.array([0.5, 1.0])), [0.325, 1.0])
    with pytest.raises(ScenarioError, match="load_factor"):
        loss_load_factor(1.2)
    with pytest.raises(ScenarioError):
        loss_load_factor(float("nan"))


def test_annual_loss_energy() -> None:
    # 1 kW peak, ϑ = 0.37675, 8760 h: 1000 × 0.37675 × 8760 / 1000 = 3300.33 kWh
    assert annual_loss_kwh(1000.0, 0.37675, 8760.0) == pytest.approx(3300.33, rel=1e-12)
    np.testing.assert_allclose(annual_loss_kwh(np.array([0.0, 2000.0]), 0.5, 4000.0),
                               [0.0, 4000.0])


# --- payback and NPV ------------------------------------------------------------------


def test_simple_payback() -> None:
    assert simple_payback_years(1000.0, 200.0) == pytest.approx(5.0)   # 1000 / 200
    assert simple_payback_years(1000.0, 0.0) == math.inf                 # never pays back
    assert simple_payback_years(1000.0, -5.0) == math.inf
    assert simple_payback_years(0.0, 50.0) == 0.0                        # nothing to repay
    np.testing.assert_allclose(
        simple_payback_years(np.array([1000.0, 300.0, 10.0]), np.array([200.0, 0.0, 20.0])),
        [5.0, np.inf, 0.5])


def test_npv_hand_case() -> None:
    # Added 1000, saving 200 a year for 3 years at 10 % discount, no escalation:
    # 200/1.1 + 200/1.21 + 200/1.331 = 181.818 + 165.289 + 150.263 = 497.370 -> NPV −502.630
    assert npv(1000.0, 200.0, 0.0, 0.10, 3) == pytest.approx(-502.6296, abs=1e-3)
    # With the saving escalating 5 % a year: r = 1.05/1.1 = 0.954545;
    # Q = 1 + r + r² = 2.865702; PV = 200/1.1 × Q = 181.818 × 2.865702 = 521.037 -> −478.963
    assert npv(1000.0, 200.0, 0.05, 0.10, 3) == pytest.approx(-478.9632, abs=1e-3)
    # Zero discount and escalation: plain sum, 200 × 6 − 1000 = 200
    assert npv(1000.0, 200.0, 0.0, 0.0, 6) == pytest.approx(200.0, rel=1e-12)


def test_npv_consistent_with_f_factor() -> None:
    # An upsizing that cuts the peak loss by s W saves s·(T·P + D) in year 1 and then grows
    # as the loss cost does, so its NPV is −added + s·F (same a, b, i, N).
    params = EconomicParams(energy_price_per_wh=0.00012, demand_per_w_year=0.168,
                            load_factor=0.55, load_growth=0.01, escalation=0.02,
                            discount=0.07, years=25)
    s_w, added = 350.0, 1800.0
    expected = -added + s_w * params.loss_pv_per_w
    assert params.upsizing_npv(added, s_w) == pytest.approx(expected, rel=1e-12)
    direct = npv(added, s_w * params.annual_cost_per_w, 0.02, 0.07, 25, load_growth=0.01)
    assert direct == pytest.approx(expected, rel=1e-12)
    assert params.annual_loss_kwh(s_w) == pytest.approx(s_w * 8760 * params.theta / 1000)


# --- IEC 60287-3-2 clause 5.1: economic current ranges -----------------------------------

# Three invented sizes, per metre of one conductor: installed cost CI and resistance R.
CI = np.array([10.0, 14.0, 20.0])
R = np.array([1.0e-3, 0.6e-3, 0.4e-3])


def test_economic_current_bounds_hand_example() -> None:
    # IEC 60287-3-2:2012 cl. 5.1 (from memory): the range of size k ends where its total
    # cost CI + I²·R·F meets that of size k + 1:  I = sqrt(ΔCI / (F·ΔR)).  With F = 1 per W:
    # sizes 0|1: sqrt((14 − 10)/(1 × 0.4e-3)) = sqrt(10 000) = 100 A
    # sizes 1|2: sqrt((20 − 14)/(1 × 0.2e-3)) = sqrt(30 000) = 173.205 A
    lower, upper = economic_current_bounds_a(CI, R, 1.0)
    np.testing.assert_allclose(lower, [0.0, 100.0, 173.2050808])
    np.testing.assert_allclose(upper, [100.0, 173.2050808, np.inf])
    # At 100 A both totals are 20: 10 + 100² × 1e-3 = 20 = 14 + 100² × 0.6e-3
    # Raising F to 4 halves every boundary (I ∝ 1/sqrt(F)).
    np.testing.assert_allclose(economic_current_bounds_a(CI, R, 4.0)[1][:2], [50.0, 86.6025404])


def test_economic_size_index_follows_the_ranges() -> None:
    currents = np.array([0.0, 99.0, 101.0, 173.0, 174.0, 1000.0])
    np.testing.assert_array_equal(economic_size_index(currents, CI, R, 1.0), [0, 0, 1, 1, 2, 2])
    assert economic_size_index(150.0, CI, R, 1.0) == 1
    # A size not sold (NaN) is skipped.
    assert economic_size_index(150.0, np.array([10.0, np.nan, 20.0]), R, 1.0) == 2


@given(st.lists(st.tuples(st.floats(0.5, 50.0), st.floats(0.05, 0.9)), min_size=2, max_size=8),
       st.floats(0.1, 20.0), st.floats(0.0, 1000.0))
def test_least_total_cost_lies_in_its_range(steps: list[tuple[float, float]], f: float,
                                            current: float) -> None:
    # Build sizes with rising cost and falling resistance; whenever the boundaries ascend
    # (every size has a non-empty range), the least-cost size is the one whose range
    # contains the current.
    ci = np.cumsum([s[0] for s in steps])
    r = 1e-3 * np.cumprod([s[1] for s in steps])
    lower, upper = economic_current_bounds_a(ci, r, f)
    if np.all(np.diff(upper[:-1]) > 1e-9):
        k = economic_size_index(current, ci, r, f)
        total = ci + current**2 * r * f
        assert total[k] == pytest.approx(total.min(), rel=1e-12)
        assert lower[k] - 1e-9 <= current <= upper[k] + 1e-9


def test_economic_current_bounds_refuse_bad_data() -> None:
    with pytest.raises(ScenarioError, match="resistance must fall"):
        economic_current_bounds_a(CI, np.array([1e-3, 1e-3, 0.5e-3]), 1.0)
    with pytest.raises(ScenarioError, match="positive"):
        economic_current_bounds_a(CI, R, 0.0)
    with pytest.raises(ScenarioError):
        economic_current_bounds_a(CI, R[:2], 1.0)


# --- EconomicParams -------------------------------------------------------------------


def test_params_derive_and_keep_loss_load_factor() -> None:
    p = EconomicParams(energy_price_per_wh=1e-4, discount=0.05, years=20, load_factor=0.5)
    assert p.loss_load_factor == pytest.approx(0.325)
    q = EconomicParams(energy_price_per_wh=1e-4, discount=0.05, years=20, load_factor=0.5,
                       loss_load_factor=0.4)
    assert q.loss_load_factor == 0.4
    # Property equals the pure function with the same inputs.
    assert q.loss_pv_per_w == pytest.approx(
        loss_pv_per_w(1e-4, 0.0, 0.4, 8760.0, 0.0, 0.0, 0.05, 20), rel=1e-14)


@pytest.mark.parametrize(("changes", "field"), [
    ({"discount": 7.0}, "discount_rate"),          # a percent passed as a fraction
    ({"escalation": -1.0}, "escalation"),
    ({"years": 0}, "lifetime"),
    ({"energy_price_per_wh": -1e-4}, "energy_price"),
    ({"demand_per_w_year": float("nan")}, "demand_charge"),
    ({"hours_per_year": 9000.0}, "hours"),
    ({"load_factor": None}, "load_factor"),          # neither load factor given
    ({"load_factor": 1.5}, "load_factor"),
    ({"loss_load_factor": 0.1}, "loss_load_factor"),  # below LF² = 0.25: impossible
    ({"loss_load_factor": 0.6}, "loss_load_factor"),  # above LF = 0.5: impossible
])
def test_params_validate_with_scenario_field_names(changes: dict, field: str) -> None:
    base = {"energy_price_per_wh": 1e-4, "discount": 0.05, "years": 20, "load_factor": 0.5}
    with pytest.raises(ScenarioError) as info:
        EconomicParams(**(base | changes))
    assert info.value.field == field


def test_params_are_frozen() -> None:
    p = EconomicParams(energy_price_per_wh=1e-4, discount=0.05, years=20, load_factor=0.5)
    with pytest.raises(AttributeError):
        p.discount = 0.1  # type: ignore[misc]
