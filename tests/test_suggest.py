"""'Did you mean' suggestions come from an index: right answers, bounded work per miss."""

from __future__ import annotations

import difflib

import pytest
from hypothesis import given
from hypothesis import strategies as st

from sizer.validation import Suggester, suggest

IDS = [f"PNL-{i:05d}-{chr(65 + i % 26)}{chr(65 + (i * 7) % 26)}" for i in range(5000)]


def test_small_vocabulary_matches_difflib() -> None:
    assert suggest("feeeder", ["feeder", "branch"]) == " (did you mean 'feeder'?)"
    assert suggest("zzz", ["feeder", "branch"]) == ""


@given(st.sampled_from(IDS), st.sampled_from(["drop", "double", "swap"]))
def test_large_vocabulary_finds_the_id_a_typo_came_from(word: str, typo: str) -> None:
    k = 6
    if typo == "drop":
        miss = word[:k] + word[k + 1:]
    elif typo == "double":
        miss = word[:k] + word[k] + word[k:]
    else:
        miss = word[:k] + word[k + 1] + word[k] + word[k + 2:]
    hint = Suggester(IDS).hint(miss)
    best = difflib.get_close_matches(miss.lower(), [i.lower() for i in IDS], n=1, cutoff=0.6)
    # The indexed answer is as close as the exhaustive one.
    got = hint.split("'")[1].lower()
    ratio = difflib.SequenceMatcher(None, miss.lower(), got).ratio()
    assert ratio == pytest.approx(
        difflib.SequenceMatcher(None, miss.lower(), best[0]).ratio())


def test_work_per_miss_is_bounded(monkeypatch) -> None:
    compared: list[int] = []
    real = difflib.get_close_matches

    def counting(word, possibilities, *a, **k):
        compared.append(len(possibilities))
        return real(word, possibilities, *a, **k)

    monkeypatch.setattr(difflib, "get_close_matches", counting)
    s = Suggester(IDS)
    for word in IDS[:50]:
        s.hint(word + "x")
    assert max(compared) <= Suggester.MAX_COMPARED
