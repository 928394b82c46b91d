"""Operating currents and loss profiles of every run: how the loads really run.

Sizing and losses are kept apart. Every segment keeps its *sizing* current (the code's
rules in ``sizer.loads``: unknown-load percentage, continuous factor, demand factors) for
ampacity, protection and voltage drop. Losses are priced from an *operating profile*:

- **A load** runs at ``utilisation`` × its declared load (an unknown load: × its device
  rating) at its peak, with a ``load_factor`` (mean / peak) and a ``peak_coincidence``
  (its current at the building's peak / its own peak), never above its sizing current.
  Defaults per load category come
  from ``sizer/operating_profiles.csv`` (common practice, each row sourced); a node may
  override each value, and loads with no category use the ``general`` row, which takes
  the ``[economics]`` load factor. Motors default to ``motors``, loads with no load given
  (only a device rating) to ``unknown``.
- **A feeder's** operating peak is its ``coincidence`` (default: its demand factor) ×
  the *phasor* sum of the operating peaks below it (P + jQ, so different power factors
  add as vectors), plus a transformer's own losses at that loading. Its mean is the
  phasor sum of the means below; the spread (standard deviation) of the loads below is
  added as fully correlated, the upper bound, so a feeder is never priced below what its
  loads imply (independent loads would give less).
- **Loss-load factor** of each run μ = mean square / peak² of its own current: by the
  ``moments`` method (default) μ = (|mean|² + spread²) / peak², clipped to
  [LF², LF] which bounds every load curve; by ``buller-woodrow``, μ = 0.3·LF + 0.7·LF²
  on the run's own load factor LF = |mean| / peak. A single load's μ is Buller-Woodrow
  on its load factor unless given.
- **Money** per W of the run's peak loss, IEC 60287-3-2 clause 4 with the run's own
  factors: F = (T·P + D·k²)·Q/(1 + i), T = hours × μ, k the run's peak coincidence (the
  demand charge falls on its loss at the building's peak), Q from the run's own growth
  (the mean growth of the loads below, weighted by their mean current: a stated
  approximation when the loads grow at different rates).

Powers are VA phasors at each node's own voltage; currents are line currents in A.
"""

from __future__ import annotations

import csv
from collections.abc import Mapping
from dataclasses import dataclass
from functools import cache
from pathlib import Path
from types import MappingProxyType

import numpy as np

from sizer.economics import HOURS_PER_YEAR, EconomicParams, growth_ratio, q_factor
from sizer.economics import loss_load_factor as buller_woodrow
from sizer.errors import ScenarioError
from sizer.model import Scenario, Segment

SQRT3 = float(np.sqrt(3.0))
_PROFILES_CSV = Path(__file__).with_name("operating_profiles.csv")
GENERAL = "general"
MOTORS = "motors"
UNKNOWN = "unknown"


@dataclass(frozen=True)
class LoadProfile:
    """Typical operation of one load category (fractions; see operating_profiles.csv)."""

    category: str
    utilisation: float
    load_factor: float | None     # None: the scenario's [economics] load factor
    peak_coincidence: float
    source: str


@cache
def load_profiles(path: Path = _PROFILES_CSV) -> Mapping[str, LoadProfile]:
    """The load categories of the data file, by name."""
    out: dict[str, LoadProfile] = {}
    with path.open(encoding="utf-8") as fh:
        rows = csv.DictReader(line for line in fh if not line.startswith("#"))
        for row in rows:
            lf = row["load_factor"].strip()
            out[row["category"]] = LoadProfile(
                category=row["category"], utilisation=float(row["utilisation"]),
                load_factor=float(lf) if lf else None,
                peak_coincidence=float(row["peak_coincidence"]), source=row["source"])
    return MappingProxyType(out)


def categories() -> tuple[str, ...]:
    """Names of the load categories a node may give."""
    return tuple(load_profiles())


