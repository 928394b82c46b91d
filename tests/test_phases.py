"""Phase assignment, phase currents and the neutral (sizer.phases).

Balancing is checked against brute force (3^n assignments) on small panels; LPT against
Graham's bound 4/3 − 1/(3m) = 11/9 for m = 3 (R. L. Graham, "Bounds on multiprocessing
timing anomalies", SIAM J. Appl. Math. 17, 1969). The neutral of a wye panel with
resistive loads carries I_N = √(Ia² + Ib² + Ic² − Ia·Ib − Ib·Ic − Ic·Ia) (the phasor sum
of three currents 120° apart: textbook circuit analysis).
"""

from __future__ import annotations

import cmath
import json
import math
import random

import pytest
from builders import write_scenario
from hypothesis import given
from hypothesis import strategies as st

from sizer.cli import main
from sizer.optimize import prepare
from sizer.phases import (
    ANGLE_DEG,
    EXACT_LIMIT,
    LINES,
    LPT_BOUND,
    PAIRS,
    SINGLE,
    _lpt,
    _unit_phasors,
    assign_panel,
    brute_force_peak_a,
    peak_phase_a,
)
from sizer.scenario import load_scenario

currents = st.lists(st.floats(0.5, 100.0, allow_nan=False), min_size=1, max_size=7)


def peak_of(assigned: list[str], current_a: list[float]) -> float:
    load = [0.0, 0.0, 0.0]
    for ph, i in zip(assigned, current_a, strict=True):
        for k in LINES[ph]:
            load[k] += i
    return max(load)


@given(currents, st.data())
def test_exact_assignment_equals_brute_force(current_a, data):
    pair = data.draw(st.lists(st.booleans(), min_size=len(current_a),
                              max_size=len(current_a)))
    assigned = assign_panel(current_a, pair, [None] * len(current_a))
    for ph, is_pair in zip(assigned, pair, strict=True):
        assert (ph in ("AB", "BC", "CA")) == is_pair
    assert peak_of(assigned, current_a) == pytest.approx(brute_force_peak_a(current_a, pair))


@given(st.lists(st.floats(0.5, 100.0, allow_nan=False), min_size=1, max_size=9))
def test_lpt_within_grahams_bound_on_line_to_neutral_panels(current_a):
    order = sorted(range(len(current_a)), key=lambda i: (-current_a[i], i))
    pair = [False] * len(current_a)
    lpt = peak_phase_a(_lpt(order, current_a, pair, [0.0, 0.0, 0.0]), current_a,
                       [0.0, 0.0, 0.0])
    best = brute_force_peak_a(current_a, pair)
    assert lpt <= LPT_BOUND * best + 1e-9
    assert LPT_BOUND == pytest.approx(11 / 9)


def test_fixed_phases_are_kept_and_the_rest_balanced():
    # Two 20 A circuits fixed on A; three free 10 A circuits go to B and C: B 20, C 10 or
    # B 10, C 20 — never onto A (40 A would be the peak).
    assigned = assign_panel([20, 20, 10, 10, 10], [False] * 5, ["A", "A", None, None, None])
    assert assigned[:2] == ["A", "A"]
    assert "A" not in assigned[2:]
    assert peak_of(assigned, [20, 20, 10, 10, 10]) == 40


def test_assignment_is_deterministic():
    args = ([12.0, 12.0, 7.0, 7.0, 3.0], [False, True, False, True, False], [None] * 5)
    assert assign_panel(*args) == assign_panel(*args)


# --- phase and neutral currents by hand ------------------------------------------------

PANEL = """
[[node]]
id = "P"
parent = "SRC"
length = "50 ft"
neutral = true

[[node]]
id = "A1"
parent = "P"
length = "60 ft"
phases = 1
voltage = "120 V"
load = "1800 W"
power_factor = 1.0
phase = "A"
{extra}

[[node]]
id = "A2"
parent = "P"
length = "60 ft"
phases = 1
voltage = "120 V"
load = "1800 W"
power_factor = 1.0
phase = "A"
{extra}

[[node]]
id = "B1"
parent = "P"
length = "60 ft"
phases = 1
voltage = "120 V"
load = "2400 W"
power_factor = 1.0
phase = "B"
{extra}

[[node]]
id = "C1"
parent = "P"
length = "60 ft"
phases = 1
voltage = "120 V"
load = "1200 W"
power_factor = 1.0
phase = "C"
{extra}
"""


def prep_of(tmp_path, extra=""):
    path = write_scenario(tmp_path, PANEL.format(extra=extra), voltage="208 V")
    return prepare(load_scenario(path)), path


