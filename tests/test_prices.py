"""Price lists: the bundled demo catalogues, per-metre conversion, metal re-indexing, errors.

The demo prices are invented; what is checked against the world is their metal mass
(area × density: NEC Chapter 9 Table 8 areas, IEC 60228 nominal areas), their sizes,
and their plausibility against NEC Table 310.16 ampacities and IEC 60228 resistances.
"""

from __future__ import annotations

import csv
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from reference_tables import awg_name as _awg_name
from reference_tables import read_reference as _reference

from sizer.catalogue.prices import (
    PriceList,
    bundled_price_list_path,
    load_price_list,
    resolve_price_list,
)
from sizer.errors import ScenarioError, UnitError
from sizer.units import M_PER_FT, parse_size

REFERENCE = Path(__file__).resolve().parent / "reference"
COSTDATA = Path(__file__).resolve().parents[1] / "costdata"

# Densities: Cu 8.89 g/cm³ (IEC 60028) [C], Al 2.703 g/cm³ [M] (shared/reference/README.md).
DENSITY_KG_PER_M3 = {"Cu": 8890.0, "Al": 2703.0}
CMIL_TO_MM2 = np.pi / 4 * 0.0254**2  # 1 cmil = (π/4)(0.0254 mm)², exact


@dataclass(frozen=True)
class StandInCatalogue:
    """Just what a price list needs, for when the real catalogue cannot be imported."""

    name: str
    sizes: tuple[str, ...]
    area_mm2: np.ndarray

    def index(self, size: str) -> int:
        return self.sizes.index(parse_size(size))


def _stand_in(name: str) -> StandInCatalogue:
    if name == "awg":  # NEC Chapter 9 Table 8 sizes and areas [C]
        rows = _reference("nec_ch9_table8.csv")
        return StandInCatalogue("awg", tuple(_awg_name(r["size_awg_kcmil"]) for r in rows),
                                np.array([float(r["area_cmil"]) * CMIL_TO_MM2 for r in rows]))
    rows = _reference("iec60228_class2_max_r20_ohm_per_km.csv")  # IEC 60228 nominal areas [C]
    return StandInCatalogue("metric", tuple(f"{r['mm2']} mm2" for r in rows),
                            np.array([float(r["mm2"]) for r in rows]))


def _catalogue(name: str):  # the real one when it is there, else the stand-in
    try:
        from sizer.catalogue import load_catalogue
    except ImportError:
        return _stand_in(name)
    return load_catalogue(name)


@pytest.fixture(scope="module")
def awg():
    return _catalogue("awg")


@pytest.fixture(scope="module")
def metric():
    return _catalogue("metric")


@pytest.fixture(scope="module")
def us_prices(awg) -> PriceList:
    return load_price_list(bundled_price_list_path("demo-us.csv"), awg, "USD")


@pytest.fixture(scope="module")
def metric_prices(metric) -> PriceList:
    return load_price_list(bundled_price_list_path("demo-metric.csv"), metric, "EUR")


def _raw_rows(path: Path) -> list[dict[str, str]]:
    with open(path, encoding="utf-8") as fh:
        return list(csv.DictReader(line for line in fh if not line.startswith("#")))


# --- the bundled demo lists ------------------------------------------------------------


def test_stand_in_matches_the_contract_sizes() -> None:
    # The stand-in's sizes are the canonical names of CONTRACT.md, smallest to largest.
    assert _stand_in("awg").sizes[0] == "14 AWG" and _stand_in("awg").sizes[-1] == "1000 kcmil"
    assert len(_stand_in("awg").sizes) == 24
    assert _stand_in("metric").sizes[0] == "1.5 mm2" and len(_stand_in("metric").sizes) == 19


@pytest.mark.parametrize(("fixture", "al_from"), [("us_prices", "12 AWG"),
                                                  ("metric_prices", "10 mm2")])