@dataclass(frozen=True)
class RunProfiles:
    """Per segment (aligned with the segments): the operating peak and its loss profile."""

    operating_a: np.ndarray        # peak operating line current, A
    operating_va: np.ndarray       # peak operating P + jQ, VA (complex)
    load_factor: np.ndarray        # mean / peak of the run's current
    loss_load_factor: np.ndarray   # μ: mean square / peak² of the run's current
    peak_coincidence: np.ndarray   # k: current at the building's peak / own peak
    load_growth: np.ndarray        # a: fraction per year
    category: tuple[str, ...]      # the load category of each leaf ("" for feeders)
    method: str

    def loss_pv_per_w(self, econ: EconomicParams) -> np.ndarray:
        """F of IEC 60287-3-2 per segment: present value of 1 W of the run's peak loss."""
        q = np.asarray(q_factor(growth_ratio(self.load_growth, econ.escalation,
                                             econ.discount), econ.years))
        return self.annual_cost_per_w(econ) * q / (1.0 + econ.discount)

    def annual_cost_per_w(self, econ: EconomicParams) -> np.ndarray:
        """First-year cost of 1 W of the run's peak loss: T·P + D·k² (money per W)."""
        return (econ.hours_per_year * self.loss_load_factor * econ.energy_price_per_wh
                + econ.demand_per_w_year * self.peak_coincidence ** 2)

    def kwh_per_w(self, econ: EconomicParams) -> np.ndarray:
        """Energy lost in the first year per W of the run's peak loss (kWh/W)."""
        return econ.hours_per_year * self.loss_load_factor / 1000.0


def _leaf_values(
    scenario: Scenario, segments: tuple[Segment, ...], econ: EconomicParams,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray,
           tuple[str, ...]]:
    """Per node: category, utilisation, LF, μ, k of its own load; coincidence; growth."""
    profiles = load_profiles()
    n = len(segments)
    util = np.zeros(n)
    lf = np.zeros(n)
    mu = np.full(n, np.nan)
    k = np.zeros(n)
    coinc = np.ones(n)
    growth = np.full(n, np.nan)
    cats: list[str] = []
    econ_lf = econ.load_factor
    for i, seg in enumerate(segments):
        nd = seg.node
        op = nd.operating
        if op.load_growth is not None:
            growth[i] = op.load_growth
        coinc[i] = op.coincidence if op.coincidence is not None else nd.demand_factor
        if not seg.is_leaf:
            cats.append("")
            continue
        name = op.category or (MOTORS if nd.motor is not None
                               else UNKNOWN if nd.load is None and nd.motor is None
                               else GENERAL)
        prof = profiles.get(name)
        if prof is None:
            raise ScenarioError(f"unknown load category {name!r}; use one of "
                                + ", ".join(profiles), file=scenario.file, node=nd.id,
                                field="category")
        cats.append(name)
        util[i] = op.utilisation if op.utilisation is not None else prof.utilisation
        given_lf = (op.load_factor if op.load_factor is not None
                    else min(op.full_load_hours / econ.hours_per_year, 1.0)
                    if op.full_load_hours is not None else prof.load_factor)
        if given_lf is None:
            # The general row: the scenario's own load factor, and its loss-load factor
            # when [economics] gives one.
            given_lf = econ_lf if econ_lf is not None else econ.theta
            if op.loss_load_factor is None and econ.loss_load_factor is not None:
                mu[i] = econ.theta
        lf[i] = given_lf
        if op.loss_load_factor is not None:
            mu[i] = op.loss_load_factor
        k[i] = op.peak_coincidence if op.peak_coincidence is not None \
            else prof.peak_coincidence
    # A single load's loss-load factor: Buller-Woodrow on its load factor unless given.
    bw = np.asarray(buller_woodrow(lf))
    mu = np.where(np.isnan(mu), bw, mu)
    mu = np.clip(mu, lf * lf, lf)
    return util, lf, mu, k, coinc, growth, tuple(cats)


