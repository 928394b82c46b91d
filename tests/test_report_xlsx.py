"""The XLSX schedule: readable, deterministic, text stays text, clear error without openpyxl."""

from __future__ import annotations

import io
import sys

import pytest

from sizer.errors import SizerError
from sizer.model import Design, SegmentResult, Totals
from sizer.report.export import SCHEDULE_COLUMNS, write_xlsx, xlsx_bytes

openpyxl = pytest.importorskip("openpyxl", reason="openpyxl is the [xlsx] extra")


def segment(id_: str, parent: str) -> SegmentResult:
    return SegmentResult(
        id=id_, parent=parent, kind="feeder", material="Al", size="4/0 AWG", sets=2,
        egc="4 AWG", length_m=30.48, current_a=250.0, ampacity_a=410.0, vd_pct=0.4,
        path_vd_pct=0.4, r_ohm=0.0049, x_ohm=0.0016, ocpd_a=300.0, capex=1234.5,
        loss_kw=0.92, loss_pv=6800.0, temp_c=61.0, voltage_v=480.0, phases=3,
        loadflow_drop_pct=0.41, fault_ka=18.2)


DESIGN = Design("optimal", "lifecycle", "nec", "USD", Totals(2469.0, 13600.0, 4000.0),
                (segment("=1+1", "SRC"), segment("@cmd", "=1+1")))


def test_workbook_content(tmp_path):
    path = write_xlsx(tmp_path / "s.xlsx", DESIGN)
    wb = openpyxl.load_workbook(path)
    ws = wb["Schedule"]
    assert [c.value for c in ws[1]] == list(SCHEDULE_COLUMNS)
    assert ws.max_row == 3
    first = {name: ws.cell(row=2, column=i + 1) for i, name in enumerate(SCHEDULE_COLUMNS)}
    # Formula-like names are stored as text, never as formulas.
    assert first["id"].value == "=1+1" and first["id"].data_type == "s"
    assert first["capex"].value == pytest.approx(1234.5)
    assert first["sets"].value == 2
    totals = {r[0].value: r[1].value for r in wb["Totals"].iter_rows()}
    assert totals["lifecycle"] == pytest.approx(16069.0)
    assert "licensed professional" in totals["caution"]


def test_same_design_same_bytes():
    # No timestamps in a data file: zip entries and document properties are fixed.
    assert xlsx_bytes(DESIGN) == xlsx_bytes(DESIGN)


def test_without_openpyxl_names_the_extra(tmp_path, monkeypatch):
    monkeypatch.setitem(sys.modules, "openpyxl", None)  # import fails as if not installed
    with pytest.raises(SizerError, match=r"pip install 'sizer\[xlsx\]'"):
        write_xlsx(tmp_path / "s.xlsx", DESIGN)
    assert not (tmp_path / "s.xlsx").exists()


def test_readable_from_bytes():
    wb = openpyxl.load_workbook(io.BytesIO(xlsx_bytes(DESIGN)))
    assert wb.sheetnames == ["Schedule", "Totals"]