def test_demo_lists_cover_every_size(request, fixture: str, al_from: str) -> None:
    prices: PriceList = request.getfixturevalue(fixture)
    n = len(prices.sizes)
    for mat in ("Cu", "Al"):
        for arr in (prices.conductor(mat), prices.labour(mat), prices.metal_kg(mat)):
            assert arr.shape == (n,)
    assert prices.sold("Cu").all()
    # Aluminium building wire from 12 AWG (common practice); IEC 60228 class 2 Al from 10 mm².
    first_al = prices.sizes.index(al_from)
    np.testing.assert_array_equal(prices.sold("Al"), np.arange(n) >= first_al)


def test_demo_al_sizes_agree_with_the_catalogue(awg, metric, us_prices, metric_prices) -> None:
    for cat, prices in ((awg, us_prices), (metric, metric_prices)):
        if hasattr(cat, "made_in"):  # the real catalogue knows which sizes are made in Al
            np.testing.assert_array_equal(prices.sold("Al"), cat.made_in("Al"))


def test_demo_headers_say_invented_and_units() -> None:
    for name, currency, unit in (("demo-us.csv", "USD", "ft"), ("demo-metric.csv", "EUR", "m")):
        head = [ln for ln in (COSTDATA / name).read_text(encoding="utf-8").splitlines()
                if ln.startswith("#")]
        text = "\n".join(head)
        assert "invented demo data" in text
        assert "replace with your supplier's quotes" in text
        assert f"# currency: {currency}" in text
        assert f"# length_unit: {unit}" in text
        assert "copper_price_basis: " in text and "aluminium_price_basis: " in text
        assert "area × density" in text


def test_source_is_carried(us_prices: PriceList) -> None:
    assert us_prices.source.startswith("demo-us.csv")
    assert "invented demo data" in us_prices.source
    assert us_prices.currency == "USD"
    assert us_prices.metal_per_kg["Cu"] == pytest.approx(9.50)
    assert us_prices.metal_per_kg["Al"] == pytest.approx(2.60)


def test_feet_converted_to_metres(us_prices: PriceList) -> None:
    # 1 ft = 0.3048 m exactly (international foot): USD/ft ÷ 0.3048 = USD/m.
    raw = {(r["material"], r["size"]): r for r in _raw_rows(COSTDATA / "demo-us.csv")}
    row = raw["Cu", "4/0 AWG"]
    k = us_prices.sizes.index("4/0 AWG")
    assert us_prices.conductor("Cu")[k] == pytest.approx(float(row["conductor_price"]) / M_PER_FT)
    assert us_prices.labour("Cu")[k] == pytest.approx(float(row["labour"]) / M_PER_FT)
    assert us_prices.metal_kg("Cu")[k] == pytest.approx(float(row["metal_kg"]) / M_PER_FT)


@pytest.mark.parametrize("name", ["awg", "metric"])
def test_demo_metal_mass_is_area_times_density(name: str, us_prices, metric_prices) -> None:
    # Mass per metre = area (NEC Ch. 9 Table 8 cmil [C] / IEC 60228 nominal mm² [C]) × density.
    ref = _stand_in(name)
    prices = us_prices if name == "awg" else metric_prices
    for mat in ("Cu", "Al"):
        expected = ref.area_mm2 * 1e-6 * DENSITY_KG_PER_M3[mat]
        sold = prices.sold(mat)
        np.testing.assert_allclose(prices.metal_kg(mat)[sold], expected[sold], rtol=2e-4)


