"""One point of a sweep: the base problem re-priced at other field values."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import replace
from typing import Any

from sizer.candidates import reprice
from sizer.errors import ScenarioError
from sizer.operating import run_profiles
from sizer.optimize import Prepared, economic_params
from sizer.sweep.vary import FIELDS, _field_error

# --- one point's inputs ------------------------------------------------------------------


def base_value(prep: Prepared, name: str) -> float:
    """The scenario's own value of a field, in the field's unit."""
    spec = FIELDS[name]
    if spec.metal:
        return float(prep.prices.metal_per_kg[spec.metal])
    if spec.name == "loss_load_factor":
        return float(prep.economics.theta)
    value = float(getattr(prep.scenario.economics, spec.attr))
    # 0.07 → 7 %, rounded so that 7 / 100 gives back the scenario's 0.07 exactly.
    return float(f"{value * 100.0:.12g}") if spec.percent else value


def prepared_at(base: Prepared, names: Sequence[str], values: Sequence[float]) -> Prepared:
    """The base problem at other field values: same rows, re-priced (no rebuild)."""
    econ_changes: dict[str, Any] = {}
    metal: dict[str, float] = {}
    price_changes: dict[str, Any] = {}
    for name, value in zip(names, values, strict=True):
        spec = FIELDS[name]
        if spec.metal:
            metal[spec.metal] = float(value)
            price_changes[spec.attr] = float(value)
        else:
            # As the scenario reader does: "7 %" → 7 / 100.
            econ_changes[spec.attr] = float(value) / 100.0 if spec.percent else float(value)
    scenario = base.scenario
    try:
        if econ_changes:
            scenario = replace(scenario, economics=replace(scenario.economics, **econ_changes))
        if price_changes:
            scenario = replace(scenario, prices=replace(scenario.prices, **price_changes))
        econ = economic_params(scenario) if econ_changes else base.economics
    except ScenarioError as exc:
        where = _vary_name(exc.field, names)
        shown = ", ".join(f"{n}={v:g}" for n, v in zip(names, values, strict=True))
        raise _field_error(where, f"at {shown}: {exc.message}") from None
    try:
        prices = base.prices.reindexed(metal) if metal else base.prices
    except ScenarioError as exc:
        name = next(f.name for f in FIELDS.values() if f.metal and exc.field in
                    (f.name, f"{f.name}_price_basis"))
        raise _field_error(name, exc.message) from None
    # Each run prices its losses with its own profile (sizer.operating): recomputed when
    # the economics move; the operating currents, and so the peak losses, stay.
    runs = run_profiles(scenario, base.segments, econ) if econ_changes else base.runs
    table = reprice(base.table, base.segments, base.catalogue, prices,
                    runs.loss_pv_per_w(econ))
    return replace(base, scenario=scenario, prices=prices, economics=econ, table=table,
                   runs=runs)


def _vary_name(model_field: str | None, names: Sequence[str]) -> str:
    """The varied field an economics validation error is about."""
    for name in names:
        if model_field and model_field.split(".")[-1] == name:
            return name
    return names[0]
