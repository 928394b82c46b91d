"""Overcurrent protection and grounding rules of a profile: pure, vectorised functions.

Device ratings and ampacities in A; sizes as integer indices into the profile's size
order (the catalogue's). An index outside the size list gives False / NaN / -1.
"""

from __future__ import annotations

import numpy as np

from sizer.errors import ScenarioError
from sizer.rules.ampacity import REL_TOL
from sizer.rules.profile import RuleProfile, check_material

NO_SIZE = -1  # egc_size_index: no size satisfies the rule within the size list


def next_standard_rating_a(profile: RuleProfile, current_a: object) -> np.ndarray:
    """Smallest standard device rating >= ``current_a`` (A); NaN above the largest rating.

    A current within 1e-9 (relative) of a rating counts as that rating.
    """
    ratings = np.asarray(profile.standard_ratings_a)
    current = np.asarray(current_a, dtype=float)
    pos = np.searchsorted(ratings, current * (1 - REL_TOL), side="left")
    out = ratings[np.minimum(pos, len(ratings) - 1)]
    return np.where((pos < len(ratings)) & ~np.isnan(current), out, np.nan)


def protects(profile: RuleProfile, ampacity_a: object, ocpd_a: object,
             next_size_up: object = True) -> np.ndarray:
    """Whether a device rated ``ocpd_a`` protects conductors of total ``ampacity_a`` (A).

    The rating may not exceed the ampacity, except that (NEC 240.4(B)) where the profile
    allows it, a device up to the next standard rating above the ampacity is allowed
    when that rating is at most ``next_size_up_max_a`` (800 A); above that (240.4(C))
    the ampacity must be at least the rating. Pass the ampacity of all parallel sets.
    ``next_size_up`` False (per row) withholds 240.4(B): transformer secondary
    conductors, NEC 240.21(C) (see ``next_size_up_allowed``).
    """
    amp = np.asarray(ampacity_a, dtype=float)
    ocpd = np.asarray(ocpd_a, dtype=float)
    with np.errstate(invalid="ignore"):
        ok = (ocpd > 0) & (ocpd <= amp * (1 + REL_TOL))
        if profile.next_size_up_max_a is not None:
            nxt = next_standard_rating_a(profile, amp)
            allowed = nxt <= profile.next_size_up_max_a * (1 + REL_TOL)
            ok |= (np.asarray(next_size_up, dtype=bool) & (ocpd > 0) & allowed
                   & (ocpd <= nxt * (1 + REL_TOL)))
    return np.asarray(ok)


def next_size_up_allowed(profile: RuleProfile, secondary: object) -> np.ndarray:
    """Whether 240.4(B) may apply: not on transformer secondary conductors (240.21(C))."""
    sec = np.asarray(secondary, dtype=bool)
    return ~sec if profile.secondary_rule == "device" else np.ones(sec.shape, dtype=bool)


def bonding_jumper_size_index(profile: RuleProfile, material: str,
                              phase_size_index: object) -> np.ndarray:
    """Size index of the supply-side bonding jumper of service conductors, per raceway.

    NEC 250.102(C)(1): by the largest ungrounded conductor in the raceway (one phase
    conductor of one parallel set, 250.102(C)(2)), from the profile's table; above its
    last row, ``service_bonding_pct`` (12.5 %) of that conductor's area. Same material
    as the phase conductors, never larger than them. NO_SIZE where the profile has no
    such table or the size is invalid.
    """
    check_material(material)
    phase, ok = profile.indices(phase_size_index)
    area = profile.size_area_mm2
    if not profile.service_bonding:
        return np.full(phase.shape, NO_SIZE, dtype=np.int64)
    col = 0 if material == "Cu" else 1
    tops = np.asarray([row[col] for row in profile.service_bonding])
    jumper = np.asarray([row[2 + col] for row in profile.service_bonding])
    row = np.searchsorted(tops, area[phase] * (1 - 1e-9), side="left")
    needed = np.where(row < tops.size, jumper[np.minimum(row, tops.size - 1)],
                      profile.service_bonding_pct / 100.0 * area[phase])
    pick = np.searchsorted(area, needed * (1 - 1e-9), side="left")
    pick = np.minimum(pick, phase)
    return np.where(ok & (pick < area.size), pick, NO_SIZE).astype(np.int64)
