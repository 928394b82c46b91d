"""Conductor data: metals, size catalogues and installations, loaded from the files beside.

The numbers live in ``materials.toml``, ``awg.csv``, ``metric.csv`` and
``installations.toml``, each recording its source; this module only reads them into
frozen dataclasses of SI floats (resistance in ohm per metre, lengths in mm as named).
"""

from __future__ import annotations

import csv
import functools
import math
import tomllib
from dataclasses import dataclass, fields
from pathlib import Path

import numpy as np

from sizer.errors import UnitError
from sizer.units import parse_material, parse_size

_HERE = Path(__file__).resolve().parent

CATALOGUES: tuple[str, ...] = ("awg", "metric")


# --- metals ----------------------------------------------------------------------------


@dataclass(frozen=True)
class Material:
    """A conductor metal's constants (SI), as recorded in ``materials.toml``."""

    name: str                    # "Cu" | "Al"
    resistivity20_ohm_m: float   # DC resistivity at 20 degC
    alpha20_per_k: float         # temperature coefficient of resistance at 20 degC
    density_kg_per_m3: float
    iec60949_k: float            # IEC 60949 adiabatic constant K, A s^0.5 / mm2
    iec60949_beta_c: float       # IEC 60949 beta: reciprocal of alpha at 0 degC, degC
    icea_constant: float         # ICEA P-32-382 constant, with A in cmil
    icea_t0_c: float             # ICEA P-32-382 inferred zero-resistance temperature, degC

    def __post_init__(self) -> None:
        for f in fields(self):
            value = getattr(self, f.name)
            if f.name != "name" and not (math.isfinite(value) and value > 0):
                raise UnitError(f"materials.toml: {self.name}.{f.name} must be positive, "
                                f"got {value!r}")


@functools.cache
def _materials() -> dict[str, Material]:
    with open(_HERE / "materials.toml", "rb") as fh:
        data = tomllib.load(fh)
    wanted = [f.name for f in fields(Material) if f.name != "name"]
    out = {}
    for name, table in data.items():
        missing = [k for k in wanted if k not in table]
        if missing:
            raise UnitError(f"materials.toml: [{name}] lacks {', '.join(missing)}")
        out[name] = Material(name, **{k: float(table[k]) for k in wanted})
    return out


def material(name: str) -> Material:
    """The constants of "Cu" or "Al" (also "copper", "aluminium", ...)."""
    return _materials()[parse_material(name)]


# --- size catalogues -------------------------------------------------------------------


def _frozen(values: list[float], dtype: type = float) -> np.ndarray:
    arr: np.ndarray = np.asarray(values, dtype=dtype)
    arr.flags.writeable = False  # shared through the cache: nobody may change it
    return arr


@dataclass(frozen=True, eq=False)  # arrays inside: compare and hash by identity
class Catalogue:
    """One family of conductor sizes, ascending area; arrays are indexed like ``sizes``."""

    name: str                          # "awg" | "metric"
    sizes: tuple[str, ...]             # canonical names, ascending area
    area_mm2: np.ndarray
    diameter_mm: np.ndarray            # stranded conductor diameter
    insulated_diameter_mm: np.ndarray  # typical single-conductor overall diameter (for spacing)
    strands: np.ndarray                # int
    r20_cu_ohm_per_m: np.ndarray       # DC at 20 degC
    r20_al_ohm_per_m: np.ndarray       # NaN where that size is not made in Al
    source: str

    def index(self, size: str) -> int:
        """Position of ``size`` (any spelling parse_size reads) in this catalogue."""
        try:
            canonical = parse_size(size)
        except UnitError as exc:
            raise UnitError(f"unknown conductor size {size!r} in the {self.name} catalogue "
                            f"({self.sizes[0]} .. {self.sizes[-1]})") from exc
        try:
            return self.sizes.index(canonical)
        except ValueError:
            raise UnitError(f"size {canonical!r} is not in the {self.name} catalogue "
                            f"({self.sizes[0]} .. {self.sizes[-1]})") from None

    def r20_ohm_per_m(self, material: str) -> np.ndarray:
        """DC resistance at 20 degC of each size in ``material`` (NaN = not made), ohm/m."""
        return self.r20_cu_ohm_per_m if parse_material(material) == "Cu" else \
            self.r20_al_ohm_per_m

    def made_in(self, material: str) -> np.ndarray:
        """Boolean mask of the sizes made in ``material``."""
        return np.isfinite(self.r20_ohm_per_m(material))


