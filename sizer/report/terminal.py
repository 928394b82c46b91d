"""The short terminal summary of a design: a compact schedule, the totals, the caution."""

from __future__ import annotations

from sizer import CAUTION
from sizer.model import Design, DesignStatus
from sizer.units import conductor_label


def summary(design: Design, title: str, *, max_rows: int = 40, max_findings: int = 8) -> str:
    """A one-screen text summary; long schedules and finding lists are cut short."""
    cur = design.currency
    lines = [f"{title}", f"status: {DesignStatus(design.status).words}"
             f"   objective: {design.objective}   rules: {design.rules}"
             + (f"   engine: {design.engine}" if design.engine else "")
             + (f"   proven gap: {100 * design.gap:.3g} %"
                if design.status is DesignStatus.TIME_LIMIT and design.gap is not None else "")]
    if design.segments:
        lines.append(
            f"{'segment':<14} {'kind':<7} {'length':>8} {'I A':>7} {'dev A':>6} "
            f"{'conductor':<22} {'EGC':<10} {'Iz A':>6} {'vd %':>5} {'path %':>6} "
            f"{'capex':>10}")
        for s in design.segments[:max_rows]:
            cond = conductor_label(s.sets, s.size, s.material)
            pin = "*" if s.pinned else ""
            path = (f"{s.loadflow_drop_pct:6.2f}" if s.loadflow_drop_pct is not None
                    else f"{s.path_vd_pct:6.2f}")
            lines.append(
                f"{s.id[:14]:<14} {s.kind:<7} {s.length_m:7.1f}m {s.current_a:7.1f} "
                f"{s.ocpd_a:6.0f} {(cond + pin)[:22]:<22} {s.egc[:10]:<10} {s.ampacity_a:6.0f} "
                f"{s.vd_pct:5.2f} {path} {s.capex:10,.0f}")
        if len(design.segments) > max_rows:
            lines.append(f"... {len(design.segments) - max_rows} more segments in the files")
        t = design.totals
        lines.append(
            f"totals: upfront {t.capex:,.0f} {cur}   loss PV {t.loss_pv:,.0f} {cur}   "
            f"lifetime {t.lifecycle:,.0f} {cur}   losses {t.loss_kwh_per_year:,.0f} kWh/year")
        lines.append(f"worst path drop: {design.worst_path_drop_pct():.2f} %")
    for d in design.diagnosis:
        lines.append(f"  - {d}")
    for v in design.violations[:max_findings]:
        lines.append(f"  ! {v.segment}: {v.rule}: {v.message}")
    if len(design.violations) > max_findings:
        lines.append(f"  ! ... {len(design.violations) - max_findings} more findings in the files")
    for n in design.notes:
        lines.append(f"note: {n}")
    lines.append(CAUTION)
    return "\n".join(lines)
