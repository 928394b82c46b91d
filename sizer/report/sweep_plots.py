"""Plots, the HTML report section and the JSON file of a sensitivity sweep.

Plot functions take a finished ``SweepResult`` and return a matplotlib Figure (made
without pyplot, so no global state and no display); ``sweep_section_html`` embeds them
as base64 PNG in one self-contained ``<section>`` whose every scenario name is escaped.
"""

from __future__ import annotations

import base64
import io
import math
from collections.abc import Sequence
from html import escape
from pathlib import Path

import numpy as np
from matplotlib.figure import Figure

from sizer import CAUTION
from sizer.report.export import atomic_write, json_text
from sizer.sweep import Breakeven, SweepPoint, SweepResult, nearest
from sizer.units import conductor_label

# Tables in the HTML stop here; the JSON file has every row.
MAX_ROWS = 60
_COLOURS = {"optimum": "#1b6ca8", "today": "#d1495b", "code_minimum": "#6c757d",
            "low": "#66a182", "high": "#edae49"}


def _cost_label(result: SweepResult) -> str:
    what = "upfront cost" if result.objective == "capex" else "lifetime cost (upfront + losses PV)"
    return f"{what}, {result.currency}"


def _field_label(result: SweepResult, name: str) -> str:
    unit = result.unit(name)
    return f"{name} ({unit})" if unit else name


def _fmt(value: float) -> str:
    return "–" if not math.isfinite(value) else f"{value:.6g}"


def _money(value: float) -> str:
    return "–" if not math.isfinite(value) else f"{value:,.0f}"


def _others(result: SweepResult, fixed: dict[str, float]) -> str:
    return ", ".join(f"{n} = {_fmt(v)} {result.unit(n)}".strip() for n, v in fixed.items())


# --- figures ---------------------------------------------------------------------------------


def figure_line(result: SweepResult, name: str) -> Figure | None:
    """Cost against one field: the moving optimum, today's design and the code minimum."""
    points, fixed = result.line(name)
    if len(points) < 2:
        return None
    k = result.names.index(name)
    x = np.array([p.values[k] for p in points])
    fig = Figure(figsize=(7.0, 4.0), dpi=100)
    ax = fig.add_subplot()
    ax.plot(x, [result.fixed_cost(p, "code_minimum") for p in points], "-",
            color=_COLOURS["code_minimum"], label="code minimum (fixed)")
    ax.plot(x, [result.fixed_cost(p, "today") for p in points], "-", color=_COLOURS["today"],
            label="today's optimum (fixed)")
    ax.plot(x, [result.optimum_cost(p) for p in points], "o--", color=_COLOURS["optimum"],
            label="optimum at each point")
    ax.axvline(result.base_values[k], color="0.3", lw=0.8, ls=":")
    on_line = {p.index for p in points}
    evens = sorted({round(b.value, 12) for b in result.breakevens
                    if b.field == name and b.from_point in on_line and b.to_point in on_line})
    if evens:
        # Break-evens as a rug along the bottom: where some segment changes its conductor.
        ax.plot(evens, [0.0] * len(evens), "|", color=_COLOURS["optimum"], ms=10,
                transform=ax.get_xaxis_transform(), label="break-evens", clip_on=False)
    ax.set_xlabel(_field_label(result, name))
    ax.set_ylabel(_cost_label(result))
    title = f"Cost against {name}"
    if fixed:
        title += f" ({_others(result, fixed)})"
    ax.set_title(title, fontsize=9)
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize=8)
    fig.tight_layout()
    return fig


def figure_tornado(result: SweepResult) -> Figure | None:
    """The optimum's cost at each field's two ends, the other fields at the scenario's."""
    bars = list(result.tornado)
    if not bars:
        return None
    base = result.optimum_cost(result.baseline)
    fig = Figure(figsize=(7.0, 1.2 + 0.55 * len(bars)), dpi=100)
    ax = fig.add_subplot()
    for y, bar in enumerate(reversed(bars)):
        for end, cost in (("low", bar.optimum_low), ("high", bar.optimum_high)):
            ax.barh(y, cost - base, left=base, color=_COLOURS[end], height=0.6,
                    label=f"{end} end of range" if y == 0 else None)
    ax.set_yticks(range(len(bars)))
    ax.set_yticklabels([f"{b.field}\n{_fmt(b.low)} – {_fmt(b.high)} {result.unit(b.field)}"
                        for b in reversed(bars)], fontsize=8)
    ax.axvline(base, color="0.2", lw=0.8)
    ax.set_xlabel(f"optimum {_cost_label(result)}")
    ax.set_title("One at a time: the optimum's cost at each range's ends", fontsize=9)
    ax.legend(fontsize=8, loc="lower right")
    ax.grid(True, axis="x", alpha=0.3)
    fig.tight_layout()
    return fig


