"""Phases of single-phase circuits on three-phase panels, phase currents and the neutral.

- **Assignment.** On a three-phase panel each single-phase circuit takes a phase ("A",
  "B", "C": line to neutral) or a pair ("AB", "BC", "CA": line to line). A scenario may
  fix it (``phase``); the others are assigned per panel to make the most loaded phase as
  light as possible, counting each circuit's sizing current on the line(s) it uses
  (magnitudes added, the code's conservative convention). Panels with at most
  ``EXACT_LIMIT`` free circuits are solved exactly (branch and bound, checked against
  brute force in the tests); larger ones by LPT (largest circuit first onto the least
  loaded option), which for line-to-neutral circuits is within 4/3 − 1/(3·3) = 11/9 of
  the optimum (Graham 1969, "Bounds on multiprocessing timing anomalies", m = 3).
  Deterministic: ties go to the earlier option in A, B, C / AB, BC, CA order.
- **Phase currents.** Sizing: each phase of a three-phase feeder carries its demand
  factor × the sum of the sizing currents below on that phase (balanced three-phase
  loads on every phase); the feeder is sized for its most loaded phase and its drop is
  taken at that current. Operating (losses): phasors, each load's operating peak at its
  phase angle, × the coincidence factor. A transformer's primary is taken as balanced
  (a delta primary spreads the secondary's unbalance; a stated simplification).
- **Neutral.** Its current is the phasor sum of the three phase currents plus the
  triplen harmonics the loads declare (``triplen``: third-harmonic current as a share of
  the load's current; triplens of all phases add in the neutral), combined as
  √(fundamental² + triplen²). It carries losses where it carries current.
"""

from __future__ import annotations

import cmath
import math
from dataclasses import dataclass, replace
from itertools import product

import numpy as np

from sizer.errors import ScenarioError
from sizer.loads import next_rating_a
from sizer.model import Scenario, Segment
from sizer.operating import RunProfiles
from sizer.rules import RuleProfile

SINGLE = ("A", "B", "C")
PAIRS = ("AB", "BC", "CA")
LINES = {"A": (0,), "B": (1,), "C": (2,), "AB": (0, 1), "BC": (1, 2), "CA": (2, 0)}
# Angle of the voltage each circuit is connected across, degrees (A-B-C sequence):
# line-to-neutral A 0°, B −120°, C +120°; line-to-line AB leads A by 30°.
ANGLE_DEG = {"A": 0.0, "B": -120.0, "C": 120.0, "AB": 30.0, "BC": -90.0, "CA": 150.0}
EXACT_LIMIT = 12
LPT_BOUND = 4.0 / 3.0 - 1.0 / 9.0   # Graham's LPT bound for three identical machines


def assign_panel(current_a: list[float], pair: list[bool], fixed: list[str | None],
                 ) -> list[str]:
    """Phase of every circuit of one panel, the fixed ones kept; minimises the top phase."""
    n = len(current_a)
    load = [0.0, 0.0, 0.0]
    out: list[str | None] = list(fixed)
    for i in range(n):
        if fixed[i] is not None:
            for k in LINES[fixed[i]]:  # type: ignore[index]
                load[k] += current_a[i]
    free = sorted((i for i in range(n) if fixed[i] is None),
                  key=lambda i: (-current_a[i], i))
    lpt = _lpt(free, current_a, pair, load)
    if len(free) <= EXACT_LIMIT:
        best = _exact(free, current_a, pair, load, lpt)
    else:
        best = lpt
    for i, ph in best.items():
        out[i] = ph
    return [ph or "A" for ph in out]


def _options(is_pair: bool) -> tuple[str, ...]:
    return PAIRS if is_pair else SINGLE


