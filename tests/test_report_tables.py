"""Report tables: the upsizing arithmetic on a hand-made two-option case, options, schedule."""

from __future__ import annotations

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from sizer.economics import EconomicParams
from sizer.model import Design, SegmentResult, Totals
from sizer.report import tables as tb
from sizer.workflow import Option

# Hand-made economics, chosen so every number below can be checked on paper:
# P = 0.10 USD/kWh = 0.0001 USD/Wh, no demand charge, loss load factor 0.5 given,
# 8760 h a year -> T = 4380 equivalent full-loss hours a year; i = 5 %, no escalation,
# no load growth, N = 10 years.
ECON = EconomicParams(energy_price_per_wh=0.0001, discount=0.05, years=10.0,
                      loss_load_factor=0.5, hours_per_year=8760.0)
# Present value of 1 USD a year for 10 years at 5 %: (1 − 1.05^−10)/0.05 = 7.721735 (the
# ordinary annuity factor; IEC 60287-3-2's Q/(1 + i) with r = 1/1.05 is the same sum).
ANNUITY_10Y_5PCT = (1 - 1.05**-10) / 0.05


def seg(id_: str, material: str, size: str, capex: float, loss_kw: float, *, sets: int = 1,
        parent: str = "SRC", length_m: float = 50.0, path_vd_pct: float = 1.0,
        loadflow: float | None = None, current_a: float = 100.0,
        ampacity_a: float = 200.0) -> SegmentResult:
    """A design segment with only the fields the tables read set to meaningful values."""
    return SegmentResult(
        id=id_, parent=parent, kind="branch", material=material, size=size, sets=sets,
        egc="6 AWG", length_m=length_m, current_a=current_a, ampacity_a=ampacity_a,
        vd_pct=0.5, path_vd_pct=path_vd_pct, r_ohm=0.01, x_ohm=0.005, ocpd_a=125.0,
        capex=capex, loss_kw=loss_kw, loss_pv=loss_kw * 1e3 * ECON.loss_pv_per_w,
        temp_c=60.0, voltage_v=480.0, phases=3, loadflow_drop_pct=loadflow, fault_ka=10.0,
        # The run's own T and cost per W: here the scenario's (one profile for every run).
        loss_kwh_per_year=float(ECON.annual_loss_kwh(loss_kw * 1e3)),
        loss_cost_per_year=loss_kw * 1e3 * ECON.annual_cost_per_w)


def design(objective: str, *segments: SegmentResult) -> Design:
    loss_w = 1e3 * sum(s.loss_kw for s in segments)
    totals = Totals(capex=sum(s.capex for s in segments),
                    loss_pv=sum(s.loss_pv for s in segments),
                    loss_kwh_per_year=float(ECON.annual_loss_kwh(loss_w)))
    return Design(status="optimal", objective=objective, rules="nec", currency="USD",
                  totals=totals, segments=segments)


# Code minimum and lifecycle designs of four runs:
#   A: upsized, 1,000 USD -> 1,500 USD, peak loss 2.0 kW -> 1.0 kW
#   D: upsized,   200 USD ->   500 USD, peak loss 0.3 kW -> 0.2 kW
#   B: different conductor but cheaper upfront (material change): not an upsizing
#   C: unchanged
CODE_MIN = design(
    "capex",
    seg("A", "Al", "4/0 AWG", 1000.0, 2.0),
    seg("D", "Al", "6 AWG", 200.0, 0.3),
    seg("B", "Cu", "2 AWG", 700.0, 0.5),
    seg("C", "Al", "1/0 AWG", 400.0, 0.4),
)
LIFECYCLE = design(
    "lifecycle",
    seg("A", "Al", "350 kcmil", 1500.0, 1.0),
    seg("D", "Al", "4 AWG", 500.0, 0.2),
    seg("B", "Al", "1/0 AWG", 650.0, 0.45),
    seg("C", "Al", "1/0 AWG", 400.0, 0.4),
)


def test_loss_factor_of_the_hand_case():
    # T·P + D = 4380 h × 0.0001 USD/Wh = 0.438 USD per W of peak loss in the first year.
    assert ECON.annual_cost_per_w == pytest.approx(0.438)
    # F = 0.438 × annuity = 3.38212 USD per W over 10 years.
    assert ECON.loss_pv_per_w == pytest.approx(0.438 * ANNUITY_10Y_5PCT)


