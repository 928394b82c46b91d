"""How far one conductor can run: the daily single-circuit question, under a rule profile.

The conductor's temperature comes from its loading (a lightly loaded conductor runs cool
and so reaches further than a table at full temperature says), unless the caller fixes it.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from sizer.catalogue import load_catalogue
from sizer.conductors import impedance_ohm_per_m, operating_temperature_c
from sizer.drop import reach_m
from sizer.errors import ScenarioError
from sizer.rules import load_profile
from sizer.rules.ampacity import ambient_factor, ampacity_a, grouping_factor, table_ampacity_a
from sizer.rules.profile import RuleProfile, table_status
from sizer.rules.protection import (
    min_parallel_ok,
    next_standard_rating_a,
    protects,
    small_conductor_ok,
    terminal_temperature_c,
)
from sizer.units import ConductorSpec


@dataclass(frozen=True)
class ReachResult:
    """The answer of ``sizer reach``, SI floats."""

    reach_m: float
    design_current_a: float
    ampacity_a: float
    conductor_temperature_c: float
    r_ohm_per_km: float
    x_ohm_per_km: float
    warnings: tuple[str, ...] = ()   # rules the run breaks: the reach is then no answer
    current_basis: str = ""          # where the design current came from, in words
    # the profile's stand-in and from-memory topics (``table_status``)
    table_status: dict[str, list[str]] = field(default_factory=dict)


def conductor_reach(
    conductor: ConductorSpec,
    *,
    voltage_v: float,
    phases: int,
    limit_pct: float,
    insulation_c: float,
    current_a: float | None = None,
    ocpd_a: float | None = None,
    power_factor: float = 0.9,
    ambient_c: float = 30.0,
    rules: str = "nec",
    installation: str = "conduit",
    terminal_c: float | None = None,
    conductor_temperature_c: float | None = None,
) -> ReachResult:
    """Longest run of ``conductor`` within ``limit_pct`` at the design current.

    The design current is ``current_a``, or the profile's unknown-load factor times
    ``ocpd_a``. Terminal rating defaults to the profile's terminal rule for the device.
    """
    if (current_a is None) == (ocpd_a is None):
        raise ScenarioError("give either a current or a device rating, not both", field="current")
    profile = load_profile(rules)
    catalogue = load_catalogue(profile.catalogue)
    k = np.array([catalogue.index(conductor.size)])
    device_a = ocpd_a if ocpd_a is not None else float(
        next_standard_rating_a(profile, np.array([current_a]))[0])
    design_a = current_a if current_a is not None else profile.unknown_load_factor * device_a
    if terminal_c is None:
        terminal_c = float(terminal_temperature_c(profile, np.array([device_a]), k)[0])
    grouping = 2 if phases == 1 else 3
    per_set = ampacity_a(profile, conductor.material, k, insulation_c, terminal_c, ambient_c,
                         grouping, installation, loaded=grouping)
    amp = float(per_set[0]) * conductor.sets
    if not np.isfinite(amp) or amp <= 0:
        raise ScenarioError(f"{conductor} has no ampacity in the {profile.name} profile at "
                            f"{insulation_c:g} degC insulation", field="conductor")
    if conductor_temperature_c is None:
        thermal = table_ampacity_a(profile, conductor.material, k, insulation_c, installation,
                                   loaded=grouping)
        thermal = (thermal * ambient_factor(profile, insulation_c, ambient_c, installation)
                   * grouping_factor(profile, grouping) * conductor.sets)
        conductor_temperature_c = float(operating_temperature_c(
            ambient_c, insulation_c, design_a, thermal)[0])
    r, x = impedance_ohm_per_m(catalogue, conductor.material, k,
                               np.array([conductor_temperature_c]), installation,
                               profile.frequency_hz)
    reach = float(reach_m(design_a, r, x, power_factor, phases, voltage_v, limit_pct,
                          conductor.sets)[0])
    if current_a is None:
        basis = (f"{design_a:g} A: {100 * profile.unknown_load_factor:g} % of the "
                 f"{device_a:g} A device, unknown load ({profile.sources['unknown_load']})")
    else:
        basis = f"{design_a:g} A as given"
    warnings = reach_warnings(profile, conductor, k, design_a, amp,
                              ocpd_a if ocpd_a is not None else None)
    return ReachResult(reach, design_a, amp, conductor_temperature_c,
                       float(r[0]) * 1e3, float(x[0]) * 1e3, warnings, basis,
                       table_status(profile))


def reach_warnings(profile: RuleProfile, conductor: ConductorSpec, size_index: np.ndarray,
                   design_a: float, ampacity_a: float, ocpd_a: float | None) -> tuple[str, ...]:
    """Rules the run breaks, as sentences: over its ampacity, unprotected, parallel size."""
    out = []
    if design_a > ampacity_a * (1 + 1e-9):
        out.append(f"{conductor} carries {ampacity_a:.0f} A, less than the {design_a:g} A "
                   "design current: over its ampacity")
    if ocpd_a is not None:
        if not protects(profile, np.array([ampacity_a]), np.array([ocpd_a]))[0]:
            out.append(f"a {ocpd_a:g} A device does not protect {conductor} "
                       f"({ampacity_a:.0f} A; {profile.sources['next_size_up']})")
        elif not small_conductor_ok(profile, conductor.material, size_index,
                                    np.array([ocpd_a]))[0]:
            out.append(f"a {ocpd_a:g} A device is above the small-conductor limit of "
                       f"{conductor} ({profile.sources['small_conductors']})")
    if not min_parallel_ok(profile, size_index, np.array([conductor.sets]))[0]:
        out.append(f"{conductor}: below the minimum size for parallel conductors "
                   f"({profile.min_parallel_size}, {profile.sources.get('parallel', '')})")
    return tuple(out)