_COLUMNS = ("size", "area_mm2", "strands", "diameter_mm", "insulated_diameter_mm",
            "r20_cu_ohm_per_km", "r20_al_ohm_per_km")


def _read_catalogue(name: str, path: Path) -> Catalogue:
    header: list[str] = []
    body: list[str] = []
    with open(path, encoding="utf-8") as fh:
        for line in fh:
            if line.startswith("#"):
                header.append(line[1:].strip())
            elif line.strip():
                body.append(line)
    rows = list(csv.DictReader(body))
    if not rows or any(c not in rows[0] for c in _COLUMNS):
        raise UnitError(f"{path.name}: needs the columns {', '.join(_COLUMNS)}")
    source = " ".join(h.removeprefix("source:").strip() for h in header
                      if h.startswith("source:"))

    def col(key: str) -> list[float]:
        return [float(r[key]) if r[key].strip() else math.nan for r in rows]

    km_to_m = 1e-3
    cat = Catalogue(
        name=name,
        sizes=tuple(parse_size(r["size"]) for r in rows),
        area_mm2=_frozen(col("area_mm2")),
        diameter_mm=_frozen(col("diameter_mm")),
        insulated_diameter_mm=_frozen(col("insulated_diameter_mm")),
        strands=_frozen([int(r["strands"]) for r in rows], dtype=np.int64),
        r20_cu_ohm_per_m=_frozen([v * km_to_m for v in col("r20_cu_ohm_per_km")]),
        r20_al_ohm_per_m=_frozen([v * km_to_m for v in col("r20_al_ohm_per_km")]),
        source=source,
    )
    if np.any(np.diff(cat.area_mm2) <= 0):
        raise UnitError(f"{path.name}: sizes must be listed by ascending area")
    return cat


@functools.cache
def load_catalogue(name: str) -> Catalogue:
    """The ``"awg"`` (AWG/kcmil) or ``"metric"`` (mm2) catalogue; read once, then cached."""
    if name not in CATALOGUES:
        raise UnitError(f"unknown conductor catalogue {name!r} (use {' or '.join(CATALOGUES)})")
    return _read_catalogue(name, _HERE / f"{name}.csv")


def catalogue_of_size(size: str) -> str:
    """``"awg"`` for an AWG or kcmil size, ``"metric"`` for mm2."""
    canonical = parse_size(size)
    return "metric" if canonical.endswith(" mm2") else "awg"


# --- installations ---------------------------------------------------------------------


@dataclass(frozen=True)
class Installation:
    """How the single conductors of a circuit lie, from ``installations.toml``."""

    name: str
    spacing_factor: float         # axial spacing s = factor x insulated diameter
    reactance_multiplier: float   # magnetic raceway (steel conduit) about 1.25

    def __post_init__(self) -> None:
        if not (self.spacing_factor >= 1.0 and self.reactance_multiplier >= 1.0):
            raise UnitError(f"installations.toml: [{self.name}] needs spacing_factor >= 1 "
                            "and reactance_multiplier >= 1")


@functools.cache
def _installations() -> dict[str, Installation]:
    with open(_HERE / "installations.toml", "rb") as fh:
        data = tomllib.load(fh)
    return {name: Installation(name, float(t["spacing_factor"]),
                               float(t["reactance_multiplier"]))
            for name, t in data.items()}


def installation(name: str) -> Installation:
    """The installation called ``name`` (conduit, ..., buried, direct_buried, free_air)."""
    table = _installations()
    if name not in table:
        raise UnitError(f"unknown installation {name!r} (use one of {', '.join(table)})")
    return table[name]
