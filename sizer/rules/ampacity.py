"""Conductor ampacity by a rule profile: table lookup, ambient and grouping correction.

Pure functions, vectorised over ``size_index`` (integer indices into the profile's size
order, which is the catalogue's order). A size without a table value gives NaN. Currents
are in A, temperatures in degC; every ampacity is per conductor, i.e. per parallel set.
"""

from __future__ import annotations

import numpy as np

from sizer.errors import ScenarioError
from sizer.rules.profile import RuleProfile, check_material

# Relative tolerance for comparing currents, so float noise (40 x 0.8 = 32.000000000000004)
# never decides a rule.
REL_TOL = 1e-9


def _column_rows(profile: RuleProfile, column_c: np.ndarray) -> np.ndarray:
    """Row of each temperature in the ampacity table; NaN temperatures give row 0."""
    temps = np.asarray(profile.column_temps_c)
    col = np.where(np.isnan(column_c), temps[0], column_c)
    rows = np.searchsorted(temps, col)
    found = (rows < len(temps)) & (temps[np.minimum(rows, len(temps) - 1)] == col)
    if not np.all(found):
        bad = float(np.asarray(col)[~found].flat[0])
        columns = ", ".join(f"{t:g}" for t in temps)
        raise ScenarioError(f"{bad:g} degC is not an ampacity column of rule profile "
                            f"'{profile.name}' (columns: {columns} degC)")
    return rows


def table_ampacity_a(
    profile: RuleProfile, material: str, size_index: object, column_c: object, installation: str,
    loaded: object = 3,
) -> np.ndarray:
    """Uncorrected table ampacity in A at a temperature column; NaN where the table has none.

    ``column_c`` may be an array broadcast against ``size_index`` (NaN gives NaN).
    ``loaded`` is the number of loaded conductors of the circuit (2 single-phase, 3
    three-phase; may be an array): where the profile tabulates whole circuits (iec, IEC
    60364-5-52 Annex B) a circuit of 2 takes the two-loaded-conductor column, or the
    three-loaded value where that column has none. Profiles with per-conductor tables
    (nec, cec) ignore it: their count enters through the adjustment factor.
    """
    check_material(material)
    method = profile.method(installation)
    safe, valid = profile.indices(size_index)
    col = np.asarray(column_c, dtype=float)
    safe, valid, col = np.broadcast_arrays(safe, valid, col)
    table = profile.ampacity_tables_a.get((method, material))
    if table is None:
        return np.full(safe.shape, np.nan)
    rows = _column_rows(profile, col)
    value = table[rows, safe]
    two = profile.ampacity_two_loaded_a.get((method, material))
    if two is not None:
        two_value = two[rows, safe]
        value = np.where((np.asarray(loaded) == 2) & ~np.isnan(two_value), two_value, value)
    return np.where(valid & ~np.isnan(col), value, np.nan)


def ambient_factor(
    profile: RuleProfile, insulation_c: float, ambient_c: object, installation: str = "conduit"
) -> float | np.ndarray:
    """Ambient-temperature correction factor (dimensionless), rounded to 2 decimals.

    factor = sqrt((Tc − Ta) / (Tc − Tref)) — NEC Equation 310.15(B), the formula behind
    NEC Table 310.15(B)(1) and IEC 60364-5-52 Tables B.52.14/B.52.15 — with Tc the
    insulation rating and Tref the reference ambient of the installation's table (IEC
    buried, method D1: 20 degC ground). Ambients below the profile's credit floor (10
    degC) count as the floor; an ambient at or above Tc gives 0.
    """
    tc = profile.check_insulation(insulation_c)
    tref = profile.reference_ambient_c[profile.method(installation)]
    ta = np.asarray(ambient_c, dtype=float)
    if not np.all(np.isfinite(ta)):
        raise ScenarioError(f"ambient temperature must be finite, got {ambient_c!r}")
    ta = np.maximum(ta, profile.ambient_credit_min_c)
    factor = np.round(np.sqrt(np.clip(tc - ta, 0.0, None) / (tc - tref)), 2)
    return float(factor) if factor.ndim == 0 else factor


