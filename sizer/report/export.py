"""Files written from a finished design: JSON results and CSV/XLSX schedules.

Every file goes through the one writer, ``sizer.outputs``: written to a unique temporary
file beside its target and renamed into place, so an interrupted run never leaves a
half-written output. Data files carry no timestamps
and their floats are rounded, so the same input gives byte-identical files.
"""

from __future__ import annotations

import csv
import datetime
import io
import json
import math
import zipfile
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import asdict, fields, is_dataclass
from operator import attrgetter
from pathlib import Path
from typing import TYPE_CHECKING, Any

from sizer.model import Design, SegmentResult, Violation
from sizer.outputs import Protected, write_file

if TYPE_CHECKING:
    import pandas as pd

DECIMALS = 6
# A leading character a spreadsheet would read as a formula.
_FORMULA_LEAD = ("=", "+", "-", "@", "\t", "\r")


class CleanRows(list):
    """A list of records already JSON-safe (see :func:`clean_records`): not walked again."""


def clean(value: Any) -> Any:
    """JSON-safe copy: floats rounded, non-finite to None, dataclasses to dicts."""
    kind = type(value)
    if kind is float:
        if not math.isfinite(value):
            return None
        rounded = round(value, DECIMALS)
        return 0.0 if rounded == 0 else rounded
    if kind is str or kind is int or kind is bool or value is None:
        return value
    if kind is CleanRows:
        return value
    if isinstance(value, Mapping):
        return {str(k): clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [clean(v) for v in value]
    if is_dataclass(value) and not isinstance(value, type):
        return clean(asdict(value))
    if isinstance(value, float):  # float subclasses (numpy float64)
        return clean(float(value))
    if hasattr(value, "item") and callable(value.item):  # other numpy scalars
        return clean(value.item())
    return value


_NONE_TYPE = type(None)


def clean_column(values: Sequence[Any]) -> list[Any]:
    """``[clean(v) for v in values]``, in one pass per column when its type allows.

    A column of plain floats (and None) is rounded in one comprehension; one of text,
    whole numbers and booleans is already clean; any other goes value by value.
    """
    kinds = set(map(type, values))
    if kinds == {float}:
        return round_floats(values)
    if kinds == {float, _NONE_TYPE}:
        given = [i for i, v in enumerate(values) if v is not None]
        out: list[Any] = [None] * len(values)
        for i, x in zip(given, round_floats([values[i] for i in given]), strict=True):
            out[i] = x
        return out
    if kinds <= {str, int, bool, _NONE_TYPE}:
        return list(values)
    return [clean(v) for v in values]


# round_floats takes numpy's rounding only where it provably equals Python's round():
# |x| below this (so x * 10^DECIMALS is exact to within 2^-13 ...)
_NUMPY_ROUND_BELOW = 1e6
# ... and x * 10^DECIMALS at least this far from a half (so both round the same way).
_HALF_MARGIN = 1e-3


def round_floats(values: Sequence[float]) -> list[float | None]:
    """``[clean(v) for v in values]`` for plain floats, vectorised: equal value for value.

    ``round(x, 6)`` is the double nearest to k / 10^6, k the integer nearest to the exact
    x · 10^6; numpy's ``rint(x * 1e6) / 1e6`` is the same double whenever it finds the
    same k (k below 2^53, so the division is correctly rounded). It does when x · 10^6 is
    far from a half-way point compared with the product's rounding error; the few other
    values (and NaN, ±inf) go through ``clean`` one by one.
    """
    import numpy as np

    x = np.asarray(values, dtype=float)
    scale = 10.0 ** DECIMALS
    with np.errstate(invalid="ignore", over="ignore"):
        y = x * scale
        out = np.rint(y) / scale
        safe = (np.abs(x) < _NUMPY_ROUND_BELOW) & (np.abs(y - np.floor(y) - 0.5) > _HALF_MARGIN)
    out[out == 0] = 0.0   # no -0.0, as clean writes it
    result: list[float | None] = out.tolist()
    for i in np.flatnonzero(~safe).tolist():
        result[i] = clean(float(values[i]))
    return result


def clean_records(records: Sequence[Any], names: Sequence[str],
                  omit_none: frozenset[str] = frozenset()) -> CleanRows:
    """Objects as JSON-safe dicts of the attributes ``names``, built column by column.

    Equal to ``[clean({k: getattr(r, k) for k in names}) for r in records]`` with the
    keys in ``omit_none`` left out of a record where they are None; the result is marked
    clean, so writing it walks no value again.
    """
    # Keys inserted sorted: the writer's sort (sort_keys) then finds them in order.
    names = sorted(names)
    if not records:
        return CleanRows()
    get = attrgetter(*names) if len(names) > 1 else (lambda r: (getattr(r, names[0]),))
    columns = [clean_column(c) for c in zip(*map(get, records), strict=True)]
    rows = CleanRows(dict(zip(names, values, strict=True)) for values in zip(*columns, strict=True))
    for k in omit_none:
        for row in rows:
            if row[k] is None:
                del row[k]
    return rows


_SEGMENT_FIELDS = tuple(f.name for f in fields(SegmentResult))
_VIOLATION_FIELDS = tuple(f.name for f in fields(Violation))
# Keys written only on the runs they describe: ``phase`` on single-phase runs of a
# three-phase system, ``phase_currents_a`` and ``neutral_a`` on three-phase runs,
# ``neutral_size`` on three-phase runs with a neutral.
_ONLY_WHERE_SET = frozenset({"phase", "phase_currents_a", "neutral_a", "neutral_size"})


def design_document(design: Design, extra: Mapping[str, Any] | None = None) -> dict[str, Any]:
    """The stable JSON results document of a design (the keys other tools read)."""
    doc: dict[str, Any] = {
        "status": design.status,
        "objective": design.objective,
        "rules": design.rules,
        "currency": design.currency,
        "engine": design.engine,
        "proven_optimal": design.proven_optimal,
        "gap": design.gap,
        "totals": {
            "capex": design.totals.capex,
            "loss_pv": design.totals.loss_pv,
            "lifecycle": design.totals.lifecycle,
            "loss_kwh_per_year": design.totals.loss_kwh_per_year,
        },
        # Built column by column and marked clean: tens of thousands of runs are
        # rounded in a few comprehensions, not walked value by value.
        "segments": clean_records(design.segments, _SEGMENT_FIELDS, _ONLY_WHERE_SET),
    }
    if design.diagnosis:
        doc["diagnosis"] = list(design.diagnosis)
    # Rules the design breaks: for check, every rule; for solve, what verification found
    # (short-circuit withstand, motor-start dip) beyond the rules the optimiser enforced.
    doc["violations"] = clean_records(design.violations, _VIOLATION_FIELDS)
    if design.notes:
        doc["notes"] = list(design.notes)
    if extra:
        doc.update(extra)
    return clean(doc)


def json_text(doc: Any) -> str:
    """Deterministic JSON text: sorted keys, rounded floats, final newline.

    A top-level object is written one key per line and each element of a list of objects
    on its own line, so large results stay readable and diffable and use the fast encoder.
    """
    data = clean(doc)
    # One encoder for every piece (json.dumps with options makes a new one per call).
    one = json.JSONEncoder(sort_keys=True, ensure_ascii=False).encode
    if not isinstance(data, dict):
        return one(data) + "\n"

    lines = []
    for key in sorted(data):
        value = data[key]
        if isinstance(value, list) and value and all(isinstance(v, dict) for v in value):
            inner = ",\n".join(f"    {one(v)}" for v in value)
            lines.append(f"  {one(key)}: [\n{inner}\n  ]")
        else:
            lines.append(f"  {one(key)}: {one(value)}")
    return "{\n" + ",\n".join(lines) + "\n}\n"


def safe_cell(value: Any) -> Any:
    """Neutralise text a spreadsheet would evaluate (a leading =, +, -, @)."""
    if isinstance(value, str) and value.startswith(_FORMULA_LEAD):
        return "'" + value
    return value


def csv_text(header: Sequence[str], rows: Iterable[Sequence[Any]]) -> str:
    """CSV text with every cell quoted-as-needed and formula-like text neutralised."""
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(header)
    for row in rows:
        # Only text from the scenario is neutralised; a negative number stays a number.
        writer.writerow([safe_cell(v) if isinstance(v, str) else _fmt(v) for v in row])
    return buf.getvalue()


def _fmt(value: Any) -> Any:
    if isinstance(value, float):
        return "" if not math.isfinite(value) else f"{value:.{DECIMALS}g}"
    return "" if value is None else value


SCHEDULE_COLUMNS = (
    "id", "parent", "kind", "voltage_v", "phases", "length_m", "current_a", "ocpd_a",
    "material", "size", "sets", "egc", "bonding_jumper", "ampacity_a", "temp_c", "vd_pct",
    "path_vd_pct", "loadflow_drop_pct", "fault_ka", "fault_min_ka", "earth_fault_a",
    "trip_a", "r_ohm", "x_ohm", "capex", "loss_kw", "loss_pv", "pinned", "terminal_max",
    "termination", "raceway", "conductor_capex", "termination_capex", "raceway_capex",
)


def schedule_frame(design: Design) -> pd.DataFrame:
    """The per-segment schedule as a DataFrame: one row per run, units in column names."""
    import pandas as pd

    return pd.DataFrame([[getattr(s, c) for c in SCHEDULE_COLUMNS] for s in design.segments],
                        columns=list(SCHEDULE_COLUMNS))


def schedule_csv(design: Design) -> str:
    """The per-segment schedule as CSV text: the columns of :func:`schedule_frame`.

    Written column by column straight from the design (the same cells as writing the
    frame through :func:`csv_text`, without building it or importing pandas).
    """
    records = list(map(attrgetter(*SCHEDULE_COLUMNS), design.segments))
    columns = [_csv_column(c) for c in zip(*records, strict=True)] if records else []
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(SCHEDULE_COLUMNS)
    writer.writerows(zip(*columns, strict=True))
    return buf.getvalue()


def _csv_column(values: Sequence[Any]) -> list[Any]:
    """The cells of one schedule column, as :func:`csv_text` writes them."""
    kinds = set(map(type, values))
    # x - x == 0 only for finite x (as math.isfinite, without a call per cell).
    if kinds <= {float}:
        return [f"{v:.{DECIMALS}g}" if v - v == 0 else "" for v in values]
    if kinds <= {float, _NONE_TYPE}:
        return ["" if v is None else f"{v:.{DECIMALS}g}" if v - v == 0 else ""
                for v in values]
    if kinds <= {int, bool}:
        return list(values)
    if kinds <= {str, _NONE_TYPE}:
        return ["" if v is None else "'" + v if v.startswith(_FORMULA_LEAD) else v
                for v in values]
    return [safe_cell(v) if isinstance(v, str) else _fmt(v) for v in values]


def atomic_write(path: str | Path, data: str | bytes, *,
                 protect: Protected | Sequence[Path] = ()) -> Path:
    """Write ``data`` to ``path`` whole or not at all, never over a file in ``protect``.

    One file written through the one writer (``sizer.outputs``); a run writing several
    files stages them together with ``sizer.outputs.Staged``.
    """
    return write_file(path, data, protect=protect)


# --- XLSX schedule (optional: needs openpyxl, the [xlsx] extra) ---------------------------

XLSX_HINT = "writing XLSX needs openpyxl: pip install 'sizer[xlsx]'"
# Zip entry time for every part, so the same design gives byte-identical workbooks.
_ZIP_EPOCH = (1980, 1, 1, 0, 0, 0)
_XLSX_NUMBER_FORMATS = {
    "length_m": "0.0", "current_a": "0.0", "ocpd_a": "0", "ampacity_a": "0", "temp_c": "0.0",
    "vd_pct": "0.00", "path_vd_pct": "0.00", "loadflow_drop_pct": "0.00", "fault_ka": "0.0",
    "fault_min_ka": "0.0", "earth_fault_a": "0", "trip_a": "0",
    "r_ohm": "0.00000", "x_ohm": "0.00000", "capex": "#,##0", "loss_kw": "0.000",
    "loss_pv": "#,##0", "voltage_v": "0",
}


def xlsx_available() -> bool:
    """True when openpyxl can be imported."""
    try:
        import openpyxl  # noqa: F401
    except ImportError:
        return False
    return True


def xlsx_bytes(design: Design) -> bytes:
    """The schedule and totals as an XLSX workbook (deterministic bytes, no timestamps)."""
    try:
        from openpyxl import Workbook
        from openpyxl.cell.cell import ILLEGAL_CHARACTERS_RE
        from openpyxl.styles import Font
        from openpyxl.writer.excel import ExcelWriter
    except ImportError:
        from sizer.errors import SizerError

        raise SizerError(XLSX_HINT) from None
    from sizer import CAUTION

    def put(ws: Any, row: int, col: int, value: Any) -> Any:
        value = clean(value)
        if isinstance(value, str):
            value = ILLEGAL_CHARACTERS_RE.sub("", value)
        cell = ws.cell(row=row, column=col, value=value)
        if isinstance(value, str):
            cell.data_type = "s"  # text stays text: a leading "=" is never a formula
        return cell

    wb = Workbook()
    wb.properties.creator = "sizer"
    # A fixed date, not the run time: data files carry no timestamps.
    wb.properties.created = wb.properties.modified = datetime.datetime(*_ZIP_EPOCH)
    ws = wb.active
    ws.title = "Schedule"
    # Written from the same DataFrame as the CSV (and as ``Results.schedule``).
    frame = schedule_frame(design)
    rows = [list(r) for r in frame.astype(object).itertuples(index=False, name=None)]
    columns = [str(c) for c in frame.columns]
    for col, name in enumerate(columns, start=1):
        put(ws, 1, col, name).font = Font(bold=True)
    for row, values in enumerate(rows, start=2):
        for col, (name, value) in enumerate(zip(columns, values, strict=True), start=1):
            cell = put(ws, row, col, value)
            if name in _XLSX_NUMBER_FORMATS:
                cell.number_format = _XLSX_NUMBER_FORMATS[name]
    ws.freeze_panes = "C2"
    for col, name in enumerate(columns, start=1):
        width = max([len(name)] + [len(str(r[col - 1])) for r in rows])
        ws.column_dimensions[ws.cell(row=1, column=col).column_letter].width = min(width + 2, 40)

    totals = wb.create_sheet("Totals")
    t = design.totals
    facts = [("status", design.status), ("objective", design.objective),
             ("rules", design.rules), ("currency", design.currency),
             ("capex", t.capex), ("loss_pv", t.loss_pv), ("lifecycle", t.lifecycle),
             ("loss_kwh_per_year", t.loss_kwh_per_year), ("caution", CAUTION)]
    for row, (key, value) in enumerate(facts, start=1):
        put(totals, row, 1, key).font = Font(bold=True)
        put(totals, row, 2, value)
    totals.column_dimensions["A"].width = 20
    totals.column_dimensions["B"].width = 24

    raw = io.BytesIO()
    with zipfile.ZipFile(raw, "w", zipfile.ZIP_DEFLATED) as archive:
        ExcelWriter(wb, archive).write_data()
    return _fixed_zip_times(raw.getvalue())


def _fixed_zip_times(data: bytes) -> bytes:
    """Rewrite a zip with every entry dated 1980-01-01 (zip stamps the wall clock)."""
    out = io.BytesIO()
    with zipfile.ZipFile(io.BytesIO(data)) as src, \
            zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as dst:
        for info in src.infolist():
            fixed = zipfile.ZipInfo(info.filename, date_time=_ZIP_EPOCH)
            fixed.compress_type = zipfile.ZIP_DEFLATED
            fixed.external_attr = 0o644 << 16
            dst.writestr(fixed, src.read(info.filename))
    return out.getvalue()


def write_xlsx(path: str | Path, design: Design, *,
               protect: Protected | Sequence[Path] = ()) -> Path:
    """Write the schedule workbook atomically; SizerError naming the extra without openpyxl."""
    return atomic_write(path, xlsx_bytes(design), protect=protect)
