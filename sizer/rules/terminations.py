"""Terminal ranges of overcurrent devices and what an oversized conductor needs to land.

A device's terminals take conductors between a smallest and a largest size, and only so
many per terminal (one per parallel set). Tables come from the profile's data file
(``terminals_awg.csv``, ``terminals_metric.csv``); sizes are integer indices into the
profile's size order. Pure, vectorised functions.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from sizer.errors import ScenarioError

OVERSIZE_CHOICES: tuple[str, ...] = ("splice", "refuse")
NO_TERMINAL = -1  # terminal_range: no row of the table takes that device with that many sets
# Relative tolerance when a device rating is compared with a band limit.
_REL_TOL = 1e-9


@dataclass(frozen=True, eq=False)
class TerminalTable:
    """Terminal ranges by device rating (one row per band and conductors-per-terminal).

    A device belongs to the first band whose ``ocpd_max_a`` is at or above its rating;
    within the band, a row takes up to ``per_terminal`` conductors of sizes
    ``min_size``..``max_size`` (size indices). ``oversize`` is what the profile does
    with a conductor above the range: "splice" (a priced reducing splice) or "refuse".
    """

    ocpd_max_a: np.ndarray
    per_terminal: np.ndarray
    min_size: np.ndarray
    max_size: np.ndarray
    oversize: str
    source: str

    def __post_init__(self) -> None:
        if self.oversize not in OVERSIZE_CHOICES:
            raise ScenarioError(f"oversize termination must be one of {OVERSIZE_CHOICES}, "
                                f"got {self.oversize!r}", field="oversize_termination")
        n = self.ocpd_max_a.shape[0]
        if n == 0 or any(a.shape != (n,) for a in (self.per_terminal, self.min_size,
                                                   self.max_size)):
            raise ScenarioError("terminal table needs rows of equal length")
        if np.any(np.diff(self.ocpd_max_a) < 0) or np.any(self.ocpd_max_a <= 0):
            raise ScenarioError("terminal table bands must be positive and ascending")
        if np.any(self.per_terminal < 1) or np.any(self.min_size > self.max_size):
            raise ScenarioError("terminal table rows need at least one conductor per "
                                "terminal and min_size <= max_size")


def read_terminal_table(header: list[str], rows: list[list[str]], size_index: dict[str, int],
                        oversize: str, source: str, file: str) -> TerminalTable:
    """Build a TerminalTable from the CSV's header and rows (sizes as the trade writes them)."""
    want = ["ocpd_max_a", "conductors_per_terminal", "min_size", "max_size"]
    if header != want:
        raise ScenarioError(f"terminal table needs columns {','.join(want)}", file=file)
    try:
        ocpd = np.array([float(r[0]) for r in rows])
        per = np.array([int(r[1]) for r in rows], dtype=np.int64)
        low = np.array([size_index[r[2].strip()] for r in rows], dtype=np.int64)
        high = np.array([size_index[r[3].strip()] for r in rows], dtype=np.int64)
    except (ValueError, KeyError) as exc:
        raise ScenarioError(f"terminal table: bad value {exc}", file=file) from None
    try:
        return TerminalTable(ocpd, per, low, high, oversize, source)
    except ScenarioError as exc:
        raise ScenarioError(exc.message, file=file, field=exc.field) from None


def terminal_range(table: TerminalTable, ocpd_a: object,
                   sets: object) -> tuple[np.ndarray, np.ndarray]:
    """Smallest and largest size index a device rated ``ocpd_a`` (A) takes with ``sets``.

    ``NO_TERMINAL`` (-1) in both where the rating is above the table or no row of its
    band takes that many conductors per terminal (then no reducing splice helps).
    """
    ocpd = np.asarray(ocpd_a, dtype=float)
    n_sets = np.asarray(sets)
    bands = np.unique(table.ocpd_max_a)
    band = np.searchsorted(bands, ocpd * (1 - _REL_TOL), side="left")
    row_band = np.searchsorted(bands, table.ocpd_max_a, side="left")
    big = np.iinfo(np.int64).max
    low = np.full(np.broadcast(ocpd, n_sets).shape, big, dtype=np.int64)
    high = np.full(low.shape, NO_TERMINAL, dtype=np.int64)
    for r in range(table.ocpd_max_a.shape[0]):
        takes = (band == row_band[r]) & (n_sets <= table.per_terminal[r])
        low = np.where(takes, np.minimum(low, table.min_size[r]), low)
        high = np.where(takes, np.maximum(high, table.max_size[r]), high)
    low = np.where(high >= 0, low, NO_TERMINAL)
    return low, high


def most_per_terminal(table: TerminalTable, ocpd_a: object) -> np.ndarray:
    """Most conductors per terminal any row of the device's band takes (0 above the table)."""
    ocpd = np.asarray(ocpd_a, dtype=float)
    bands = np.unique(table.ocpd_max_a)
    band = np.searchsorted(bands, ocpd * (1 - _REL_TOL), side="left")
    row_band = np.searchsorted(bands, table.ocpd_max_a, side="left")
    most = np.zeros(ocpd.shape, dtype=np.int64)
    for r in range(table.ocpd_max_a.shape[0]):
        most = np.where(band == row_band[r], np.maximum(most, table.per_terminal[r]), most)
    return most


def splice_ends(size_index: object, supply_max: object, load_max: object) -> np.ndarray:
    """Ends of the run (0, 1 or 2) where the conductor is larger than the terminal takes."""
    size = np.asarray(size_index)
    return ((size > np.asarray(supply_max)).astype(np.int64)
            + (size > np.asarray(load_max)).astype(np.int64))


def lands(size_index: object, low: object, high: object, oversize: str) -> np.ndarray:
    """Whether a conductor can be terminated: directly, or by splice when that is allowed.

    Smaller than the range never lands (a lug does not clamp it); larger lands only with
    ``oversize == "splice"``; ``NO_TERMINAL`` never lands.
    """
    size = np.asarray(size_index)
    hi = np.asarray(high)
    ok = (hi >= 0) & (size >= np.asarray(low))
    if oversize == "refuse":
        ok &= size <= hi
    return np.asarray(ok)
