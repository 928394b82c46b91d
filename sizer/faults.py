"""Earth faults at the far end of a run: trip currents, protective-conductor impedance, U0.

Pure functions of SI floats (arrays broadcast). The rule values (voltage factors,
trip multiples, disconnection times) come from the profile's ``[fault]`` section
(:class:`sizer.rules.profile.FaultRule`); nothing here knows about scenarios or solvers.

The minimum line-to-earth fault current at a run's far end (IEC 60909-0 minimum
conditions, TN system) is

    I_ef = c_min · U0 / |Z_s|,   Z_s = Z_source + Σ_path (Z_line + Z_pe) (+ transformers)

with every conductor at the fault-loop temperature. The device disconnects in time when
I_ef ≥ I_a (IEC 60364-4-41 411.4.4: Z_s · I_a ≤ U0, here with c_min applied to U0 as
IEC 60909 minimum conditions ask). Referred to each run's own U0 and a common power base
(``z_pu = z_ohm · S_base / U0²``) the loop impedance adds along a path across
transformers and across three-phase to single-phase circuits that share a U0, which is
what lets the optimiser carry it as a path constraint like voltage drop.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike

from sizer import catalogue as cat
from sizer.conductors import impedance_ohm_per_m
from sizer.errors import ScenarioError
from sizer.rules.profile import DEVICES, FaultRule

S_BASE_VA = 1.0e6
"""System power base (VA) of every per-unit value in sizer; results do not depend on it."""

__all__ = ["S_BASE_VA", "default_device", "disconnection_time_s", "earth_fault_a", "loop_pu",
           "pe_impedance_ohm", "source_loop_ohm", "trip_current_a", "trip_multiple"]

_MCB_MULTIPLE = {"B": 5.0, "C": 10.0, "D": 20.0}
"""IEC 60898-1: upper limit of the instantaneous-trip range, x In (B 3-5, C 5-10, D 10-20)."""


def is_final_circuit(ocpd_a: float, is_leaf: bool, rule: FaultRule) -> bool:
    """A final circuit (IEC 60364-4-41 Table 41.1 applies): a leaf fed at most the limit."""
    return is_leaf and ocpd_a <= rule.final_circuit_max_a + 1e-9


def disconnection_time_s(ocpd_a: float, is_leaf: bool, rule: FaultRule) -> float:
    """Required disconnection time (s): 0.4 s final circuits <= 32 A, else 5 s (TN, 230 V)."""
    return rule.final_time_s if is_final_circuit(ocpd_a, is_leaf, rule) else \
        rule.distribution_time_s


def trip_multiple(device: str, ocpd_a: float, is_leaf: bool, rule: FaultRule,
                  multiple: float | None = None) -> float:
    """Current (x In) that disconnects ``device`` in the required time.

    A given ``multiple`` wins. Miniature breakers by curve (IEC 60898-1: B 5, C 10,
    D 20 x In, the top of the instantaneous range); "breaker" (moulded case) the
    profile's instantaneous multiple; "fuse" the profile's multiple for 0.4 s (final
    circuits) or 5 s (distribution).
    """
    if multiple is not None:
        if not (math.isfinite(multiple) and multiple >= 1):
            raise ScenarioError(f"must be a number >= 1, got {multiple}", field="trip_multiple")
        return float(multiple)
    if device not in DEVICES:
        raise ScenarioError(f"unknown device {device!r}; use one of {', '.join(DEVICES)}",
                            field="device")
    if device in _MCB_MULTIPLE:
        return _MCB_MULTIPLE[device]
    if device == "fuse":
        return (rule.fuse_multiple_final if is_final_circuit(ocpd_a, is_leaf, rule)
                else rule.fuse_multiple_distribution)
    return rule.trip_multiple


def default_device(ocpd_a: float, rule: FaultRule) -> str:
    """The profile's device for a run that names none: by its rating."""
    return rule.device if ocpd_a <= rule.small_device_max_a + 1e-9 else rule.large_device