def heatmap_data(result: SweepResult) -> tuple[list[float], list[float], np.ndarray,
                                                np.ndarray, dict[str, float]] | None:
    """Grid data over the first two fields: their values, the optimum's cost and regret.

    NaN where a point was not solved; with more fields, the others are held at the grid
    values nearest the scenario's (returned last).
    """
    if result.mode != "grid" or len(result.fields) < 2:
        return None
    f0, f1 = result.fields[0], result.fields[1]
    fixed = {}
    for j, f in enumerate(result.fields[2:], start=2):
        fixed[f.name] = nearest(f.values, result.base_values[j])
    cost = np.full((len(f1.values), len(f0.values)), np.nan)
    regret = np.full_like(cost, np.nan)
    col = {v: i for i, v in enumerate(f0.values)}
    row = {v: i for i, v in enumerate(f1.values)}
    for p in result.points:
        if not p.ok or any(p.values[j] != fixed[n] for j, n in enumerate(result.names)
                           if j >= 2):
            continue
        cost[row[p.values[1]], col[p.values[0]]] = result.optimum_cost(p)
        regret[row[p.values[1]], col[p.values[0]]] = result.regret(p)
    return list(f0.values), list(f1.values), cost, regret, fixed


def figure_heatmap(result: SweepResult) -> Figure | None:
    """Two panels over the first two fields: the optimum's cost and today's regret."""
    data = heatmap_data(result)
    if data is None:
        return None
    xs, ys, cost, regret, fixed = data
    fig = Figure(figsize=(10.0, 4.2), dpi=100)
    for i, (matrix, title) in enumerate(((cost, f"optimum {_cost_label(result)}"),
                                         (regret, f"regret of today's design, {result.currency}"))):
        ax = fig.add_subplot(1, 2, i + 1)
        image = ax.imshow(matrix, origin="lower", aspect="auto",
                          cmap="viridis" if i == 0 else "magma_r")
        ax.set_xticks(range(len(xs)))
        ax.set_xticklabels([_fmt(v) for v in xs], fontsize=7, rotation=45)
        ax.set_yticks(range(len(ys)))
        ax.set_yticklabels([_fmt(v) for v in ys], fontsize=7)
        ax.set_xlabel(_field_label(result, result.names[0]))
        ax.set_ylabel(_field_label(result, result.names[1]))
        ax.set_title(title, fontsize=9)
        fig.colorbar(image, ax=ax)
        if i == 1 and matrix.size <= 225:
            for (r, c), v in np.ndenumerate(matrix):
                if math.isfinite(v):
                    ax.text(c, r, f"{v:,.0f}", ha="center", va="center", fontsize=6,
                            color="black" if v < 0.6 * np.nanmax(matrix) else "white")
    if fixed:
        fig.suptitle(_others(result, fixed), fontsize=8)
    fig.tight_layout()
    return fig


