"""The compiled TOML parser reads every scenario exactly as the standard ``tomllib`` does.

``sizer.toml_parse.loads`` uses ``rtoml`` when it is installed and ``tomllib`` (the
reference, TOML 1.0) otherwise or whenever the two could differ; these tests hold the
two paths to the same values and the same errors, word for word.
"""

from __future__ import annotations

import datetime as dt
import sys
import tomllib
from pathlib import Path

import pytest
from hypothesis import given
from hypothesis import strategies as st
from test_malformed import BASE, CASES

from sizer import toml_parse, validation
from sizer.bench import synthetic_scenario
from sizer.bundled import bundled_folder
from sizer.cli import main
from sizer.scenario import load_scenario

BUNDLED = sorted(bundled_folder("scenarios").glob("*.toml"))


def outcome(parse, text: str) -> tuple[str, str]:
    """What a parser makes of ``text``: its value (repr, types included) or its error."""
    try:
        return "value", repr(parse(text))
    except (tomllib.TOMLDecodeError, ValueError, RecursionError) as exc:
        return "error", f"{type(exc).__name__}: {exc}"


@pytest.fixture
def no_compiled_parser(monkeypatch):
    """sizer as on a machine where the compiled parser cannot be imported."""
    monkeypatch.setitem(sys.modules, "rtoml", None)   # "import rtoml" raises ImportError
    assert toml_parse.compiled_parser() is None
    monkeypatch.setattr(toml_parse, "COMPILED", toml_parse.compiled_parser())


def test_the_compiled_parser_is_installed():
    # A dependency of sizer (pyproject.toml): the fast path is the one users run.
    assert toml_parse.COMPILED is not None


@pytest.mark.parametrize("path", [*BUNDLED, "synthetic"], ids=lambda p: getattr(p, "stem", p))
def test_same_values_as_tomllib_on_real_scenarios(path):
    text = synthetic_scenario(1000) if path == "synthetic" else Path(path).read_text("utf-8")
    assert not toml_parse.might_differ(text)   # the compiled parser is really used here
    fast = toml_parse.COMPILED.loads(text)
    assert fast == tomllib.loads(text)
    assert repr(fast) == repr(tomllib.loads(text))   # same types and key order too
    assert toml_parse.loads(text) == fast


@pytest.mark.parametrize("path", BUNDLED, ids=lambda p: p.stem)
def test_same_scenario_without_the_compiled_parser(path, monkeypatch):
    fast = load_scenario(path)
    monkeypatch.setattr(toml_parse, "COMPILED", None)
    assert load_scenario(path) == fast


def test_same_synthetic_tree_without_the_compiled_parser(tmp_path, monkeypatch):
    path = tmp_path / "s1000.toml"
    path.write_text(synthetic_scenario(1000), encoding="utf-8")
    fast = load_scenario(path)
    assert len(fast.nodes) >= 1000
    monkeypatch.setattr(toml_parse, "COMPILED", None)
    assert load_scenario(path) == fast


# Texts where rtoml 0.14 and tomllib disagree if both are asked (checked when written):
# TOML 1.1 additions rtoml accepts, values tomllib reads and rtoml refuses, and date-times
# rtoml builds with its own time-zone class. loads must give tomllib's outcome for each.
DIFFERENT = {
    "escape e": 'a = "\\e"',
    "escape x": 'a = "\\x41"',
    "inline table over lines": 'a = {x = 1,\ny = 2}',
    "inline table, trailing comma": 'a = {x = 1,}',
    "inline table, brace in a string": 'a = {x = "}",\ny = 2}',
    "nested inline table over lines": 'a = {x = {y = 1},\nz = 2}',
    "time without seconds": "a = 07:32",
    "date-time without seconds": "a = 1979-05-27T07:32Z",
    "offset date-time": "a = 1979-05-27T07:32:00-08:00",
    "utc date-time": "a = 1979-05-27T07:32:00Z",
    "local date": "a = 1979-05-27",
    "byte-order mark": "\ufeffa = 1",
    "float overflow": "a = 1e400",
    "duplicate key": "a = 1\na = 2",
    "table twice": "[a]\nx = 1\n[a]\ny = 2",
    "control character in a comment": "a = 1 # \x01",
    "nested too deeply": "a = " + "[" * 3000 + "]" * 3000,
    "huge integer": "a = 99999999999999999999999",
    "escape in a multi-line string": 'a = """\nx\\e"""',
    "inline table after a multi-line string": 'a = """\n"""\nb = {x = 1,\n}',
}