def overload_factor(profile: RuleProfile, device: str, ocpd_a: float) -> float:
    """Share of the ampacity a device may be rated at for overload coordination.

    IEC 60364-4-43 433.1: I2 <= 1.45 Iz with I2 = k In, so In <= (1.45 / k) Iz; k by
    device class (breakers 1.45, gG fuses 1.6 from 16 A and 1.9 below). 1.0 where the
    profile has no such rule or the device needs no reduction.
    """
    if not profile.overload_i2_multiple:
        return 1.0
    if device == "fuse":
        k = profile.overload_i2_multiple["fuse" if ocpd_a >= 16.0 - 1e-9 else "fuse_small"]
    else:
        k = profile.overload_i2_multiple["breaker"]
    return min(1.0, profile.overload_i2_limit / k)


def small_conductor_ok(
    profile: RuleProfile, material: str, size_index: object, ocpd_a: object
) -> np.ndarray:
    """Whether the device rating respects the small-conductor limits (NEC 240.4(D)).

    Cu 14/12/10 AWG at most 15/20/30 A, Al 12/10 AWG at most 15/25 A in nec; sizes
    without a limit always pass.
    """
    check_material(material)
    limits = np.full(len(profile.sizes), np.inf)
    for mat, size, max_a in profile.small_conductor_max_ocpd_a:
        if mat == material:
            limits[profile.size_index(size)] = max_a
    safe, valid = profile.indices(size_index)
    ocpd = np.asarray(ocpd_a, dtype=float)
    with np.errstate(invalid="ignore"):
        return np.asarray(valid & (ocpd <= limits[safe] * (1 + REL_TOL)))


def terminal_temperature_c(profile: RuleProfile, ocpd_a: object, size_index: object) -> np.ndarray:
    """Default termination temperature column (degC) when the scenario gives none.

    NEC 110.14(C)(1): 60 degC for circuits rated 100 A or less or conductors 14-1 AWG,
    otherwise 75 degC. NaN where the profile has no such rule (iec) or the size is invalid.
    """
    safe, valid = profile.indices(size_index)
    ocpd = np.asarray(ocpd_a, dtype=float)
    rule = profile.terminal_rule
    if rule is None:
        return np.full(np.broadcast(safe, ocpd).shape, np.nan)
    with np.errstate(invalid="ignore"):
        low = (ocpd <= rule.low_max_ocpd_a) | (safe <= profile.size_index(rule.low_max_size))
    return np.where(valid, np.where(low, rule.low_c, rule.high_c), np.nan)


def min_parallel_ok(profile: RuleProfile, size_index: object, sets: object) -> np.ndarray:
    """Whether ``sets`` parallel conductors of this size are allowed (NEC 310.10(G): 1/0 AWG+)."""
    safe, valid = profile.indices(size_index)
    n_sets = np.asarray(sets)
    if n_sets.dtype.kind not in "iu" or np.any(n_sets < 1):
        raise ScenarioError(f"parallel sets must be whole numbers >= 1, got {sets!r}")
    if profile.min_parallel_size is None:
        return np.asarray(valid & (n_sets >= 1))
    smallest = profile.size_index(profile.min_parallel_size)
    return np.asarray(valid & ((n_sets == 1) | (safe >= smallest)))


def size_index_of_area(profile: RuleProfile, area_mm2: object) -> np.ndarray:
    """Profile size index of each conductor area (mm2): the nearest size within 2 %.

    Lets callers pass a catalogue's areas (AWG from the gauge formula, within 0.1 % of
    NEC Table 8) while the rules use the profile's own Table 8 areas. NO_SIZE (-1) where
    no size is that close (neighbouring sizes differ by at least 6 %).
    """
    area = np.asarray(area_mm2, dtype=float)
    ref = profile.size_area_mm2
    with np.errstate(invalid="ignore", divide="ignore"):
        dist = np.abs(np.log(np.where(area > 0, area, np.nan)[..., None] / ref))
    dist = np.where(np.isnan(dist), np.inf, dist)
    pick = np.argmin(dist, axis=-1)
    close = np.take_along_axis(dist, pick[..., None], axis=-1)[..., 0] <= np.log(1.02)
    return np.where(close, pick, NO_SIZE).astype(np.int64)