def test_justification_arithmetic_of_the_upsized_run():
    rows = tb.justification_table(CODE_MIN, LIFECYCLE, ECON, "USD")
    assert [r.segment for r in rows] == ["A", "D"]  # B is cheaper upfront, C unchanged
    a = rows[0]
    # Added cost: 1,500 − 1,000 = 500 USD.
    assert a.added_cost == pytest.approx(500.0)
    # Peak loss saved: 2.0 kW − 1.0 kW = 1,000 W.
    assert a.peak_loss_saving_w == pytest.approx(1000.0)
    # Energy saved: 1,000 W × 4,380 h = 4,380 kWh a year.
    assert a.kwh_saved_per_year == pytest.approx(4380.0)
    # Money saved: 4,380 kWh × 0.10 USD/kWh = 438 USD a year.
    assert a.money_saved_per_year == pytest.approx(438.0)
    # Simple payback: 500 / 438 = 1.1416 years.
    assert a.payback_years == pytest.approx(500.0 / 438.0)
    assert a.payback_years == pytest.approx(1.14155, abs=1e-5)
    # NPV: −500 + 438 × 7.721735 = −500 + 3,382.12 = 2,882.12 USD.
    assert a.npv == pytest.approx(-500.0 + 438.0 * ANNUITY_10Y_5PCT)
    assert a.npv == pytest.approx(2882.12, abs=0.01)
    assert a.sentence == (
        "Upsizing A from 4/0 AWG Al to 350 kcmil Al costs 500 USD more now, saves 4,380 kWh "
        "(438 USD) a year and pays back in 1.1 years (simple payback); over 10 years it is "
        "worth 2,882 USD "
        "today.")


def test_justification_second_run_and_order():
    rows = tb.justification_table(CODE_MIN, LIFECYCLE, ECON, "USD")
    d = rows[1]
    # Added 300 USD; 100 W saved -> 438 kWh, 43.80 USD a year; payback 300/43.8 = 6.85 years.
    assert d.kwh_saved_per_year == pytest.approx(438.0)
    assert d.money_saved_per_year == pytest.approx(43.8)
    assert d.payback_years == pytest.approx(6.849, abs=1e-3)
    # NPV: −300 + 43.8 × 7.721735 = 38.21 USD, below A's: sorted by NPV, best first.
    assert d.npv == pytest.approx(38.21, abs=0.01)
    assert rows[0].npv > d.npv


def test_justification_npv_is_the_lifecycle_difference_of_the_run():
    # NPV = −Δcapex + ΔP·F = (capex + loss PV) of the code minimum − that of the lifecycle run.
    rows = {r.segment: r for r in tb.justification_table(CODE_MIN, LIFECYCLE, ECON, "USD")}
    before = {s.id: s for s in CODE_MIN.segments}
    after = {s.id: s for s in LIFECYCLE.segments}
    for key, row in rows.items():
        gain = (before[key].capex + before[key].loss_pv) - (after[key].capex + after[key].loss_pv)
        assert row.npv == pytest.approx(gain)


def test_a_losing_upsizing_says_so():
    base = design("capex", seg("E", "Cu", "8 AWG", 100.0, 0.2))
    big = design("lifecycle", seg("E", "Cu", "4 AWG", 1100.0, 0.1))
    (row,) = tb.justification_table(base, big, ECON, "USD")
    # −1,000 + 43.8 × 7.721735 = −661.79 USD
    assert row.npv == pytest.approx(-661.79, abs=0.01)
    assert "costs 662 USD more than it saves" in row.sentence


def test_no_saving_never_pays_back():
    base = design("capex", seg("F", "Cu", "8 AWG", 100.0, 0.2))
    same_loss = design("lifecycle", seg("F", "Cu", "6 AWG", 150.0, 0.2))
    (row,) = tb.justification_table(base, same_loss, ECON, "USD")
    assert math.isinf(row.payback_years)
    assert "never pays back" in row.sentence


def test_cash_flow_of_the_whole_upsizing():
    cash = tb.upsizing_cash_flow(CODE_MIN, LIFECYCLE, ECON)
    # Whole design: Δcapex = 3,050 − 2,300 = 750 USD; ΔP = 3.2 − 2.05 kW = 1,150 W,
    # first-year saving 1,150 × 0.438 = 503.70 USD.
    assert cash.added_cost == pytest.approx(750.0)
    assert cash.first_year_saving == pytest.approx(503.7)
    assert [r.year for r in cash.rows] == list(range(11))
    assert cash.rows[0].cumulative == pytest.approx(-750.0)
    # No escalation: the cumulative line is straight, so it crosses zero at the simple
    # payback 750/503.7 = 1.489 years exactly.
    assert cash.crossing_year() == pytest.approx(750.0 / 503.7)
    assert cash.payback_years == pytest.approx(750.0 / 503.7)
    # The discounted sum ends at the NPV: −750 + 503.7 × 7.721735 = 3,139.44 USD.
    assert cash.rows[-1].cumulative_discounted == pytest.approx(cash.npv)
    assert cash.npv == pytest.approx(-750 + 503.7 * ANNUITY_10Y_5PCT)
    # ... which is the difference of the two designs' lifetime totals.
    assert cash.npv == pytest.approx(CODE_MIN.totals.lifecycle - LIFECYCLE.totals.lifecycle)
    assert cash.crossing_year(discounted=True) > cash.crossing_year()


@given(added=st.floats(1.0, 1e5), saving=st.floats(1.0, 1e4),
       escalation=st.floats(0.0, 0.08), discount=st.floats(0.0, 0.15),
       years=st.integers(1, 40))
