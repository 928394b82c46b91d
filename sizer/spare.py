"""Spare capacity: a feeder or panel reserves room for load to come.

``spare = "25 %"`` on a node sizes its run for its sizing current × (1 + spare): the
required ampacity, the device sizer picks and the voltage drop all take the reserve,
so the run still complies when the spare is used. Losses do not: they come from the
operating profile (``sizer.operating``), which knows nothing of the reserve. The spare
of a node holds for its own run only; give it upstream too where the feeders ahead
must carry it (a stated choice: a designer decides how far up a reserve reaches).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from sizer.loads import next_rating_a
from sizer.model import Scenario, Segment
from sizer.rules import RuleProfile


def with_spare_capacity(segments: tuple[Segment, ...],
                        profile: RuleProfile) -> tuple[Segment, ...]:
    """Segments whose node reserves spare, sized for (1 + spare) × their currents."""
    ratings = np.asarray(profile.standard_ratings_a, dtype=float)
    out = []
    for seg in segments:
        spare = seg.node.spare
        if spare <= 0:
            out.append(seg)
            continue
        grow = 1.0 + spare
        required = seg.required_ampacity_a * grow
        ocpd = seg.ocpd_a
        if seg.ocpd_chosen:
            pick = float(next_rating_a(ratings, np.array([required]))[0])
            if not math.isnan(pick):
                ocpd = pick
        out.append(replace(seg, current_a=seg.current_a * grow,
                           required_ampacity_a=required, ocpd_a=ocpd))
    return tuple(out)


def without_spare(scenario: Scenario) -> Scenario:
    """The same scenario with every reserve removed (to price what the spare costs)."""
    nodes = tuple(replace(n, spare=0.0) if n.spare > 0 else n for n in scenario.nodes)
    return replace(scenario, nodes=nodes)


def has_spare(scenario: Scenario) -> bool:
    """True when any node reserves spare capacity."""
    return any(n.spare > 0 for n in scenario.nodes)
