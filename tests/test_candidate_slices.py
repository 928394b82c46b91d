"""The candidate table is built in slices of whole runs: the same table, less memory.

Slicing only bounds the work arrays alive at once; every column, the diagnosis and the
order of rows must be those of building the whole grid in one go.
"""

from __future__ import annotations

import itertools
from dataclasses import fields
from pathlib import Path

import numpy as np
import pytest

import sizer.candidates as candidates
from sizer.bench import synthetic_scenario
from sizer.optimize import prepare
from sizer.scenario import load_scenario

SCENARIOS = Path(__file__).parents[1] / "scenarios"


def _same(a: object, b: object) -> bool:
    if isinstance(a, np.ndarray):
        assert isinstance(b, np.ndarray)
        return a.shape == b.shape and a.dtype == b.dtype and bool(
            np.array_equal(a, b, equal_nan=a.dtype.kind in "fc"))
    return a == b


def _prepared(path: Path, monkeypatch, slice_combinations: int):
    monkeypatch.setattr(candidates, "SLICE_COMBINATIONS", slice_combinations)
    return prepare(load_scenario(path))


@pytest.fixture(scope="module")
def building(tmp_path_factory) -> Path:
    path = tmp_path_factory.mktemp("slices") / "building.toml"
    path.write_text(synthetic_scenario(400), encoding="utf-8")
    return path


@pytest.mark.parametrize("name", ["kiln-hall.toml", "hollinmoor-campus.toml",
                                  "kestrel-arena.toml", "building"])
def test_slices_build_the_same_table(name, building, monkeypatch):
    path = building if name == "building" else SCENARIOS / name
    whole = _prepared(path, monkeypatch, 10**12)
    # a few hundred combinations a slice: many slices, some cut between any two runs
    sliced = _prepared(path, monkeypatch, 300)
    for f in fields(whole.table):
        assert _same(getattr(whole.table, f.name), getattr(sliced.table, f.name)), f.name
    for f in fields(whole.local):
        assert _same(getattr(whole.local, f.name), getattr(sliced.local, f.name)), f.name


def test_a_shared_route_is_never_cut(monkeypatch):
    scenario = load_scenario(SCENARIOS / "hollinmoor-campus.toml")
    prep = prepare(scenario)
    sa = candidates.segment_arrays(prep.segments, prep.profile, prep.catalogue)
    per_segment = candidates.segment_combinations(sa, len(prep.catalogue.sizes), 4)
    assert sa.route is not None and (sa.route >= 0).sum() >= 2
    slices = candidates._slices(sa, per_segment, 1)   # cut wherever a cut is allowed
    assert slices[0][0] == 0 and slices[-1][1] == len(prep.segments)
    assert all(a[1] == b[0] for a, b in itertools.pairwise(slices))
    where = np.zeros(len(prep.segments), dtype=np.int64)
    for k, (lo, hi) in enumerate(slices):
        where[lo:hi] = k
    for route in set(sa.route[sa.route >= 0].tolist()):
        assert len(set(where[sa.route == route].tolist())) == 1
    # and everything else is cut run by run
    assert len(slices) > len(prep.segments) // 2


def test_codes_are_narrow_integers(building, monkeypatch):
    table = _prepared(building, monkeypatch, 10**12).table
    assert table.material.dtype == np.int8 and table.sets.dtype == np.int16
    assert table.segment.dtype == np.int32 and table.size_index.dtype == np.int16
    # the values still index every per-segment and per-size array the same way
    assert int(table.segment.max()) == table.offsets.size - 2


def _alone(sa, per_segment, by_length):
    """Every run a kind of its own: the table as if each run were built alone."""
    return np.arange(sa.length_m.shape[0], dtype=np.int64)


@pytest.mark.parametrize("name", ["kiln-hall.toml", "hollinmoor-campus.toml",
                                  "kestrel-arena.toml", "building", "adiabatic"])
