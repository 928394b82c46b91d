"""A finished sweep: its points, the design changes, break-evens and tornado."""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from sizer.optimize import Objective
from sizer.results import Results
from sizer.sweep.vary import FIELDS, VaryRange, nearest

if TYPE_CHECKING:
    import pandas as pd

# --- results -------------------------------------------------------------------------------


@dataclass(frozen=True)
class SweepPoint:
    """One solved point: the field values (fields' units), the optimum and fixed designs."""

    index: int
    values: tuple[float, ...]
    status: str
    capex: float
    loss_pv: float
    loss_kwh_per_year: float
    co2_kg_per_year: float
    segments: tuple[tuple[str, str, int], ...]   # (material, size, sets) per segment
    choice: tuple[int, ...]                       # candidate rows (same table at every point)
    fixed: Mapping[str, tuple[float, float]]      # design -> (capex, loss_pv) here
    message: str = ""

    @property
    def ok(self) -> bool:
        """True when the point has a design."""
        return bool(self.choice)

    @property
    def lifecycle(self) -> float:
        """Capex plus loss PV of the point's optimum."""
        return self.capex + self.loss_pv


@dataclass(frozen=True)
class Change:
    """Segments that choose differently between two neighbouring points along a field."""

    field: str
    from_point: int
    to_point: int
    segments: tuple[str, ...]


@dataclass(frozen=True)
class Breakeven:
    """Where one segment's choice flips along a field, between two neighbouring points.

    ``value`` is where the costs of the two fixed choices are equal: the segment's own
    two rows (``basis="segment"``) when swapping that segment alone keeps every drop
    limit and the crossing lies between the points, else the two whole designs
    (``basis="design"``: the segment moves together with others); ``"midpoint"`` only
    when neither crosses (never for an exactly solved sweep).
    """

    segment: str
    field: str
    value: float
    low: float
    high: float
    at: tuple[tuple[str, float], ...]     # the other fields' values
    before: tuple[str, str, int]          # (material, size, sets) below the value
    after: tuple[str, str, int]
    kind: str                             # material | size up | size down | sets up | sets down
    basis: str
    from_point: int
    to_point: int


@dataclass(frozen=True)
class TornadoBar:
    """The optimum's cost at a field's two ends, the other fields at the scenario's values."""

    field: str
    low: float
    high: float
    base: float
    optimum_low: float
    optimum_high: float
    today_low: float
    today_high: float

    @property
    def swing(self) -> float:
        """How far the optimum's cost moves across the field's range."""
        return abs(self.optimum_high - self.optimum_low)


