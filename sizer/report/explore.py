"""The trade-off to explore: every frontier design embedded compactly, and its chart.

Pure functions of finished designs (``sizer.model.Design``): no solving here. Each
design is stored as the chosen row per run, an index into that run's short list of
conductors used by any design on the page, plus its drops, fault levels and marks, so
the page's script only looks numbers up. Money in the scenario's currency, drops in %
of each circuit's nominal voltage, energy in kWh.
"""

from __future__ import annotations

import html
import json
import math
from collections.abc import Sequence
from dataclasses import dataclass

from sizer.model import Design, KeyFigures, SegmentResult
from sizer.report.tree import BINDING_TOLERANCE_PCT, RunView


@dataclass(frozen=True)
class DesignPoint:
    """One design the page can show: a frontier point, the code minimum or the optimum.

    ``design`` (verified: load-flow drops and fault levels filled in) is there when the
    page shows designs run by run; a large tree's page needs the key figures only.
    """

    label: str
    figures: KeyFigures
    design: Design | None = None
    method: str = ""             # "weighted sum" | "epsilon constraint" | "" (an option)

    @classmethod
    def of(cls, label: str, design: Design, method: str = "") -> DesignPoint:
        """The point of a whole design."""
        return cls(label, design.key_figures(), design, method)

    @property
    def findings(self) -> int:
        """Rule findings of the design (verification included)."""
        return self.figures.findings


@dataclass(frozen=True)
class RunLimits:
    """The drop limits one run is held to (%); inf when none applies."""

    own_pct: float
    path_pct: float


def conductor(s: SegmentResult) -> str:
    """A run's conductor as the trade writes it, pinned runs marked."""
    text = f"{s.sets}x {s.size} {s.material}" if s.sets > 1 else f"{s.size} {s.material}"
    return text + (" (pinned)" if s.pinned else "")


def upsized(s: SegmentResult, base: SegmentResult | None) -> bool:
    """Larger than the code minimum: another conductor that costs more upfront."""
    if base is None:
        return False
    return (s.material, s.size, s.sets) != (base.material, base.size, base.sets) and (
        s.capex > base.capex + 1e-9)


def binds(s: SegmentResult, limits: RunLimits) -> bool:
    """A drop limit binds: the run's own drop or its path drop is at its limit.

    The path drop is the larger of the linear estimate and the load flow: the closed
    loop tightens the estimate's budget by the load flow's excess, so for a load the
    optimiser held back it is the load flow that sits at the limit.
    """
    tol = BINDING_TOLERANCE_PCT
    path = max(s.path_vd_pct, s.loadflow_drop_pct if s.loadflow_drop_pct is not None
               else -math.inf)
    return (s.vd_pct >= limits.own_pct - tol) or (
        math.isfinite(limits.path_pct) and path >= limits.path_pct - tol)


def shown_drop(s: SegmentResult) -> float:
    """The path drop the page shows: the load flow's when run, else the linear estimate."""
    return s.loadflow_drop_pct if s.loadflow_drop_pct is not None else s.path_vd_pct


def run_views(design: Design, code_minimum: Design | None, parent: Sequence[int],
              kinds: Sequence[str], limits: Sequence[RunLimits],
              descriptions: Sequence[str] = ()) -> list[RunView]:
    """The tree picture's runs for one design (same order as its segments)."""
    base = {s.id: s for s in code_minimum.segments} if code_minimum else {}
    out = []
    for i, s in enumerate(design.segments):
        out.append(RunView(
            index=i, id=s.id, parent=int(parent[i]), node_kind=kinds[i],
            conductor=conductor(s), drop_pct=shown_drop(s),
            upsized=upsized(s, base.get(s.id)), binds=binds(s, limits[i]),
            description=descriptions[i] if i < len(descriptions) else ""))
    return out


def _h(value: float | None) -> int | None:
    """Hundredths, for compact storage (None stays None)."""
    return None if value is None or not math.isfinite(value) else round(value * 100)


