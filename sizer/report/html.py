"""The HTML report: one self-contained file that persuades an owner and satisfies an engineer.

The page needs no network and no script: the style sheet is inlined and the figures are
embedded as base64 PNG. Every string that comes from the scenario (ids, titles,
descriptions, notes, messages) goes through ``html.escape``; the page's own markup is
built here, never from scenario text. The run date appears only in this human report,
never in the data files.
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
import math
import re
from collections.abc import Iterable, Sequence
from dataclasses import replace
from importlib import resources
from pathlib import Path
from string import Template

from sizer import CAUTION, __version__
from sizer.catalogue.prices import resolve_price_list
from sizer.model import Design, DesignStatus, KeyFigures, Scenario
from sizer.optimize import Prepared
from sizer.report import explore as ex
from sizer.report import plots
from sizer.report import tables as tb
from sizer.report.export import atomic_write
from sizer.report.tree import node_kind, tree_html
from sizer.results import LARGE_TREE_RUNS, Results
from sizer.rules.profile import RuleProfile
from sizer.units import M_PER_FT
from sizer.workflow import DisconnectionDriver, FrontierPoint, Option, Progress, Verification, quiet

# A tree with more runs than this gets a light page: the schedule summed by panel (the
# CSV and JSON files hold every run), the longest lists cut to LIST_LIMIT lines, and the
# trade-off explorer switching the key figures only (no per-run data).
SUMMARY_OVER = LARGE_TREE_RUNS
LIST_LIMIT = 50
# Stands in the page for its own size until the page is whole.
_SIZE_MARK = "\x00page-size\x00"

# --- small HTML helpers ------------------------------------------------------------------


def esc(value: object) -> str:
    """Escape any value for HTML text and attribute values."""
    return html.escape(str(value), quote=True)


def num(value: float | None, digits: int = 0, *, sep: bool = True) -> str:
    """A number for a table cell; "—" for None or not finite."""
    if value is None or not math.isfinite(value):
        return "—"
    if round(value, digits) == 0:
        value = 0.0  # no "-0"
    return f"{value:,.{digits}f}" if sep else f"{value:.{digits}f}"


class Cell:
    """A table cell: its text (escaped on output) and how to align and mark it."""

    __slots__ = ("css", "text")

    def __init__(self, text: object, css: str = "") -> None:
        self.text = text
        self.css = css


def _cell(tag: str, value: object, numeric: bool) -> str:
    css = ["num"] if numeric else []
    if isinstance(value, Cell):
        css += [value.css] if value.css else []
        value = value.text
    cls = f' class="{" ".join(css)}"' if css else ""
    return f"<{tag}{cls}>{esc(value)}</{tag}>"


def table(headers: Sequence[str], rows: Iterable[Sequence[object]], *,
          numeric: Sequence[bool] | None = None, caption: str = "",
          row_class: Sequence[str] | None = None, css: str = "") -> str:
    """An HTML table; every cell escaped; ``numeric`` right-aligns columns."""
    numeric = numeric or [False] * len(headers)
    head = "".join(_cell("th", h, n) for h, n in zip(headers, numeric, strict=True))
    body = []
    for i, row in enumerate(rows):
        cls = f' class="{row_class[i]}"' if row_class and row_class[i] else ""
        cells = "".join(_cell("td", v, n) for v, n in zip(row, numeric, strict=True))
        body.append(f"<tr{cls}>{cells}</tr>")
    cap = f"<caption>{esc(caption)}</caption>" if caption else ""
    cls = f' class="{css}"' if css else ""
    return (f'<div class="scroll"><table{cls}>{cap}<thead><tr>{head}</tr></thead>'
            f'<tbody>{"".join(body)}</tbody></table></div>')


def facts(pairs: Iterable[tuple[str, object]]) -> str:
    """A two-column table of labelled facts."""
    rows = "".join(f"<tr><th>{esc(k)}</th><td>{esc(v)}</td></tr>" for k, v in pairs)
    return f'<div class="scroll"><table class="facts"><tbody>{rows}</tbody></table></div>'


def figure(png: bytes, alt: str, caption: str) -> str:
    """An embedded PNG figure with its caption."""
    data = base64.b64encode(png).decode("ascii")
    return (f'<figure><img src="data:image/png;base64,{data}" alt="{esc(alt)}">'
            f"<figcaption>{esc(caption)}</figcaption></figure>")


def card(label: str, value: str, sub: str = "", warn: bool = False, key: str = "") -> str:
    """A key figure of the first screen; ``key`` names it for the page's script."""
    k = f' data-card="{esc(key)}"' if key else ""
    return (f'<div class="card{" warn" if warn else ""}"{k}><div class="label">{esc(label)}'
            f'</div><div class="value">{esc(value)}</div><div class="sub">{esc(sub)}</div></div>')


def pct(value: float | None, digits: int = 2) -> str:
    """A percentage with its sign; "—" when absent."""
    return "—" if value is None or not math.isfinite(value) else f"{value:.{digits}f} %"


# --- the report ----------------------------------------------------------------------------


def write_report(path: str | Path, results: Results, *, protect: Sequence[Path] = (),
                 progress: Progress = quiet, extra_sections: Sequence[str] = ()) -> Path:
    """Render the report of finished results and write it atomically.

    ``extra_sections`` are finished, escaped HTML sections (e.g. the sweep's) placed
    before the footer.
    """
    text = render_report(results, progress=progress, extra_sections=extra_sections)
    progress("report: writing the file")
    return atomic_write(path, text, protect=protect)


def render_report(results: Results, *, progress: Progress = quiet,
                  today: _dt.date | None = None,
                  extra_sections: Sequence[str] = ()) -> str:
    """The whole report as HTML text; it reads the results and computes nothing new."""
    prep = results.prep
    progress("report: tables and figures")
    page = _Page(prep, results.design, list(results.options), list(results.frontier_points),
                 results.verification, results.frontier_figures, results.frontier_designs,
                 results.disconnection_drivers)
    body = page.body(today or _dt.date.today(), extra_sections)
    template = Template(resources.files("sizer.report").joinpath("template.html")
                        .read_text(encoding="utf-8"))
    style = resources.files("sizer.report").joinpath("report.css").read_text(encoding="utf-8")
    script = resources.files("sizer.report").joinpath("report.js").read_text(encoding="utf-8")
    text = template.substitute(
        version=esc(__version__),
        title=esc(f"Conductor sizing report — {prep.scenario.title}"),
        style=style, body=body,
        script=f"<script>\n{script}</script>" if page.explorer else "")
    if _SIZE_MARK in text:   # a summarised page says how large it is
        size = len(text.encode("utf-8"))
        text = text.replace(_SIZE_MARK, f"{size / 1e6:.1f} MB" if size >= 1e5
                            else f"{size / 1e3:.0f} kB")
    return text