def png_base64(fig: Figure) -> str:
    """The figure as base64 PNG text (no timestamp in the file)."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", metadata={"Software": None})
    return base64.b64encode(buf.getvalue()).decode("ascii")


# --- HTML ------------------------------------------------------------------------------------


_STYLE = """
.sizer-sweep table{border-collapse:collapse;font-size:0.85em;margin:0.5em 0}
.sizer-sweep th,.sizer-sweep td{border:1px solid #ccc;padding:2px 6px;text-align:left}
.sizer-sweep td.num{text-align:right}
.sizer-sweep figure{margin:1em 0}
.sizer-sweep img{max-width:100%}
.sizer-sweep .caution{font-style:italic;color:#555}
"""


def _img(fig: Figure | None, alt: str, caption: str) -> str:
    if fig is None:
        return ""
    return (f'<figure><img alt="{escape(alt)}" src="data:image/png;base64,{png_base64(fig)}">'
            f"<figcaption>{escape(caption)}</figcaption></figure>")


def _conductor(c: tuple[str, str, int]) -> str:
    material, size, sets = c
    return conductor_label(sets, size, material)


def _table(head: Sequence[str], rows: Sequence[Sequence[tuple[str, bool]]]) -> str:
    out = ["<table><thead><tr>", *(f"<th>{escape(h)}</th>" for h in head), "</tr></thead><tbody>"]
    for row in rows:
        out.append("<tr>")
        out.extend(f'<td class="num">{escape(t)}</td>' if num else f"<td>{escape(t)}</td>"
                   for t, num in row)
        out.append("</tr>")
    out.append("</tbody></table>")
    return "".join(out)


def unique_breakevens(result: SweepResult) -> list[tuple[Breakeven, int]]:
    """Break-evens with the same segment, field, change and value merged, with their count.

    A grid repeats a break-even for every value of the other fields that does not move
    it. Sorted by field, then value.
    """
    merged: dict[tuple[object, ...], list[Breakeven]] = {}
    for b in result.breakevens:
        key = (b.segment, b.field, b.before, b.after, f"{b.value:.6g}")
        merged.setdefault(key, []).append(b)
    order = {name: k for k, name in enumerate(result.names)}
    out = [(group[0], len(group)) for group in merged.values()]
    return sorted(out, key=lambda bc: (order[bc[0].field], bc[0].value, bc[0].segment))


def sweep_section_html(result: SweepResult) -> str:
    """The sweep as one self-contained, escaped HTML ``<section>`` (plots inline as PNG)."""
    r = result
    parts = [f"<section class=\"sizer-sweep\" id=\"sweep\"><style>{_STYLE}</style>",
             "<h2>Sensitivity to energy and metal prices</h2>"]
    mode = "every combination" if r.mode == "grid" else "one field at a time"
    ranges = "; ".join(
        f"{f.name} {_fmt(f.values[0])} to {_fmt(f.values[-1])} {r.unit(f.name)} "
        f"({len(f.values)} values; this scenario {_fmt(r.base_values[k])})"
        for k, f in enumerate(r.fields))
    parts.append(f"<p>{escape(r.title)}: {len(r.points)} of {r.points_total} points solved "
                 f"({escape(mode)}), each a full solve minimising the "
                 f"{escape(_cost_label(r))}. Varied: {escape(ranges)}.</p>")
    if r.interrupted:
        parts.append(f"<p><strong>Interrupted: {len(r.points)} of {r.points_total} points were "
                     f"done; the summaries below use those only.</strong></p>")
    for note in r.notes:
        if not note.startswith("interrupted"):
            parts.append(f"<p>{escape(note)}</p>")

    # Today's design across the range.
    solved = [p for p in r.points if p.ok]
    if solved:
        worst = max(solved, key=r.regret)
        zero = sum(1 for p in solved if r.regret(p) <= 1e-6 * max(1.0, r.optimum_cost(p)))
        near = sum(1 for p in solved if r.regret(p) <= 0.01 * r.optimum_cost(p))
        at = ", ".join(f"{n} = {_fmt(v)} {r.unit(n)}".strip()
                       for n, v in zip(r.names, worst.values, strict=True))
        parts.append(
            f"<h3>Today's design across the range</h3><p>Today's optimum (at this "
            f"scenario's own values, {_money(r.optimum_cost(r.baseline))} {escape(r.currency)}) "
            f"is still the optimum at {zero} of {len(solved)} points and within 1 % of it at "
            f"{near}. Its largest regret is "
            f"{_money(r.regret(worst))} {escape(r.currency)}, at {escape(at)}, over that "
            f"point's optimum of {_money(r.optimum_cost(worst))} {escape(r.currency)}.</p>")
    for name in r.names:
        _, fixed = r.line(name)
        caption = (f"Cost of the two fixed designs and of the optimum at each point against "
                   f"{name}; dotted: this scenario's value; ticks along the bottom: break-evens.")
        if fixed:
            caption += f" Other fields at {_others(r, fixed)}."
        parts.append(_img(figure_line(r, name), f"cost against {name}", caption))

    # Break-evens.
    parts.append("<h3>Break-even values</h3>")
    evens = unique_breakevens(r)
    if not evens:
        parts.append("<p>No segment changes its conductor anywhere in the ranges.</p>")
    else:
        parts.append("<p>Where each segment's choice flips: the value at which the two "
                     "conductors (or, where they move together with other segments, the two "
                     "designs) cost the same.</p>")
        rows = []
        for b, count in evens[:MAX_ROWS]:
            at = ", ".join(f"{n} = {_fmt(v)}" for n, v in b.at) if count == 1 else (
                f"the same at {count} combinations" if b.at else "")
            rows.append([(b.segment, False), (b.field, False), (_conductor(b.before), False),
                         (_conductor(b.after), False), (b.kind, False),
                         (f"{_fmt(b.value)} {r.unit(b.field)}".strip(), True),
                         (f"{_fmt(b.low)} – {_fmt(b.high)}", True), (b.basis, False),
                         (at, False)])
        parts.append(_table(("segment", "field", "below", "above", "change", "break-even",
                             "between points", "basis", "other fields"), rows))
        if len(evens) > MAX_ROWS:
            parts.append(f"<p>… and {len(evens) - MAX_ROWS} more in the JSON results.</p>")

    # Tornado.
    if r.tornado:
        parts.append("<h3>Which input matters most</h3>")
        rows = [[(t.field, False), (f"{_fmt(t.low)} – {_fmt(t.high)} {r.unit(t.field)}", False),
                 (_money(t.optimum_low), True), (_money(t.optimum_high), True),
                 (_money(t.swing), True), (_money(t.today_low), True),
                 (_money(t.today_high), True)] for t in r.tornado]
        parts.append(_table(("field", "range", "optimum at low", "optimum at high", "swing",
                             "today's design at low", "today's design at high"), rows))
        parts.append(_img(figure_tornado(r), "tornado of the optimum's cost",
                          "Each field alone from the low to the high end of its range, the "
                          "others at this scenario's values."))
    heat = figure_heatmap(r)
    if heat is not None:
        parts.append("<h3>Over the grid</h3>")
        parts.append(_img(heat, "heat maps of cost and regret",
                          f"Left: the optimum's cost; right: what today's design costs over it, "
                          f"over {r.names[0]} and {r.names[1]}."))

    # Every point.
    parts.append(f"<details><summary>All {len(r.points)} points</summary>")
    rows = []
    for p in r.points:
        rows.append([(str(p.index), True),
                     *((_fmt(v), True) for v in p.values), (p.status, False),
                     (_money(p.capex), True), (_money(p.loss_pv), True),
                     (_money(p.lifecycle), True),
                     (_money(r.regret(p)) if p.ok else "–", True),
                     (_changed(r, p), False)])
    parts.append(_table(("point", *(f"{n} ({r.unit(n)})" if r.unit(n) else n for n in r.names),
                         "status", "upfront", "loss PV", "lifetime", "regret",
                         "differs from today"), rows[:MAX_ROWS * 10]))
    parts.append("</details>")
    parts.append(f'<p class="caution">{escape(CAUTION)}</p></section>')
    return "\n".join(p for p in parts if p)


def _changed(result: SweepResult, p: SweepPoint) -> str:
    if not p.ok:
        return ""
    moved = [sid for sid, a, b in zip(result.segment_ids, p.segments, result.baseline.segments,
                                      strict=True) if a != b]
    if len(moved) > 6:
        return ", ".join(moved[:6]) + f" and {len(moved) - 6} more"
    return ", ".join(moved)


# --- files -----------------------------------------------------------------------------------


def sweep_json_text(result: SweepResult) -> str:
    """The sweep's JSON document as deterministic text."""
    return json_text(result.document())


def write_sweep_json(result: SweepResult, path: str | Path,
                     protect: Sequence[Path] = ()) -> Path:
    """Write the sweep's JSON document atomically."""
    return atomic_write(path, sweep_json_text(result), protect=protect)


# --- terminal ----------------------------------------------------------------------------------


def sweep_summary_text(result: SweepResult, breakevens: int = 8) -> str:
    """A short plain-text summary for the terminal: ranges, tornado, break-evens, regret."""
    r = result
    cur = r.currency
    lines = [f"{r.title} — sensitivity ({'grid' if r.mode == 'grid' else 'one at a time'}, "
             f"{r.objective} objective)"]
    for k, f in enumerate(r.fields):
        lines.append(f"  {f.name}: {_fmt(f.values[0])} to {_fmt(f.values[-1])} "
                     f"{r.unit(f.name)} in {len(f.values)} values (this scenario "
                     f"{_fmt(r.base_values[k])})")
    done = f"{len(r.points)} of {r.points_total} points solved"
    if r.interrupted:
        done += " — INTERRUPTED, the rest were cancelled"
    lines.append(f"  {done} in {r.seconds:.1f} s ({r.runner})")
    lines.append(f"  today's optimum: {_money(r.optimum_cost(r.baseline))} {cur}")
    if r.tornado:
        lines.append("  the optimum's cost across each range (others at this scenario's values):")
        for t in r.tornado:
            lines.append(f"    {t.field:<16} {_money(t.optimum_low):>12} → "
                         f"{_money(t.optimum_high):>12} {cur}  (swing {_money(t.swing)})")
    evens = unique_breakevens(r)
    if evens:
        lines.append(f"  break-evens ({len(evens)}; first {min(breakevens, len(evens))}):")
        for b, _ in evens[:breakevens]:
            lines.append(f"    {b.segment}: {_conductor(b.before)} → {_conductor(b.after)} at "
                         f"{b.field} = {_fmt(b.value)} {r.unit(b.field)}".rstrip())
    solved = [p for p in r.points if p.ok]
    if solved:
        worst = max(solved, key=r.regret)
        at = ", ".join(f"{n}={_fmt(v)}" for n, v in zip(r.names, worst.values, strict=True))
        lines.append(f"  largest regret of today's design: {_money(r.regret(worst))} {cur} "
                     f"at {at}")
    lines.append(CAUTION)
    return "\n".join(lines)