def soil_factor(profile: RuleProfile, installation: str, resistivity_k_m_per_w: float | None,
                depth_m: float | None) -> float:
    """Correction of a buried run's ampacity for its soil and depth (dimensionless).

    From the profile's tables (iec: IEC 60364-5-52 Table B.52.16 for resistivity [M],
    depth factors common practice [M]); a value between rows takes the next more severe
    row (higher resistivity, greater depth). 1.0 where the profile has no table or the
    installation is not in the ground. A resistivity above the table is refused.
    """
    soil = profile.soil
    if soil is None or installation not in soil.resistivity:
        return 1.0
    factor = 1.0
    if resistivity_k_m_per_w is not None:
        rows = soil.resistivity[installation]
        k = next((i for i, (rho, _) in enumerate(rows)
                  if rho >= resistivity_k_m_per_w * (1 - REL_TOL)), None)
        if k is None:
            raise ScenarioError(f"soil thermal resistivity {resistivity_k_m_per_w:g} K.m/W is "
                                f"beyond the profile's table (up to {rows[-1][0]:g} K.m/W)",
                                field="soil_resistivity")
        factor *= rows[k][1]
    if depth_m is not None:
        rows = soil.depth
        k = next((i for i, (d, _) in enumerate(rows) if d >= depth_m * (1 - REL_TOL)),
                 len(rows) - 1)
        factor *= rows[k][1]
    return factor


