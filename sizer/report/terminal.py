"""The short terminal summary of a design: a compact schedule, the totals, the caution."""

from __future__ import annotations

from collections.abc import Sequence
from os import PathLike

from sizer import CAUTION
from sizer.model import Design, DesignStatus
from sizer.report.tables import group_findings
from sizer.units import conductor_label


def summary(design: Design, title: str, *, max_rows: int | None = 40, max_findings: int = 8,
            written: Sequence[str | PathLike[str]] = (), notes: Sequence[str] = ()) -> str:
    """A one-screen text summary; long schedules and finding lists are cut short.

    ``max_rows`` None prints every run. ``written`` names the files this run wrote, so a
    cut schedule can point to them (and says how to see it all when there are none).
    Drops say which they are: the path column and the worst drop are the AC load flow's
    when it ran (as in the report), the linear estimate's otherwise. ``notes`` (what was
    assumed per run, the profile's stand-in tables) come before the caution.
    """
    cur = design.currency
    lines = [f"{title}", f"status: {DesignStatus(design.status).words}"
             f"   objective: {design.objective}   rules: {design.rules}"
             + (f"   engine: {design.engine}" if design.engine else "")
             + (f"   proven gap: {100 * design.gap:.3g} %"
                if design.status is DesignStatus.TIME_LIMIT and design.gap is not None else "")]
    if design.segments:
        by_flow = all(s.loadflow_drop_pct is not None for s in design.segments)
        shown = design.segments if max_rows is None else design.segments[:max(max_rows, 0)]
        lines.append(
            f"{'segment':<14} {'kind':<7} {'length':>8} {'I A':>7} {'dev A':>6} "
            f"{'conductor':<22} {'EGC or bond':<14} {'Iz A':>6} {'vd %':>5} "
            f"{'path % LF' if by_flow else 'path % est':>10} {'capex':>10} {'lands':<7} "
            f"{'raceway'}")
        for s in shown:
            cond = conductor_label(s.sets, s.size, s.material)
            pin = "*" if s.pinned else ""
            bond = s.egc or f"SSBJ {s.bonding_jumper}"   # service: supply-side bonding jumper
            path = (f"{s.loadflow_drop_pct:10.2f}" if by_flow and s.loadflow_drop_pct is not None
                    else f"{s.path_vd_pct:10.2f}")
            lines.append(
                f"{s.id[:14]:<14} {s.kind:<7} {s.length_m:7.1f}m {s.current_a:7.1f} "
                f"{s.ocpd_a:6.0f} {(cond + pin)[:22]:<22} {bond[:14]:<14} {s.ampacity_a:6.0f} "
                f"{s.vd_pct:5.2f} {path} {s.capex:10,.0f} "
                f"{'splice' if s.termination == 'reducing splice' else s.termination:<7} "
                f"{s.raceway}".rstrip())
        hidden = len(design.segments) - len(shown)
        if hidden > 0:
            where = (f"in {', '.join(str(w) for w in written)}" if written
                     else "not shown (--rows all prints them)")
            lines.append(f"... {hidden} more run{'s' if hidden != 1 else ''} {where}")
        t = design.totals
        lines.append(
            f"totals: upfront {t.capex:,.0f} {cur}   loss PV {t.loss_pv:,.0f} {cur}   "
            f"lifetime {t.lifecycle:,.0f} {cur}   losses {t.loss_kwh_per_year:,.0f} kWh/year")
        estimate = design.worst_path_drop_pct()
        if by_flow:
            flow = max(s.loadflow_drop_pct or 0.0 for s in design.segments)
            lines.append(f"worst path drop: {flow:.2f} % by AC load flow "
                         f"({estimate:.2f} % by the linear estimate)")
        else:
            lines.append(f"worst path drop: {estimate:.2f} % (linear estimate)")
        lines.append("path % LF: drop from the source to the run's far end by AC load flow"
                     if by_flow else "path % est: drop from the source to the run's far end, "
                     "linear estimate")
    for d in design.diagnosis:
        lines.append(f"  - {d}")
    groups = group_findings(design)
    for g in groups[:max_findings]:
        at = g.title if len(g.segments) == 1 else f"{g.title} (worst {g.worst.segment})"
        lines.append(f"  ! {at}: {g.rule}: {g.worst.message}")
    if len(groups) > max_findings:
        where = (f"in {', '.join(str(w) for w in written)}" if written
                 else "not shown (--json writes every one)")
        lines.append(f"  ! ... {len(groups) - max_findings} more findings {where}")
    for n in (*design.notes, *notes):
        lines.append(f"note: {n}")
    lines.append(CAUTION)
    return "\n".join(lines)
