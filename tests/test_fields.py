"""The field registry is the one definition of every scenario key.

The key reference in scenarios/README.md is generated from it, the reader accepts
exactly its keys, and the sweep varies exactly its sweep fields.
"""

from __future__ import annotations

import dataclasses
from pathlib import Path

import pytest
from builders import write_scenario

from sizer import fields, scenario, sweep
from sizer.errors import ScenarioError
from sizer.model import CableSettings, Economics, Motor, Source, Transformer
from sizer.scenario import load_scenario

ROOT = Path(__file__).resolve().parents[1]


def test_key_reference_is_generated_from_the_registry() -> None:
    written = (ROOT / "scenarios" / "README.md").read_text(encoding="utf-8")
    assert written == fields.key_reference(), (
        "scenarios/README.md is stale: run `python -m sizer.fields > scenarios/README.md`")


@pytest.mark.parametrize("key", ["neutral", "clearing_time", "grouping", "core_loss",
                                 "secondary_phases", "power", "emission_factor"])
def test_keys_users_had_to_discover_are_documented(key: str) -> None:
    assert f"| `{key}`" in fields.key_reference()


def test_reader_key_lists_come_from_the_registry() -> None:
    assert scenario.ECONOMICS_KEYS == tuple(f.name for f in fields.in_table("economics"))
    assert set(scenario.NODE_KEYS) == {f.name for f in fields.in_table("node")}
    assert scenario.SCHEDULE_COLUMNS == fields.schedule_columns()
    assert set(sweep.FIELDS) == {f.name for f in fields.FIELDS if f.sweep}


@pytest.mark.parametrize(("table", "model"), [
    ("economics", Economics), ("source", Source), ("transformer", Transformer),
    ("motor", Motor)])
def test_every_field_names_a_real_model_attribute(table: str, model: type) -> None:
    names = {f.name for f in dataclasses.fields(model)}
    for f in fields.in_table(table):
        if f.attr:
            assert f.attr in names, f"{f.key}: {model.__name__} has no {f.attr}"


def test_defaults_come_from_the_registry(tmp_path: Path) -> None:
    nodes = '[[node]]\nid = "P"\nparent = "SRC"\nlength = "10 m"\nload = "10 kW"\n'
    text = write_scenario(tmp_path, nodes).read_text().replace(
        'materials = ["Cu"]\ninsulation = "90 degC"\nterminals = "75 degC"\nmax_sets = 4\n', "")
    (tmp_path / "bare.toml").write_text(text)
    node = load_scenario(tmp_path / "bare.toml").nodes[0]
    cable_fields = {f.name for f in dataclasses.fields(CableSettings)}
    for f in fields.in_table("defaults"):
        if f.attr in cable_fields:
            assert getattr(node.cable, f.attr) == f.default, f.name
    assert node.power_factor == fields.field("node", "power_factor").default


def test_every_required_key_is_reported_with_its_example(tmp_path: Path) -> None:
    site = write_scenario(tmp_path, '[[node]]\nid = "P"\nparent = "SRC"\nlength = "10 m"\n'
                                    'load = "1 kW"\n')
    text = site.read_text().replace('discount_rate = "7 %"\n', "")
    site.write_text(text)
    with pytest.raises(ScenarioError, match=r"economics.discount_rate'?: missing \(e\.g\. "
                                            r"discount_rate = \"7 %\"\)"):
        load_scenario(site)


def test_sweep_refuses_what_the_reader_refuses() -> None:
    with pytest.raises(ScenarioError, match="at most"):
        sweep.parse_vary("copper=1e308:2e308:2", "USD")
    with pytest.raises(ScenarioError, match="load_factor"):
        sweep.parse_vary("load_factor=0.5:1.5:3", "USD")
