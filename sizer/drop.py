"""Voltage drop of a run and regulation of a transformer.

Pure numpy functions (arguments broadcast). Conventions: ``r_ohm_per_m`` and
``x_ohm_per_m`` are per conductor of one set; ``sets`` parallel sets share the current;
``voltage_v`` is line-to-line for three-phase circuits and the circuit voltage for
single-phase ones; the power factor is lagging (0 < pf <= 1).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from sizer.errors import ScenarioError

SQRT3 = float(np.sqrt(3.0))


def _loop_factor(phases: ArrayLike) -> np.ndarray:
    """√3 for three-phase (line-to-line drop), 2 for single-phase (out and back)."""
    p = np.asarray(phases)
    if not np.all((p == 1) | (p == 3)):
        raise ScenarioError(f"phases must be 1 or 3, got {np.unique(p[(p != 1) & (p != 3)])}")
    return np.where(p == 3, SQRT3, 2.0)


def _cos_sin(power_factor: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    pf = np.asarray(power_factor, dtype=float)
    if not np.all((pf > 0) & (pf <= 1)):
        raise ScenarioError("power factor must be in (0, 1]")
    return pf, np.sqrt(1.0 - pf**2)


def _sets(sets: ArrayLike) -> np.ndarray:
    n = np.asarray(sets, dtype=float)
    if not np.all(n >= 1):
        raise ScenarioError("parallel sets must be at least 1")
    return n


def _voltage(voltage_v: ArrayLike) -> np.ndarray:
    v = np.asarray(voltage_v, dtype=float)
    if not np.all(v > 0):
        raise ScenarioError("nominal voltage must be positive")
    return v


def drop_v(current_a: ArrayLike, length_m: ArrayLike, r_ohm_per_m: ArrayLike,
           x_ohm_per_m: ArrayLike, power_factor: ArrayLike, phases: ArrayLike,
           sets: ArrayLike = 1) -> np.ndarray:
    """Approximate drop, V: k·I·L·(R cosφ + X sinφ)/sets, k = √3 (3-phase, V line-to-line) or 2.

    The usual engineering formula (the in-phase part of the series drop); it never
    over-estimates the exact phasor drop (see ``exact_drop_v``).
    """
    cos, sin = _cos_sin(power_factor)
    return (_loop_factor(phases) * np.asarray(current_a, dtype=float)
            * np.asarray(length_m, dtype=float)
            * (np.asarray(r_ohm_per_m, dtype=float) * cos
               + np.asarray(x_ohm_per_m, dtype=float) * sin) / _sets(sets))


def drop_pct(current_a: ArrayLike, length_m: ArrayLike, r_ohm_per_m: ArrayLike,
             x_ohm_per_m: ArrayLike, power_factor: ArrayLike, phases: ArrayLike,
             voltage_v: ArrayLike, sets: ArrayLike = 1) -> np.ndarray:
    """Approximate drop in % of the nominal ``voltage_v``."""
    return 100.0 * drop_v(current_a, length_m, r_ohm_per_m, x_ohm_per_m, power_factor,
                          phases, sets) / _voltage(voltage_v)


def exact_drop_v(current_a: ArrayLike, length_m: ArrayLike, r_ohm_per_m: ArrayLike,
                 x_ohm_per_m: ArrayLike, power_factor: ArrayLike, phases: ArrayLike,
                 voltage_v: ArrayLike, sets: ArrayLike = 1) -> np.ndarray:
    """Phasor drop |Vs| − |Vr|, V, with the receiving end held at the nominal voltage.

    Vs = Vr + k·I·Z·L/sets with I lagging Vr by φ; in the scale of ``voltage_v``
    (line-to-line for 3-phase).
    """
    v = _voltage(voltage_v)
    cos, sin = _cos_sin(power_factor)
    scale = (_loop_factor(phases) * np.asarray(current_a, dtype=float)
             * np.asarray(length_m, dtype=float) / _sets(sets))
    r = np.asarray(r_ohm_per_m, dtype=float)
    x = np.asarray(x_ohm_per_m, dtype=float)
    # k I Z e^{-jφ} = a + jb: a the in-phase drop (the approximate formula), b the quadrature
    a = scale * (r * cos + x * sin)
    b = scale * (x * cos - r * sin)
    # |V + a + jb| − V written as a quotient to avoid cancellation for small drops
    return (2.0 * v * a + a * a + b * b) / (np.hypot(v + a, b) + v)


def reach_m(current_a: ArrayLike, r_ohm_per_m: ArrayLike, x_ohm_per_m: ArrayLike,
            power_factor: ArrayLike, phases: ArrayLike, voltage_v: ArrayLike,
            limit_pct: ArrayLike, sets: ArrayLike = 1) -> np.ndarray:
    """Longest run whose approximate drop stays within ``limit_pct`` of ``voltage_v``, m.

    The conductor temperature depends on the current, not the length, so the caller
    passes R at the operating temperature for this current
    (``conductors.operating_temperature_c``) and no iteration is needed. Infinite at zero
    current.
    """
    per_m = drop_v(current_a, 1.0, r_ohm_per_m, x_ohm_per_m, power_factor, phases, sets)
    budget_v = np.asarray(limit_pct, dtype=float) / 100.0 * _voltage(voltage_v)
    with np.errstate(divide="ignore"):
        return budget_v / per_m


def transformer_regulation_pct(load_fraction: ArrayLike, impedance_pct: ArrayLike,
                               x_r: ArrayLike, power_factor: ArrayLike) -> np.ndarray:
    """Voltage regulation of a transformer, % of rated secondary voltage.

    IEC 60076-1 (annex on the calculation of voltage drop):
    ε = n·R cosφ + n·X sinφ + (n·X cosφ − n·R sinφ)²/200, with R% and X% from the
    impedance Z% and the X/R ratio, n the load as a fraction of the rating.
    """
    cos, sin = _cos_sin(power_factor)
    n = np.asarray(load_fraction, dtype=float)
    z = np.asarray(impedance_pct, dtype=float)
    ratio = np.asarray(x_r, dtype=float)
    r_pct = n * z / np.hypot(1.0, ratio)
    x_pct = r_pct * ratio
    return r_pct * cos + x_pct * sin + (x_pct * cos - r_pct * sin) ** 2 / 200.0