def _lpt(free: list[int], current_a: list[float], pair: list[bool],
         start: list[float]) -> dict[int, str]:
    """Largest circuit first onto the option whose most loaded line ends lightest.

    Each option's key is (its most loaded line after, its lines' load before); the least
    key wins, ties to the earlier option in A, B, C / AB, BC, CA order. Written out for
    the three lines rather than a ``min`` over options (eight times faster, same picks).
    """
    a, b, c = start
    out = {}
    for i in free:
        x = current_a[i]
        if pair[i]:
            ab = (max(a + x, b + x), a + b)
            bc = (max(b + x, c + x), b + c)
            ca = (max(c + x, a + x), c + a)
            if ab <= bc and ab <= ca:
                a, b, out[i] = a + x, b + x, "AB"
            elif bc <= ca:
                b, c, out[i] = b + x, c + x, "BC"
            else:
                c, a, out[i] = c + x, a + x, "CA"
        else:
            ka, kb, kc = (a + x, a), (b + x, b), (c + x, c)
            if ka <= kb and ka <= kc:
                a, out[i] = a + x, "A"
            elif kb <= kc:
                b, out[i] = b + x, "B"
            else:
                c, out[i] = c + x, "C"
    return out


def peak_phase_a(assignment: dict[int, str], current_a: list[float],
                 start: list[float]) -> float:
    """The most loaded phase of an assignment (A, magnitudes added)."""
    load = list(start)
    for i, ph in assignment.items():
        for k in LINES[ph]:
            load[k] += current_a[i]
    return max(load)


def _exact(free: list[int], current_a: list[float], pair: list[bool], start: list[float],
           incumbent: dict[int, str]) -> dict[int, str]:
    """Branch and bound over the free circuits (largest first), from the LPT incumbent.

    Depth first, options in A, B, C / AB, BC, CA order; a leaf replaces the incumbent
    when its top phase is lower by more than ``eps``. Two prunings cut the search without
    changing which leaf is found first, because neither skips a leaf that could replace
    the incumbent:

    * the mean bound: every line ends at least at the mean of the three, the loads so far
      plus what the remaining circuits add (a pair adds its current to two lines); a
      small relative margin covers the rounding of the sums;
    * failed states: relabelling the phases (any permutation of A, B, C maps the line
      options A/B/C and the pairs AB/BC/CA onto themselves) maps the completions of a
      state onto those of the permuted state with the same top phase, so a state whose
      search found nothing better is remembered by its depth and sorted loads, and an
      equal state met later is skipped (the incumbent only falls).

    Loads are restored from saved values, not by subtraction, so a leaf's loads are the
    plain sums along its path whatever was searched before it.
    """
    best_peak = peak_phase_a(incumbent, current_a, start)
    best_pick = dict(incumbent)
    load = list(start)
    chosen: dict[int, str] = {}
    eps = 1e-9
    m = len(free)
    rest = [0.0] * (m + 1)   # what the circuits from each position on add over the lines
    for pos in range(m - 1, -1, -1):
        i = free[pos]
        rest[pos] = rest[pos + 1] + current_a[i] * len(LINES[_options(pair[i])[0]])
    margin = 1e-12 * (abs(sum(start)) + rest[0] + 1.0)
    failed: set[tuple[int, float, float, float]] = set()
    options = [[LINES[ph] for ph in _options(pair[i])] for i in free]
    names = [_options(pair[i]) for i in free]

    def dfs(pos: int) -> None:
        nonlocal best_peak, best_pick
        if max(load) >= best_peak - eps:
            return
        if pos == m:
            best_peak, best_pick = max(load), dict(chosen)
            return
        if (load[0] + load[1] + load[2] + rest[pos]) / 3.0 - margin >= best_peak - eps:
            return
        a, b, c = sorted(load)
        state = (pos, a, b, c)
        if state in failed:
            return
        before = best_peak
        i = free[pos]
        cur = current_a[i]
        saved = tuple(load)
        seen = set()
        for ph, lines in zip(names[pos], options[pos], strict=True):
            for k in lines:
                load[k] = saved[k] + cur
            key = tuple(load)
            if key not in seen:      # symmetric states need exploring once
                seen.add(key)
                chosen[i] = ph
                dfs(pos + 1)
                del chosen[i]
            load[0], load[1], load[2] = saved
        if best_peak == before:
            failed.add(state)

    dfs(0)
    return best_pick


def brute_force_peak_a(current_a: list[float], pair: list[bool]) -> float:
    """The optimum by enumeration (tests only: 3^n assignments)."""
    best = math.inf
    for combo in product(*(_options(p) for p in pair)):
        load = [0.0, 0.0, 0.0]
        for i, ph in enumerate(combo):
            for k in LINES[ph]:
                load[k] += current_a[i]
        best = min(best, max(load))
    return best


