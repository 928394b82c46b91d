"""Price lists: conductor and labour prices per metre, aligned with a conductor catalogue.

A price list is a CSV file (format in ``costdata/README.md``): ``# key: value`` comment
lines record the currency, the length unit, the metal prices the list was priced at
and the source; then one row per material and size with the price of one conductor
per length unit, the labour to pull one parallel set of a circuit per length unit, and
the conductor's metal mass per length unit (area × density). Giving today's metal
price re-indexes the metal part: price += (today − basis) × metal mass.
"""

from __future__ import annotations

import csv
import math
import re
from collections.abc import Callable, Mapping
from dataclasses import dataclass, replace
from dataclasses import field as _field
from pathlib import Path
from types import MappingProxyType
from typing import Protocol

import numpy as np
import numpy.typing as npt

from sizer.bundled import bundled_folder
from sizer.errors import ScenarioError, UnitError
from sizer.units import MATERIALS, parse_length_m, parse_material, parse_money, parse_size

COLUMNS = ("material", "size", "conductor_price", "labour", "metal_kg")
# Header keys holding the metal price each material's list was priced at.
BASIS_KEYS: dict[str, str] = {"Cu": "copper_price_basis", "Al": "aluminium_price_basis"}
# The scenario's [prices] field that re-indexes each metal (for error locations).
REINDEX_FIELDS: dict[str, str] = {"Cu": "copper", "Al": "aluminium"}
COSTDATA_DIR = bundled_folder("costdata")

_HEADER = re.compile(r"^#\s*(?P<key>[A-Za-z_]+)\s*:\s*(?P<value>.*?)\s*$")

FloatArray = npt.NDArray[np.float64]


class SizeCatalogue(Protocol):
    """What a price list needs of a conductor catalogue: its name and ordered sizes."""

    @property
    def name(self) -> str: ...  # noqa: D102

    @property
    def sizes(self) -> tuple[str, ...]: ...  # noqa: D102


@dataclass(frozen=True)
class PriceList:
    """Prices in ``currency`` per metre, one array entry per catalogue size (NaN = not sold).

    ``conductor_per_m``: one conductor; ``labour_per_m``: pulling one parallel set of a
    circuit, per metre of route; ``metal_kg_per_m``: conductor metal mass of one
    conductor; ``metal_per_kg``: the metal price the conductor prices now stand at.
    """

    currency: str
    source: str
    catalogue: str
    sizes: tuple[str, ...]
    conductor_per_m: Mapping[str, FloatArray]
    labour_per_m: Mapping[str, FloatArray]
    metal_kg_per_m: Mapping[str, FloatArray]
    metal_per_kg: Mapping[str, float]
    # One reducing splice on one conductor of each size (connector, pigtail, labour); NaN
    # where the list has no ``splice`` column or no price: such a conductor is not spliced.
    splice_each: Mapping[str, FloatArray] = _field(default_factory=lambda: MappingProxyType({}))
    raceways: RacewayPrices | None = None  # the ``<list>.raceways.csv`` beside the list
    # ``<list>.terminals.csv`` beside the list: terminal ranges replacing the profile's
    terminals_path: Path | None = None

    def splice(self, material: str) -> FloatArray:
        """Price of one reducing splice on one conductor, over the catalogue's sizes."""
        got = self.splice_each.get(_material(material))
        return got if got is not None else np.full(len(self.sizes), np.nan)
    # insulation family of the product line by material ("thermoplastic" | "thermoset"),
    # from the header's ``insulation_type``; a material not named is not stated
    insulation_type: Mapping[str, str] = _field(default_factory=lambda: MappingProxyType({}))

    def conductor(self, material: str) -> FloatArray:
        """Price of one conductor per metre over the catalogue's sizes."""
        return self.conductor_per_m[_material(material)]

    def labour(self, material: str) -> FloatArray:
        """Labour per metre of route for one parallel set, over the catalogue's sizes."""
        return self.labour_per_m[_material(material)]

    def metal_kg(self, material: str) -> FloatArray:
        """Metal mass of one conductor per metre (kg/m) over the catalogue's sizes."""
        return self.metal_kg_per_m[_material(material)]

    def reindexed(self, metal_per_kg: Mapping[str, float]) -> PriceList:
        """The list with each conductor's metal part moved to new metal prices (per kg).

        price' = price + (new − now) × metal mass per metre, for each material given;
        labour and the other material stay. Raises ScenarioError (field ``copper`` or
        ``aluminium``, or the basis key the list lacks) for an impossible price.
        """
        conductor = dict(self.conductor_per_m)
        now = dict(self.metal_per_kg)
        for mat, new in metal_per_kg.items():
            field = REINDEX_FIELDS[mat]
            if isinstance(new, bool) or not (isinstance(new, int | float)
                                             and math.isfinite(new) and new > 0):
                raise ScenarioError(f"the metal price must be a positive number per kg, got "
                                    f"{new!r}", field=field)
            listed = ~np.isnan(self.conductor_per_m[mat])
            if not listed.any() or new == now[mat]:
                continue
            if not math.isfinite(now[mat]):
                raise ScenarioError(
                    f"cannot re-index {mat} to {new:g} {self.currency}/kg: the price list does "
                    f"not say the price it was priced at ('# {BASIS_KEYS[mat]}: ...')",
                    field=BASIS_KEYS[mat])
            arr = self.conductor_per_m[mat] + (new - now[mat]) * self.metal_kg_per_m[mat]
            low = listed & ~(arr > 0)
            if low.any():
                size = self.sizes[int(np.flatnonzero(low)[0])]
                raise ScenarioError(
                    f"{mat} at {new:g} {self.currency}/kg makes the {size} price not positive "
                    f"(the list was priced at {now[mat]:g} {self.currency}/kg)", field=field)
            arr.setflags(write=False)
            conductor[mat] = arr
            now[mat] = float(new)
        return replace(self, conductor_per_m=MappingProxyType(conductor),
                       metal_per_kg=MappingProxyType(now))

    def sold(self, material: str) -> npt.NDArray[np.bool_]:
        """True where the list prices that size in that material."""
        return ~np.isnan(self.conductor(material))