def grouping_factor(profile: RuleProfile, conductors: object) -> float | np.ndarray:
    """Adjustment factor for ``conductors`` current-carrying conductors sharing a raceway.

    NEC 310.15(C)(1) counts conductors; IEC 60364-5-52 Table B.52.17 counts circuits,
    taken as ceil(conductors / 3). Counts between table entries take the next larger one.
    """
    n = np.asarray(conductors)
    if n.dtype.kind not in "iu" or np.any(n < 1):
        raise ScenarioError(
            f"grouping must be a whole number of current-carrying conductors >= 1, "
            f"got {conductors!r}")
    groups = -(-n // profile.grouping_conductors_per_group)  # ceiling division
    tops = np.asarray([b[0] for b in profile.grouping_bands])
    factors = np.asarray([b[1] for b in profile.grouping_bands])
    factor = factors[np.searchsorted(tops, groups, side="left")]
    return float(factor) if factor.ndim == 0 else factor


def current_carrying_conductors(profile: RuleProfile, phases: object, neutral: object,
                                nonlinear_share: object, two_lines_of_wye: object = False
                                ) -> np.ndarray:
    """Current-carrying conductors of one circuit (one set) for the adjustment factor.

    A 1-phase circuit counts 2; a 3-phase circuit its 3 lines, plus the neutral of a
    4-wire wye circuit when more than the profile's share of its load is non-linear
    (NEC 310.15(E)(3): "major portion", share 0.5); otherwise the neutral carries only
    the unbalanced current and does not count (310.15(E)(1)). A 1-phase 3-wire circuit
    of two lines and the neutral of a wye (``two_lines_of_wye``) counts 3: its neutral
    carries about the line current (310.15(E)(2)). Profiles without a neutral rule
    count 2 or 3.
    """
    ph = np.asarray(phases)
    counts = np.where(ph == 1, 2, 3)
    limit = profile.neutral_nonlinear_share
    if limit is None:
        return counts.astype(np.int64)
    with np.errstate(invalid="ignore"):
        with_neutral = np.asarray(neutral, dtype=bool)
        harmonic = (ph == 3) & with_neutral & (
            np.asarray(nonlinear_share, dtype=float) > limit)
        shared = (ph == 1) & with_neutral & np.asarray(two_lines_of_wye, dtype=bool)
    return (counts + harmonic + shared).astype(np.int64)


def ampacity_a(
    profile: RuleProfile,
    material: str,
    size_index: object,
    insulation_c: float,
    terminal_c: object,
    ambient_c: float,
    grouping: int,
    installation: str,
    loaded: object = 3,
) -> np.ndarray:
    """Ampacity in A of one conductor (one parallel set), corrected and terminal-limited.

    The lesser of
    - the table value at the insulation column × ambient factor × grouping factor, and
    - the table value at the terminal column, uncorrected (NEC 110.14(C)).

    ``terminal_c`` may be None or NaN (no terminal limit, e.g. the iec profile) or an
    array broadcast with ``size_index`` (e.g. from ``terminal_temperature_c``);
    ``grouping`` is the number of current-carrying conductors in the raceway (>= 1);
    ``loaded`` the loaded conductors of the circuit (``table_ampacity_a``).
    """
    insulation = profile.check_insulation(insulation_c)
    corrected = (table_ampacity_a(profile, material, size_index, insulation, installation,
                                  loaded)
                 * ambient_factor(profile, insulation, ambient_c, installation)
                 * grouping_factor(profile, grouping))
    if terminal_c is None:
        return corrected
    term = np.asarray(terminal_c, dtype=float)
    limit = table_ampacity_a(profile, material, size_index, term, installation, loaded)
    limit = np.where(np.isnan(term), np.inf, limit)
    return np.minimum(corrected, limit)


def unadjusted_ampacity_a(
    profile: RuleProfile,
    material: str,
    size_index: object,
    insulation_c: float,
    terminal_c: object,
    installation: str,
    loaded: object = 3,
) -> np.ndarray:
    """Table ampacity in A at the lower of insulation and terminal columns, uncorrected.

    The value NEC 210.19(A)(1)(a) / 215.2(A)(1)(a) compares with noncontinuous load +
    125 % of continuous load, before any adjustment or correction factor.
    """
    insulation = profile.check_insulation(insulation_c)
    column: object = insulation
    if terminal_c is not None:
        term = np.asarray(terminal_c, dtype=float)
        column = np.where(np.isnan(term), insulation, np.minimum(term, insulation))
    return table_ampacity_a(profile, material, size_index, column, installation, loaded)


def ampacity_ok(
    profile: RuleProfile,
    material: str,
    size_index: object,
    *,
    insulation_c: float,
    terminal_c: object,
    ambient_c: float,
    grouping: int,
    installation: str,
    current_a: object,
    continuous_a: object = 0.0,
    sets: object = 1,
    loaded: object = 3,
) -> np.ndarray:
    """Whether ``sets`` parallel conductors carry the load (both NEC checks, applied apart).

    (a) before adjustment: sets × unadjusted ampacity >= current + (continuous factor − 1)
        × continuous current (noncontinuous + 125 % continuous; 210.19(A)(1)(a));
    (b) after correction: sets × ampacity_a >= current (210.19(A)(1)(b)).
    ``current_a`` is the whole design current, ``continuous_a`` its continuous part (A).
    """
    current = np.asarray(current_a, dtype=float)
    continuous = np.asarray(continuous_a, dtype=float)
    n_sets = np.asarray(sets)
    if np.any(~np.isfinite(current)) or np.any(current < 0):
        raise ScenarioError(f"design current must be finite and >= 0, got {current_a!r}")
    if np.any(continuous < 0) or np.any(continuous > current * (1 + REL_TOL)):
        raise ScenarioError("the continuous part of a load must lie between 0 and the load")
    if n_sets.dtype.kind not in "iu" or np.any(n_sets < 1):
        raise ScenarioError(f"parallel sets must be whole numbers >= 1, got {sets!r}")
    before = unadjusted_ampacity_a(profile, material, size_index, insulation_c, terminal_c,
                                   installation, loaded)
    after = ampacity_a(profile, material, size_index, insulation_c, terminal_c, ambient_c,
                       grouping, installation, loaded)
    need_before = current + (profile.continuous_factor - 1.0) * continuous
    return carries_load(n_sets * before, n_sets * after, need_before, current)


def carries_load(before_a: object, after_a: object, need_before_a: object,
                 need_after_a: object) -> np.ndarray:
    """The two ampacity tests of NEC 210.19(A)(1) / 215.2(A)(1), applied apart (A).

    ``before_a``: the table ampacity at the terminal-limited column, no adjustment or
    correction (``unadjusted_ampacity_a``), against ``need_before_a`` (noncontinuous +
    125 % of continuous; motors 430.22/430.24). ``after_a``: the adjusted and corrected
    ampacity (``ampacity_a``) against ``need_after_a`` (the load itself; motors as
    before). All for the whole run, parallel sets summed. NaN ampacities fail.
    """
    before = np.asarray(before_a, dtype=float)
    after = np.asarray(after_a, dtype=float)
    with np.errstate(invalid="ignore"):
        ok_before = before * (1 + REL_TOL) >= np.asarray(need_before_a, dtype=float)
        ok_after = after * (1 + REL_TOL) >= np.asarray(need_after_a, dtype=float)
    return np.asarray(ok_before & ok_after & (after > 0))

