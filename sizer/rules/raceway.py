"""Raceways: trade size from the fill rule, tray width, and the conductors that share them.

Areas in mm² and widths in mm; sizes are integer indices into the profile's size order.
The fill rule (NEC Chapter 9 Table 1) limits the summed cross-section of the conductors
(or cables) in a raceway to a fraction of its internal area that depends on their count.
Pure, vectorised functions; the tables are read from the profile's data files.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from sizer.errors import ScenarioError

MM2_PER_IN2 = 25.4**2
NO_RACEWAY = -1    # raceway_size_index: no listed size is large enough
TRAY = "tray"      # the raceway type word that means a cable tray priced by width
NONE = "none"      # no raceway (free air on cleats)
DIRECT = "direct"  # no raceway: laid directly in the ground of the trench


@dataclass(frozen=True, eq=False)
class RacewayType:
    """One kind of conduit or duct: its trade sizes (ascending) and internal areas."""

    name: str
    designators: tuple[str, ...]     # how the price list names each size ("53")
    labels: tuple[str, ...]          # as the trade writes it: "53 mm (2 in) EMT"
    area_mm2: np.ndarray             # total internal area (100 %)


@dataclass(frozen=True, eq=False)
class RacewayRules:
    """A profile's raceway practice.

    ``types``: conduit/duct kinds; ``installation_type``: installation word -> a type
    name, ``"tray"`` or ``"none"``; ``conductor_area_mm2`` per material over the profile
    sizes (NaN: not tabulated); ``fill``: (largest count, fraction) bands ascending, the
    last up to inf; ``tray_widths_mm`` ascending; ``trench``: installations laid in a
    trench (priced per metre of route).
    """

    types: Mapping[str, RacewayType]
    installation_type: Mapping[str, str]
    conductor_area_mm2: Mapping[str, np.ndarray]
    fill: tuple[tuple[float, float], ...]
    tray_widths_mm: tuple[float, ...]
    trench: tuple[str, ...]
    inch_labels: bool                # write tray widths with inches too (AWG profiles)
    source: str

    def diameter_mm(self, material: str) -> np.ndarray:
        """Overall diameter of one conductor or cable, from its area: d = √(4A/π)."""
        return np.sqrt(4.0 * self.conductor_area_mm2[material] / math.pi)

    def label(self, installation: str, raceways: int, k: int) -> str:
        """The raceway of a run as the trade writes it: "2 x 53 mm (2 in) EMT".

        ``raceways`` of size ``k`` (one per parallel set, or one for all); a tray is one
        per run; buried ducts say "in trench".
        """
        kind = self.installation_type[installation]
        if kind == NONE:
            return "none (free air)"
        if kind == DIRECT:
            return "direct buried in trench"
        if k < 0:
            return ""
        if kind == TRAY:
            return self.tray_label(k)
        trench = " in trench" if installation in self.trench else ""
        return f"{raceways} x {self.types[kind].labels[k]}{trench}"

    def tray_label(self, k: int) -> str:
        """A tray width as the trade writes it: "300 mm (12 in) tray"."""
        w = self.tray_widths_mm[k]
        inches = f" ({w / 25.4:.0f} in)" if self.inch_labels else ""
        return f"{w:.0f} mm{inches} tray"


def fill_fraction(fill: tuple[tuple[float, float], ...], conductors: object) -> np.ndarray:
    """Fraction of a raceway's area ``conductors`` conductors may fill (NEC Ch. 9 Table 1).

    NEC: one conductor 53 %, two 31 %, over two 40 %.
    """
    n = np.asarray(conductors, dtype=float)
    tops = np.asarray([b[0] for b in fill])
    fractions = np.asarray([b[1] for b in fill])
    return np.asarray(fractions[np.searchsorted(tops, n, side="left")])


def raceway_size_index(area_mm2: np.ndarray, fill: tuple[tuple[float, float], ...],
                       cable_area_mm2: object, conductors: object) -> np.ndarray:
    """Smallest trade size (index into ``area_mm2``) whose allowed fill holds the cables.

    ``cable_area_mm2`` is the summed cross-section of the ``conductors`` conductors in
    one raceway; NO_RACEWAY (-1) where even the largest size is too small or the area
    is not known.
    """
    need = np.asarray(cable_area_mm2, dtype=float) / fill_fraction(fill, conductors)
    pick = np.searchsorted(np.asarray(area_mm2), need * (1 - 1e-12), side="left")
    ok = np.isfinite(need) & (pick < len(area_mm2))
    return np.where(ok, pick, NO_RACEWAY).astype(np.int64)


def tray_width_index(widths_mm: tuple[float, ...], diameters_mm: object) -> np.ndarray:
    """Smallest tray width at least the summed diameters of its cables in one layer.

    NEC 392.22(B)(1): single conductors in one layer, the sum of their diameters within
    the tray width [M]; the same practice is used for every profile.
    """
    need = np.asarray(diameters_mm, dtype=float)
    pick = np.searchsorted(np.asarray(widths_mm), need * (1 - 1e-12), side="left")
    ok = np.isfinite(need) & (pick < len(widths_mm))
    return np.where(ok, pick, NO_RACEWAY).astype(np.int64)


def grouped_conductors(per_set: object, sets: object, together: object) -> np.ndarray:
    """Current-carrying conductors that derate as one group.

    ``per_set`` conductors of one parallel set; when the sets lie ``together`` (one
    raceway, one trench, one bundle) all ``sets`` × ``per_set`` count, else each set's
    own raceway holds only its ``per_set``.
    """
    n = np.asarray(per_set, dtype=np.int64)
    return np.where(np.asarray(together, dtype=bool), n * np.asarray(sets, dtype=np.int64), n)


def band_tops_conductors(bands: tuple[tuple[float, float], ...],
                         conductors_per_group: int) -> np.ndarray:
    """Upper ends of the grouping bands in conductors (inf for the last band).

    NEC 310.15(C)(1) counts conductors (3, 6, 9, 20, ...); IEC 60364-5-52 Table B.52.17
    counts circuits, three conductors each.
    """
    return np.asarray([b[0] * conductors_per_group for b in bands], dtype=float)


# --- reading the tables ---------------------------------------------------------------


def read_raceway_types(header: list[str], rows: list[list[str]],
                       file: str) -> dict[str, RacewayType]:
    """Raceway areas from a CSV table, grouped by raceway type.

    Columns ``type,trade_size_in,designator_mm,area_in2`` (NEC Chapter 9 Table 4) or
    ``type,designator_mm,inner_diameter_mm`` (a bore, for metric conduit and duct).
    """
    nec = ["type", "trade_size_in", "designator_mm", "area_in2"]
    bore = ["type", "designator_mm", "inner_diameter_mm"]
    grouped: dict[str, list[tuple[str, str, float]]] = {}
    try:
        for r in rows:
            name = r[0].strip()
            if header == nec:
                label = f"{r[2]} mm ({r[1]} in) {name}"
                area = float(r[3]) * MM2_PER_IN2
                grouped.setdefault(name, []).append((r[2].strip(), label, area))
            elif header == bore:
                label = f"{r[1]} mm {name}"
                area = math.pi / 4 * float(r[2]) ** 2
                grouped.setdefault(name, []).append((r[1].strip(), label, area))
            else:
                raise ScenarioError(f"raceway table needs columns {','.join(nec)} or "
                                    f"{','.join(bore)}", file=file)
    except ValueError as exc:
        raise ScenarioError(f"raceway table: {exc}", file=file) from None
    out = {}
    for name, items in grouped.items():
        areas = np.array([a for _, _, a in items])
        if np.any(np.diff(areas) <= 0) or np.any(areas <= 0):
            raise ScenarioError(f"raceway type {name!r}: areas must be positive and "
                                "ascending", file=file)
        areas.flags.writeable = False
        out[name] = RacewayType(name, tuple(d for d, _, _ in items),
                                tuple(lab for _, lab, _ in items), areas)
    return out


def read_conductor_areas(header: list[str], rows: list[list[str]],
                         size_index: dict[str, int], insulation: str,
                         file: str) -> np.ndarray:
    """Area (mm²) over the profile sizes of one insulation; NaN where not listed.

    The table has columns ``size,NAME:area_in2`` or ``size,NAME:diameter_mm``.
    """
    out = np.full(len(size_index), np.nan)
    for unit in ("area_in2", "diameter_mm"):
        column = f"{insulation}:{unit}"
        if column in header:
            j = header.index(column)
            break
    else:
        raise ScenarioError(f"conductor table has no column for insulation {insulation!r}",
                            file=file)
    try:
        for r in rows:
            value = float(r[j])
            k = size_index[r[0].strip()]
            out[k] = value * MM2_PER_IN2 if unit == "area_in2" else math.pi / 4 * value**2
    except (ValueError, KeyError) as exc:
        raise ScenarioError(f"conductor table: bad value {exc}", file=file) from None
    out.flags.writeable = False
    return out