@dataclass(frozen=True)
class RacewayPrices:
    """Installed price per metre (material + labour) of each raceway type and size.

    ``per_m`` maps (type, size) to money per metre of one raceway — conduit and duct by
    designator ("53"), ``tray`` by width in mm ("300"); ``trench_per_m`` is one trench
    per metre of route (NaN when not priced).
    """

    per_m: Mapping[tuple[str, str], float]
    trench_per_m: float
    source: str

    def price_per_m(self, kind: str, size: str) -> float:
        """Money per metre of one raceway; NaN when the list does not price it."""
        return self.per_m.get((kind, size), math.nan)


def raceway_list_path(price_list: str | Path) -> Path:
    """Where the raceway prices of a price list live: ``demo-us.csv`` → ``demo-us.raceways.csv``."""
    path = Path(price_list)
    return path.with_name(f"{path.stem}.raceways.csv")


def load_raceway_prices(path: str | Path, currency: str) -> RacewayPrices:
    """Read a raceway price CSV, in the project's currency.

    Columns type,size,price,labour: price and labour per length unit of one raceway.
    """
    file = str(path)
    try:
        text = Path(path).read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise ScenarioError(f"cannot read the raceway prices: {exc}", file=file) from exc
    header, table = _split(text)
    if (header.get("currency") or "").strip().upper() != currency.strip().upper():
        raise ScenarioError(f"raceway prices must be in {currency} ('# currency: ...')",
                            file=file, field="currency")
    try:
        m_per_unit = parse_length_m(f"1 {header.get('length_unit', '')}")
    except UnitError:
        raise ScenarioError("the header must say the length unit, e.g. '# length_unit: ft'",
                            file=file, field="length_unit") from None
    parsed = list(csv.reader([line for _, line in table]))
    if not parsed or [c.strip().lower() for c in parsed[0]] != ["type", "size", "price",
                                                                "labour"]:
        raise ScenarioError("raceway prices need columns type,size,price,labour", file=file)
    per_m: dict[tuple[str, str], float] = {}
    trench = math.nan
    for (line, _), cells in zip(table[1:], parsed[1:], strict=True):
        try:
            value = (float(cells[2]) + float(cells[3])) / m_per_unit
        except (ValueError, IndexError):
            raise ScenarioError(f"line {line}: price and labour must be numbers",
                                file=file) from None
        if not (math.isfinite(value) and value >= 0):
            raise ScenarioError(f"line {line}: price and labour must be zero or more",
                                file=file)
        kind, size = cells[0].strip(), cells[1].strip()
        if kind == "trench":
            trench = value
        else:
            per_m[kind, size] = value
    described = header.get("source", "")
    return RacewayPrices(MappingProxyType(per_m), trench,
                         f"{Path(path).name}: {described}" if described else Path(path).name)