def test_neutral_of_a_known_unbalance_by_hand(tmp_path):
    prep, _ = prep_of(tmp_path)
    p = 0
    # 1800 W / 120 V = 15 A twice on A (30 A), 2400 W / 120 V = 20 A on B, 10 A on C.
    assert list(prep.phases.sizing_a[p]) == pytest.approx([30.0, 20.0, 10.0])
    # I_N = √(30² + 20² + 10² − 30·20 − 20·10 − 10·30) = √300 = 17.32 A.
    assert prep.phases.neutral_a[p] == pytest.approx(math.sqrt(300.0))
    # The feeder is sized by its most loaded phase, 30 A (the balanced mean is 20 A).
    assert prep.segments[p].current_a == pytest.approx(30.0)


def test_triplen_harmonics_add_in_the_neutral(tmp_path):
    prep, _ = prep_of(tmp_path, extra='triplen = "30 %"')
    # Third harmonics of the three phases are in phase: 0.3 × (30 + 20 + 10) = 18 A;
    # with the fundamental's 17.32 A: √(300 + 18²) = √624 = 24.98 A.
    assert prep.phases.neutral_a[0] == pytest.approx(math.sqrt(624.0))


def test_neutral_current_adds_its_losses(tmp_path):
    prep, _ = prep_of(tmp_path)
    t = prep.table
    rows = slice(int(t.offsets[0]), int(t.offsets[1]))
    # Loads of no category run at their declared load: Σ I_p² + I_N² = 30² + 20² + 10²
    # + 300 = 1700 A², against 3 × 20² = 1200 A² for a balanced 20 A run.
    assert t.loss_w[rows] == pytest.approx(1700.0 * t.r_ohm[rows])


def test_json_phase_keys(tmp_path):
    _, path = prep_of(tmp_path)
    out = tmp_path / "r.json"
    assert main(["solve", str(path), "--json", str(out), "--quiet"]) == 0
    segs = {s["id"]: s for s in json.loads(out.read_text())["segments"]}
    assert segs["A1"]["phase"] == "A" and segs["B1"]["phase"] == "B"
    assert "phase_currents_a" not in segs["A1"] and "neutral_a" not in segs["A1"]
    assert segs["P"]["phase_currents_a"] == pytest.approx([30.0, 20.0, 10.0])
    assert segs["P"]["neutral_a"] == pytest.approx(math.sqrt(300.0), abs=1e-6)
    assert "phase" not in segs["P"]


