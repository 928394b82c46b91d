"""One topology serves every walk over the tree: checked against brute-force walks."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from sizer.errors import InternalError
from sizer.topology import Topology


@st.composite
def trees(draw: st.DrawFn) -> np.ndarray:
    n = draw(st.integers(1, 40))
    return np.array([draw(st.integers(-1, i - 1)) for i in range(n)], dtype=np.int64)


def _walk(parent: np.ndarray, s: int) -> list[int]:
    out = []
    while s >= 0:
        out.append(s)
        s = int(parent[s])
    return out[::-1]


@given(trees(), st.data())
def test_walks_agree_with_brute_force(parent: np.ndarray, data: st.DataObject) -> None:
    topo = Topology(parent)
    n = parent.size
    own = np.array(data.draw(st.lists(st.integers(-5, 5), min_size=n, max_size=n)), float)
    for s in range(n):
        path = _walk(parent, s)
        assert topo.path(s) == path
        assert topo.path_sum(own)[s] == own[path].sum()
        assert topo.above_product(own + 10)[s] == np.prod((own + 10)[path[:-1]])
        assert topo.depth[s] == len(path)
        below = [t for t in range(n) if s in _walk(parent, t)]
        assert topo.is_leaf[s] == (below == [s])
        best = max(below, key=lambda t: (own[t], -t))
        assert topo.subtree_argmax(own)[s] == best
        assert list(topo.children[s]) == [t for t in range(n) if parent[t] == s]


def test_subtree_argmax_without_candidates_is_minus_one() -> None:
    topo = Topology(np.array([-1, 0, 0]))
    got = topo.subtree_argmax(np.array([-np.inf, 5.0, -np.inf]))
    assert got.tolist() == [1, 1, -1]


@pytest.mark.parametrize("parent", [[0], [-1, 1], [-1, -2], [[-1]]])
def test_not_parents_first_is_an_internal_error(parent) -> None:
    with pytest.raises(InternalError):
        Topology(np.array(parent))


def test_from_ids_refuses_an_unknown_parent() -> None:
    assert Topology.from_ids(["A", "B"], ["SRC", "A"], "SRC").parent.tolist() == [-1, 0]
    with pytest.raises(InternalError):
        Topology.from_ids(["A", "B"], ["SRC", "X"], "SRC")
