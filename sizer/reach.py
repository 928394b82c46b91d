"""How far one conductor can run: the daily single-circuit question, under a rule profile.

The conductor's temperature comes from its loading (a lightly loaded conductor runs cool
and so reaches further than a table at full temperature says), unless the caller fixes it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from sizer.catalogue import load_catalogue
from sizer.conductors import impedance_ohm_per_m, operating_temperature_c
from sizer.drop import reach_m
from sizer.errors import ScenarioError
from sizer.rules import load_profile
from sizer.rules.ampacity import ambient_factor, ampacity_a, grouping_factor, table_ampacity_a
from sizer.rules.protection import next_standard_rating_a, terminal_temperature_c
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
                         grouping, installation)
    amp = float(per_set[0]) * conductor.sets
    if not np.isfinite(amp) or amp <= 0:
        raise ScenarioError(f"{conductor} has no ampacity in the {profile.name} profile at "
                            f"{insulation_c:g} degC insulation", field="conductor")
    if conductor_temperature_c is None:
        thermal = table_ampacity_a(profile, conductor.material, k, insulation_c, installation)
        thermal = (thermal * ambient_factor(profile, insulation_c, ambient_c, installation)
                   * grouping_factor(profile, grouping) * conductor.sets)
        conductor_temperature_c = float(operating_temperature_c(
            ambient_c, insulation_c, design_a, thermal)[0])
    r, x = impedance_ohm_per_m(catalogue, conductor.material, k,
                               np.array([conductor_temperature_c]), installation,
                               profile.frequency_hz)
    reach = float(reach_m(design_a, r, x, power_factor, phases, voltage_v, limit_pct,
                          conductor.sets)[0])
    return ReachResult(reach, design_a, amp, conductor_temperature_c,
                       float(r[0]) * 1e3, float(x[0]) * 1e3)
