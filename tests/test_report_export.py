"""The JSON and CSV files are written column by column, equal to cleaning value by value.

``design_document`` and ``schedule_csv`` no longer walk every value one call at a time:
floats are rounded a column at a time (numpy where that provably gives Python's
``round``) and the rows are marked clean. These tests hold the fast path to the plain
definition — ``clean`` of each value, the CSV written from ``schedule_frame`` — on real
designs and on values chosen to break it (ties at the sixth decimal, -0.0, NaN, ±inf,
huge numbers).
"""

from __future__ import annotations

import dataclasses
import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from sizer.bench import synthetic_scenario
from sizer.bundled import bundled_folder
from sizer.model import Design, SegmentResult, Totals, Violation
from sizer.optimize import Objective, prepare
from sizer.report.export import (
    _ONLY_WHERE_SET,
    DECIMALS,
    SCHEDULE_COLUMNS,
    clean,
    clean_column,
    csv_text,
    design_document,
    json_text,
    round_floats,
    schedule_csv,
    schedule_frame,
)
from sizer.results import solve_results
from sizer.scenario import load_scenario


def reference_document(design: Design, extra: dict | None = None) -> dict:
    """The JSON document as defined: every value through ``clean`` one by one."""
    doc = {
        "status": design.status, "objective": design.objective, "rules": design.rules,
        "currency": design.currency, "engine": design.engine,
        "proven_optimal": design.proven_optimal, "gap": design.gap,
        "totals": {"capex": design.totals.capex, "loss_pv": design.totals.loss_pv,
                   "lifecycle": design.totals.lifecycle,
                   "loss_kwh_per_year": design.totals.loss_kwh_per_year},
        "segments": [{f.name: getattr(s, f.name) for f in dataclasses.fields(s)
                      if f.name not in _ONLY_WHERE_SET or getattr(s, f.name) is not None}
                     for s in design.segments],
    }
    if design.diagnosis:
        doc["diagnosis"] = list(design.diagnosis)
    doc["violations"] = [dataclasses.asdict(v) for v in design.violations]
    if design.notes:
        doc["notes"] = list(design.notes)
    if extra:
        doc.update(extra)
    return clean(doc)


def reference_csv(design: Design) -> str:
    """The CSV schedule as defined: the schedule frame's cells through ``csv_text``."""
    frame = schedule_frame(design)
    rows = (list(row) for row in frame.astype(object).itertuples(index=False, name=None))
    return csv_text(SCHEDULE_COLUMNS, rows)


def same(a: list, b: list) -> bool:
    """Equal value for value, telling -0.0 from 0.0 and None from NaN."""
    return [repr(x) for x in a] == [repr(x) for x in b]


# --- rounding a column --------------------------------------------------------------------

TIES = st.builds(lambda k, d, s: s * (k + 0.5 + d) / 10**DECIMALS,
                 st.integers(0, 10**12), st.sampled_from([0.0, 1e-9, -1e-9, 1e-4, -1e-4]),
                 st.sampled_from([1.0, -1.0]))
FLOATS = st.one_of(st.floats(allow_nan=True, allow_infinity=True), TIES,
                   st.floats(-2e6, 2e6), st.floats(-1e-5, 1e-5))


@given(st.lists(FLOATS, max_size=40))
def test_round_floats_is_clean_value_by_value(values):
    assert same(round_floats(values), [clean(v) for v in values])


@pytest.mark.parametrize("value", [0.0000015, 2.675, 1.0000005, -0.0000004, -0.0, 1e6 + 0.5e-6,
                                   123456.7890125, 5e-7, -5e-7, 4503599627.3705, 1e300,
                                   math.nan, math.inf, -math.inf, 2.5e-6, 0.1 + 0.2])
def test_round_floats_at_known_hard_values(value):
    assert same(round_floats([value]), [clean(value)])


@given(st.lists(st.one_of(FLOATS, st.none(), st.text(max_size=3), st.integers(), st.booleans(),
                          st.tuples(FLOATS, FLOATS)), max_size=30))
def test_clean_column_is_clean_value_by_value(values):
    assert same(clean_column(values), [clean(v) for v in values])


# --- whole documents ---------------------------------------------------------------------


def solved(path) -> Design:
    return solve_results(prepare(load_scenario(path)), Objective.LIFECYCLE).design


@pytest.fixture(scope="module")
def designs(tmp_path_factory):
    folder = tmp_path_factory.mktemp("export")
    synthetic = folder / "s300.toml"
    synthetic.write_text(synthetic_scenario(300), encoding="utf-8")
    return {"kiln-hall": solved(bundled_folder("scenarios") / "kiln-hall.toml"),
            "synthetic 300": solved(synthetic)}


def odd_segment(id_: str, parent: str, **values) -> SegmentResult:
    base = dict(id=id_, parent=parent, kind="branch", material="Cu", size="12 AWG", sets=1,
                egc="12 AWG", length_m=30.0, current_a=16.0, ampacity_a=25.0, vd_pct=1.0,
                path_vd_pct=2.0, r_ohm=0.1, x_ohm=0.01, ocpd_a=20.0, capex=100.0,
                loss_kw=0.01, loss_pv=50.0, temp_c=60.0, voltage_v=120.0, phases=1)
    return SegmentResult(**{**base, **values})


ODD = Design(
    "violations", "check", "nec", "USD", Totals(1.0000005, math.inf, -0.0),
    (odd_segment("=A", "SRC", vd_pct=math.nan, capex=2.675e-7, loss_pv=-0.0,
                 loadflow_drop_pct=None, phase="A", phase_currents_a=(1.0, math.nan, -0.0)),
     odd_segment("B", "=A", current_a=math.inf, egc=None, fault_ka=1e300, trip_a=-5e-7,
                 neutral_size="reduced", ocpd_a=3000000.0000005)),
    violations=(Violation("B", "ampacity", math.inf, 25.0000005, "over"),
                Violation("=A", "total drop", math.nan, -0.0)),
    diagnosis=("none",), notes=("a note",))


@pytest.mark.parametrize("name", ["kiln-hall", "synthetic 300", "odd values", "no design"])
def test_document_and_json_equal_the_definition(designs, name):
    design = {"odd values": ODD,
              "no design": dataclasses.replace(ODD, segments=(), violations=())}.get(name)
    design = design or designs[name]
    extra = {"table_status": {"x": 1.23456789}, "circuit_notes": ["n"]}
    assert design_document(design, extra) == reference_document(design, extra)
    assert json_text(design_document(design, extra)) == json_text(
        reference_document(design, extra))


@pytest.mark.parametrize("name", ["kiln-hall", "synthetic 300", "odd values"])
def test_schedule_csv_equals_the_frame_written_cell_by_cell(designs, name):
    design = ODD if name == "odd values" else designs[name]
    assert schedule_csv(design) == reference_csv(design)


def test_a_written_document_is_not_walked_again(designs, monkeypatch):
    # The rows are marked clean: writing them calls clean() on the few top-level values
    # only, never once per run.
    from sizer.report import export

    doc = design_document(designs["synthetic 300"])
    calls = []
    real = export.clean

    def counting(value):
        calls.append(value)
        return real(value)

    monkeypatch.setattr(export, "clean", counting)
    json_text(doc)
    assert len(calls) < 100 < len(doc["segments"])