def explorer_data(points: Sequence[DesignPoint], shown: int, reference: int,
                  code_minimum: int | None, limits: Sequence[RunLimits], *,
                  currency: str, cost_per_w_year: float, kwh_per_w_year: float,
                  years: float, drop_limit_pct: float, per_run: bool = True) -> dict:
    """The page's data: each run's short list of conductors and each design's picks.

    ``shown`` is the design the page shows without script, ``reference`` the lifecycle
    optimum the differences are measured from, ``code_minimum`` the base of upsizing
    and payback. Drops and fault levels are stored in hundredths (% and kA).

    Without ``per_run`` (a large tree's light page) each design carries its totals and
    the number of runs that differ from the reference only: no ``runs``, no picks.
    """
    if not per_run:
        return _totals_only(points, shown, reference, code_minimum, currency=currency,
                            cost_per_w_year=cost_per_w_year, kwh_per_w_year=kwh_per_w_year,
                            years=years, drop_limit_pct=drop_limit_pct)
    if any(p.design is None for p in points):
        raise ValueError("a page that shows designs run by run needs every whole design")
    first = points[shown].design
    assert first is not None
    alts: list[list[tuple]] = [[] for _ in first.segments]
    keys: list[dict[tuple, int]] = [{} for _ in first.segments]
    base = points[code_minimum].design if code_minimum is not None else None
    base_by_id = {s.id: s for s in base.segments} if base else {}
    out_points = []
    for p in points:
        d = p.design
        assert d is not None
        pick, est, lf, fk, ef, up, bind = [], [], [], [], [], [], []
        for i, s in enumerate(d.segments):
            row = (conductor(s), s.egc, round(s.ampacity_a, 1), round(s.vd_pct, 4),
                   round(s.capex, 2), round(s.loss_kw, 5), round(s.loss_pv, 2),
                   round(100.0 * s.current_a / s.ampacity_a, 1) if s.ampacity_a > 0 else None,
                   s.terminal_max, s.termination, s.raceway)
            if row not in keys[i]:
                keys[i][row] = len(alts[i])
                alts[i].append(row)
            pick.append(keys[i][row])
            est.append(_h(s.path_vd_pct))
            lf.append(_h(s.loadflow_drop_pct))
            fk.append(_h(s.fault_ka))
            ef.append(None if s.earth_fault_a is None else round(s.earth_fault_a))
            if upsized(s, base_by_id.get(s.id)):
                up.append(i)
            if binds(s, limits[i]):
                bind.append(i)
        out_points.append({
            **_point_totals(p),
            "pick": pick, "est": est, "lf": lf, "fk": fk, "ef": ef, "up": up, "bind": bind,
        })
    return {
        "currency": currency, "years": years, "costPerW": cost_per_w_year,
        "kwhPerW": kwh_per_w_year, "dropLimit": drop_limit_pct, "shown": shown,
        "reference": reference,
        "codeMinimum": code_minimum,
        "runs": [{"id": s.id, "alts": [list(a) for a in alts[i]],
                  "trip": None if s.trip_a is None else round(s.trip_a),
                  "lim": [limits[i].own_pct,
                          limits[i].path_pct if math.isfinite(limits[i].path_pct) else None]}
                 for i, s in enumerate(first.segments)],
        "points": out_points,
    }


def _point_totals(p: DesignPoint) -> dict:
    """A design's totals and key figures as the page's script reads them."""
    f = p.figures
    return {
        "label": p.label, "method": p.method,
        "capex": round(f.totals.capex, 2), "losspv": round(f.totals.loss_pv, 2),
        "lossw": round(f.loss_w, 3), "kwh": round(f.totals.loss_kwh_per_year, 1),
        # First-year loss cost, each run at its own T and peak coincidence.
        "losscost": round(f.loss_cost_per_year, 2),
        "findings": f.findings, "worst": round(f.worst_drop_pct, 4), "basis": f.drop_basis,
    }