def _material(material: str) -> str:
    if material not in MATERIALS:
        raise UnitError(f"unknown conductor material {material!r} (use \"Cu\" or \"Al\")")
    return material


@dataclass(frozen=True)
class _Row:
    line: int
    material: str
    index: int
    conductor: float
    labour: float
    metal_kg: float
    splice: float = math.nan   # one reducing splice on one conductor; NaN: not priced


def load_price_list(
    path: str | Path,
    catalogue: SizeCatalogue,
    currency: str,
    copper_per_kg: float | None = None,
    aluminium_per_kg: float | None = None,
) -> PriceList:
    """Read a price list CSV into per-metre arrays aligned with ``catalogue.sizes``.

    ``currency`` is the project's; the file must be in it. ``copper_per_kg`` and
    ``aluminium_per_kg`` (project currency per kg) re-index the metal part of the
    conductor prices from the basis recorded in the file. Raises ScenarioError naming
    the file and the field on any problem.
    """
    file = str(path)
    currency = currency.strip().upper()
    try:
        text = Path(path).read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise ScenarioError(f"cannot read the price list: {exc}", file=file) from exc

    header, table = _split(text)

    def fail(message: str, field: str | None = None) -> ScenarioError:
        return ScenarioError(message, file=file, field=field)

    file_currency = header.get("currency")
    if not file_currency:
        raise fail("the header must say the currency, e.g. '# currency: USD'", "currency")
    if file_currency.strip().upper() != currency:
        raise fail(f"prices are in {file_currency} but the project uses {currency}; use a "
                   f"price list in {currency} or change the project currency", "currency")
    unit = header.get("length_unit")
    if not unit:
        raise fail("the header must say the length unit, e.g. '# length_unit: ft'",
                   "length_unit")
    try:
        m_per_unit = parse_length_m(f"1 {unit}")
    except UnitError as exc:
        raise fail(f"{unit!r} is not a length unit", "length_unit") from exc
    if not m_per_unit > 0:
        raise fail(f"{unit!r} is not a length unit", "length_unit")

    basis: dict[str, float] = {}
    for mat, key in BASIS_KEYS.items():
        if key in header:
            try:
                basis[mat] = parse_money(header[key], currency, per="kg")
            except UnitError as exc:
                raise fail(f"{exc.message} (write e.g. '9.50 {currency}/kg')", key) from exc
            if not (math.isfinite(basis[mat]) and basis[mat] > 0):
                raise fail(f"metal price basis must be positive, got {header[key]!r}", key)

    rows = _rows(table, catalogue, file)
    n = len(catalogue.sizes)
    conductor: dict[str, FloatArray] = {mat: np.full(n, np.nan) for mat in MATERIALS}
    labour: dict[str, FloatArray] = {mat: np.full(n, np.nan) for mat in MATERIALS}
    metal_kg: dict[str, FloatArray] = {mat: np.full(n, np.nan) for mat in MATERIALS}
    splice: dict[str, FloatArray] = {mat: np.full(n, np.nan) for mat in MATERIALS}
    for row in rows:
        conductor[row.material][row.index] = row.conductor
        labour[row.material][row.index] = row.labour
        metal_kg[row.material][row.index] = row.metal_kg
        splice[row.material][row.index] = row.splice
    _check_complete(rows, catalogue, file)

    metal_per_kg: dict[str, float] = {mat: basis.get(mat, math.nan) for mat in MATERIALS}

    def per_m(arrays: dict[str, FloatArray]) -> Mapping[str, FloatArray]:
        out: dict[str, FloatArray] = {}
        for mat, arr in arrays.items():
            arr = arr / m_per_unit
            arr.setflags(write=False)
            out[mat] = arr
        return MappingProxyType(out)

    described = header.get("source", "")
    splice_each = {}
    for mat, arr in splice.items():
        arr.setflags(write=False)
        splice_each[mat] = arr
    race_path = raceway_list_path(path)
    raceways = load_raceway_prices(race_path, currency) if race_path.is_file() else None
    term_path = Path(path).with_name(f"{Path(path).stem}.terminals.csv")
    families = _insulation_types(header.get("insulation_type"), fail)
    as_listed = PriceList(
        currency=currency,
        source=f"{Path(path).name}: {described}" if described else Path(path).name,
        catalogue=catalogue.name,
        sizes=tuple(catalogue.sizes),
        conductor_per_m=per_m(conductor),
        labour_per_m=per_m(labour),
        metal_kg_per_m=per_m(metal_kg),
        metal_per_kg=MappingProxyType(metal_per_kg),
        splice_each=MappingProxyType(splice_each),
        raceways=raceways,
        terminals_path=term_path if term_path.is_file() else None,
        insulation_type=MappingProxyType(families),
    )
    new = {mat: value for mat, value in (("Cu", copper_per_kg), ("Al", aluminium_per_kg))
           if value is not None}
    try:
        return as_listed.reindexed(new)
    except ScenarioError as exc:
        raise exc.located(file=file) from None