def test_runs_alike_but_for_length_share_their_work(name, building, tmp_path, monkeypatch):
    if name == "adiabatic":
        # the adiabatic PE depends on the run's length: such runs must not share it
        text = (SCENARIOS / "hollinmoor-campus.toml").read_text(encoding="utf-8")
        path = tmp_path / "adiabatic.toml"
        path.write_text(text.replace("[defaults]\n", '[defaults]\npe_rule = "adiabatic"\n', 1),
                        encoding="utf-8")
    else:
        path = building if name == "building" else SCENARIOS / name
    shared = prepare(load_scenario(path))
    monkeypatch.setattr(candidates, "_run_kinds", _alone)
    alone = prepare(load_scenario(path))
    for f in fields(shared.table):
        assert _same(getattr(shared.table, f.name), getattr(alone.table, f.name)), f.name
    for f in fields(shared.local):
        assert _same(getattr(shared.local, f.name), getattr(alone.local, f.name)), f.name


def test_kinds_compare_everything_but_length(building):
    prep = prepare(load_scenario(building))
    sa = candidates.segment_arrays(prep.segments, prep.profile, prep.catalogue)
    n = len(prep.segments)
    kind = candidates._run_kinds(sa, (None,), np.zeros(n, dtype=bool))
    assert kind.max() + 1 < n // 4                     # branch circuits share kinds
    for k in np.unique(kind).tolist():
        members = np.flatnonzero(kind == k)
        for f in fields(sa):
            value = getattr(sa, f.name)
            if f.name == "length_m" or value is None:
                continue
            column = np.asarray(value, dtype=object)[members]
            assert all(_same_value(v, column[0]) for v in column), f.name
    # and a run compared by length shares its kind only with runs of its length
    by_length = candidates._run_kinds(sa, (None,), np.ones(n, dtype=bool))
    for k in np.unique(by_length).tolist():
        assert len(set(sa.length_m[by_length == k].tolist())) == 1


def _same_value(a, b) -> bool:
    if isinstance(a, np.ndarray):
        return bool(np.array_equal(a, b, equal_nan=a.dtype.kind in "fc"))
    return bool(a == b or (a != a and b != b))


def test_rows_added_after_the_build_leave_no_second_table_behind():
    # prepare replaces the table by one with larger-PE copies; the table it replaces
    # hands its columns over and is left empty (never two whole tables at once)
    from sizer.earthfault import pe_step_rows, with_larger_pe

    scenario = load_scenario(SCENARIOS / "kiln-hall.toml")
    prep = prepare(scenario)
    table = prep.table
    # a table without its copies, rebuilt from the prepared one's original rows
    original = candidates.take_rows(table, (table.pe_step == 0))
    base = candidates.take_rows(original, np.ones(len(original), dtype=bool))
    rows, size = pe_step_rows(prep.segments, prep.profile, prep.catalogue, base,
                              prep.earth.u0_v, prep.earth.limit_pu, prep.parent)
    assert rows.size
    grown = with_larger_pe(prep.segments, prep.profile, prep.catalogue, prep.prices, base,
                           rows, size, None)
    assert base.segment is None and base.capex is None          # handed over
    assert len(grown) == len(table)
    assert np.array_equal(grown.capex, table.capex) and np.array_equal(grown.pe_step,
                                                                       table.pe_step)


def test_the_loop_in_real_arithmetic_is_the_complex_expression_bit_for_bit():
    rng = np.random.default_rng(7)
    n = 20_000
    line = rng.random(n) * 1e-3 + 1j * rng.random(n) * 2e-4
    pe = rng.random(n) * 2e-3 + 1j * rng.random(n) * 2e-4
    length = rng.random(n) * 300.0
    sets = rng.integers(1, 11, n).astype(np.int16)
    plain = line * length / sets + pe * (length / sets.astype(float))
    assert np.array_equal(candidates.loop_of(line, pe, length, sets), plain)