@dataclass(frozen=True)
class PhaseState:
    """Per segment: its phase, and for three-phase runs the phase and neutral currents."""

    phase: tuple[str | None, ...]                 # single-phase runs on a 3-phase system
    sizing_a: np.ndarray                          # [n, 3] sizing current per phase, A
    neutral_a: np.ndarray                         # sizing neutral current, A
    operating: np.ndarray                         # [n, 3] complex operating phasors, A
    operating_neutral_a: np.ndarray               # neutral at the operating peak, A


_ANGLE_COLUMN = {ph: k for k, ph in enumerate(ANGLE_DEG)}


def _unit_phasors(power_factor: list[float]) -> np.ndarray:
    """Unit phasor ``e^{j(angle − acos pf)}`` of every run at the angles of ``ANGLE_DEG``, [n, 6].

    A load at power factor ``pf`` on a line at ``angle`` lags it by ``acos pf``; its
    current phasor is its magnitude times this. One cmath call per distinct power factor.
    """
    known: dict[float, list[complex]] = {}
    rows = []
    for pf in power_factor:
        row = known.get(pf)
        if row is None:
            lag = math.acos(min(max(pf, 0), 1))
            row = known[pf] = [cmath.exp(1j * (math.radians(a) - lag))
                               for a in ANGLE_DEG.values()]
        rows.append(row)
    return np.array(rows, dtype=complex).reshape(len(power_factor), len(ANGLE_DEG))


@np.errstate(over="ignore", under="ignore", invalid="ignore", divide="ignore")
def assign_phases(scenario: Scenario, segments: tuple[Segment, ...], runs: RunProfiles,
                  ) -> PhaseState:
    """Assign phases per panel and work out phase and neutral currents of every run."""
    n = len(segments)
    parent = [s.parent_index for s in segments]
    children: list[list[int]] = [[] for _ in range(n)]
    roots: list[int] = []
    for i, p in enumerate(parent):
        (children[p] if p >= 0 else roots).append(i)
    phase: list[str | None] = [None] * n

    def settle(panel_phases: int, kids: list[int]) -> None:
        singles = [k for k in kids if segments[k].phases == 1]
        if panel_phases != 3 or not singles:
            return
        cur = [segments[k].current_a for k in singles]
        pair = [not segments[k].line_to_neutral for k in singles]
        fixed: list[str | None] = []
        for k, is_pair in zip(singles, pair, strict=True):
            given = segments[k].node.phase
            if given is not None and (given in PAIRS) != is_pair:
                want = "a pair (AB, BC or CA)" if is_pair else "one phase (A, B or C)"
                kind = "line to line" if is_pair else "line to neutral"
                raise ScenarioError(f"this circuit is {kind}: give {want}, got {given!r}",
                                    file=scenario.file, node=segments[k].id, field="phase")
            fixed.append(given)
        for k, ph in zip(singles, assign_panel(cur, pair, fixed), strict=True):
            phase[k] = ph

    settle(scenario.source.phases, roots)
    for i in range(n):                       # parents first
        seg = segments[i]
        if seg.node.phase is not None and (seg.phases == 3 or phase[i] is None):
            raise ScenarioError("only a single-phase circuit on a three-phase panel takes a "
                                "phase", file=scenario.file, node=seg.id, field="phase")
        if seg.phases == 1 and phase[i] is not None:
            for k in _below_same_level(i, children, segments):
                phase[k] = phase[i]          # a single-phase subpanel's circuits share it
        if seg.phases == 3 and seg.node.transformer is None:
            settle(3, children[i])
        elif seg.node.transformer is not None and seg.node.transformer.secondary_phases == 3:
            settle(3, children[i])

    # Each run's unit phasor at the six angles (A, B, C, AB, BC, CA).
    unit = _unit_phasors([s.power_factor for s in segments])
    own = np.asarray(runs.operating_a, dtype=float)[:, None] * unit
    sizing = np.zeros((n, 3))
    op = np.zeros((n, 3), dtype=complex)
    trip_sizing = np.zeros(n)
    trip_op = np.zeros(n)
    for i in range(n - 1, -1, -1):           # children first
        seg = segments[i]
        h = seg.node.triplen
        if seg.phases == 1:
            ph = phase[i]
            if ph is not None:
                for k in LINES[ph]:
                    sizing[i, k] = seg.current_a
                lines = LINES[ph]
                z = own[i, _ANGLE_COLUMN[ph]]
                op[i, lines[0]] = z
                if len(lines) == 2:
                    op[i, lines[1]] = -z
                if seg.line_to_neutral:
                    trip_sizing[i] = h * seg.current_a
                    trip_op[i] = h * runs.operating_a[i]
        elif seg.is_leaf or seg.node.transformer is not None:
            sizing[i] = seg.current_a
            op[i] = own[i, :3]
        else:
            df = seg.node.demand_factor
            coinc = (seg.node.operating.coincidence
                     if seg.node.operating.coincidence is not None else df)
            kids = children[i]
            sizing[i] = df * sizing[kids].sum(axis=0) if kids else 0.0
            op[i] = coinc * op[kids].sum(axis=0) if kids else 0.0
            trip_sizing[i] = df * trip_sizing[kids].sum() if kids else 0.0
            trip_op[i] = coinc * trip_op[kids].sum() if kids else 0.0
        if seg.phases == 1 and seg.node.transformer is None and not seg.is_leaf:
            kids = children[i]
            trip_sizing[i] = max(trip_sizing[i], trip_sizing[kids].sum() if kids else 0.0)
    # Neutral: phasor sum of the fundamental (sizing: at each load's own angle too).
    sizing_phasor = sizing * unit[:, :3]
    neutral = np.sqrt(np.abs(sizing_phasor.sum(axis=1)) ** 2 + trip_sizing ** 2)
    neutral_op = np.sqrt(np.abs(op.sum(axis=1)) ** 2 + trip_op ** 2)
    return PhaseState(tuple(phase), sizing, neutral, op, neutral_op)