class _Page:
    """Builds the sections of one report from the finished designs."""

    def __init__(self, prep: Prepared, design: Design, options: list[Option],
                 points: list[FrontierPoint], ver: Verification | None,
                 point_figures: Sequence[KeyFigures] = (),
                 point_designs: Sequence[Design] = (),
                 drivers: Sequence[DisconnectionDriver] = ()) -> None:
        self.prep = prep
        self.design = design
        self.options = options
        self.points = points
        self.ver = ver
        self.scenario = prep.scenario
        self.econ = prep.economics
        self.cur = design.currency or prep.scenario.currency
        self.option_rows = tb.options_table(options, prep.economics,
                                            prep.scenario.economics.emission_kg_per_kwh)
        self.code_min = tb.option_design(options, "code_minimum")
        self.lifecycle = tb.option_design(options, "lifecycle")
        self.cash = (tb.upsizing_cash_flow(self.code_min, self.lifecycle, self.econ)
                     if self.code_min and self.lifecycle else None)
        self.justify = (tb.justification_table(self.code_min, self.lifecycle, self.econ,
                                               self.cur)
                        if self.code_min and self.lifecycle else ())
        self.imperial = prep.catalogue.name == "awg"
        self.limits = self._limits()
        self.parent = [int(g.parent_index) for g in prep.segments]
        self.kinds = self._kinds()
        self.descriptions = [g.node.description for g in prep.segments]
        self.drivers = tuple(drivers)
        self.summary = len(prep.segments) > SUMMARY_OVER
        self._explorer_points(points, point_figures, point_designs)

    def _limits(self) -> list[ex.RunLimits]:
        p = self.prep.profile
        own = {kind: p.drop_limit_pct(kind) for kind in {g.kind for g in self.prep.segments}}
        leaf = [float(x) for x in self.prep.leaf_limit_pct]   # one conversion, not one per run
        return [ex.RunLimits(own[g.kind], leaf[i] if g.is_leaf else math.inf)
                for i, g in enumerate(self.prep.segments)]

    def _kinds(self) -> list[str]:
        segs = self.prep.segments
        has_children = {int(g.parent_index) for g in segs}
        return [node_kind(i in has_children, g.parent_index < 0, g.node.transformer is not None)
                for i, g in enumerate(segs)]

    def _explorer_points(self, points: list[FrontierPoint], figures: Sequence[KeyFigures],
                         designs: Sequence[Design]) -> None:
        """The designs the page can switch between: shown first, then by upfront cost.

        ``figures`` and ``designs`` are the frontier points' (same order); a large tree's
        results have no designs of them.
        """
        d = self.design
        self.explorer: dict | None = None
        self.xpoints: list[ex.DesignPoint] = []
        self.shown = self.reference = 0
        self.code_min_index: int | None = None
        if not d.segments or len(d.segments) != len(self.prep.segments):
            return
        seen: dict[tuple, int] = {}
        candidates: list[ex.DesignPoint] = [ex.DesignPoint.of(_objective_words(d), d)]
        if self.lifecycle is not None and self.lifecycle is not d:
            candidates.append(ex.DesignPoint.of("lifecycle optimum", self.lifecycle))
        if self.code_min is not None and self.code_min is not d:
            candidates.append(ex.DesignPoint.of("code minimum", self.code_min))
        whole: Sequence[Design | None] = designs or [None] * len(points)
        frontier = [ex.DesignPoint("", f, design, p.method)
                    for p, f, design in zip(points, figures, whole, strict=True)]
        frontier.sort(key=lambda x: (x.figures.totals.capex, x.figures.totals.loss_pv))
        candidates += [replace(c, label=f"frontier point {k + 1}")
                       for k, c in enumerate(frontier)]
        for c in candidates:
            key = c.figures.conductors
            if len(key) != len(d.segments):
                continue
            if key in seen:
                j = seen[key]
                if c.method and not self.xpoints[j].method:   # an option on the frontier
                    self.xpoints[j] = replace(self.xpoints[j], method=c.method)
                continue
            seen[key] = len(self.xpoints)
            self.xpoints.append(c)
        order = sorted(range(len(self.xpoints)),
                       key=lambda i: (self.xpoints[i].figures.totals.capex,
                                      self.xpoints[i].figures.totals.loss_pv))
        self.xpoints = [self.xpoints[i] for i in order]
        self.shown = order.index(0)
        ids = {id(p.design): i for i, p in enumerate(self.xpoints) if p.design is not None}
        self.reference = ids.get(id(self.lifecycle), self.shown) if self.lifecycle else self.shown
        self.code_min_index = ids.get(id(self.code_min)) if self.code_min else None
        if self.code_min is d:
            self.code_min_index = self.shown
        if self.lifecycle is d:
            self.reference = self.shown
        if len(self.xpoints) < 2:
            return
        e = self.econ
        self.explorer = ex.explorer_data(
            self.xpoints, self.shown, self.reference, self.code_min_index, self.limits,
            currency=self.cur, cost_per_w_year=float(e.annual_cost_per_w),
            kwh_per_w_year=float(e.annual_loss_kwh(1.0)), years=float(e.years),
            drop_limit_pct=float(self.prep.profile.drop_total_pct),
            per_run=not self.summary)

    # -- page -------------------------------------------------------------------------------

    def body(self, today: _dt.date, extra_sections: Sequence[str] = ()) -> str:
        """Header, first screen and every section."""
        s = self.scenario
        parts = [
            '<header class="title"><div class="inner">',
            f"<h1>Conductor sizing report — {esc(s.title)}</h1>",
            f"<p>{esc(self.prep.profile.title)} · {esc(_objective_words(self.design))} · "
            f"{len(self.prep.segments)} runs · prices in {esc(self.cur)}</p>",
            "</div></header><main>",
            f'<div class="caution" role="note"><strong>Caution</strong>{esc(CAUTION)}'
            "</div>",
            self.first_screen(),
            '<nav class="toc">Contents: <a href="#explore">Trade-off</a><a href="#tree">Tree</a>'
            '<a href="#scenario">Scenario</a>'
            '<a href="#assumptions">Assumptions</a><a href="#options">Options</a>'
            '<a href="#justification">Why upsize</a><a href="#schedule">Schedule</a>'
            '<a href="#figures">Figures</a>'
            + ('<a href="#phases">Phases</a>' if self.has_phases() else "")
            + '<a href="#verification">Verification</a></nav>',
            self.explore_section(),
            self.tree_section(),
            self.scenario_section(),
            self.assumptions_section(),
            self.options_section(),
            self.justification_section(),
            self.schedule_section(),
            self.figures_section(),
            self.phase_section(),
            self.verification_section(),
            *extra_sections,
            f'<footer><div class="caution" role="note"><strong>Caution</strong>'
            f"{esc(CAUTION)}</div>"
            f"<p>Generated {esc(today.isoformat())} by sizer {esc(__version__)} from "
            f"{esc(Path(s.file).name if s.file else 'an unnamed scenario')}. "
            "This page is self-contained: it loads nothing from the network.</p></footer>",
            "</main>",
            ex.data_script(self.explorer) if self.explorer else "",
        ]
        return "\n".join(parts)

    def first_screen(self) -> str:
        """The key figures an owner reads first, and the one-sentence case for upsizing."""
        d = self.design
        if not d.segments:
            items = "".join(f"<li>{esc(x)}</li>" for x in d.diagnosis)
            return (f'<p class="headline">No design: {esc(DesignStatus(d.status).words)}'
                    f".</p><ul>{items}</ul>")
        t = d.totals
        lf = [s.loadflow_drop_pct for s in d.segments if s.loadflow_drop_pct is not None]
        worst_lf = max(lf) if lf else None
        limit = self.prep.profile.drop_total_pct
        worst = worst_lf if worst_lf is not None else d.worst_path_drop_pct()
        findings = len(d.violations)
        cards = [
            card("Upfront cost", f"{tb.money(t.capex)} {self.cur}",
                 "conductors and installation", key="capex"),
            card("Lifetime total", f"{tb.money(t.lifecycle)} {self.cur}",
                 f"upfront + losses over {self.econ.years:g} years, today's money",
                 key="lifecycle"),
            card("Losses", f"{tb.money(t.loss_kwh_per_year)} kWh/yr",
                 f"{tb.money(tb.annual_loss_cost(d))} {self.cur} "
                 "in the first year", key="losses"),
            card("Worst voltage drop", pct(worst),
                 f"{'AC load flow' if worst_lf is not None else 'linear estimate'}, "
                 f"limit {limit:g} %", warn=worst > limit + 1e-9, key="drop"),
            card("Findings", str(findings),
                 "see Verification" if findings else "none from the checks run",
                 warn=findings > 0, key="findings"),
        ]
        showing = (f'<div class="showing" id="showing" hidden>Showing: <strong>'
                   f"{esc(_objective_words(d))}</strong></div>" if self.explorer else "")
        return (f'<p class="headline">{esc(self.headline())}</p>{showing}'
                f'<div class="cards" id="cards">{"".join(cards)}</div>'
                f'<p class="muted">Design: {esc(_objective_words(d))}, status '
                f"{esc(DesignStatus(d.status).words)}"
                f"{', engine ' + esc(d.engine) if d.engine else ''}.</p>")

    def headline(self) -> str:
        """The case for the lifecycle design in one sentence."""
        c = self.cash
        years = f"{self.econ.years:g}"
        if c is None:
            return "The options could not all be solved; see the options table."
        if c.added_cost <= 0.5:
            return ("The least-cost design that meets the code is also the best over the "
                    f"installation's {years}-year life: no upsizing pays.")
        pays = (f"pays back in {c.payback_years:.1f} years (simple payback: added cost over "
                "the first year's saving)"
                if math.isfinite(c.payback_years) else "never pays back")
        return (f"Sizing for the whole life instead of the code minimum costs "
                f"{tb.money(c.added_cost)} {self.cur} more now, saves "
                f"{tb.money(c.first_year_saving)} {self.cur} in the first year and {pays}; "
                f"over {years} years it is worth {tb.money(c.npv)} {self.cur} today.")

    # -- sections --------------------------------------------------------------------------

    def explore_section(self) -> str:
        """The frontier chart: every design on it can be shown (with the script)."""
        if not self.xpoints or len(self.xpoints) < 2:
            return ""
        pts = self.xpoints
        chart = ex.frontier_svg(pts, self.shown, self.reference, self.code_min_index,
                                self.cur, self.econ.years)
        n = len(pts)
        controls = (f'<div class="controls" id="explore-controls" hidden>'
                    f'<label for="frontier-slider">Design along the frontier, least upfront '
                    f'cost first: </label><input type="range" id="frontier-slider" min="0" '
                    f'max="{n - 1}" step="1" value="{self.shown}">'
                    f'<button type="button" id="show-optimum">Show the lifecycle optimum'
                    f"</button></div>")
        rows = []
        for i, p in enumerate(pts):
            t = p.figures.totals
            rows.append([Cell(p.label, "chosen" if i == self.shown else ""), num(t.capex),
                         num(t.loss_pv), num(t.lifecycle), str(p.findings)])
        listing = table(["Design", f"Upfront {self.cur}", f"Loss PV {self.cur}",
                         f"Lifetime total {self.cur}", "Findings"], rows,
                        numeric=[False, True, True, True, True], css="points")
        return ('<section id="explore"><h2>The trade-off: upfront cost against losses</h2>'
                f'<div class="explore"><figure class="chart-box">{chart}<figcaption>'
                f"{esc(ex.chart_key())}. Each mark is a compliant design that no other beats "
                "on both upfront cost and losses.</figcaption></figure>"
                f'<div class="explore-side">{controls}'
                '<p id="explore-diff" class="diff">This page shows '
                f"{esc(pts[self.shown].label)}. Click a point on the chart or move the "
                + ("slider to show another design in the key figures (needs JavaScript; "
                   "on a tree this large the tree and the schedule summary stay on the "
                   "design the page was written for).</p>" if self.summary else
                   "slider to show another design in the key figures, the tree and the "
                   "schedule (needs JavaScript).</p>")
                + f"<details><summary>The {n} designs</summary>{listing}</details>"
                "</div></div></section>")

    def tree_section(self) -> str:
        """The distribution tree as a picture of the design shown."""
        d = self.design
        if not d.segments or len(d.segments) != len(self.prep.segments):
            return ""
        views = ex.run_views(d, self.code_min, self.parent, self.kinds, self.limits,
                             self.descriptions)
        return ('<section id="tree"><h2>The distribution tree</h2>'
                + tree_html(self.scenario.source.id, views,
                            drop_basis=d.key_figures().drop_basis)
                + "</section>")

    def scenario_section(self) -> str:
        """Site, rules, source and the size of the tree."""
        s = self.scenario
        src = s.source
        segs = self.prep.segments
        feeders = sum(1 for g in segs if g.kind == "feeder")
        roots = [g for g in segs if g.parent_index < 0]
        demand_kva = abs(sum((g.demand_va for g in roots), 0j)) / 1e3
        fault = (f"{src.fault_current_a / 1e3:g} kA, X/R {src.x_r:g}"
                 if src.fault_current_a else "not given (infinite bus assumed)")
        transformers = sum(1 for n in s.nodes if n.transformer is not None)
        pairs = [
            ("Project", s.title),
            ("Scenario file", Path(s.file).name if s.file else "—"),
            ("Rules", f"{self.prep.profile.title} ({self.prep.profile.edition})"),
            ("Source", f"{src.id}: {src.voltage_v:g} V, {src.phases}-phase"),
            ("Source fault level", fault),
            ("Nodes", f"{len(s.nodes) + 1} (source + {len(s.nodes)}): "
                      f"{_count(feeders, 'feeder')}, "
                      f"{_count(len(segs) - feeders, 'branch circuit')}, "
                      f"{_count(transformers, 'transformer')}"),
            ("Demand at the source", f"{demand_kva:,.0f} kVA (demand factors applied)"),
            ("Currency", s.currency),
        ]
        return '<section id="scenario"><h2>Scenario</h2>' + facts(pairs) + "</section>"

    def assumptions_section(self) -> str:
        """Rule profile and limits, economics, prices."""
        p = self.prep.profile
        e = self.econ
        se = self.scenario.economics
        rules = [
            ("Profile", f"{p.name}: {p.title}"),
            ("Edition", p.edition),
            ("Voltage drop limits", f"{p.drop_feeder_pct:g} % per feeder, {p.drop_branch_pct:g} % "
                                    f"per branch circuit, {p.drop_total_pct:g} % source to load"),
            ("Continuous loads", f"× {p.continuous_factor:g} for the ampacity before "
                                 "adjustment" + (" and as installed"
                                                 if p.continuous_after_adjustment else "")),
            ("Load unknown", f"{100 * p.unknown_load_factor:g} % of the device rating"),
            ("Motor-start dip limit", f"{p.motor_start_dip_pct:g} %"),
            ("Fault clearing time", f"{p.default_clearing_time_s:g} s unless a node gives one"),
            *fault_assumptions(p),
        ]
        given_llf = se.loss_load_factor is not None
        econ = [
            ("Energy price", f"{1e3 * e.energy_price_per_wh:g} {self.cur}/kWh"),
            ("Demand charge", f"{se.demand_charge_per_kw_month:g} {self.cur}/kW per month"),
            ("Escalation", f"{100 * e.escalation:g} % a year"),
            ("Discount rate", f"{100 * e.discount:g} % a year"),
            ("Load growth", f"{100 * e.load_growth:g} % a year"),
            ("Lifetime", f"{e.years:g} years"),
            ("Load factor", f"{se.load_factor:g} (loads with no category)"),
            ("Loss load factor", f"{e.theta:.3f} "
                                 + ("(given)" if given_llf else "(0.3 LF + 0.7 LF²)")
                                 + "; each run has its own, see below"),
            ("Hours per year", f"{e.hours_per_year:g} h"),
            ("Present value of 1 W of peak loss",
             f"{e.loss_pv_per_w:.3f} {self.cur} (IEC 60287-3-2) for a run that peaks with "
             "the building at the load factor above; each run's own below"),
            ("Grid emission factor", f"{se.emission_kg_per_kwh:g} kg CO₂/kWh "
                                     "([economics] emission_factor; 0.4 when not given)"),
        ]
        prices = self.price_facts()
        # the profile's stand-ins and from-memory tables (per-run assumptions: Verification)
        from sizer.rules.profile import table_status_line

        status = table_status_line(p)
        lines = [*(getattr(p, "notes", ()) or ()), *([status] if status else [])]
        notes = "".join(f"<li>{esc(n)}</li>" for n in lines)
        return ('<section id="assumptions"><h2>Assumptions</h2><div class="columns">'
                f"<div><h3>Rules</h3>{facts(rules)}"
                f"{f'<ul class=muted>{notes}</ul>' if notes else ''}</div>"
                f"<div><h3>Economics</h3>{facts(econ)}</div>"
                f"<div><h3>Prices</h3>{facts(prices)}</div></div>"
                f"{self.operation_block()}</section>")

    def operation_block(self) -> str:
        """How the loads run: the operating profiles behind the losses."""
        rows = tb.profiles_table(self.prep)
        method = self.scenario.economics.loss_load_method
        how = ("each run's loss-load factor from the mean and spread of the loads below it "
               "(spreads added as fully correlated, the upper bound)" if method == "moments"
               else "each run's loss-load factor from its own load factor, 0.3 LF + 0.7 LF² "
                    "(Buller-Woodrow)")
        body = table(
            ["Load category", "Loads", "Overridden", "Utilisation", "Load factor",
             "Full-load hours", "Loss-load factor", "Peak coincidence", "Source"],
            [(r.category.replace("_", " "), r.loads, r.overridden,
              f"{100 * r.utilisation:.0f} %", f"{r.load_factor:.2f}",
              f"{r.full_load_hours:,.0f} h", f"{r.loss_load_factor:.3f}",
              f"{r.peak_coincidence:.2f}", r.source) for r in rows],
            numeric=[False, True, True, True, True, True, True, True, False])
        return ("<h3>How the loads run (losses only)</h3>"
                "<p class=muted>Ampacity, protection and voltage drop use the code's sizing "
                "currents; losses use each load's operating peak (utilisation × its declared "
                "load, or × the device rating when no load is given) and profile. Feeders: "
                "the phasor sum of the operating peaks below × the coincidence factor (the "
                f"demand factor unless given); {how}. The demand charge falls on each run's "
                "loss at the building's peak (peak coincidence squared). Category defaults "
                "are common practice or from memory, marked in the source column.</p>"
                + body)

    def price_facts(self) -> list[tuple[str, str]]:
        """The price list, its currency, date and metal prices."""
        pl = self.prep.prices
        header = _price_header(self.scenario)
        metal = ", ".join(f"{m} {v:g} {pl.currency}/kg"
                          for m, v in sorted(pl.metal_per_kg.items()))
        basis = ", ".join(f"{m} {header[k]}" for m, k in (("Cu", "copper_price_basis"),
                                                          ("Al", "aluminium_price_basis"))
                          if k in header)
        date = header.get("date") or header.get("priced") or header.get("price_date")
        out = [("Price list", pl.source), ("Currency", pl.currency),
               ("Price date", date or "not recorded in the price list")]
        if basis:
            out.append(("Metal prices the list was priced at", basis))
        out.append(("Metal prices used", metal or "as listed"))
        if "product" in header:
            out.append(("Product", header["product"]))
        return out

    def options_section(self) -> str:
        """The options side by side, with the frontier figure."""
        cur = self.cur
        headers = ["Option", f"Upfront {cur}", f"Conductors {cur}", f"Splices {cur}",
                   f"Raceways {cur}", f"Loss PV {cur}", f"Lifetime total {cur}",
                   "Losses kWh/yr", f"Loss cost {cur}/yr", "Worst drop % (estimate)",
                   "Worst drop % (load flow)", "CO₂ t/yr", "CO₂ t over life"]
        rows: list[list[object]] = []
        classes: list[str] = []
        for r in self.option_rows:
            title = r.title if r.feasible else f"{r.title}: {DesignStatus(r.status).words}"
            rows.append([title, num(r.capex), num(r.conductor_capex), num(r.termination_capex),
                         num(r.raceway_capex), num(r.loss_pv), num(r.lifecycle),
                         num(r.loss_kwh_per_year), num(r.loss_cost_per_year),
                         num(r.worst_drop_pct, 2), num(r.worst_loadflow_drop_pct, 2),
                         num(r.co2_t_per_year, 1), num(r.co2_t_lifetime, 0)])
            classes.append("chosen" if r.key == "lifecycle" else "")
        numeric = [False] + [True] * 12
        ef = self.scenario.economics.emission_kg_per_kwh
        return ('<section id="options"><h2>Options side by side</h2>'
                + table(headers, rows, numeric=numeric, row_class=classes, css="options")
                + f'<p class="note">Loss PV: present value of the cost of losses over '
                  f"{self.econ.years:g} years (energy and demand charge, escalated and "
                  f"discounted). Loss cost and CO₂ per year are first-year figures; CO₂ uses "
                  f"{ef:g} kg/kWh and grows with the load over the life. Upfront is the "
                  "installed cost: conductors and EGC pulled, reducing splices where a "
                  "conductor is larger than its terminal takes, and raceways (conduit per "
                  "parallel set, tray, trench) with their labour. The highlighted row "
                  "is the lifecycle optimum.</p>" + self.spare_note() + "</section>")

    def spare_note(self) -> str:
        """What the reserved spare capacity costs, against the same optimum without it."""
        by_key = {r.key: r for r in self.option_rows}
        with_, bare = by_key.get("lifecycle"), by_key.get("without_spare")
        if with_ is None or bare is None or not (with_.feasible and bare.feasible):
            return ""
        runs = [n.id for n in self.scenario.nodes if n.spare > 0]
        added = with_.capex - bare.capex
        total = with_.lifecycle - bare.lifecycle
        return (f'<p class="note">Spare capacity reserved on {_count(len(runs), "run")} '
                f"({esc(', '.join(runs))}): it adds {tb.money(added)} {self.cur} upfront "
                f"and {tb.money(total)} {self.cur} to the lifetime total against the same "
                "optimum without it (its losses are priced at the operating load, not the "
                "reserve).</p>")

    def justification_section(self) -> str:
        """Per-segment upsizing: the sentences, the table, the totals."""
        cur = self.cur
        out = ['<section id="justification"><h2>Why upsize: run by run</h2>']
        if self.code_min is None or self.lifecycle is None:
            out.append("<p>The code-minimum or lifecycle option has no design; nothing to "
                       "compare.</p></section>")
            return "".join(out)
        out.append(self._refused_upsizing())
        if not self.justify:
            out.append("<p>The lifecycle optimum buys no run larger than the code minimum.</p>"
                       "</section>")
            return "".join(out)
        top = self.justify[:8]
        out.append('<ul class="sentences">' + "".join(f"<li>{esc(r.sentence)}</li>" for r in top)
                   + "</ul>")
        if len(self.justify) > len(top):
            out.append(f'<p class="note">{len(self.justify) - len(top)} more runs in the table '
                       "below.</p>")
        headers = ["Run", "Code minimum", "Lifecycle", f"Added {cur}", "kWh saved/yr",
                   f"{cur} saved/yr", "Simple payback years", f"NPV {cur}"]
        listed = self.justify[:LIST_LIMIT] if self.summary else self.justify
        rows: list[list[object]] = [[r.segment, r.code_minimum, r.lifecycle, num(r.added_cost),
                 num(r.kwh_saved_per_year), num(r.money_saved_per_year),
                 num(r.payback_years, 1) if math.isfinite(r.payback_years) else "never",
                 num(r.npv)] for r in listed]
        added = sum(r.added_cost for r in self.justify)
        value = sum(r.npv for r in self.justify)
        rows.append([Cell("all upsized runs", "total"), "", "", num(added),
                     num(sum(r.kwh_saved_per_year for r in self.justify)),
                     num(sum(r.money_saved_per_year for r in self.justify)), "", num(value)])
        out.append(table(headers, rows, numeric=[False] * 3 + [True] * 5))
        if len(listed) < len(self.justify):
            out.append(f'<p class="note">The {len(listed)} upsized runs of highest NPV are '
                       f"listed, of {len(self.justify):,}; the total row counts them all.</p>")
        out.append(f'<p class="note">Sorted by NPV. Savings are first-year figures (energy at '
                   f"{1e3 * self.econ.energy_price_per_wh:g} {cur}/kWh plus demand charge); "
                   f"payback is simple (added cost / first-year saving); NPV is over "
                   f"{self.econ.years:g} years at {100 * self.econ.discount:g} % with "
                   f"{100 * self.econ.escalation:g} % escalation. Added cost is the full "
                   "installed cost: conductors, splices, raceways and labour.</p>")
        if self.cash is not None and self.cash.added_cost > 0.5:
            fig = plots.cash_flow_figure(self.cash, cur, self.econ.discount)
            out.append(figure(plots.png_bytes(fig), "Cumulative cash flow of upsizing",
                              "The whole upsizing, year by year: added cost in year 0, loss "
                              "savings after; where a curve crosses zero it has paid back."))
        out.append("</section>")
        return "".join(out)

    def has_phases(self) -> bool:
        """True when some single-phase circuit sits on a three-phase panel."""
        return any(p is not None for p in self.prep.phases.phase)

    def phase_section(self) -> str:
        """Each three-phase panel's phase balance: currents per phase, neutral, bars."""
        segs = self.prep.segments
        ph = self.prep.phases
        # Each run's single-phase circuits, in one pass (a scan per panel is quadratic).
        phased: dict[int, list[int]] = {}
        for k, g in enumerate(segs):
            if ph.phase[k] is not None and g.parent_index >= 0:
                phased.setdefault(int(g.parent_index), []).append(k)
        panels = [(i, phased[i]) for i, seg in enumerate(segs)
                  if seg.phases == 3 and i in phased]
        if not panels:
            return ""
        rows = []
        for i, kids in panels:
            cur = [float(v) for v in ph.sizing_a[i]]
            top = max(cur) or 1.0
            mean = sum(cur) / 3
            bars = "".join(
                f'<div><span class="muted">{name}</span> <span style="display:inline-block;'
                f'height:0.7em;width:{120 * c / top:.0f}px;background:#4a78a8"></span> '
                f"{c:,.1f} A</div>" for name, c in zip("ABC", cur, strict=True))
            on = "; ".join(f"{p}: " + ", ".join(segs[k].id for k in kids if ph.phase[k] == p)
                           for p in ("A", "B", "C", "AB", "BC", "CA")
                           if any(ph.phase[k] == p for k in kids))
            rows.append(f"<tr><th>{esc(segs[i].id)}</th><td>{bars}</td>"
                        f"<td class=num>{ph.neutral_a[i]:,.1f} A</td>"
                        f"<td class=num>{100 * (top - mean) / mean if mean else 0:.1f} %</td>"
                        f"<td>{esc(on)}</td></tr>")
        return ('<section id="phases"><h2>Phase balance</h2><p class=muted>Single-phase '
                "circuits on each three-phase panel, as fixed in the scenario or assigned "
                "by sizer to make the most loaded phase as light as possible (sizing "
                "currents). Feeders are sized and their drop taken at their most loaded "
                "phase; the neutral carries the phasor sum plus declared triplen harmonics."
                '</p><div class="scroll"><table><thead><tr><th>Panel</th><th>Phase currents'
                "</th><th>Neutral</th><th>Top phase over the mean</th><th>Circuits</th></tr>"
                f"</thead><tbody>{''.join(rows)}</tbody></table></div></section>")

    def _refused_upsizing(self) -> str:
        """The runs a terminal or raceway limit kept from a larger conductor, named."""
        limits = [(seg.id, text) for seg, text in zip(self.prep.segments,
                                                      self.prep.local.build_limits, strict=False)
                  if text]
        if not limits:
            return ""
        shown = limits[:LIST_LIMIT] if self.summary else limits
        more = (f"<p class=\"note\">… and {len(limits) - len(shown):,} more.</p>"
                if len(shown) < len(limits) else "")
        return ("<p>Runs that could not be upsized further because of a terminal or raceway "
                "limit:</p><ul class=\"limits\">"
                + "".join(f"<li>{esc(sid)}: {esc(text)}</li>" for sid, text in shown)
                + "</ul>" + more)

    def schedule_section(self) -> str:
        """The cable schedule of the design: one row per run, narrow enough for a page.

        Cells that change with the design shown carry ``data-k`` so the page's script can
        rewrite them; every row carries ``data-i`` (the run's index) and its panel.
        """
        d = self.design
        out = ['<section id="schedule"><h2>Cable schedule</h2>']
        if not d.segments:
            out.append("<p>No design.</p></section>")
            return "".join(out)
        if self.summary:
            out.append(self.schedule_summary())
            out.append("</section>")
            return "".join(out)
        p = self.prep.profile
        descriptions = {n.id: n.description for n in self.scenario.nodes}
        rows_data = tb.schedule_table(d, descriptions)
        cur = self.cur
        length = "Length m / ft" if self.imperial else "Length m"
        # (header, key for the script or "", numeric)
        cols = [("From", "", False), ("Run (to)", "", False), ("Kind", "", False),
                ("Circuit", "", False), (length, "", True), ("Current A", "", True),
                ("Device A", "", True), ("Conductor", "c", False), ("EGC/bond", "e", False),
                ("Lands", "n", False), ("Raceway", "r", False),
                ("Ampacity A", "a", True), ("Use %", "u", True), ("Own drop %", "v", True),
                ("Path drop % linear estimate", "p", True),
                ("Path drop % load flow", "l", True), ("Fault kA", "f", True),
                ("Earth fault A / trip A", "g", True),
                (f"Upfront {cur}", "x", True), ("Loss kW", "w", True),
                (f"Loss PV {cur}", "q", True)]
        head = "".join(
            f'<th{" class=num" if n else ""} data-col="{j}" scope="col">{esc(h)}</th>'
            for j, (h, _k, n) in enumerate(cols))
        body = []
        for i, (r, seg) in enumerate(zip(rows_data, self.prep.segments, strict=False)):
            own_limit = p.drop_limit_pct(r.kind)
            total_limit = p.drop_total_pct if seg.is_leaf else math.inf
            run = f"{esc(r.to_id)}"
            if r.description:
                run += f'<span class="desc">{esc(r.description)}</span>'
            span = (f"{num(r.length_m, 1)}<span class=sub>{num(r.length_m / M_PER_FT, 0)} ft"
                    "</span>" if self.imperial else num(r.length_m, 1))
            cond = r.conductor + (" (pinned)" if r.pinned else "")
            cells = [
                ("", esc(r.from_id), False), ("", run, False), ("", esc(r.kind), False),
                ("", f'<span class="nw">{num(r.voltage_v)} V {r.phases}-ph</span>', False),
                ("", span, True),
                ("", num(r.current_a, 1), True), ("", num(r.ocpd_a), True),
                ("c", esc(cond), False), ("e", esc(r.egc).replace(" ", "\u00a0"), False),
                ("n", esc(landing_text(r.termination, r.terminal_max)), False),
                ("r", esc(r.raceway), False),
                ("a", num(r.ampacity_a), True), ("u", num(r.utilisation_pct, 0), True),
                ("v", _flag_html(r.vd_pct, own_limit), True),
                ("p", _flag_html(r.path_vd_pct, total_limit), True),
                ("l", _flag_html(r.loadflow_drop_pct, total_limit), True),
                ("f", num(r.fault_ka, 1), True),
                ("g", _earth_html(r.earth_fault_a, r.trip_a), True),
                ("x", num(r.capex), True),
                ("w", num(r.loss_kw, 2), True), ("q", num(r.loss_pv), True)]
            tds = "".join(
                f'<td{_cls(k, n)}{f" data-k={k}" if k else ""}>{v}</td>' for k, v, n in cells)
            body.append(f'<tr data-i="{i}" data-panel="{esc(r.from_id)}">{tds}</tr>')
        panels = sorted({r.from_id for r in rows_data})
        options = "".join(f'<option value="{esc(x)}">{esc(x)}</option>' for x in panels)
        controls = ('<div class="controls" id="schedule-controls" hidden>'
                    '<label>Panel <select id="f-panel"><option value="">all</option>'
                    f"{options}</select></label>"
                    '<label>Run or description <input type="search" id="f-text" size="14">'
                    "</label>"
                    '<label>Path drop at least <input type="number" id="f-drop" min="0" '
                    'step="0.1" size="4"> %</label>'
                    '<label><input type="checkbox" id="f-changed"> only runs that differ '
                    "from the lifecycle optimum</label>"
                    '<span id="f-count" class="muted"></span>'
                    '<span class="muted">Click a column heading to sort.</span></div>')
        t = d.totals
        out.append('<p class="note">Use % is the design current over the ampacity (the '
                   "continuous-load factor is applied to the requirement, not shown here). "
                   "Drops are in % of each circuit's nominal voltage; path drops run from the "
                   "source to the run's far end, transformers included: the linear estimate "
                   "is what the optimiser holds to the limits, the AC load flow checks it. "
                   "Earth fault: the minimum line-to-earth fault current at the run's far "
                   "end (IEC 60909 minimum conditions) against the current that disconnects "
                   "its device in time. Marked cells exceed their limit. EGC: equipment "
                   "grounding conductor; Device: the overcurrent device rating.</p>")
        out.append(controls)
        out.append(f'<table class="schedule" id="schedule-table"><thead><tr>{head}</tr></thead>'
                   f'<tbody>{"".join(body)}</tbody></table>')
        out.append(f'<p class="note" id="schedule-totals">Totals: upfront {tb.money(t.capex)} '
                   f"{cur}, loss PV {tb.money(t.loss_pv)} {cur}, "
                   f"{tb.money(t.loss_kwh_per_year)} kWh lost in the first year.</p>")
        if self.drivers:
            out.append("<h3>Sized by disconnection, not by drop</h3><ul>"
                       + "".join(f"<li>{esc(tb.disconnection_sentence(x))}</li>"
                                 for x in self.drivers) + "</ul>")
        out.append("</section>")
        return "".join(out)

    def schedule_summary(self) -> str:
        """A large tree's schedule: one row per panel or board, the runs it feeds summed."""
        d = self.design
        p = self.prep.profile
        cur = self.cur
        path_limits = [p.drop_total_pct if g.is_leaf else math.inf for g in self.prep.segments]
        rows = tb.panel_summary(d, p.drop_limit_pct, path_limits)
        t = d.totals
        body = table(
            ["Panel or board", "Runs fed", "Conductors", f"Upfront {cur}", f"Loss PV {cur}",
             "Worst path drop %", "at run", "Runs over a drop limit", "Findings"],
            [[r.panel, f"{r.runs:,}", r.conductors, num(r.capex), num(r.loss_pv),
              num(r.worst_drop_pct, 2), r.worst_run,
              Cell(f"{r.over_limit:,}", "over") if r.over_limit else "0",
              Cell(f"{r.findings:,}", "over") if r.findings else "0"] for r in rows],
            numeric=[False, True, False, True, True, True, False, True, True],
            css="schedule-summary")
        drivers = ""
        if self.drivers:
            listed = self.drivers[:LIST_LIMIT]
            drivers = ("<h3>Sized by disconnection, not by drop</h3><ul>"
                       + "".join(f"<li>{esc(tb.disconnection_sentence(x))}</li>"
                                 for x in listed) + "</ul>"
                       + (f'<p class="note">… and {len(self.drivers) - len(listed):,} more '
                          "(the schedule's earth-fault and trip columns show them all).</p>"
                          if len(listed) < len(self.drivers) else ""))
        return (f'<p class="note" id="schedule-summary-note">This tree has '
                f"{len(d.segments):,} runs, so the schedule is summed by the panel or board "
                f"that feeds them: {len(rows):,} rows, one per panel. The full cable schedule, "
                "one row per run with its conductor, EGC, raceway, drops and fault levels, is "
                "in the CSV file (sizer solve … --csv schedule.csv) and the JSON "
                f"results; this page stays light ({_SIZE_MARK}) so that a browser opens it "
                "quickly. Drops are the AC load flow's where it ran, else the linear "
                "estimate, in % of each circuit's nominal voltage.</p>"
                + body
                + f'<p class="note" id="schedule-totals">Totals: upfront {tb.money(t.capex)} '
                  f"{cur}, loss PV {tb.money(t.loss_pv)} {cur}, "
                  f"{tb.money(t.loss_kwh_per_year)} kWh lost in the first year.</p>"
                + drivers)

    def figures_section(self) -> str:
        """Frontier, voltage profile, cost breakdown."""
        d = self.design
        out = ['<section id="figures"><h2>Figures</h2>']
        if not d.segments:
            out.append("<p>No design to draw.</p></section>")
            return "".join(out)
        p = self.prep.profile
        years = self.econ.years
        if self.points and not self.explorer:
            fig = plots.frontier_figure(tb.frontier_table(self.points), self.option_rows,
                                        self.cur, years)
            out.append(figure(plots.png_bytes(fig), "Frontier of upfront cost against losses",
                              "Each point is a compliant design that no other beats on both "
                              "upfront cost and losses; filled circles come from weighted "
                              "sums, hollow squares from the ε-constraint method. Designs "
                              "on the dashed line cost the same over the life as the "
                              "lifecycle optimum."))
        profile = tb.worst_path_profile(d)
        fig = plots.voltage_profile_figure(profile, max(p.drop_feeder_pct, p.drop_branch_pct),
                                           p.drop_total_pct)
        out.append(figure(plots.png_bytes(fig), f"Voltage drop along the path to {profile.load}",
                          f"Drop from the source to {profile.load}, the load with the largest "
                          "drop, at the far end of each run; a jump at a transformer is its "
                          "regulation."))
        fig = plots.cost_breakdown_figure(tb.cost_breakdown(d), self.cur, years)
        out.append(figure(plots.png_bytes(fig), "Cost by run",
                          "Upfront cost and present value of losses of each run, largest "
                          "first."))
        out.append("</section>")
        return "".join(out)

    def verification_section(self) -> str:
        """Load flow, estimate against load flow, fault levels, findings, motor starts, notes."""
        d = self.design
        ver = self.ver
        out = ['<section id="verification"><h2>Verification</h2>']
        items: list[str] = []
        if ver is not None:
            if ver.converged:
                items.append(f"The AC load flow (backward/forward sweep, constant-power loads) "
                             f"converged in {ver.iterations} iterations.")
            else:
                items.append(f"The AC load flow did NOT converge in {ver.iterations} "
                             "iterations: the drops below are not confirmed.")
        diffs = [(s.loadflow_drop_pct - s.path_vd_pct, s.id) for s in d.segments
                 if s.loadflow_drop_pct is not None]
        if diffs:
            worst_diff, seg = max(diffs, key=lambda x: abs(x[0]))
            items.append(f"Largest difference between the linear drop estimate and the load "
                         f"flow: {worst_diff:+.3f} percentage points at {seg}.")
        faults = [(s.fault_ka, s.id) for s in d.segments if s.fault_ka is not None]
        src = self.scenario.source
        if faults:
            hi, lo = max(faults), min(faults)
            items.append(f"Bolted fault level at the far end of each run (three-phase; "
                         f"single-phase circuits line to neutral): from "
                         f"{hi[0]:.1f} kA ({hi[1]}) down to {lo[0]:.1f} kA ({lo[1]}); source "
                         + (f"{src.fault_current_a / 1e3:g} kA." if src.fault_current_a
                            else "level not given, infinite bus assumed."))
        lows = [(s.fault_min_ka, s.id) for s in d.segments if s.fault_min_ka is not None]
        if lows:
            lo_min = min(lows)
            items.append(f"Minimum three-phase fault (c_min, conductors hot, no motors): "
                         f"down to {lo_min[0]:.2f} kA ({lo_min[1]}).")
        margins = [(s.earth_fault_a / s.trip_a, s.id, s.earth_fault_a, s.trip_a)
                   for s in d.segments if s.earth_fault_a is not None and s.trip_a]
        if margins:
            m = min(margins)
            items.append(f"Disconnection: the smallest margin of far-end earth fault over "
                         f"trip current is at {m[1]}, {m[2]:,.0f} A against {m[3]:,.0f} A "
                         f"(× {m[0]:.2f}); {len(self.drivers)} run(s) sized by this rule "
                         "rather than by drop.")
        if items:
            out.append("<ul>" + "".join(f"<li>{esc(x)}</li>" for x in items) + "</ul>")
        if d.violations:
            out.append(f"<h3>Findings ({len(d.violations)})</h3>")
            counts: dict[str, int] = {}
            for v in d.violations:
                counts[v.rule] = counts.get(v.rule, 0) + 1
            out.append('<p class="note">' + esc("; ".join(f"{k}: {n}" for k, n in
                                                          sorted(counts.items())))
                       + ". Each needs a decision by the designer before the design is "
                       "used.</p>")
            groups = tb.group_findings(d)
            out.append(table(["Runs", "Rule", "Worst value", "Limit", "What it means"],
                             ([Cell(g.title + ("" if len(g.segments) == 1 else
                                               f" ({', '.join(g.segments)})")),
                               g.rule, _with_unit(g.worst.value, g.rule),
                               _with_unit(g.worst.limit, g.rule),
                               (g.worst.message if len(g.segments) == 1 else
                                f"worst at {g.worst.segment}: {g.worst.message}")]
                              for g in groups),
                             numeric=[False, False, True, True, False]))
        else:
            out.append("<p>No findings from the checks run (ampacity, protection, drop, "
                       "disconnection, short-circuit withstand, motor-start dip).</p>")
        if ver is not None and ver.motor_dips:
            limit = self.prep.profile.motor_start_dip_pct
            out.append("<h3>Motor starting</h3>")
            out.append(table(
                ["Motor", "Voltage dip at start %", "Limit %", "Result"],
                ([m, num(dip, 2), num(limit, 1),
                  Cell("over the limit", "over") if dip > limit + 1e-9 else "within"]
                 for m, dip in ver.motor_dips),
                numeric=[False, True, True, False]))
        if d.diagnosis:
            out.append("<h3>Diagnosis</h3><ul>"
                       + "".join(f"<li>{esc(x)}</li>" for x in d.diagnosis) + "</ul>")
        # what sizer assumed or looked up per run (motor full-load currents, voltages taken)
        from sizer.loads import circuit_notes

        notes = (*d.notes, *circuit_notes(self.prep.segments))
        if notes:
            out.append("<h3>Notes</h3><ul>"
                       + "".join(f"<li>{esc(x)}</li>" for x in notes) + "</ul>")
        out.append("</section>")
        return "".join(out)


