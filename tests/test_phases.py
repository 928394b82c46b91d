"""Phase assignment, phase currents and the neutral (sizer.phases).

Balancing is checked against brute force (3^n assignments) on small panels; LPT against
Graham's bound 4/3 − 1/(3m) = 11/9 for m = 3 (R. L. Graham, "Bounds on multiprocessing
timing anomalies", SIAM J. Appl. Math. 17, 1969). The neutral of a wye panel with
resistive loads carries I_N = √(Ia² + Ib² + Ic² − Ia·Ib − Ib·Ic − Ic·Ia) (the phasor sum
of three currents 120° apart: textbook circuit analysis).
"""

from __future__ import annotations

import json
import math

import pytest
from builders import write_scenario
from hypothesis import given
from hypothesis import strategies as st

from sizer.cli import main
from sizer.optimize import prepare
from sizer.phases import (
    LINES,
    LPT_BOUND,
    _lpt,
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