@dataclass(frozen=True)
class SweepResult:
    """A finished (or interrupted) sweep: points in index order and what they show."""

    title: str
    currency: str
    objective: str
    mode: str
    fields: tuple[VaryRange, ...]
    base_values: tuple[float, ...]
    segment_ids: tuple[str, ...]
    points: tuple[SweepPoint, ...]          # done points only, by index
    points_total: int
    baseline: SweepPoint                    # today's optimum, at the scenario's values
    code_minimum: SweepPoint                # least capex, at the scenario's values
    ends: Mapping[tuple[float, ...], SweepPoint]   # solved one-at-a-time range ends
    changes: tuple[Change, ...]
    breakevens: tuple[Breakeven, ...]
    tornado: tuple[TornadoBar, ...]
    interrupted: bool = False
    notes: tuple[str, ...] = ()
    # How it ran; not part of the JSON document (serial, pool and Dask give the same).
    runner: str = "serial"
    seconds: float = 0.0
    # The full design at the scenario's own values, for a report (not in the document).
    baseline_results: Results | None = field(default=None, repr=False, compare=False)

    @property
    def names(self) -> tuple[str, ...]:
        """The varied fields' names."""
        return tuple(f.name for f in self.fields)

    def unit(self, name: str) -> str:
        """A field's unit in this project's currency."""
        return FIELDS[name].unit_in(self.currency)

    def cost(self, capex: float, loss_pv: float) -> float:
        """The objective's cost from capex and loss PV."""
        return capex if self.objective == Objective.CAPEX.value else capex + loss_pv

    def optimum_cost(self, p: SweepPoint) -> float:
        """The objective cost of a point's optimum."""
        return self.cost(p.capex, p.loss_pv)

    def fixed_cost(self, p: SweepPoint, design: str) -> float:
        """The objective cost of a fixed design ("today", "code_minimum") at a point."""
        capex, loss_pv = p.fixed.get(design, (math.nan, math.nan))
        return self.cost(capex, loss_pv)

    def regret(self, p: SweepPoint) -> float:
        """Today's design's cost at the point minus the point's optimum (≥ 0)."""
        return max(0.0, self.fixed_cost(p, "today") - self.optimum_cost(p))

    def line(self, name: str) -> tuple[list[SweepPoint], dict[str, float]]:
        """Points along one field, in order, the other fields fixed; and those fixed values.

        One-at-a-time: that field's points. Grid: the slice through the grid values
        nearest the scenario's own values.
        """
        k = self.names.index(name)
        fixed = {}
        for j, f in enumerate(self.fields):
            if j == k:
                continue
            if self.mode == "oat":
                fixed[f.name] = self.base_values[j]
            else:
                fixed[f.name] = nearest(f.values, self.base_values[j])
        pts = [p for p in self.points if p.ok and self._on_line(p, k, fixed)]
        if self.mode == "oat":
            # Each field's line holds its own points, in range order.
            start = sum(len(f.values) for f in self.fields[:k])
            pts = [p for p in pts if start <= p.index < start + len(self.fields[k].values)]
        return sorted(pts, key=lambda p: p.values[k]), fixed

    def _on_line(self, p: SweepPoint, k: int, fixed: Mapping[str, float]) -> bool:
        return all(p.values[j] == fixed[n] for j, n in enumerate(self.names) if j != k)

    @property
    def points_frame(self) -> pd.DataFrame:
        """One row per solved point: varied values, status, totals and today's cost.

        Varied values are in their units (named in the column); ``today_cost`` is what
        the design at the scenario's own values would cost at that point.
        """
        import pandas as pd

        rows = []
        for p in self.points:
            row: dict[str, Any] = {f"{n} [{self.unit(n)}]" if self.unit(n) else n: v
                                   for n, v in zip(self.names, p.values, strict=True)}
            row |= {"status": p.status, "capex": p.capex, "loss_pv": p.loss_pv,
                    "lifecycle": p.lifecycle, "loss_kwh_per_year": p.loss_kwh_per_year,
                    "today_cost": self.fixed_cost(p, "today") if p.ok else math.nan,
                    "regret": self.regret(p) if p.ok else math.nan}
            rows.append(row)
        return pd.DataFrame(rows)

    def document(self) -> dict[str, Any]:
        """The JSON document (plain data; floats rounded when written with json_text)."""
        names = self.names

        def seg_list(p: SweepPoint) -> list[dict[str, Any]]:
            return [{"id": sid, "material": m, "size": s, "sets": n}
                    for sid, (m, s, n) in zip(self.segment_ids, p.segments, strict=True)]

        def point_doc(p: SweepPoint, with_index: bool = True) -> dict[str, Any]:
            doc: dict[str, Any] = {
                "values": dict(zip(names, p.values, strict=True)),
                "status": p.status,
                "totals": {"capex": p.capex, "loss_pv": p.loss_pv,
                           "lifecycle": p.lifecycle, "loss_kwh_per_year": p.loss_kwh_per_year,
                           "co2_kg_per_year": p.co2_kg_per_year},
                "segments": seg_list(p) if p.ok else [],
            }
            if p.ok:
                doc["fixed"] = {d: self.fixed_cost(p, d) for d in sorted(p.fixed)}
            if with_index:
                doc["index"] = p.index
            if p.message:
                doc["message"] = p.message
            return doc

        return {
            "title": self.title,
            "currency": self.currency,
            "objective": self.objective,
            "mode": self.mode,
            "fields": list(names),
            "units": {n: self.unit(n) for n in names},
            "ranges": {f.name: list(f.values) for f in self.fields},
            "base_values": dict(zip(names, self.base_values, strict=True)),
            "baseline": point_doc(self.baseline, with_index=False),
            "code_minimum": point_doc(self.code_minimum, with_index=False),
            "points": [point_doc(p) for p in self.points],
            "changes": [{"field": c.field, "from_point": c.from_point,
                         "to_point": c.to_point, "segments": list(c.segments)}
                        for c in self.changes],
            "breakevens": [{
                "segment": b.segment, "field": b.field, "value": b.value,
                "between": [b.low, b.high], "at": dict(b.at),
                "from": {"material": b.before[0], "size": b.before[1], "sets": b.before[2]},
                "to": {"material": b.after[0], "size": b.after[1], "sets": b.after[2]},
                "kind": b.kind, "basis": b.basis,
                "from_point": b.from_point, "to_point": b.to_point,
            } for b in self.breakevens],
            "tornado": [{
                "field": t.field, "low": t.low, "high": t.high, "base": t.base,
                "optimum": {"low": t.optimum_low, "base": self.optimum_cost(self.baseline),
                            "high": t.optimum_high},
                "today": {"low": t.today_low, "high": t.today_high},
                "swing": t.swing,
            } for t in self.tornado],
            "regret": [{"point": p.index, "today": self.fixed_cost(p, "today"),
                        "optimum": self.optimum_cost(p), "regret": self.regret(p)}
                       for p in self.points if p.ok],
            "interrupted": self.interrupted,
            "points_done": len(self.points),
            "points_total": self.points_total,
            "notes": list(self.notes),
        }
