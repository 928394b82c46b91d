"""The shape of a radial tree, built once: parents, children, depth, paths, subtree sums.

Nodes are numbered parents first (``parent[i] < i``, ``-1`` for a node fed from the
source), so one pass forwards visits every parent before its children and one pass
backwards every child before its parent. Every walk sizer makes over a tree (path sums,
paths, what a segment carries for the loads below it, products of factors above) is
one of the O(n) methods here, never a per-path loop.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from sizer.errors import InternalError


@dataclass(frozen=True, eq=False)  # arrays inside: compare by identity
class Topology:
    """A radial tree given by ``parent`` (int64, parents first, -1 = the source)."""

    parent: np.ndarray
    _parent_list: list[int] = field(init=False, repr=False)

    def __post_init__(self) -> None:
        parent = np.array(self.parent, dtype=np.int64, copy=True)
        idx = np.arange(parent.size)
        if parent.ndim != 1 or np.any((parent >= idx) | (parent < -1)):
            raise InternalError("nodes must be numbered parents first (-1 <= parent[i] < i)",
                                field="parent")
        parent.setflags(write=False)
        object.__setattr__(self, "parent", parent)
        object.__setattr__(self, "_parent_list", parent.tolist())

    @classmethod
    def from_ids(cls, ids: Sequence[str], parents: Sequence[str], root: str) -> Topology:
        """The topology of named nodes listed parents first, fed from ``root``."""
        index = {name: i for i, name in enumerate(ids)}
        parent = [-1 if p == root else index.get(p, len(ids)) for p in parents]
        return cls(np.asarray(parent, dtype=np.int64))

    @property
    def n(self) -> int:
        """Number of nodes."""
        return int(self.parent.size)

    @cached_property
    def children(self) -> tuple[tuple[int, ...], ...]:
        """The children of every node, in order."""
        kids: list[list[int]] = [[] for _ in range(self.n)]
        for i, p in enumerate(self._parent_list):
            if p >= 0:
                kids[p].append(i)
        return tuple(tuple(k) for k in kids)

    @cached_property
    def roots(self) -> tuple[int, ...]:
        """Nodes fed straight from the source."""
        return tuple(np.flatnonzero(self.parent < 0).tolist())

    @cached_property
    def is_leaf(self) -> np.ndarray:
        """True for nodes without children."""
        has = self.parent >= 0
        out = np.bincount(self.parent[has], minlength=self.n) == 0
        out.setflags(write=False)
        return out

    @cached_property
    def depth(self) -> np.ndarray:
        """Runs between the source and each node's far end (1 for a root)."""
        return self.path_sum(np.ones(self.n)).astype(np.int64)

    def path(self, s: int) -> list[int]:
        """The nodes from the source down to ``s``, ``s`` included."""
        chain = []
        while s >= 0:
            chain.append(s)
            s = self._parent_list[s]
        return chain[::-1]

    def path_sum(self, own: np.ndarray | Sequence[float]) -> np.ndarray:
        """Σ ``own`` over the path source → i, for every node i (one forward pass)."""
        total = np.asarray(own, dtype=np.float64).tolist()
        for i, p in enumerate(self._parent_list):
            if p >= 0:
                total[i] += total[p]
        return np.asarray(total)

    def above_product(self, own: np.ndarray | Sequence[float]) -> np.ndarray:
        """Π ``own`` over the strict ancestors of every node (1 for a root)."""
        factor = np.asarray(own, dtype=np.float64).tolist()
        out = [1.0] * self.n
        for i, p in enumerate(self._parent_list):
            if p >= 0:
                out[i] = out[p] * factor[p]
        return np.asarray(out)

    def subtree_argmax(self, own: np.ndarray | Sequence[float]) -> np.ndarray:
        """The node of each subtree (itself included) with the largest ``own``.

        Ties go to the first in numbering; -1 where every value is -inf.
        """
        best = np.asarray(own, dtype=np.float64).tolist()
        arg = [i if best[i] > -np.inf else -1 for i in range(self.n)]
        for i in range(self.n - 1, -1, -1):   # children before parents
            p = self._parent_list[i]
            if p >= 0 and (best[i] > best[p] or (best[i] == best[p] and arg[i] >= 0
                                                 and 0 <= arg[i] < arg[p])):
                best[p], arg[p] = best[i], arg[i]
        return np.asarray(arg, dtype=np.int64)
