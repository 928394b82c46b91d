"""Wall time and peak memory of each stage of one command, for `sizer bench`.

The command's own code marks its stages (``with stage("read"):``); nothing is recorded
unless a log is open, so an ordinary run pays one global lookup per stage. `sizer bench`
runs the real command in a fresh process with ``SIZER_STAGE_LOG`` naming a file, and
reads back the record: the times are those of the code path the user runs, not a copy.
"""

from __future__ import annotations

import json
import os
import resource
import sys
import time
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field

__all__ = ["ENV", "StageLog", "count", "open_log", "stage", "write_log"]

ENV = "SIZER_STAGE_LOG"


def _peak_mb() -> float:
    """Peak resident memory of this process so far (MB)."""
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    return peak / (1024 * 1024) if sys.platform == "darwin" else peak / 1024


@dataclass
class StageLog:
    """Seconds, calls and the peak memory after each stage, in first-seen order."""

    seconds: dict[str, float] = field(default_factory=dict)
    calls: dict[str, int] = field(default_factory=dict)
    peak_mb: dict[str, float] = field(default_factory=dict)
    counts: dict[str, float] = field(default_factory=dict)
    started: float = field(default_factory=time.perf_counter)

    def add(self, name: str, seconds: float) -> None:
        """Add one call of a stage, and note the peak memory so far."""
        self.seconds[name] = self.seconds.get(name, 0.0) + seconds
        self.calls[name] = self.calls.get(name, 0) + 1
        self.peak_mb[name] = _peak_mb()

    def document(self) -> dict[str, object]:
        """The record as plain JSON data."""
        return {"stages": [{"stage": k, "seconds": v, "calls": self.calls[k],
                            "peak_mb_after": self.peak_mb[k]}
                           for k, v in self.seconds.items()],
                "counts": dict(self.counts),
                "wall_s": time.perf_counter() - self.started,
                "peak_mb": _peak_mb()}


_log: StageLog | None = None
_stack: list[str] = []


def open_log() -> StageLog:
    """Start recording (the bench, or a test)."""
    global _log
    _log = StageLog()
    return _log


@contextmanager
def stage(name: str) -> Iterator[None]:
    """Time the enclosed block as stage ``name`` (repeated stages add up)."""
    if _log is None:
        yield
        return
    log = _log
    # A stage inside another is recorded under both names ("report/engine"), so the
    # top-level stages add up to the command's wall time.
    _stack.append(name)
    key = "/".join(_stack)
    t0 = time.perf_counter()
    try:
        yield
    finally:
        _stack.pop()
        log.add(key, time.perf_counter() - t0)


def count(name: str, value: float) -> None:
    """Record a size the bench divides by (segments, candidate rows, rounds).

    The first value of a name is kept: the run's own scenario is prepared first, and
    the report's side-by-side options (all copper, …) prepare theirs afterwards.
    """
    if _log is not None:
        _log.counts.setdefault(name, value)


def write_log() -> None:
    """Write the record to the file ``SIZER_STAGE_LOG`` names, if a log is open."""
    path = os.environ.get(ENV)
    if _log is not None and path:
        with open(path, "w", encoding="utf-8") as fh:
            json.dump(_log.document(), fh)
