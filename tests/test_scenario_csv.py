"""CSV node schedules: reading them with a head file, and writing them back (round trip)."""

from __future__ import annotations

import csv
import tempfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from sizer.errors import ScenarioError
from sizer.scenario import SCHEDULE_COLUMNS, load_scenario, write_schedule_csv

REPO = Path(__file__).resolve().parents[1]

HEAD = """\
[project]
title = "schedule test"
rules = "nec"
currency = "USD"
schedule = "circuits.csv"

[economics]
energy_price = "0.12 USD/kWh"
discount_rate = "7 %"
lifetime = "25 year"
load_factor = 0.55

[defaults]
terminals = "75 degC"

[source]
id = "SERVICE"
voltage = "480 V"
phases = 3
"""

CSV = """\
# invented demo data: a schedule as a spreadsheet would export it
id,parent,length,load,power_factor,continuous,ocpd,phases,voltage,transformer.rating,transformer.secondary,transformer.impedance,transformer.x_r,motor.hp,description
SWBD,SERVICE,25 ft,,,,1200 A,,,,,,,,"Main switchboard, 1200 A"
KILN-2,SWBD,310 ft,180 kW,0.95,yes,,,,,,,,,
XFMR-L,SWBD,60 ft,,,,,,,75 kVA,208 V,5.2 %,4,,
LTG-4,XFMR-L,95 ft,,,,20 A,1,120 V,,,,,,

FAN-1,SWBD,150 ft,,0.85,,,,,,,,,20,Exhaust fan
"""


def head_for(scenario_text: str, schedule: str = "circuits.csv") -> str:
    """A demo's head: everything before its first [[node]], with a schedule line."""
    head = scenario_text.split("[[node]]")[0]
    return head.replace("[project]\n", f'[project]\nschedule = "{schedule}"\n', 1)


def test_schedule_named_in_the_head(tmp_path):
    (tmp_path / "head.toml").write_text(HEAD, encoding="utf-8")
    (tmp_path / "circuits.csv").write_text(CSV, encoding="utf-8")
    sc = load_scenario(tmp_path / "head.toml")
    assert [n.id for n in sc.nodes] == ["SWBD", "KILN-2", "XFMR-L", "LTG-4", "FAN-1"]
    swbd, kiln, xfmr, ltg, fan = sc.nodes
    assert swbd.description == "Main switchboard, 1200 A"
    assert (kiln.power_factor, kiln.continuous) == (0.95, True)
    assert xfmr.transformer.rating_va == 75000.0 and xfmr.transformer.x_r == 4.0
    assert (ltg.voltage_v, ltg.phases, ltg.ocpd_a) == (120.0, 1, 20.0)
    assert fan.motor.power_w == pytest.approx(20 * 745.6998715822702)
    assert fan.continuous and fan.cable.terminals_c == 75.0      # defaults from the head


def test_giving_the_csv_finds_its_head(tmp_path):
    (tmp_path / "head.toml").write_text(HEAD, encoding="utf-8")
    (tmp_path / "other.toml").write_text("[project]\ntitle = 'not this one'\n",
                                         encoding="utf-8")
    (tmp_path / "broken.toml").write_text("[project\n", encoding="utf-8")
    (tmp_path / "circuits.csv").write_text(CSV, encoding="utf-8")
    by_csv = load_scenario(tmp_path / "circuits.csv")
    by_head = load_scenario(tmp_path / "head.toml")
    assert by_csv.nodes == by_head.nodes
    assert by_csv.file == str(tmp_path / "circuits.csv")


def test_two_heads_for_one_schedule_is_an_error(tmp_path):
    for name in ("a.toml", "b.toml"):
        (tmp_path / name).write_text(HEAD, encoding="utf-8")
    (tmp_path / "circuits.csv").write_text(CSV, encoding="utf-8")
    with pytest.raises(ScenarioError, match="several head files"):
        load_scenario(tmp_path / "circuits.csv")


def test_semicolons_bom_and_capitalised_headers(tmp_path):
    text = CSV.replace(",", ";").replace("id;parent;length", "ID;Parent;Length")
    text = text.replace('"Main switchboard; 1200 A"', "Main switchboard")
    (tmp_path / "head.toml").write_text(HEAD, encoding="utf-8")
    (tmp_path / "circuits.csv").write_bytes(text.encode("utf-8-sig"))
    sc = load_scenario(tmp_path / "head.toml")
    assert len(sc.nodes) == 5 and sc.nodes[0].description == "Main switchboard"


def test_toml_nodes_and_schedule_rows_together(tmp_path):
    extra = '\n[[node]]\nid = "MCC"\nparent = "SWBD"\nlength = "40 ft"\nocpd = "400 A"\n'
    rows = CSV + "PUMP,MCC,30 ft,12 kW,,,,,,,,,,,\n"
    (tmp_path / "head.toml").write_text(HEAD + extra, encoding="utf-8")
    (tmp_path / "circuits.csv").write_text(rows, encoding="utf-8")
    sc = load_scenario(tmp_path / "head.toml")
    # parents first: SWBD (a row) comes before MCC (a [[node]] table listed first)
    ids = [n.id for n in sc.nodes]
    assert ids.index("SWBD") < ids.index("MCC") < ids.index("PUMP")


