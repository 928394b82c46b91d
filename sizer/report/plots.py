"""Figures of the report, drawn from the tables of ``sizer.report.tables``.

Each function takes tables and returns a matplotlib ``Figure`` built without pyplot (no
global state, no window; the Agg canvas renders it). Every series differs by line style,
marker or hatch as well as colour, so a greyscale print still reads.
"""

from __future__ import annotations

import io
import math
from collections.abc import Sequence
from functools import lru_cache

from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter

from sizer.report.tables import CashFlow, CostRow, FrontierRow, OptionRow, VoltageProfile

# Our palette: dark ink, deep teal, ochre, brick, plum — distinct in lightness too.
INK = "#22313f"
TEAL = "#1b7f79"
OCHRE = "#c98a1b"
BRICK = "#a4432f"
PLUM = "#6b4c7a"
PALE_TEAL = "#a9d3cf"
PALE_OCHRE = "#f0d9a8"
GRID = "#d5dade"

# How each option is marked on the frontier: marker, colour, size.
OPTION_MARKS = {
    "code_minimum": ("v", BRICK, 10),
    "lifecycle": ("*", TEAL, 15),
    "all_copper": ("D", OCHRE, 9),
    "without_spare": ("X", INK, 9),
    "as_pinned": ("P", PLUM, 10),
}
METHOD_MARKS = {
    "weighted sum": ("o", INK, "full"),
    "epsilon constraint": ("s", INK, "none"),
}
METHOD_LABELS = {
    "weighted sum": "weighted-sum point",
    "epsilon constraint": "ε-constraint point",
}


@lru_cache(maxsize=1)
def _font_codepoints() -> frozenset[int]:
    """Characters the plot font (matplotlib's default, shipped with it) can draw."""
    from matplotlib import font_manager
    from matplotlib.ft2font import FT2Font

    return frozenset(FT2Font(font_manager.findfont(font_manager.FontProperties())).get_charmap())


def plain(text: str) -> str:
    """Text from the scenario, safe for matplotlib.

    A "$" must not start mathtext, and a character the font lacks (a name in a script it
    does not cover) is drawn as "?" rather than warned about; the report's tables keep
    the name exactly. Using the shipped font alone keeps the figures the same on every
    machine.
    """
    have = _font_codepoints()
    text = "".join(c if ord(c) in have else "?" for c in text)
    return text.replace("\\", "\\\\").replace("$", r"\$")


def _thousands(_: object = None) -> FuncFormatter:
    return FuncFormatter(lambda v, _pos: f"{v:,.0f}")


def _figure(width_in: float = 7.6, height_in: float = 4.4) -> Figure:
    fig = Figure(figsize=(width_in, height_in), layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def _style(ax: Axes, title: str) -> None:
    ax.set_title(title, loc="left", fontsize=11, color=INK)
    ax.grid(True, color=GRID, linewidth=0.7)
    ax.set_axisbelow(True)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)