def _split(text: str) -> tuple[dict[str, str], list[tuple[int, str]]]:
    """Split a price file into its ``# key: value`` header and its numbered table lines."""
    header: dict[str, str] = {}
    table: list[tuple[int, str]] = []
    for number, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip()
        if not stripped:
            continue
        if stripped.startswith("#"):
            if m := _HEADER.match(stripped):
                header[m["key"].lower()] = m["value"]
            continue
        table.append((number, line))
    return header, table


def _rows(table: list[tuple[int, str]], catalogue: SizeCatalogue, file: str) -> list[_Row]:
    """Parse and check the table lines; one _Row per material and size."""

    def fail(message: str, field: str | None = None) -> ScenarioError:
        return ScenarioError(message, file=file, field=field)

    if not table:
        raise fail("no column names and no price rows")
    parsed = list(csv.reader([line for _, line in table]))
    columns = [c.strip().lower() for c in parsed[0]]
    for name in COLUMNS:
        if name not in columns:
            raise fail(f"missing column '{name}' (columns: {', '.join(COLUMNS)})", name)
    at = {name: columns.index(name) for name in COLUMNS}
    position = {size: k for k, size in enumerate(catalogue.sizes)}
    rows: list[_Row] = []
    seen: dict[tuple[str, int], int] = {}
    for (line, _), cells in zip(table[1:], parsed[1:], strict=True):
        if len(cells) < len(columns):
            raise fail(f"line {line}: {len(cells)} values for {len(columns)} columns")
        cell = {name: cells[at[name]].strip() for name in COLUMNS}
        try:
            mat = parse_material(cell["material"])
        except UnitError as exc:
            raise fail(f"line {line}: {exc.message}", "material") from exc
        try:
            size = parse_size(cell["size"])
        except UnitError as exc:
            raise fail(f"line {line}: {exc.message}", "size") from exc
        if size not in position:
            raise fail(f"line {line}: size {size} is not in the {catalogue.name} catalogue "
                       f"({catalogue.sizes[0]} … {catalogue.sizes[-1]})", "size")
        k = position[size]
        if (mat, k) in seen:
            raise fail(f"line {line}: {mat} {size} is listed twice (also line "
                       f"{seen[mat, k]})", "size")
        seen[mat, k] = line
        values = {}
        for name, minimum, strict in (("conductor_price", 0.0, True), ("labour", 0.0, False),
                                      ("metal_kg", 0.0, True)):
            try:
                value = float(cell[name])
            except ValueError:
                raise fail(f"line {line} ({mat} {size}): {cell[name]!r} is not a number",
                           name) from None
            if not math.isfinite(value) or value < minimum or (strict and value == minimum):
                need = "positive" if strict else "zero or more"
                raise fail(f"line {line} ({mat} {size}): {cell[name]!r} must be {need}", name)
            values[name] = value
        splice = math.nan
        if "splice" in columns and cells[columns.index("splice")].strip():
            text = cells[columns.index("splice")].strip()
            try:
                splice = float(text)
            except ValueError:
                raise fail(f"line {line} ({mat} {size}): {text!r} is not a number",
                           "splice") from None
            if not (math.isfinite(splice) and splice >= 0):
                raise fail(f"line {line} ({mat} {size}): {text!r} must be zero or more",
                           "splice")
        rows.append(_Row(line, mat, k, values["conductor_price"], values["labour"],
                         values["metal_kg"], splice))
    if not rows:
        raise fail("no price rows")
    return rows