def test_bad_cells_name_the_csv_and_the_node(tmp_path):
    rows = CSV.replace("KILN-2,SWBD,310 ft,180 kW,0.95,yes", "KILN-2,SWBD,310 A,180 kW,1.7,maybe")
    (tmp_path / "head.toml").write_text(HEAD, encoding="utf-8")
    (tmp_path / "circuits.csv").write_text(rows, encoding="utf-8")
    with pytest.raises(ScenarioError) as err:
        load_scenario(tmp_path / "head.toml")
    lines = str(err.value).splitlines()
    csv = str(tmp_path / "circuits.csv")
    assert lines == [
        f"{csv}: node 'KILN-2', field 'length': '310 A' is not a length",
        f"{csv}: node 'KILN-2', field 'power_factor': must be in (0, 1], got '1.7'",
        f"{csv}: node 'KILN-2', field 'continuous': must be true or false, got 'maybe'",
    ]


def test_row_with_too_many_cells(tmp_path):
    rows = CSV + "X,SWBD,10 ft,1 kW,,,,,,,,,,,,,,extra\n"
    (tmp_path / "head.toml").write_text(HEAD, encoding="utf-8")
    (tmp_path / "circuits.csv").write_text(rows, encoding="utf-8")
    with pytest.raises(ScenarioError, match="line 9 has 18 cells"):
        load_scenario(tmp_path / "head.toml")


def test_missing_schedule_file(tmp_path):
    (tmp_path / "head.toml").write_text(HEAD, encoding="utf-8")
    with pytest.raises(ScenarioError) as err:
        load_scenario(tmp_path / "head.toml")
    assert err.value.field == "project.schedule" and "no such file" in str(err.value)


@pytest.mark.parametrize("name", ["kiln-hall.toml", "hollinmoor-campus.toml",
                                  "kestrel-arena.toml"])
def test_demo_round_trip(tmp_path, name):
    original = load_scenario(REPO / "scenarios" / name)
    write_schedule_csv(original, tmp_path / "circuits.csv")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["circuits.csv"]   # no temp left
    head = head_for((REPO / "scenarios" / name).read_text(encoding="utf-8"))
    (tmp_path / "head.toml").write_text(head, encoding="utf-8")
    again = load_scenario(tmp_path / "head.toml")
    assert again.nodes == original.nodes
    with (tmp_path / "circuits.csv").open(encoding="utf-8", newline="") as fh:
        header = next(csv.reader(fh))
    assert header == list(SCHEDULE_COLUMNS)


words = st.text(alphabet=st.sampled_from('ab ,;"\'-é#'), max_size=12).map(str.strip)


@st.composite
def random_nodes(draw):
    """[[node]] tables with every optional field drawn at random (a valid tree)."""
    n = draw(st.integers(1, 10))
    parents = [draw(st.integers(-1, i - 1)) for i in range(n)]
    has_child = {p for p in parents if p >= 0}
    out = []
    for i, p in enumerate(parents):
        # ids may start with "#" (the writer quotes every cell, so no line reads as a comment)
        lines = [f'id = "#{i}"', f'parent = "{"SERVICE" if p < 0 else f"#{p}"}"',
                 f'length = "{draw(st.floats(0.5, 900))} {draw(st.sampled_from(["m", "ft"]))}"']
        if draw(st.booleans()):
            desc = draw(words).replace("\\", "").replace('"', "'")
            lines.append(f'description = "{desc}"')
        if draw(st.booleans()):
            materials = draw(st.sampled_from(['["Cu"]', '["Al", "Cu"]']))
            lines.append(f"materials = {materials}")
        if draw(st.booleans()):
            lines.append(f'ambient = "{draw(st.floats(-40, 80))} degC"')
        if draw(st.booleans()):
            lines.append(f"grouping = {draw(st.integers(1, 12))}")
        if draw(st.booleans()):
            lines.append(f'clearing_time = "{draw(st.floats(0.01, 2))} s"')
        if draw(st.booleans()):
            lines.append(f"neutral = {draw(st.sampled_from(['true', 'false']))}")
        if draw(st.booleans()):
            lines.append(f'installation = "{draw(st.sampled_from(["tray", "buried"]))}"')
        lines.append(f"power_factor = {draw(st.floats(0.05, 1.0))}")
        if i in has_child:
            if draw(st.booleans()):
                lines.append(f"demand_factor = {draw(st.floats(0.05, 1.0))}")
        else:
            kind = draw(st.sampled_from(["load", "ocpd", "motor"]))
            if kind == "load":
                unit = draw(st.sampled_from(["kW", "kVA", "A", "hp"]))
                lines.append(f'load = "{draw(st.floats(0, 200))} {unit}"')
            elif kind == "ocpd":
                lines.append(f'ocpd = "{draw(st.sampled_from([15, 20, 60, 400]))} A"')
            else:
                lines.append(f"motor = {{ hp = {draw(st.floats(0.5, 300))}, "
                             f"start_multiple = {draw(st.floats(1, 8))} }}")
            if draw(st.booleans()):
                lines.append('conductor = "2x 500 kcmil Cu"\nmax_sets = 3')
        out.append("[[node]]\n" + "\n".join(lines) + "\n")
    return "\n".join(out)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(random_nodes())
def test_random_round_trip(body):
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        toml = HEAD.replace('schedule = "circuits.csv"\n', "")
        (folder / "a.toml").write_text(toml + body, encoding="utf-8")
        original = load_scenario(folder / "a.toml")
        write_schedule_csv(original, folder / "circuits.csv")
        (folder / "b.toml").write_text(HEAD, encoding="utf-8")
        again = load_scenario(folder / "circuits.csv")
    assert again.nodes == original.nodes