def png_bytes(fig: Figure, dpi: int = 110) -> bytes:
    """The figure as PNG bytes (no timestamp in the metadata)."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi, metadata={"Software": None})
    return buf.getvalue()


def frontier_figure(points: Sequence[FrontierRow], options: Sequence[OptionRow],
                    currency: str, years: float) -> Figure:
    """Upfront cost against loss PV: the frontier, its points by method, the options marked.

    Series (lines): the frontier curve, one per method present, one per feasible option,
    and the equal-lifetime-total line through the lifecycle optimum when it is there.
    """
    fig = _figure()
    ax = fig.add_subplot()
    _style(ax, "Upfront cost against the cost of losses")
    pts = sorted(points, key=lambda p: p.capex)
    if pts:
        ax.plot([p.capex for p in pts], [p.loss_pv for p in pts], color=INK, linewidth=1.0,
                linestyle="-", alpha=0.7, label="frontier: least losses for each budget")
    for method in METHOD_MARKS:
        chosen = [p for p in pts if p.method == method]
        if not chosen:
            continue
        marker, colour, fill = METHOD_MARKS[method]
        ax.plot([p.capex for p in chosen], [p.loss_pv for p in chosen], linestyle="none",
                marker=marker, markersize=5.5, color=colour, fillstyle=fill,
                label=METHOD_LABELS[method])
    for opt in options:
        if not opt.feasible:
            continue
        marker, colour, size = OPTION_MARKS.get(opt.key, ("X", INK, 9))
        ax.plot([opt.capex], [opt.loss_pv], linestyle="none", marker=marker, markersize=size,
                color=colour, markeredgecolor=INK, markeredgewidth=0.8, label=plain(opt.title))
    best = next((o for o in options if o.key == "lifecycle" and o.feasible), None)
    if best is not None:
        xs = [p.capex for p in pts] + [o.capex for o in options if o.feasible]
        lo, hi = min(xs), max(xs)
        ax.plot([lo, hi], [best.lifecycle - lo, best.lifecycle - hi], color=TEAL,
                linestyle=(0, (4, 3)), linewidth=1.0,
                label="same lifetime total as the lifecycle optimum")
        ys = [p.loss_pv for p in pts] + [o.loss_pv for o in options if o.feasible]
        ax.set_ylim(max(0.0, min(ys) * 0.85), max(ys) * 1.08)
    ax.set_xlabel(f"Upfront cost of conductors and installation ({currency})")
    ax.set_ylabel(f"Present value of losses over {years:g} years ({currency})")
    ax.xaxis.set_major_formatter(_thousands())
    ax.yaxis.set_major_formatter(_thousands())
    ax.legend(fontsize=8, frameon=False, loc="upper right")
    return fig


MAX_PROFILE_LABELS = 12     # node names along the worst path's profile
MAX_PROFILE_MARKERS = 200   # more nodes than this: lines without markers


def voltage_profile_figure(profile: VoltageProfile, run_limit_pct: float,
                           total_limit_pct: float) -> Figure:
    """Drop against distance along the worst path, estimate and load flow, limits drawn.

    Series (lines): estimate, load flow (when present), the total limit, the per-run limit.
    """
    fig = _figure(7.6, 4.8)
    ax = fig.add_subplot()
    _style(ax, f"Voltage drop along the path to {plain(profile.load)}")
    x = [p.distance_m for p in profile.points]
    # A path of thousands of runs (a riser) is drawn as lines, its nodes marked and named
    # only when there are few of them: at most MAX_PROFILE_LABELS names, spread along it.
    few = len(profile.points) <= MAX_PROFILE_MARKERS
    ax.plot(x, [p.drop_pct for p in profile.points], color=TEAL, linestyle="-",
            marker="o" if few else "", markersize=5, label="estimate (R cos φ + X sin φ)")
    if profile.points and all(p.loadflow_drop_pct is not None for p in profile.points):
        lf = [p.loadflow_drop_pct if p.loadflow_drop_pct is not None else math.nan
              for p in profile.points]
        ax.plot(x, lf, color=BRICK,
                linestyle=(0, (5, 2)), marker="s" if few else "", markersize=5,
                fillstyle="none", label="AC load flow")
    ax.axhline(total_limit_pct, color=INK, linestyle="-", linewidth=1.6,
               label=f"{total_limit_pct:g} % total limit, source to load")
    ax.axhline(run_limit_pct, color=OCHRE, linestyle=(0, (1, 2)), linewidth=1.8,
               label=f"{run_limit_pct:g} % limit of each feeder or branch run (own drop)")
    n = len(profile.points)
    step = max(1, math.ceil((n - 1) / (MAX_PROFILE_LABELS - 1))) if n > MAX_PROFILE_LABELS else 1
    named = set(range(0, n, step)) | ({n - 1} if n else set())
    for p in (profile.points[i] for i in sorted(named)):
        # Slanted labels above the points keep close neighbours legible.
        ax.annotate(plain(p.node), (p.distance_m, p.drop_pct), textcoords="offset points",
                    xytext=(2, 7), fontsize=7.5, color=INK, rotation=35)
    top = max([total_limit_pct, *(p.drop_pct for p in profile.points),
               *(p.loadflow_drop_pct or 0.0 for p in profile.points)])
    ax.set_ylim(0.0, top * 1.15)
    ax.set_xlim(left=0.0, right=max(x, default=1.0) * 1.12 or 1.0)
    ax.set_xlabel("Distance from the source along the route (m)")
    ax.set_ylabel("Voltage drop (% of nominal voltage)")
    ax.legend(fontsize=8, frameon=False, loc="upper center", bbox_to_anchor=(0.5, -0.14),
              ncol=2)
    return fig


def cash_flow_figure(cash: CashFlow, currency: str, discount: float) -> Figure:
    """Cumulative cash flow of the upsizing, undiscounted and discounted; break-even marked.

    Series (lines): the two cumulative curves, the zero line, and a dotted vertical line
    at the simple payback (the same figure as the headline and the run table).
    """
    fig = _figure()
    ax = fig.add_subplot()
    _style(ax, "Cumulative cash flow of upsizing (lifecycle design against code minimum)")
    years = [r.year for r in cash.rows]
    ax.plot(years, [r.cumulative for r in cash.rows], color=TEAL, linestyle="-",
            linewidth=2.0, label="cumulative, undiscounted")
    ax.plot(years, [r.cumulative_discounted for r in cash.rows], color=BRICK,
            linestyle=(0, (5, 2)), linewidth=2.0,
            label=f"cumulative, discounted at {100 * discount:g} % a year")
    ax.axhline(0.0, color=INK, linewidth=0.9, label="break-even")
    # One payback figure on the whole page: the simple one (added cost / first-year saving).
    if cash.added_cost > 0 and cash.payback_years <= max(years, default=0):
        ax.axvline(cash.payback_years, color=INK, linestyle=(0, (1, 2)), linewidth=1.4,
                   label=f"simple payback (added cost / first-year saving), "
                         f"{cash.payback_years:.1f} years")
    ax.set_xlabel("Years after construction (year)")
    ax.set_ylabel(f"Cumulative money, savings less added cost ({currency})")
    ax.yaxis.set_major_formatter(_thousands())
    ax.set_xlim(0, max(years, default=1))
    ax.legend(fontsize=8, frameon=False, loc="lower right")
    return fig


def cost_breakdown_figure(rows: Sequence[CostRow], currency: str, years: float) -> Figure:
    """Upfront cost and loss PV per run, stacked horizontal bars (two bar series)."""
    height = 1.6 + 0.28 * max(len(rows), 1)
    fig = _figure(7.6, min(max(height, 3.0), 9.0))
    ax = fig.add_subplot()
    _style(ax, "Where the money goes, run by run")
    labels = [plain(r.segment) for r in rows]
    pos = list(range(len(rows)))
    capex = [r.capex for r in rows]
    loss = [r.loss_pv for r in rows]
    ax.barh(pos, capex, color=TEAL, edgecolor=INK, linewidth=0.6, label="upfront cost")
    ax.barh(pos, loss, left=capex, color=PALE_OCHRE, edgecolor=INK, linewidth=0.6,
            hatch="///", label=f"present value of losses over {years:g} years")
    ax.set_yticks(pos, labels, fontsize=8)
    ax.invert_yaxis()
    ax.set_xlabel(f"Cost ({currency})")
    ax.set_ylabel("Run (named by the node it feeds)")
    ax.xaxis.set_major_formatter(_thousands())
    ax.grid(False, axis="y")
    ax.legend(fontsize=8, frameon=False, loc="upper center", bbox_to_anchor=(0.5, -0.1),
              ncol=2)
    if rows and not any(math.isfinite(v) and v > 0 for v in capex + loss):
        ax.set_xlim(0, 1)
    return fig