@pytest.mark.parametrize("text", DIFFERENT.values(), ids=DIFFERENT.keys())
def test_tomllib_decides_where_the_parsers_differ(text):
    assert outcome(toml_parse.loads, text) == outcome(tomllib.loads, text)


def test_might_differ_says_no_to_plain_scenario_text():
    assert not toml_parse.might_differ(BASE)
    assert toml_parse.might_differ('a = "\\e"')
    assert toml_parse.might_differ("a = 07:32:00")
    # inside a string a time or a brace is only text
    assert not toml_parse.might_differ('a = "07:32 {"\nb = {x = "}"}')


def test_a_datetime_value_is_refused_the_same_way(tmp_path, capsys, monkeypatch):
    path = tmp_path / "when.toml"
    path.write_text(BASE.replace('title = "Malformed-input fixture"',
                                 "title = 1979-05-27T07:32:00-08:00"), encoding="utf-8")
    assert main(["loads", str(path)]) == 2
    fast = capsys.readouterr().err
    monkeypatch.setattr(toml_parse, "COMPILED", None)
    assert main(["loads", str(path)]) == 2
    assert capsys.readouterr().err == fast
    assert repr(dt.datetime(1979, 5, 27, 7, 32, tzinfo=dt.timezone(dt.timedelta(hours=-8)))
                ) in fast


def _run(path: Path, capsys) -> tuple[int, str, str]:
    code = main(["loads", str(path)])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.mark.parametrize(("name", "text"), [(c[0], c[1]) for c in CASES],
                         ids=[c[0] for c in CASES])
def test_every_malformed_case_reads_the_same_without_the_compiled_parser(
        tmp_path, capsys, monkeypatch, name, text):
    if name == "too-many-nodes":
        monkeypatch.setattr(validation, "MAX_NODES", 3)
    path = tmp_path / "bad.toml"
    path.write_text(text, encoding="utf-8")
    fast = _run(path, capsys)
    monkeypatch.setattr(toml_parse, "COMPILED", None)
    assert _run(path, capsys) == fast


def test_fallback_when_the_compiled_parser_cannot_be_imported(tmp_path, capsys,
                                                             no_compiled_parser):
    # The standard parser alone: a good file reads, a broken one names line and column.
    assert load_scenario(BUNDLED[0]).nodes
    path = tmp_path / "bad.toml"
    path.write_text(BASE.replace("[project]", "[project", 1), encoding="utf-8")
    code, out, err = _run(path, capsys)
    assert code == 2 and out == ""
    assert "is not valid TOML" in err and "(at line 1, column 9)" in err


# Single characters that matter to a TOML lexer, and a few whole constructs where the
# parsers differ, spliced into a valid scenario at random places.
_PIECES = st.sampled_from(['"', "'", "{", "}", "[", "]", "=", ",", "#", "\\", "\n", " ",
                           ".", ":", "-", "0", "7", "e", "x", '"""', "'''", "\\e", "\r",
                           "\x01", "\ufeff", "07:32", "1979-05-27", "inf", "nan", "1e400",
                           "{x = 1,}", "{\n", "true"])


@given(st.lists(st.tuples(st.integers(0, len(BASE)), st.integers(0, 3), _PIECES),
                min_size=1, max_size=4))
def test_spliced_text_reads_as_tomllib_reads_it(edits):
    text = BASE
    for at, cut, piece in edits:
        at = min(at, len(text))
        text = text[:at] + piece + text[at + cut:]
    assert outcome(toml_parse.loads, text) == outcome(tomllib.loads, text)
