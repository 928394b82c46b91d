"""Reading the published reference tables copied into tests/reference/.

Each CSV there opens with ``#`` lines naming its standard, table, edition and status.
"""

from __future__ import annotations

import csv
from pathlib import Path

REFERENCE = Path(__file__).parent / "reference"


def read_reference(name: str) -> list[dict[str, str]]:
    """Rows of a reference CSV, its ``# source`` lines skipped."""
    lines = (REFERENCE / name).read_text(encoding="utf-8").splitlines()
    return list(csv.DictReader(line for line in lines if not line.startswith("#")))


def awg_name(size: str) -> str:
    """The canonical name of a size as NEC tables print it ("4/0" → "4/0 AWG", "250" → kcmil)."""
    return f"{size} AWG" if "/" in size or int(size) < 250 else f"{size} kcmil"