@pytest.mark.parametrize("fixture", ["us_prices", "metric_prices"])
def test_demo_prices_are_plausible(request, fixture: str) -> None:
    prices: PriceList = request.getfixturevalue(fixture)
    for mat in ("Cu", "Al"):
        sold = prices.sold(mat)
        price, labour = prices.conductor(mat)[sold], prices.labour(mat)[sold]
        assert np.all(np.diff(price) > 0), "a bigger conductor costs more"
        assert np.all(np.diff(labour) > 0), "a bigger set takes longer to pull"
        # Labour rises slowly: much less than the conductor price does over the range.
        assert labour[-1] / labour[0] < 0.5 * price[-1] / price[0]
        # The metal is most of a large conductor's price, little of a small one's.
        metal = prices.metal_kg(mat)[sold] * prices.metal_per_kg[mat]
        assert 0.2 < metal[-1] / price[-1] < 0.9
        assert metal[0] / price[0] < metal[-1] / price[-1]
    # Al never costs more than Cu of the same size.
    both = prices.sold("Al")
    assert np.all(prices.conductor("Al")[both] < prices.conductor("Cu")[both])


def test_demo_us_al_clearly_cheaper_for_equal_ampacity(us_prices: PriceList) -> None:
    # Equal ampacity from NEC Table 310.16 (2014–2023), 75 °C column ([C] to 600 kcmil,
    # [M] above; only a plausibility check of invented prices): for each Cu size, the
    # smallest Al size with at least its ampacity.
    table = _reference("nec_310_16_ampacity_2014_to_2023.csv")
    pairs = 0
    for row in table:
        cu_amp = float(row["cu_75C"])
        al = [r for r in table if r["al_75C"] and float(r["al_75C"]) >= cu_amp]
        if not al:
            continue  # no Al size carries as much (Cu 700 kcmil and up)
        k_cu = us_prices.sizes.index(_awg_name(row["size"]))
        k_al = us_prices.sizes.index(_awg_name(al[0]["size"]))
        cu = us_prices.conductor("Cu")[k_cu]
        al_price = us_prices.conductor("Al")[k_al]
        assert al_price < 0.7 * cu, (row["size"], al[0]["size"])
        # Installed per metre of a 3-conductor set, labour included: still cheaper.
        assert (3 * al_price + us_prices.labour("Al")[k_al]
                < 3 * cu + us_prices.labour("Cu")[k_cu])
        pairs += 1
    assert pairs >= 18


def test_demo_metric_al_clearly_cheaper_for_equal_resistance(metric_prices: PriceList) -> None:
    # IEC 60228 class 2 maximum resistance at 20 °C [C]: for each Cu size, the smallest Al
    # size with no more resistance (equal loss, roughly equal ampacity) costs clearly less.
    table = _reference("iec60228_class2_max_r20_ohm_per_km.csv")
    pairs = 0
    for row in table:
        al = [r for r in table if r["al"] and float(r["al"]) <= float(row["cu_plain"])]
        if not row["al"] or not al:
            continue  # compare only where class 2 Al is made at that size and an equal exists
        k_cu = metric_prices.sizes.index(f"{row['mm2']} mm2")
        k_al = metric_prices.sizes.index(f"{al[0]['mm2']} mm2")
        assert metric_prices.conductor("Al")[k_al] < 0.7 * metric_prices.conductor("Cu")[k_cu]
        pairs += 1
    assert pairs >= 12


def test_arrays_are_read_only(us_prices: PriceList) -> None:
    with pytest.raises(ValueError):
        us_prices.conductor("Cu")[0] = 0.0
    with pytest.raises(UnitError):
        us_prices.conductor("Fe")


# --- re-indexing to a new metal price -----------------------------------------------------


def test_reindex_moves_only_the_metal_part(awg, us_prices: PriceList) -> None:
    # price' = price + (new − basis) × metal mass: Cu 9.50 -> 10.50 USD/kg adds 1.00 × kg/m.
    new = load_price_list(bundled_price_list_path("demo-us.csv"), awg, "USD", copper_per_kg=10.5)
    np.testing.assert_allclose(new.conductor("Cu") - us_prices.conductor("Cu"),
                               1.0 * us_prices.metal_kg("Cu"), rtol=1e-12)
    np.testing.assert_array_equal(new.conductor("Al"), us_prices.conductor("Al"))
    np.testing.assert_array_equal(new.labour("Cu"), us_prices.labour("Cu"))
    assert new.metal_per_kg["Cu"] == 10.5 and new.metal_per_kg["Al"] == pytest.approx(2.6)
    # 4/0 AWG Cu: 0.290529 kg/ft = 0.953179 kg/m -> +0.953 USD/m
    k = awg.index("4/0 AWG")
    assert new.conductor("Cu")[k] - us_prices.conductor("Cu")[k] == pytest.approx(0.95318,
                                                                               rel=1e-4)