def _totals_only(points: Sequence[DesignPoint], shown: int, reference: int,
                 code_minimum: int | None, *, currency: str, cost_per_w_year: float,
                 kwh_per_w_year: float, years: float, drop_limit_pct: float) -> dict:
    """The light page's data: per design its totals and how many runs differ."""
    ref = points[reference].figures.conductors
    out_points = []
    for p in points:
        entry = _point_totals(p)
        entry["changed"] = sum(1 for c, r in zip(p.figures.conductors, ref, strict=True)
                               if c != r)
        out_points.append(entry)
    return {"currency": currency, "years": years, "costPerW": cost_per_w_year,
            "kwhPerW": kwh_per_w_year, "dropLimit": drop_limit_pct, "shown": shown,
            "reference": reference, "codeMinimum": code_minimum, "points": out_points}


def data_script(data: dict) -> str:
    """The data as an inert JSON script element; "<" escaped so no text can end it."""
    text = json.dumps(data, ensure_ascii=False, separators=(",", ":"), allow_nan=False)
    text = text.replace("<", "\\u003c").replace(">", "\\u003e").replace("&", "\\u0026")
    return f'<script type="application/json" id="sizer-data">{text}</script>'


# --- the frontier chart -----------------------------------------------------------------


def _ticks(lo: float, hi: float, n: int = 5) -> list[float]:
    """Round tick values covering [lo, hi]."""
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return [lo]
    raw = (hi - lo) / n
    mag = 10 ** math.floor(math.log10(raw))
    step = min((m * mag for m in (1, 2, 2.5, 5, 10) if m * mag >= raw), default=10 * mag)
    start = math.ceil(lo / step) * step
    out = []
    v = start
    while v <= hi + 1e-9 * step:
        out.append(v)
        v += step
    return out


def _money_tick(v: float) -> str:
    if abs(v) >= 1e6:
        return f"{v / 1e6:g}M"
    if abs(v) >= 1e3:
        return f"{v / 1e3:g}k"
    return f"{v:g}"


