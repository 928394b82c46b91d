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