@settings(max_examples=25, deadline=None)
@given(st.floats(min_value=0.5, max_value=8.0))
def test_reindex_aluminium_is_linear(metric, metric_prices: PriceList, al_per_kg: float) -> None:
    new = load_price_list(bundled_price_list_path("demo-metric.csv"), metric, "EUR",
                          aluminium_per_kg=al_per_kg)
    sold = metric_prices.sold("Al")
    np.testing.assert_allclose(
        new.conductor("Al")[sold],
        metric_prices.conductor("Al")[sold]
        + (al_per_kg - 2.40) * metric_prices.metal_kg("Al")[sold],
        rtol=1e-12)
    assert np.all(new.conductor("Al")[sold] > 0)


# --- errors -----------------------------------------------------------------------------

HEADER = """# source: test list
# currency: USD
# length_unit: ft
# copper_price_basis: 9.50 USD/kg
material,size,conductor_price,labour,metal_kg
"""


def _write(tmp_path: Path, text: str, name: str = "list.csv") -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def _cu_rows(catalogue, skip: str | None = None, bad: str | None = None) -> str:
    lines = []
    for k, size in enumerate(catalogue.sizes):
        if size == skip:
            continue
        price = "abc" if size == bad else f"{1.0 + k:.2f}"
        lines.append(f"Cu,{size},{price},0.5,{0.01 * (k + 1):.4f}")
    return "\n".join(lines) + "\n"


def _error(path: Path, catalogue, currency: str = "USD", **kw) -> ScenarioError:
    with pytest.raises(ScenarioError) as info:
        load_price_list(path, catalogue, currency, **kw)
    assert info.value.file == str(path)
    return info.value


def test_small_valid_list_loads(tmp_path: Path, awg) -> None:
    prices = load_price_list(_write(tmp_path, HEADER + _cu_rows(awg)), awg, "usd")
    assert prices.sold("Cu").all() and not prices.sold("Al").any()
    assert prices.conductor("Cu")[0] == pytest.approx(1.0 / M_PER_FT)


def test_wrong_currency(awg) -> None:
    err = _error(bundled_price_list_path("demo-metric.csv"), awg, "USD")
    assert err.field == "currency"
    assert "EUR" in err.message and "USD" in err.message


def test_missing_size(tmp_path: Path, awg) -> None:
    err = _error(_write(tmp_path, HEADER + _cu_rows(awg, skip="250 kcmil")), awg)
    assert err.field == "size" and "250 kcmil" in err.message


def test_bad_number(tmp_path: Path, awg) -> None:
    err = _error(_write(tmp_path, HEADER + _cu_rows(awg, bad="2 AWG")), awg)
    assert err.field == "conductor_price" and "'abc'" in err.message and "2 AWG" in err.message


@pytest.mark.parametrize(("value", "field"), [("-1", "conductor_price"), ("nan", "conductor_price"),
                                              ("0", "conductor_price")])
def test_impossible_number(tmp_path: Path, awg, value: str, field: str) -> None:
    text = HEADER + _cu_rows(awg).replace("Cu,14 AWG,1.00,", f"Cu,14 AWG,{value},")
    assert _error(_write(tmp_path, text), awg).field == field


def test_missing_column(tmp_path: Path, awg) -> None:
    text = (HEADER + _cu_rows(awg)).replace(",metal_kg\n", ",mass\n")
    err = _error(_write(tmp_path, text), awg)
    assert err.field == "metal_kg" and "missing column" in err.message