# The unit of a finding's value and limit, by rule (sizer.optimize and sizer.workflow).
_RULE_UNITS = {"ampacity": "A", "protection": "A", "branch drop": "%", "feeder drop": "%",
               "total drop": "%", "short-circuit withstand": "kA", "motor-start dip": "%",
               "disconnection": "A", "interrupting rating": "kA"}


def fault_assumptions(p: RuleProfile) -> list[tuple[str, str]]:
    """The fault-level and disconnection assumptions of a profile, as report facts."""
    f = p.fault
    devices = (f"type {f.device} breakers up to {f.small_device_max_a:g} A, "
               f"{f.large_device}s above" if f.small_device_max_a < 6000 else
               f"{f.device}s, instantaneous trip at {f.trip_multiple:g} × rating")
    temp = ("the insulation's maximum operating temperature"
            if f.loop_temperature == "operating" else "the final short-circuit temperature")
    return [
        ("Maximum fault", f"IEC 60909: c_max {f.c_max:g}, conductors at 20 °C, running "
                          f"motors at {f.motor_multiple:g} × rated current (R/X "
                          f"{f.motor_r_x:g})"),
        ("Minimum fault", f"IEC 60909: c_min {f.c_min:g}, conductors at {temp}, no "
                          "motors; source impedance from the given level with c_max"),
        ("Disconnection", f"earth fault at each run's far end (line + protective "
                          f"conductor of every run on the path) ≥ the device's trip "
                          f"current; {f.final_time_s:g} s for final circuits up to "
                          f"{f.final_circuit_max_a:g} A, {f.distribution_time_s:g} s "
                          "otherwise (IEC 60364-4-41)"),
        ("Devices assumed", f"{devices}; B 5, C 10, D 20 × In (IEC 60898-1); fuses "
                            f"{f.fuse_multiple_final:g} × (0.4 s) / "
                            f"{f.fuse_multiple_distribution:g} × (5 s), from memory"),
    ]


