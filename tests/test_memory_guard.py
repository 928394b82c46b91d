"""A candidate table too large for the memory refuses in one line, before it is built."""

from __future__ import annotations

import pytest

from sizer.bench import synthetic_scenario
from sizer.candidates import (
    MEMORY_LIMIT_ENV,
    PEAK_BYTES_PER_COMBINATION,
    available_memory_bytes,
    combinations,
    segment_arrays,
)
from sizer.catalogue import load_catalogue
from sizer.cli import main
from sizer.loads import design_segments
from sizer.rules import load_profile
from sizer.scenario import load_scenario


@pytest.fixture()
def tree(tmp_path):
    path = tmp_path / "tree.toml"
    path.write_text(synthetic_scenario(300), encoding="utf-8")
    return path


def test_the_estimate_counts_every_combination(tree):
    scenario = load_scenario(tree)
    profile = load_profile(scenario.rules)
    catalogue = load_catalogue(profile.catalogue)
    segments = design_segments(scenario, profile)
    sa = segment_arrays(segments, profile, catalogue)
    # Copper and aluminium, every size, 1..max_sets sets per run; no shared routes.
    expected = sum(2 * len(catalogue.sizes) * s.node.cable.max_sets for s in segments)
    assert combinations(sa, len(catalogue.sizes), 4) == expected


def test_too_large_a_table_is_one_line_and_exit_2(tree, tmp_path, monkeypatch, capsys):
    monkeypatch.setenv(MEMORY_LIMIT_ENV, "20 MB")
    out = tmp_path / "design.json"
    assert main(["solve", str(tree), "--json", str(out), "--quiet"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1
    assert err.startswith(f"{tree}: the candidate table would need about ")
    assert "but 20 MB is available" in err and "max_sets" in err and MEMORY_LIMIT_ENV in err
    assert not out.exists()                          # nothing half written


def test_a_limit_that_allows_it_changes_nothing(tree, tmp_path, monkeypatch):
    monkeypatch.setenv(MEMORY_LIMIT_ENV, "64 GB")
    assert main(["solve", str(tree), "--json", str(tmp_path / "d.json"), "--quiet"]) == 0


@pytest.mark.parametrize("value", ["lots", "8", "-1 GB", "3 m"])
def test_a_bad_limit_is_one_line(tree, monkeypatch, capsys, value):
    monkeypatch.setenv(MEMORY_LIMIT_ENV, value)
    assert main(["solve", str(tree), "--quiet"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and MEMORY_LIMIT_ENV in err


def test_without_a_limit_the_free_memory_counts(monkeypatch):
    monkeypatch.delenv(MEMORY_LIMIT_ENV, raising=False)
    assert available_memory_bytes() > 0
    assert PEAK_BYTES_PER_COMBINATION > 0