def trip_current_a(device: str, ocpd_a: float, is_leaf: bool, rule: FaultRule,
                   multiple: float | None = None) -> float:
    """``trip_a``: the current (A) that makes the device disconnect in the required time."""
    return trip_multiple(device, ocpd_a, is_leaf, rule, multiple) * ocpd_a


def pe_impedance_ohm(catalogue: cat.Catalogue, material: str, egc_size_index: ArrayLike,
                     sets: ArrayLike, length_m: ArrayLike, temp_c: ArrayLike,
                     installation: str, frequency_hz: float) -> np.ndarray:
    """Complex impedance (ohm) of the protective conductor (EGC / PE) of a run.

    One EGC per parallel set (NEC 250.122(F); the price list charges one per set), so
    ``sets`` of them in parallel; R at ``temp_c`` (it runs beside the phase conductors),
    X of a conductor of its size at the installation's spacing, so that the loop
    reactance is that of a two-wire loop (an estimate: the return conductor's geometry
    is not modelled). Takes the EGC size, so a larger EGC bought to meet disconnection
    is priced and evaluated by the same function.
    """
    r, x = impedance_ohm_per_m(catalogue, material, egc_size_index, temp_c, installation,
                               frequency_hz)
    scale = np.asarray(length_m, dtype=float) / np.asarray(sets, dtype=float)
    return (r + 1j * x) * scale


def loop_pu(loop_ohm: ArrayLike, u0_v: ArrayLike, s_base_va: float) -> np.ndarray:
    """Loop impedance referred to the run's U0 on a common power base: ``Z·S/U0²``."""
    u0 = np.asarray(u0_v, dtype=float)
    return np.asarray(loop_ohm) * s_base_va / u0**2


def rows_loop_pu(loop_ohm: np.ndarray, u0_v: np.ndarray, segment: np.ndarray,
                 s_base_va: float, block: int = 1 << 20) -> np.ndarray:
    """``|loop_pu|`` of every candidate row at its run's U0 (``segment``: its run).

    The same numbers as ``np.abs(loop_pu(loop_ohm, u0_v[segment], s_base_va))``, worked
    out a block of rows at a time: whole, a table of 13 million rows made three complex
    and float temporaries of 110-220 MB each (0.9 s, most of it in fresh pages).
    """
    out = np.empty(loop_ohm.shape[0])
    for a in range(0, out.size, block):
        b = a + block
        out[a:b] = np.abs(loop_pu(loop_ohm[a:b], u0_v[segment[a:b]], s_base_va))
    return out


def source_loop_ohm(fault_current_a: float | None, voltage_v: float, phases: int,
                    x_r: float, c_max: float) -> complex:
    """The source's share of the fault loop, ohm at the source's U0.

    IEC 60909-0 network feeder: ``Z_Q = c · U_n / (√3 · I''_kQ)`` with ``c = c_max`` (the
    level given is the maximum available) at angle ``atan(X/R)``; used for the minimum
    fault as well, which is conservative (the impedance for c_min would be smaller).
    Zero sequence taken equal to positive sequence, so the loop share is ``Z_Q``.
    A single-phase source's level is a loop level at its full voltage. None: infinite bus.
    """
    if fault_current_a is None:
        return 0j
    z = c_max * voltage_v / ((math.sqrt(3.0) if phases == 3 else 1.0) * fault_current_a)
    angle = math.atan(x_r)
    return complex(z * math.cos(angle), z * math.sin(angle))


def earth_fault_a(c_min: float, u0_v: ArrayLike, loop_pu_total: ArrayLike,
                  s_base_va: float) -> np.ndarray:
    """``I_ef = c_min · U0 / |Z_s|`` with the loop given in pu (``Z·S/U0²``), A."""
    u0 = np.asarray(u0_v, dtype=float)
    with np.errstate(divide="ignore"):
        return c_min * s_base_va / (u0 * np.abs(np.asarray(loop_pu_total)))