def _earth_html(earth_a: float | None, trip_a: float | None) -> str:
    """Earth fault against trip current, marked (bold, "over") when it does not reach it."""
    if earth_a is None or trip_a is None:
        return ""
    text = f"{num(earth_a)} / {num(trip_a)}"
    if earth_a < trip_a * (1 - 1e-9):
        return f'<strong class="over">{text}</strong>'
    return text


def _with_unit(value: float, rule: str) -> str:
    unit = _RULE_UNITS.get(rule, "")
    return f"{num(value, 2)} {unit}".rstrip()


def landing_text(termination: str, terminal_max: str) -> str:
    """How a run lands on its device, in one schedule cell: "direct" or "splice to SIZE"."""
    if termination == "reducing splice":
        return f"splice to {terminal_max}" if terminal_max else "splice"
    return termination


def _flag(value: float | None, limit: float) -> object:
    """A drop cell, marked when it exceeds its limit."""
    text = num(value, 2)
    if value is not None and math.isfinite(value) and value > limit + 1e-9:
        return Cell(text, "over")
    return text


def _flag_html(value: float | None, limit: float) -> str:
    """A drop cell's text, marked (bold, "over" class) when it exceeds its limit."""
    text = num(value, 2)
    if value is not None and math.isfinite(value) and value > limit + 1e-9:
        return f'<strong class="over">{text}</strong>'
    return text


def _cls(key: str, numeric: bool) -> str:
    return ' class="num"' if numeric else ""


def _count(n: int, word: str) -> str:
    return f"{n} {word}{'' if n == 1 else 's'}"


def _objective_words(design: Design) -> str:
    return {"lifecycle": "lifecycle optimum (upfront + losses)",
            "capex": "least upfront cost (code minimum)",
            "check": "the design as pinned"}.get(design.objective, design.objective)


_HEADER_LINE = re.compile(r"^#\s*(?P<key>[A-Za-z_]+)\s*:\s*(?P<value>.*?)\s*$")


def _price_header(scenario: Scenario) -> dict[str, str]:
    """The ``# key: value`` header lines of the scenario's price list (empty when unknown)."""
    given = scenario.prices.catalogue
    if given is None:
        return {}
    folder = Path(scenario.file).parent if scenario.file else Path.cwd()
    try:
        path = resolve_price_list(str(given), folder)
        lines = path.read_text(encoding="utf-8").splitlines()
    except (OSError, ValueError):
        return {}
    out = {}
    for line in lines:
        if not line.startswith("#"):
            break
        m = _HEADER_LINE.match(line)
        if m:
            out[m["key"].lower()] = m["value"]
    return out