def frontier_svg(points: Sequence[DesignPoint], shown: int, reference: int,
                 code_minimum: int | None, currency: str, years: float) -> str:
    """Upfront cost against the present value of losses, one clickable mark per design.

    Circles are frontier points (filled: weighted sum, hollow: ε-constraint), the square
    the code minimum, the diamond the lifecycle optimum; the ring marks the design shown.
    The dashed line joins designs with the optimum's lifetime total.
    """
    w, h = 560, 330
    left, right, top, bottom = 78, 16, 14, 52
    xs = [p.figures.totals.capex for p in points]
    ys = [p.figures.totals.loss_pv for p in points]
    x0, x1 = min(xs), max(xs)
    y0, y1 = min(ys), max(ys)
    padx = (x1 - x0) * 0.08 or max(abs(x1) * 0.05, 1.0)
    pady = (y1 - y0) * 0.08 or max(abs(y1) * 0.05, 1.0)
    x0, x1, y0, y1 = x0 - padx, x1 + padx, y0 - pady, y1 + pady

    def px(v: float) -> float:
        return left + (v - x0) / (x1 - x0) * (w - left - right)

    def py(v: float) -> float:
        return h - bottom - (v - y0) / (y1 - y0) * (h - top - bottom)

    esc = html.escape
    parts = [f'<svg id="frontier-chart" class="chart" xmlns="http://www.w3.org/2000/svg" '
             f'viewBox="0 0 {w} {h}" width="{w}" height="{h}" role="img" '
             f'aria-label="Upfront cost against the present value of losses">']
    parts.append(f'<rect class="plot" x="{left}" y="{top}" width="{w - left - right}" '
                 f'height="{h - top - bottom}"/>')
    for v in _ticks(x0, x1):
        x = px(v)
        parts.append(f'<line class="grid" x1="{x:.1f}" y1="{top}" x2="{x:.1f}" '
                     f'y2="{h - bottom}"/><text class="tick" x="{x:.1f}" '
                     f'y="{h - bottom + 15}" text-anchor="middle">{_money_tick(v)}</text>')
    for v in _ticks(y0, y1):
        y = py(v)
        parts.append(f'<line class="grid" x1="{left}" y1="{y:.1f}" x2="{w - right}" '
                     f'y2="{y:.1f}"/><text class="tick" x="{left - 6}" y="{y + 4:.1f}" '
                     f'text-anchor="end">{_money_tick(v)}</text>')
    parts.append(f'<text class="axis" x="{(left + w - right) / 2:.0f}" y="{h - 14}" '
                 f'text-anchor="middle">Upfront cost ({esc(currency)})</text>'
                 f'<text class="axis" transform="translate(16,{(top + h - bottom) / 2:.0f}) '
                 f'rotate(-90)" text-anchor="middle">Losses over {years:g} years, present '
                 f"value ({esc(currency)})</text>")
    # Equal lifetime total through the reference: x + y = const.
    total = xs[reference] + ys[reference]
    line = [(x, total - x) for x in (x0, x1)]
    line = [(max(x0, min(x1, total - y0)), y0) if y < y0 else (x, y) for x, y in line]
    line = [(total - y1, y1) if y > y1 else (x, y) for x, y in line]
    parts.append(f'<line class="iso" x1="{px(line[0][0]):.1f}" y1="{py(line[0][1]):.1f}" '
                 f'x2="{px(line[1][0]):.1f}" y2="{py(line[1][1]):.1f}"/>')
    order = sorted(range(len(points)), key=lambda i: (xs[i], ys[i]))
    path = "M" + "L".join(f"{px(xs[i]):.1f},{py(ys[i]):.1f}" for i in order
                          if points[i].method)
    if path != "M":
        parts.append(f'<path class="front" d="{path}"/>')
    # Each point's click target: 12 px, shrunk to under half the gap to its nearest
    # neighbour so that close points never cover each other's centre.
    where = [(px(xs[i]), py(ys[i])) for i in range(len(points))]
    hit_r = [min([12.0] + [max(3.0, 0.45 * math.dist(a, b))
                           for j, b in enumerate(where) if j != i])
             for i, a in enumerate(where)]
    for i, p in enumerate(points):
        x, y = where[i]
        title = (f"{p.label}: upfront {xs[i]:,.0f} {currency}, losses {ys[i]:,.0f} "
                 f"{currency} present value")
        if i == reference:
            mark = (f'<path class="pt best" d="M{x:.1f},{y - 8:.1f}L{x + 8:.1f},{y:.1f}'
                    f'L{x:.1f},{y + 8:.1f}L{x - 8:.1f},{y:.1f}Z"/>')
        elif i == code_minimum:
            mark = f'<rect class="pt cm" x="{x - 6:.1f}" y="{y - 6:.1f}" width="12" height="12"/>'
        else:
            hollow = " hollow" if p.method == "epsilon constraint" else ""
            mark = f'<circle class="pt{hollow}" cx="{x:.1f}" cy="{y:.1f}" r="5.5"/>'
        ring = " on" if i == shown else ""
        parts.append(f'<g class="pick{ring}" data-p="{i}" tabindex="0" role="button">'
                     f"<title>{esc(title)}</title>"
                     f'<circle class="hit" cx="{x:.1f}" cy="{y:.1f}" r="{hit_r[i]:.1f}"/>{mark}'
                     f'<circle class="ring" cx="{x:.1f}" cy="{y:.1f}" r="11"/></g>')
    parts.append("</svg>")
    return "".join(parts)


def chart_key() -> str:
    """The chart's key in words (the marks are shapes, so it reads in greyscale)."""
    return ("◆ lifecycle optimum · ■ code minimum · ● frontier point (weighted sum) · "
            "○ frontier point (ε-constraint) · ring: the design shown · dashed line: the "
            "optimum's lifetime total")

