"""Reading the rule profiles' data tables (CSV with a ``# source:`` line).

Every table opens with ``#`` lines, one of them ``# source: ...`` naming the standard,
table, edition and status of the values.
"""

from __future__ import annotations

import csv
import math
from pathlib import Path

from sizer.errors import ScenarioError


def read_csv(path: Path) -> tuple[list[str], list[list[str]], str]:
    """Header, rows and the ``# source:`` text of a data CSV; ScenarioError if unreadable."""
    try:
        text = path.read_text(encoding="utf-8")
    except OSError as exc:
        raise ScenarioError(f"cannot read rule table: {exc}", file=str(path)) from None
    source = ""
    lines = []
    for line in text.splitlines():
        if line.startswith("#"):
            body = line.lstrip("#").strip()
            if body.lower().startswith("source:") and not source:
                source = body[len("source:"):].strip()
        elif line.strip():
            lines.append(line)
    if not source:
        raise ScenarioError("rule table has no '# source:' line", file=str(path))
    rows = list(csv.reader(lines))
    if not rows:
        raise ScenarioError("rule table is empty", file=str(path))
    header, body_rows = rows[0], rows[1:]
    for row in body_rows:
        if len(row) != len(header):
            raise ScenarioError(f"row {row} does not match header {header}", file=str(path))
    return header, body_rows, source


def read_number(text: str, path: Path) -> float:
    """A CSV cell as a float; an empty cell is NaN (no value in the table)."""
    if not text.strip():
        return math.nan
    try:
        return float(text)
    except ValueError:
        raise ScenarioError(f"not a number: {text!r}", file=str(path)) from None