@pytest.mark.parametrize(("old", "new", "field"), [
    ("# currency: USD\n", "", "currency"),
    ("# length_unit: ft\n", "", "length_unit"),
    ("# length_unit: ft\n", "# length_unit: kg\n", "length_unit"),
    ("# copper_price_basis: 9.50 USD/kg\n", "# copper_price_basis: 9.50 EUR/kg\n",
     "copper_price_basis"),
    ("Cu,14 AWG,", "Fe,14 AWG,", "material"),
    ("Cu,14 AWG,", "Cu,95 mm2,", "size"),      # a metric size in an AWG list
    ("Cu,12 AWG,", "Cu,14 AWG,", "size"),      # listed twice
])
def test_header_and_row_errors(tmp_path: Path, awg, old: str, new: str, field: str) -> None:
    text = (HEADER + _cu_rows(awg)).replace(old, new, 1)
    assert _error(_write(tmp_path, text), awg).field == field


def test_reindex_needs_a_basis(tmp_path: Path, awg) -> None:
    text = (HEADER + _cu_rows(awg)).replace("# copper_price_basis: 9.50 USD/kg\n", "")
    err = _error(_write(tmp_path, text), awg, copper_per_kg=10.0)
    assert err.field == "copper_price_basis"


def test_reindex_refuses_non_positive_prices(tmp_path: Path, awg) -> None:
    # 14 AWG at 0.10 USD/ft with 0.05 kg/ft of copper: at 2.00 USD/kg instead of 9.50 the
    # price would be 0.10 − 7.50 × 0.05 = −0.275 USD/ft.
    text = (HEADER + _cu_rows(awg)).replace("Cu,14 AWG,1.00,0.5,0.0100", "Cu,14 AWG,0.10,0.5,0.05")
    err = _error(_write(tmp_path, text), awg, copper_per_kg=2.0)
    assert err.field == "copper" and "14 AWG" in err.message
    with pytest.raises(ScenarioError) as info:
        load_price_list(bundled_price_list_path("demo-us.csv"), awg, "USD", copper_per_kg=-3.0)
    assert info.value.field == "copper"


def test_unreadable_file(tmp_path: Path, awg) -> None:
    err = _error(tmp_path / "absent.csv", awg)
    assert "cannot read" in err.message


def test_empty_list(tmp_path: Path, awg) -> None:
    assert "no price rows" in _error(_write(tmp_path, HEADER), awg).message


# --- finding a price list -----------------------------------------------------------------


@pytest.mark.parametrize("name", ["demo-us.csv", "demo-us", "costdata/demo-us.csv"])
def test_bundled_path(name: str) -> None:
    assert bundled_price_list_path(name) == COSTDATA / "demo-us.csv"


def test_bundled_path_unknown_lists_what_is_there() -> None:
    with pytest.raises(ScenarioError) as info:
        bundled_price_list_path("nowhere.csv")
    assert info.value.field == "catalogue"
    assert "demo-us.csv" in info.value.message and "demo-metric.csv" in info.value.message


def test_resolve_prefers_the_scenario_folder(tmp_path: Path, awg) -> None:
    local = _write(tmp_path, HEADER + _cu_rows(awg), name="demo-us.csv")
    assert resolve_price_list("demo-us.csv", tmp_path) == local
    assert resolve_price_list("demo-metric.csv", tmp_path) == COSTDATA / "demo-metric.csv"
    assert resolve_price_list("costdata/demo-metric.csv", tmp_path) == \
        COSTDATA / "demo-metric.csv"
    assert resolve_price_list(str(local), "/nonexistent") == local
    with pytest.raises(ScenarioError) as info:
        resolve_price_list("quotes/acme.csv", tmp_path)
    assert info.value.field == "catalogue" and "acme.csv" in info.value.message