def egc_size_index(
    profile: RuleProfile,
    material: str,
    ocpd_a: object,
    phase_area_mm2: object,
    min_phase_area_mm2: object,
    sets: object = 1,
    min_sets: object = None,
) -> np.ndarray:
    """Size index of the equipment grounding (protective) conductor in each raceway.

    ``phase_area_mm2`` is one phase conductor of the chosen size, ``min_phase_area_mm2``
    one conductor of the smallest size that meets ampacity (both matched to the profile's
    sizes, see ``size_index_of_area``).
    device_rating rule (nec, cec): NEC Table 250.122 by the device rating; when the phase
    conductors are larger than the minimum, 250.122(B) increases the EGC by the ratio of
    phase circular-mil areas (``sets`` × phase over ``min_sets`` × minimum; Chapter 9
    Table 8 areas, exact ratio) rounded up to the next size.
    phase_area rule (iec): IEC 60364-5-54 Table 54.2 from the phase size (same material).
    conductor_ampacity rule (cec): CEC Table 16 by the ampacity of the run's ungrounded
    conductors (parallel sets as their equivalent): pass that ampacity as ``ocpd_a``.
    Either way never larger than one phase conductor (250.122(A)). The EGC is of the
    same ``material`` as the phase conductors; ``min_sets`` defaults to ``sets``.
    Returns NO_SIZE (-1) where the device rating is outside the table or an area matches
    no size.
    """
    return egc_size_index_of_sizes(
        profile, material, ocpd_a, size_index_of_area(profile, phase_area_mm2),
        size_index_of_area(profile, min_phase_area_mm2), sets, min_sets)


def egc_size_index_of_sizes(
    profile: RuleProfile,
    material: str,
    ocpd_a: object,
    phase_size_index: object,
    min_phase_size_index: object,
    sets: object = 1,
    min_sets: object = None,
) -> np.ndarray:
    """``egc_size_index`` with the phase sizes given as profile size indices."""
    check_material(material)
    area = profile.size_area_mm2
    n = len(profile.sizes)
    phase, phase_ok = profile.indices(phase_size_index)
    n_sets = np.asarray(sets)
    m_sets = n_sets if min_sets is None else np.asarray(min_sets)
    if (n_sets.dtype.kind not in "iu" or m_sets.dtype.kind not in "iu"
            or np.any(n_sets < 1) or np.any(m_sets < 1)):
        raise ScenarioError("parallel sets must be whole numbers >= 1")
    ocpd = np.asarray(ocpd_a, dtype=float)
    if profile.egc_rule == "phase_area":
        tops = np.asarray([b[0] for b in profile.egc_phase_bands])
        fraction = np.asarray([b[1] for b in profile.egc_phase_bands])
        fixed = np.asarray([b[2] for b in profile.egc_phase_bands])
        band = np.searchsorted(tops, area[phase] * (1 - REL_TOL), side="left")
        needed = fraction[band] * area[phase] + fixed[band]
        ok = phase_ok & np.ones(ocpd.shape, dtype=bool)
    else:
        limits = np.asarray([row[0] for row in profile.egc_table])
        column = 0 if material == "Cu" else 1
        base_mm2 = np.asarray([a[column] for a in profile.egc_table_area_mm2])
        with np.errstate(invalid="ignore"):
            row = np.searchsorted(limits, ocpd * (1 - REL_TOL), side="left")
            ok = phase_ok & (ocpd > 0) & (row < len(limits))
        needed = base_mm2[np.minimum(row, len(limits) - 1)]
        if profile.egc_proportional:
            low, low_ok = profile.indices(min_phase_size_index)
            ratio = (n_sets * area[phase]) / (m_sets * area[low])
            needed = needed * np.maximum(ratio, 1.0)
            ok = ok & low_ok
    # smallest size whose area reaches the need (a hair of tolerance for equal areas)
    pick = np.searchsorted(area, needed * (1 - 1e-12), side="left")
    pick = np.minimum(pick, phase)  # 250.122(A): never larger than the phase conductor
    return np.where(ok & (pick < n), pick, NO_SIZE).astype(np.int64)
