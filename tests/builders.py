"""Small scenario files written by tests, so each case reads like a designer's file."""

from __future__ import annotations

from pathlib import Path

HEAD = """\
[project]
title = "{title}"
rules = "{rules}"
currency = "{currency}"

[economics]
energy_price = "{energy_price}"
discount_rate = "7 %"
escalation = "{escalation}"
lifetime = "25 year"
load_factor = {load_factor}

[defaults]
materials = {materials}
insulation = "{insulation}"
terminals = "75 degC"
max_sets = {max_sets}

[source]
id = "SRC"
voltage = "{voltage}"
phases = 3
fault_current = "22 kA"
x_r = 6
"""


def scenario_text(nodes: str, **head: object) -> str:
    """A whole scenario: the head with ``head`` overrides, then the ``[[node]]`` tables."""
    values = {"title": "test site", "rules": "nec", "currency": "USD",
              "energy_price": "0.12 USD/kWh", "escalation": "0 %", "load_factor": 0.6,
              "materials": '["Cu"]', "insulation": "90 degC", "max_sets": 4,
              "voltage": "480 V"}
    values.update(head)
    return HEAD.format(**values) + "\n" + nodes


def write_scenario(folder: Path, nodes: str, name: str = "site.toml", **head: object) -> Path:
    """Write a scenario file into ``folder`` and return its path."""
    path = folder / name
    path.write_text(scenario_text(nodes, **head), encoding="utf-8")
    return path