def test_cash_flow_ends_at_the_npv(added, saving, escalation, discount, years):
    econ = EconomicParams(energy_price_per_wh=0.0001, discount=discount, years=float(years),
                          loss_load_factor=0.5, escalation=escalation)
    saving_w = saving / econ.annual_cost_per_w
    base = design("capex", seg("X", "Cu", "8 AWG", 100.0, 2 * saving_w / 1e3))
    up = design("lifecycle", seg("X", "Cu", "4 AWG", 100.0 + added, saving_w / 1e3))
    cash = tb.upsizing_cash_flow(base, up, econ)
    assert cash.rows[-1].cumulative_discounted == pytest.approx(cash.npv, rel=1e-9, abs=1e-6)
    assert cash.npv == pytest.approx(float(econ.upsizing_npv(added, saving_w)), abs=1e-6)


def test_options_table_columns():
    options = [Option("code_minimum", "Code minimum", CODE_MIN),
               Option("lifecycle", "Lifecycle", LIFECYCLE),
               Option("all_copper", "All copper",
                      Design("infeasible", "lifecycle", "nec", "USD", Totals(0, 0, 0), ()))]
    rows = tb.options_table(options, ECON, 0.4)
    cm = rows[0]
    # Peak loss 3.2 kW -> 3,200 W × 4,380 h = 14,016 kWh a year; × 0.10 = 1,401.60 USD.
    assert cm.loss_kwh_per_year == pytest.approx(14016.0)
    assert cm.loss_cost_per_year == pytest.approx(1401.6)
    # CO2: 14,016 kWh × 0.4 kg/kWh = 5.6064 t a year; no load growth: × 10 years.
    assert cm.co2_t_per_year == pytest.approx(5.6064)
    assert cm.co2_t_lifetime == pytest.approx(56.064)
    assert cm.lifecycle == pytest.approx(CODE_MIN.totals.lifecycle)
    assert cm.worst_loadflow_drop_pct is None  # no load flow in the hand-made designs
    assert not rows[2].feasible and rows[2].status == "infeasible"


def test_lifetime_co2_grows_with_the_load():
    # Load growth a = 2 %: each year's loss energy grows by 1.02² = 1.0404, so the lifetime
    # total is Σ_{n=0..9} 1.0404^n = (1.0404^10 − 1)/0.0404 = 12.0226 first years' worth.
    econ = EconomicParams(energy_price_per_wh=0.0001, discount=0.05, years=10.0,
                          loss_load_factor=0.5, load_growth=0.02)
    assert tb.lifetime_energy_factor(econ) == pytest.approx((1.0404**10 - 1) / 0.0404)


def test_schedule_and_profile():
    d = design(
        "lifecycle",
        seg("MAIN", "Cu", "500 kcmil", 1000, 1, path_vd_pct=0.5, loadflow=0.52, length_m=20,
            current_a=300, ampacity_a=400, sets=2),
        seg("PANEL", "Al", "4/0 AWG", 500, 0.5, parent="MAIN", path_vd_pct=1.5,
            loadflow=1.55, length_m=40),
        seg("LOAD", "Al", "6 AWG", 100, 0.1, parent="PANEL", path_vd_pct=3.0, loadflow=3.1,
            length_m=30),
        seg("OTHER", "Al", "6 AWG", 100, 0.1, parent="MAIN", path_vd_pct=3.05, loadflow=3.0,
            length_m=80),
    )
    rows = tb.schedule_table(d, {"PANEL": "Panel & co"})
    assert rows[0].conductor == "2x 500 kcmil Cu"
    assert rows[0].utilisation_pct == pytest.approx(75.0)  # 300 A of 400 A
    assert rows[1].description == "Panel & co" and rows[0].description == ""
    prof = tb.worst_path_profile(d)
    # The load flow says LOAD (3.10 %) is worst although the estimate says OTHER.
    assert prof.by_loadflow and prof.load == "LOAD"
    assert [p.node for p in prof.points] == ["SRC", "MAIN", "PANEL", "LOAD"]
    assert [p.distance_m for p in prof.points] == pytest.approx([0, 20, 60, 90])
    assert [p.loadflow_drop_pct for p in prof.points] == pytest.approx([0, 0.52, 1.55, 3.1])


def test_cost_breakdown_groups_the_tail():
    d = design("lifecycle", *(seg(f"S{i}", "Cu", "8 AWG", 10.0 * i, 0.01) for i in range(1, 21)))
    rows = tb.cost_breakdown(d, top=5)
    assert len(rows) == 5
    assert rows[0].segment == "S20"
    assert rows[-1].count == 16 and rows[-1].segment == "other 16 runs"
    assert sum(r.capex for r in rows) == pytest.approx(d.totals.capex)


def test_money_format():
    assert tb.money(1240.4) == "1,240"
    assert tb.money(-0.2) == "0"
    assert tb.money(math.nan) == "—"
