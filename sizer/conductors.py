"""Conductor physics: area, DC and AC resistance, reactance, temperature, withstand.

Pure functions of numpy arrays (anything that broadcasts), SI floats in and out with the
unit in each name. Nothing here knows about scenarios; the constants come from
``sizer.catalogue`` (materials.toml, installations.toml, the size catalogues).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from sizer import catalogue as cat
from sizer.errors import ScenarioError
from sizer.units import MM2_PER_CMIL

# 1 circular mil = area of a circle 0.001 in across, in mm2 (exact).

# GMR term K of the inductance 0.2 ln(2s/d) + K mH/km by number of wires in a concentric
# stranded conductor: K = 0.2 ln(r / GMR); solid 0.05 = 0.2 x 1/4. Values of the common
# cable-engineering table (from memory; the README of the reference set lists 0.05 and 0.0514).
_STRANDS = np.array([1, 3, 7, 19, 37, 61])
_K_MH_PER_KM = np.array([0.0500, 0.0778, 0.0642, 0.0554, 0.0528, 0.0514])


def _material(material: str | cat.Material) -> cat.Material:
    return material if isinstance(material, cat.Material) else cat.material(material)


# --- area ------------------------------------------------------------------------------


def awg_area_mm2(gauge: ArrayLike) -> np.ndarray:
    """Area of AWG ``gauge`` (0, -1, -2, -3 for 1/0 .. 4/0), mm2.

    The AWG definition (ASTM B258): d = 0.127 mm x 92^((36 - n)/39).
    """
    d_mm = 0.127 * 92.0 ** ((36.0 - np.asarray(gauge, dtype=float)) / 39.0)
    return np.pi / 4 * d_mm**2


# --- resistance ------------------------------------------------------------------------


def r_dc_ohm_per_m(r20_ohm_per_m: ArrayLike, alpha20_per_k: ArrayLike,
                   temp_c: ArrayLike) -> np.ndarray:
    """DC resistance at ``temp_c``: R20 (1 + alpha20 (T - 20)), ohm/m (IEC 60287-1-1 §2.1)."""
    r20 = np.asarray(r20_ohm_per_m, dtype=float)
    return r20 * (1.0 + np.asarray(alpha20_per_k, dtype=float)
                  * (np.asarray(temp_c, dtype=float) - 20.0))


def _skin_y(x: np.ndarray) -> np.ndarray:
    """IEC 60287-1-1 §2.1.2 skin-effect factor ys from xs, all three ranges.

    The two ranges above xs = 2.8 are from memory; LV conductors up to 1000 kcmil / 630 mm2
    at 50/60 Hz stay below xs = 2.4.
    """
    x4 = x**4
    return np.where(x <= 2.8, x4 / (192.0 + 0.8 * x4),
                    np.where(x <= 3.8, -0.136 - 0.0177 * x + 0.0563 * x**2,
                             0.354 * x - 0.733))


def ac_resistance_factor(r_dc_ohm_per_m: ArrayLike, diameter_m: ArrayLike,
                         spacing_m: ArrayLike, frequency_hz: ArrayLike,
                         ks: ArrayLike = 1.0, kp: ArrayLike = 1.0) -> np.ndarray:
    """R_ac / R_dc = 1 + ys + yp for three single conductors (IEC 60287-1-1 §2.1).

    xs² = 8πf/R'·1e-7·ks, ys from xs; xp² = 8πf/R'·1e-7·kp, F = xp⁴/(192 + 0.8 xp⁴),
    yp = F (dc/s)² [0.312 (dc/s)² + 1.18/(F + 0.27)] (valid for xp <= 2.8);
    R' the DC resistance at operating temperature in ohm/m, dc the conductor diameter,
    s the axial spacing. ks = kp = 1 for round stranded conductors with extruded insulation.
    """
    r = np.asarray(r_dc_ohm_per_m, dtype=float)
    d = np.asarray(diameter_m, dtype=float)
    s = np.asarray(spacing_m, dtype=float)
    if np.any(s < d):
        raise ScenarioError("conductor spacing must be at least the conductor diameter")
    base = 8.0 * np.pi * np.asarray(frequency_hz, dtype=float) * 1e-7 / r
    ys = _skin_y(np.sqrt(base * np.asarray(ks, dtype=float)))
    xp4 = (base * np.asarray(kp, dtype=float)) ** 2
    f = xp4 / (192.0 + 0.8 * xp4)
    ratio2 = (d / s) ** 2
    yp = f * ratio2 * (0.312 * ratio2 + 1.18 / (f + 0.27))
    return 1.0 + ys + yp


# --- reactance -------------------------------------------------------------------------


def strand_k_mh_per_km(strands: ArrayLike) -> np.ndarray:
    """The GMR term K (mH/km) for a conductor of ``strands`` wires (nearest lower class)."""
    n = np.asarray(strands)
    i = np.clip(np.searchsorted(_STRANDS, n, side="right") - 1, 0, len(_STRANDS) - 1)
    return _K_MH_PER_KM[i]


def reactance_ohm_per_m(diameter_m: ArrayLike, spacing_m: ArrayLike, frequency_hz: ArrayLike,
                        strands: ArrayLike, multiplier: ArrayLike = 1.0) -> np.ndarray:
    """Series reactance per conductor: X = 2πf (K + 0.2 ln(2s/d)) mH/km x multiplier, ohm/m.

    s is the axial spacing (the geometric mean spacing for three phases), d the conductor
    diameter, K the stranding term; ``multiplier`` raises X in a magnetic raceway.
    """
    d = np.asarray(diameter_m, dtype=float)
    s = np.asarray(spacing_m, dtype=float)
    if np.any(s < d):
        raise ScenarioError("conductor spacing must be at least the conductor diameter")
    l_mh_per_km = strand_k_mh_per_km(strands) + 0.2 * np.log(2.0 * s / d)
    # mH/km = 1e-6 H/m
    return (2.0 * np.pi * np.asarray(frequency_hz, dtype=float) * l_mh_per_km * 1e-6
            * np.asarray(multiplier, dtype=float))


# --- temperature -----------------------------------------------------------------------


def operating_temperature_c(ambient_c: ArrayLike, max_temp_c: ArrayLike,
                            current_a: ArrayLike, ampacity_a: ArrayLike) -> np.ndarray:
    """Steady conductor temperature at a load: θa + (θmax − θa)(I/Iz)², capped at θmax, degC.

    Losses go with I² and the temperature rise with the losses (IEC 60287-3-2 mean
    temperature; the ampacity Iz is the current that reaches θmax).
    """
    ta = np.asarray(ambient_c, dtype=float)
    tmax = np.asarray(max_temp_c, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        load = np.asarray(current_a, dtype=float) / np.asarray(ampacity_a, dtype=float)
    return np.minimum(ta + (tmax - ta) * load**2, tmax)


# --- impedance of a catalogue conductor ------------------------------------------------


def impedance_ohm_per_m(catalogue: cat.Catalogue | str, material: str | cat.Material,
                        size_index: ArrayLike, temp_c: ArrayLike,
                        installation: cat.Installation | str,
                        frequency_hz: float) -> tuple[np.ndarray, np.ndarray]:
    """(R_ac at ``temp_c``, X) of one conductor of each catalogue size, ohm/m.

    Spacing s = installation spacing factor x typical insulated diameter; NaN where the
    size is not made in the material.
    """
    cg = catalogue if isinstance(catalogue, cat.Catalogue) else cat.load_catalogue(catalogue)
    mat = _material(material)
    inst = (installation if isinstance(installation, cat.Installation)
            else cat.installation(installation))
    idx = np.asarray(size_index, dtype=np.intp)
    d_m = cg.diameter_mm[idx] * 1e-3
    s_m = inst.spacing_factor * cg.insulated_diameter_mm[idx] * 1e-3
    r_dc = r_dc_ohm_per_m(cg.r20_ohm_per_m(mat.name)[idx], mat.alpha20_per_k, temp_c)
    r_ac = r_dc * ac_resistance_factor(r_dc, d_m, s_m, frequency_hz)
    x = reactance_ohm_per_m(d_m, s_m, frequency_hz, cg.strands[idx], inst.reactance_multiplier)
    return r_ac, x + np.zeros_like(r_ac)


# --- short-circuit withstand -----------------------------------------------------------


def _check_withstand(time_s: ArrayLike, initial_c: ArrayLike, final_c: ArrayLike) -> None:
    if np.any(np.asarray(time_s, dtype=float) <= 0):
        raise ScenarioError("short-circuit duration must be positive")
    if np.any(np.asarray(final_c, dtype=float) <= np.asarray(initial_c, dtype=float)):
        raise ScenarioError("final short-circuit temperature must exceed the initial one")


def adiabatic_withstand_a(area_mm2: ArrayLike, time_s: ArrayLike, material: str | cat.Material,
                          initial_c: ArrayLike, final_c: ArrayLike) -> np.ndarray:
    """Current a conductor carries for ``time_s`` without passing ``final_c``, A (rms).

    IEC 60949 adiabatic: I²t = K² S² ln((θf + β)/(θi + β)), S in mm2, K and β of the metal.
    """
    _check_withstand(time_s, initial_c, final_c)
    m = _material(material)
    beta = m.iec60949_beta_c
    rise = np.log((np.asarray(final_c, dtype=float) + beta)
                  / (np.asarray(initial_c, dtype=float) + beta))
    return m.iec60949_k * np.asarray(area_mm2, dtype=float) * np.sqrt(
        rise / np.asarray(time_s, dtype=float))


def icea_withstand_a(area_mm2: ArrayLike, time_s: ArrayLike, material: str | cat.Material,
                     initial_c: ArrayLike, final_c: ArrayLike) -> np.ndarray:
    """Short-circuit withstand by ICEA P-32-382, A (rms).

    (I/A)² t = C log10((T2 + T0)/(T1 + T0)), A in circular mils; C, T0 of the metal
    (Cu 0.0297, 234; Al 0.0125, 228).
    """
    _check_withstand(time_s, initial_c, final_c)
    m = _material(material)
    t0 = m.icea_t0_c
    area_cmil = np.asarray(area_mm2, dtype=float) / MM2_PER_CMIL
    rise = np.log10((np.asarray(final_c, dtype=float) + t0)
                    / (np.asarray(initial_c, dtype=float) + t0))
    return area_cmil * np.sqrt(m.icea_constant * rise / np.asarray(time_s, dtype=float))