def _below_same_level(i: int, children: list[list[int]],
                      segments: tuple[Segment, ...]) -> list[int]:
    out = []
    stack = list(children[i])
    while stack:
        k = stack.pop()
        if segments[k].node.transformer is None and segments[k].phases == 1:
            out.append(k)
            stack.extend(children[k])
    return out


def sized_by_worst_phase(segments: tuple[Segment, ...], state: PhaseState,
                         profile: RuleProfile) -> tuple[Segment, ...]:
    """Three-phase feeders carry their most loaded phase (ampacity, drop, device)."""
    ratings = np.asarray(profile.standard_ratings_a, dtype=float)
    out = []
    for i, seg in enumerate(segments):
        if seg.phases != 3 or seg.is_leaf or seg.node.transformer is not None:
            out.append(seg)
            continue
        worst = float(state.sizing_a[i].max())
        if worst <= seg.current_a * (1 + 1e-9):
            out.append(seg)
            continue
        ratio = worst / seg.current_a if seg.current_a > 0 else 1.0
        required = max(seg.required_ampacity_a, seg.required_ampacity_a * ratio)
        ocpd = seg.ocpd_a
        if seg.ocpd_chosen and required > ocpd:
            pick = float(next_rating_a(ratings, np.array([required]))[0])
            if not math.isnan(pick):
                ocpd = pick
        out.append(replace(seg, current_a=worst, required_ampacity_a=required, ocpd_a=ocpd))
    return tuple(out)


@np.errstate(over="ignore", under="ignore")
def loss_current_squared_by_phase(segments: tuple[Segment, ...], runs: RunProfiles,
                                  state: PhaseState) -> np.ndarray:
    """Σ I² over the phase conductors at the operating peak (A²), phases apart.

    1-phase: 2·I² (line and return, or two lines). 3-phase: Σ|I_p|² over the three
    phases; the neutral is apart (``neutral_current_squared``), at its own size.
    """
    out = np.empty(len(segments))
    for i, seg in enumerate(segments):
        if seg.phases == 1:
            out[i] = 2.0 * runs.operating_a[i] ** 2
        else:
            out[i] = float(np.sum(np.abs(state.operating[i]) ** 2))
    return out


@np.errstate(over="ignore", under="ignore")
def neutral_current_squared(segments: tuple[Segment, ...], state: PhaseState) -> np.ndarray:
    """I_N² at the operating peak of each three-phase run that has a neutral (A²), else 0."""
    own = np.array([s.phases == 3 and s.neutral for s in segments], dtype=bool)
    return np.where(own, state.operating_neutral_a ** 2, 0.0)