def _check_complete(rows: list[_Row], catalogue: SizeCatalogue, file: str) -> None:
    """Each listed material runs without a gap from its smallest size to the largest."""
    largest = len(catalogue.sizes) - 1
    for mat in MATERIALS:
        listed = {row.index for row in rows if row.material == mat}
        if not listed:
            continue
        missing = sorted(set(range(min(listed), largest + 1)) - listed)
        if missing:
            names = ", ".join(catalogue.sizes[k] for k in missing[:6])
            more = f" and {len(missing) - 6} more" if len(missing) > 6 else ""
            raise ScenarioError(
                f"{mat}: no price for {names}{more} (a material is priced from its smallest "
                f"listed size up to {catalogue.sizes[largest]} without gaps)",
                file=file, field="size")


def bundled_price_list_path(name: str) -> Path:
    """Path of a price list shipped in ``costdata/`` (in the checkout or the wheel).

    Accepts ``"demo-us.csv"``, ``"demo-us"`` or ``"costdata/demo-us.csv"``.
    """
    rel = Path(name)
    if rel.parts and rel.parts[0] == COSTDATA_DIR.name:
        rel = Path(*rel.parts[1:]) if len(rel.parts) > 1 else Path()
    if rel.suffix == "" and rel.name:
        rel = rel.with_suffix(".csv")
    candidate = COSTDATA_DIR / rel
    if rel.name and candidate.is_file():
        return candidate
    shipped = (sorted(p.name for p in COSTDATA_DIR.glob("*.csv")
                      if not p.name.endswith((".raceways.csv", ".terminals.csv")))
               if COSTDATA_DIR.is_dir() else [])
    listing = ", ".join(shipped) if shipped else f"none found in {COSTDATA_DIR}"
    raise ScenarioError(f"no bundled price list {name!r} (bundled: {listing})", field="catalogue")


def resolve_price_list(text: str, scenario_dir: str | Path) -> Path:
    """Find the price list a scenario names: beside the scenario first, then bundled."""
    given = Path(text).expanduser()
    if given.is_absolute():
        if given.is_file():
            return given
        raise ScenarioError(f"price list {text!r} not found", field="catalogue")
    local = Path(scenario_dir) / given
    if local.is_file():
        return local
    try:
        return bundled_price_list_path(text)
    except ScenarioError as exc:
        raise ScenarioError(f"price list {text!r} not found in {Path(scenario_dir)} "
                            f"nor among the bundled lists ({exc.message})",
                            field="catalogue") from None


_FAMILIES = ("thermoplastic", "thermoset")


def _insulation_types(text: str | None,
                      fail: Callable[[str, str], ScenarioError]) -> dict[str, str]:
    """``# insulation_type: thermoset`` or ``Cu thermoplastic, Al thermoset``."""
    if text is None:
        return {}
    words = text.replace(",", " ").split()
    if len(words) == 1 and words[0].lower() in _FAMILIES:
        return {"Cu": words[0].lower(), "Al": words[0].lower()}
    out: dict[str, str] = {}
    if len(words) % 2 == 0:
        for mat, fam in zip(words[::2], words[1::2], strict=True):
            if mat not in ("Cu", "Al") or fam.lower() not in _FAMILIES:
                break
            out[mat] = fam.lower()
        else:
            return out
    raise fail(f"insulation_type must be thermoplastic or thermoset, or per material like "
               f"'Cu thermoplastic, Al thermoset'; got {text!r}", "insulation_type")