def test_a_line_to_neutral_circuit_given_a_pair_is_one_clear_line(tmp_path, capsys):
    path = write_scenario(tmp_path, PANEL.format(extra="").replace('phase = "C"',
                                                                   'phase = "AB"'),
                          voltage="208 V")
    assert main(["solve", str(path), "--quiet"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1
    assert "node 'C1'" in err[0] and "field 'phase'" in err[0]


# --- the neutral's own size --------------------------------------------------------------

UNBALANCED = """
[[node]]
id = "P"
parent = "SRC"
length = "100 ft"
neutral = true
{size}

[[node]]
id = "A1"
parent = "P"
length = "60 ft"
phases = 1
voltage = "120 V"
load = "12 kW"
power_factor = 1.0
phase = "A"
ocpd = "150 A"
{extra}

[[node]]
id = "A2"
parent = "P"
length = "60 ft"
phases = 1
voltage = "120 V"
load = "12 kW"
power_factor = 1.0
phase = "A"
ocpd = "150 A"
{extra}

[[node]]
id = "B1"
parent = "P"
length = "60 ft"
phases = 1
voltage = "120 V"
load = "12 kW"
power_factor = 1.0
phase = "B"
ocpd = "150 A"
{extra}

[[node]]
id = "C1"
parent = "P"
length = "60 ft"
phases = 1
voltage = "120 V"
load = "12 kW"
power_factor = 1.0
phase = "C"
ocpd = "150 A"
{extra}
"""


def neutral_rows(tmp_path, size="", extra="", name="n.toml"):
    path = write_scenario(tmp_path, UNBALANCED.format(size=size, extra=extra),
                          voltage="208 V", name=name)
    prep = prepare(load_scenario(path))
    t = prep.table
    rows = range(int(t.offsets[0]), int(t.offsets[1]))
    sizes = prep.catalogue.sizes
    return prep, {(sizes[int(t.size_index[r])], int(t.sets[r])): r for r in rows}


def test_reduced_neutral_is_sized_for_its_own_current(tmp_path):
    prep, rows = neutral_rows(tmp_path, size='neutral_size = "reduced"')
    # 12 kW / 120 V = 100 A per circuit: A 200 A, B 100 A, C 100 A;
    # I_N = √(200² + 100² + 100² − 200·100 − 100·100 − 100·200) = 100 A.
    assert prep.phases.neutral_a[0] == pytest.approx(100.0)
    t = prep.table
    r = rows[("3/0 AWG", 1)]
    # 3/0 Cu carries 200 A at 75 degC (NEC Table 310.16); its neutral for 100 A is 3 AWG
    # Cu (100 A in the same column). The run comes straight from the source, so it is a
    # service run: its bonding jumper (in the EGC's column) is 4 AWG Cu for 3/0 service
    # conductors (NEC Table 250.102(C)(1), from memory), and the neutral stays above it.
    assert prep.segments[0].service
    assert prep.catalogue.sizes[int(t.neutral_size_index[r])] == "3 AWG"
    assert prep.catalogue.sizes[int(t.egc_size_index[r])] == "4 AWG"
    # Every row: the neutral is never above the phase size nor below the EGC.
    own = slice(int(t.offsets[0]), int(t.offsets[1]))
    assert (t.neutral_size_index[own] <= t.size_index[own]).all()
    assert (t.neutral_size_index[own] >= t.egc_size_index[own]).all()


def test_reduced_neutral_is_cheaper_and_a_double_neutral_dearer(tmp_path):
    _, full = neutral_rows(tmp_path, name="a.toml")
    red_prep, red = neutral_rows(tmp_path, size='neutral_size = "reduced"', name="b.toml")
    dbl_prep, dbl = neutral_rows(tmp_path, size='neutral_size = "200 %"', name="c.toml")
    full_prep, _ = neutral_rows(tmp_path, name="a.toml")
    key = ("3/0 AWG", 1)
    capex = [p.table.capex[rows[key]] for p, rows in
             ((red_prep, red), (full_prep, full), (dbl_prep, dbl))]
    assert capex[0] < capex[1] < capex[2]
    # 200 %: at least twice the phase area (3/0 = 85.0 mm² → 4/0 is 107 mm², too small;
    # 350 kcmil = 177 mm² is the first at or above 170 mm²; areas from NEC Ch. 9 Table 8).
    area = dbl_prep.catalogue.area_mm2
    r = dbl[key]
    assert area[dbl_prep.table.neutral_size_index[r]] >= 2 * area[dbl_prep.table.size_index[r]]
    assert dbl_prep.catalogue.sizes[int(dbl_prep.table.neutral_size_index[r])] == "350 kcmil"
    # The larger neutral loses less: same phase losses, I_N² at half the resistance or less.
    assert dbl_prep.table.loss_w[r] < full_prep.table.loss_w[full[key]]


def test_iec_keeps_a_full_neutral_when_triplens_exceed_15_percent():
    from sizer.candidates import neutral_rules

    rule = neutral_rules()["iec"]
    # IEC 60364-5-52 524.2.3 (from memory): reduction only up to 15 % third harmonics,
    # phase above 16 mm² Cu / 25 mm² Al, neutral at least 16 / 25 mm².
    assert float(rule["max_triplen"]) == 0.15
    assert (float(rule["min_phase_mm2_Cu"]), float(rule["min_phase_mm2_Al"])) == (16, 25)


@pytest.mark.parametrize(("triplen", "reduced"), [("10 %", True), ("20 %", False)])
def test_iec_reduction_stops_above_15_percent_triplens(tmp_path, triplen, reduced):
    body = (UNBALANCED.format(size='neutral_size = "reduced"', extra=f'triplen = "{triplen}"')
            .replace('voltage = "120 V"', 'voltage = "230 V"')
            .replace('load = "12 kW"', 'load = "23 kW"')
            .replace('ocpd = "150 A"', 'ocpd = "125 A"'))
    path = write_scenario(tmp_path, body, rules="iec", voltage="400 V", currency="EUR",
                          energy_price="0.2 EUR/kWh", insulation="90 degC")
    path.write_text(path.read_text().replace('terminals = "75 degC"', 'terminals = "auto"'))
    prep = prepare(load_scenario(path))
    t = prep.table
    own = slice(int(t.offsets[0]), int(t.offsets[1]))
    smaller = t.neutral_size_index[own] < t.size_index[own]
    assert smaller.any() == reduced


# --- the exact search: the same assignment as the plain branch and bound ---------------


def plain_lpt(free, current_a, pair, start):
    """LPT as a ``min`` over the options (the code before issue 18): the specification."""
    load = list(start)
    out = {}
    for i in free:
        best = min(PAIRS if pair[i] else SINGLE,
                   key=lambda ph: (max(load[k] + current_a[i] for k in LINES[ph]),
                                   sum(load[k] for k in LINES[ph])))
        for k in LINES[best]:
            load[k] += current_a[i]
        out[i] = best
    return out


def plain_search(current_a, pair, fixed):
    """The panel's assignment by depth-first branch and bound with no bound but the top
    phase so far (the search before issue 18): options in A, B, C / AB, BC, CA order, a
    leaf replaces the LPT incumbent when lower by more than 1e-9. The specification the
    pruned search must reproduce circuit for circuit."""
    n = len(current_a)
    start = [0.0, 0.0, 0.0]
    for i in range(n):
        if fixed[i] is not None:
            for k in LINES[fixed[i]]:
                start[k] += current_a[i]
    free = sorted((i for i in range(n) if fixed[i] is None), key=lambda i: (-current_a[i], i))
    incumbent = plain_lpt(free, current_a, pair, start)
    if len(free) > EXACT_LIMIT:
        best = incumbent
    else:
        best_peak = [peak_phase_a(incumbent, current_a, start)]
        best_pick = [dict(incumbent)]
        load = list(start)
        chosen = {}

        def dfs(pos):
            if max(load) >= best_peak[0] - 1e-9:
                return
            if pos == len(free):
                best_peak[0], best_pick[0] = max(load), dict(chosen)
                return
            i = free[pos]
            seen = set()
            for ph in (PAIRS if pair[i] else SINGLE):
                for k in LINES[ph]:
                    load[k] += current_a[i]
                if tuple(load) not in seen:
                    seen.add(tuple(load))
                    chosen[i] = ph
                    dfs(pos + 1)
                    del chosen[i]
                for k in LINES[ph]:
                    load[k] -= current_a[i]
        dfs(0)
        best = best_pick[0]
    out = list(fixed)
    for i, ph in best.items():
        out[i] = ph
    return out


def drawn_panel(r, most=EXACT_LIMIT + 1):
    """A panel as designers fill them: equal circuits, round currents, odd floats."""
    n = r.randint(1, most)
    kind = r.random()
    if kind < 0.3:
        current = [float(r.randint(1, 20)) for _ in range(n)]
    elif kind < 0.5:
        current = [r.choice([1500 / 277, 8.333333333333334, 16.67, 12.5, 0.1 + 0.2])
                   for _ in range(n)]
    elif kind < 0.6:
        current = [r.choice([0.0, 1.0, 2.0]) for _ in range(n)]
    else:
        current = [r.uniform(0.5, 50.0) for _ in range(n)]
    pair = [r.random() < (0.0 if kind < 0.4 else 0.3) for _ in range(n)]
    fixed = [r.choice(PAIRS if pair[i] else SINGLE) if r.random() < 0.1 else None
             for i in range(n)]
    return current, pair, fixed


@pytest.mark.parametrize("seed", range(4))
def test_pruned_search_picks_the_same_phases_as_the_plain_search(seed):
    r = random.Random(seed)
    for _ in range(250):
        current, pair, fixed = drawn_panel(r)
        assert assign_panel(current, pair, fixed) == plain_search(current, pair, fixed)


@given(st.lists(st.sampled_from([4.0, 6.0, 7.5, 10.0, 12.0, 15.0]), min_size=1, max_size=12),
       st.data())
def test_pruned_search_equals_the_plain_search_on_repeated_currents(current_a, data):
    pair = data.draw(st.lists(st.booleans(), min_size=len(current_a), max_size=len(current_a)))
    free = [None] * len(current_a)
    got = assign_panel(current_a, pair, free)
    assert got == plain_search(current_a, pair, free)
    if len(current_a) <= 8:
        assert peak_of(got, current_a) == pytest.approx(brute_force_peak_a(current_a, pair))


@pytest.mark.parametrize("pf", [1.0, 0.95, 0.8, 0.0, 1.2, -0.1])
def test_unit_phasors_lag_each_line_by_the_power_factor_angle(pf):
    # I = |I|·e^{j(θ_line − acos pf)}, pf clamped to [0, 1] (textbook phasor form)
    unit = _unit_phasors([pf])
    for k, angle in enumerate(ANGLE_DEG.values()):
        want = cmath.exp(1j * (math.radians(angle) - math.acos(min(max(pf, 0), 1))))
        assert unit[0, k] == want


@pytest.mark.parametrize("seed", range(2))
def test_lpt_picks_the_same_phases_as_the_min_over_options(seed):
    r = random.Random(seed)
    for _ in range(300):
        current, pair, _fixed = drawn_panel(r, most=60)
        start = [r.choice([0.0, 3.0, 0.1 + 0.2, 1e17]) for _ in range(3)]
        free = sorted(range(len(current)), key=lambda i: (-current[i], i))
        assert _lpt(free, current, pair, start) == plain_lpt(free, current, pair, start)