# Extreme inputs (a load of 1e-300 A) must not raise numpy warnings: ratios are taken
# before squares and the results stay finite.
@np.errstate(over="ignore", under="ignore", invalid="ignore", divide="ignore")
def run_profiles(scenario: Scenario, segments: tuple[Segment, ...],
                 econ: EconomicParams) -> RunProfiles:
    """The operating peak and loss profile of every segment (see the module docstring)."""
    n = len(segments)
    method = scenario.economics.loss_load_method
    util, lf_own, mu_own, k_own, coinc, growth_given, cats = _leaf_values(
        scenario, segments, econ)
    parent = np.array([s.parent_index for s in segments], dtype=np.int64)
    leaf = np.array([s.is_leaf for s in segments], dtype=bool)
    kv = np.array([(SQRT3 if s.phases == 3 else 1.0) * s.voltage_v for s in segments])

    # Growth: a node's given rate holds for it and the nodes below that give none.
    growth = growth_given.copy()
    for i in range(n):          # parents come first
        if np.isnan(growth[i]):
            p = parent[i]
            growth[i] = growth[p] if p >= 0 else econ.load_growth

    peak = np.zeros(n, dtype=complex)      # operating peak, VA
    mean = np.zeros(n, dtype=complex)      # mean, VA
    spread = np.zeros(n)                   # standard deviation of |S|, VA
    at_peak = np.zeros(n, dtype=complex)   # at the building's peak, VA
    weighted_growth = np.zeros(n)
    for i in np.flatnonzero(leaf).tolist():
        seg = segments[i]
        s_decl = seg.demand_va
        share = util[i]
        if seg.node.load is None and seg.node.motor is None:
            # Unknown load: the basis is the device rating, not the code's percentage of
            # it; never above the sizing current (the code's percentage) all the same.
            pf = seg.power_factor
            rated = kv[i] * seg.ocpd_a * (pf + 1j * np.sqrt(max(0.0, 1 - pf * pf)))
            share = min(share, abs(s_decl) / abs(rated)) if abs(rated) > 0 else 0.0
            s_decl = rated
        peak[i] = share * s_decl
        mean[i] = lf_own[i] * peak[i]
        spread[i] = np.sqrt(max(mu_own[i] - lf_own[i] ** 2, 0.0)) * abs(peak[i])
        at_peak[i] = k_own[i] * peak[i]

    # Sums up the tree: children come after parents, so walk backwards.
    sum_peak = np.zeros(n, dtype=complex)
    for i in range(n - 1, -1, -1):
        if not leaf[i]:
            tx = segments[i].node.transformer
            s_sec = coinc[i] * sum_peak[i]
            if tx is not None:
                frac = abs(s_sec) / tx.rating_va
                s_sec = s_sec + (frac * frac * (tx.r_pct + 1j * tx.x_pct)
                                 + tx.core_loss_pct) / 100.0 * tx.rating_va
            peak[i] = s_sec
            if abs(mean[i]) > 0:
                growth[i] = weighted_growth[i] / abs(mean[i])
        p = parent[i]
        if p >= 0:
            sum_peak[p] += peak[i]
            mean[p] += mean[i]
            spread[p] += spread[i]
            at_peak[p] += at_peak[i]
            weighted_growth[p] += abs(mean[i]) * growth[i]

    mag = np.abs(peak)
    safe = np.where(mag > 0, mag, 1.0)
    lf = np.where(mag > 0, np.minimum(np.abs(mean) / safe, 1.0), 0.0)
    if method == "buller-woodrow":
        mu = np.asarray(buller_woodrow(lf), dtype=float)
    else:
        # Ratios first, then squares: no overflow or underflow at extreme currents.
        mu = np.where(mag > 0, (np.abs(mean) / safe) ** 2 + (spread / safe) ** 2, 0.0)
    mu = np.where(leaf, mu_own, np.clip(mu, lf * lf, lf))
    lf = np.where(leaf, lf_own, lf)
    k = np.where(mag > 0, np.minimum(np.abs(at_peak) / safe, 1.0), 0.0)
    return RunProfiles(
        operating_a=mag / kv, operating_va=peak, load_factor=lf, loss_load_factor=mu,
        peak_coincidence=k, load_growth=growth, category=cats, method=method)


def loss_current_squared(segments: tuple[Segment, ...], runs: RunProfiles) -> np.ndarray:
    """Σ I² over the current-carrying conductors of each run at its operating peak (A²).

    Multiplied by one conductor's resistance (sets combined) it gives the run's peak
    loss: 2·I² for a 1-phase circuit (line and return), 3·I² for a balanced 3-phase run.
    """
    phases = np.array([s.phases for s in segments])
    return np.where(phases == 1, 2.0, 3.0) * runs.operating_a ** 2


def hours_text(load_factor: float, hours_per_year: float = HOURS_PER_YEAR) -> str:
    """Equivalent full-load hours of a load factor, for the report ("3,942 h")."""
    return f"{load_factor * hours_per_year:,.0f} h"
