"""`sizer bench`: synthetic distribution trees, stage timings and engine ratios.

Trees of a chosen size are written as scenario files (so reading is timed too) with the
mix of a large commercial or industrial site: switchboards, distribution panels, 277 V
and 120 V branch circuits behind lighting transformers, 480 V motor and HVAC branches,
and long feeders to remote panels where the voltage-drop limit binds. Each stage is
timed (median of the repeats) in a fresh process per size, which also gives the peak
memory of that size. The straightforward MILP is timed on the same trees while it
finishes within its time limit, and the tree engine's speed-up is the ratio measured in
the same run.
"""

from __future__ import annotations

import json
import multiprocessing
import os
import platform
import random
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable, Sequence
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import TypeVar

T = TypeVar("T")

STAGES = ("read", "currents", "candidates", "engine", "verify", "report")
# Start-up: a fresh interpreter running a command that needs no optimiser, plotting or
# load flow (issue 17): what a user waits for before sizer starts its work.
STARTUP_COMMANDS: dict[str, tuple[str, ...]] = {
    "help": ("--help",),
    "reach": ("reach", "--conductor", "4 AWG Cu", "--insulation", "90 degC", "--current",
              "50 A", "--voltage", "240 V", "--phases", "1", "--limit", "3 %"),
}

_HEAD = """\
# synthetic benchmark tree ({n} segments, seed {seed}); invented data
[project]
title = "Benchmark tree, {n} segments"
rules = "nec"
currency = "USD"

[economics]
energy_price = "0.12 USD/kWh"
discount_rate = "7 %"
escalation = "2 %"
lifetime = "25 year"
load_factor = 0.55

[defaults]
materials = ["Cu", "Al"]
insulation = "90 degC"
terminals = "75 degC"
max_sets = 4

[source]
id = "UTIL"
voltage = "480 V"
phases = 3
fault_current = "50 kA"
x_r = 8
"""


def synthetic_scenario(n_segments: int, seed: int = 1) -> str:
    """A scenario text with about ``n_segments`` segments (exactly, give or take a panel)."""
    rng = random.Random(seed)
    lines = [_HEAD.format(n=n_segments, seed=seed)]
    count = 0

    def node(**fields: object) -> None:
        nonlocal count
        count += 1
        lines.append("[[node]]")
        lines.extend(f"{key} = {_toml_inline(value)}" for key, value in fields.items())
        lines.append("")

    boards = max(1, n_segments // 300)
    for b in range(boards):
        node(id=f"SB{b}", parent="UTIL", length=f"{rng.randint(20, 60)} ft", ocpd="3000 A",
             max_sets=10)
    p = 0
    while count < n_segments:
        board = f"SB{p % boards}"
        panel = f"P{p}"
        remote = rng.random() < 0.15          # a long feeder where the drop binds
        kind = rng.random()
        if kind < 0.35:
            # Lighting and receptacle panel behind a 480-208Y/120 V transformer.
            tx = f"T{p}"
            node(id=tx, parent=board, length=f"{rng.randint(30, 400 if remote else 150)} ft",
                 transformer={"rating": "112.5 kVA", "secondary": "208 V",
                              "impedance": "4.5 %", "x_r": 3})
            node(id=panel, parent=tx, length="10 ft")
            for c in range(rng.randint(24, 42)):
                if rng.random() < 0.6:
                    node(id=f"{panel}-R{c}", parent=panel, length=f"{rng.randint(20, 160)} ft",
                         phases=1, voltage="120 V", ocpd="20 A")
                else:
                    node(id=f"{panel}-L{c}", parent=panel, length=f"{rng.randint(20, 200)} ft",
                         phases=1, voltage="120 V", load=f"{rng.randint(6, 14)} A",
                         continuous=True)
        else:
            node(id=panel, parent=board, length=f"{rng.randint(40, 700 if remote else 250)} ft")
            for c in range(rng.randint(24, 42)):
                r = rng.random()
                if r < 0.55:
                    node(id=f"{panel}-L{c}", parent=panel, length=f"{rng.randint(30, 300)} ft",
                         phases=1, voltage="277 V", load=f"{rng.randint(6, 15)} A",
                         continuous=True)
                elif r < 0.85:
                    node(id=f"{panel}-M{c}", parent=panel, length=f"{rng.randint(20, 250)} ft",
                         load=f"{rng.choice([2, 4, 7.5, 11, 15])} kW", power_factor=0.85,
                         continuous=True)
                else:
                    node(id=f"{panel}-H{c}", parent=panel, length=f"{rng.randint(20, 150)} ft",
                         load=f"{rng.choice([10, 15, 25])} kVA", power_factor=0.9)
        p += 1
    return "\n".join(lines)


def _toml_inline(value: object) -> str:
    if isinstance(value, dict):
        return "{ " + ", ".join(f"{k} = {_toml_inline(v)}" for k, v in value.items()) + " }"
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_toml_inline(v) for v in value) + "]"
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return f'"{value}"'
    return str(value)


@dataclass
class SizeResult:
    """Timings of one tree size: median seconds per stage, and more."""

    segments: int
    candidates: int = 0
    stages_s: dict[str, float] = field(default_factory=dict)
    total_s: float = 0.0
    tree_engine_s: float = 0.0
    milp_s: float | None = None
    milp_status: str = ""
    milp_gap: float | None = None
    same_optimum: bool | None = None
    milp_excess_pct: float | None = None   # MILP's best objective above the tree optimum
    speedup: float | None = None           # MILP time / tree time (a lower bound if unproven)
    peak_memory_mb: float = 0.0            # the pipeline, before the MILP is tried
    milp_peak_memory_mb: float | None = None
    candidate_rows_per_s: float = 0.0


def _time(fn: Callable[[], T], repeats: int) -> tuple[float, T]:
    """Median wall time of ``repeats`` calls, and the last call's result."""
    times = []
    for _ in range(repeats - 1):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    t0 = time.perf_counter()
    result = fn()
    times.append(time.perf_counter() - t0)
    return statistics.median(times), result


def measure(n_segments: int, repeats: int = 3, milp_limit_s: float = 60.0,
            run_milp: bool = True) -> SizeResult:
    """Time every stage on one synthetic tree (call in a fresh process for memory)."""
    import numpy as np

    from sizer.candidates import build_candidates
    from sizer.catalogue import load_catalogue
    from sizer.engines import solve
    from sizer.loads import design_segments
    from sizer.model import DesignStatus
    from sizer.optimize import Objective, build_problem, design_from_choice, prepare
    from sizer.phases import loss_current_squared_by_phase, neutral_current_squared
    from sizer.report.export import design_document, json_text, schedule_csv
    from sizer.rules import load_profile
    from sizer.scenario import load_scenario
    from sizer.workflow import verify_design, with_verification

    res = SizeResult(n_segments)
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "bench.toml"
        path.write_text(synthetic_scenario(n_segments), encoding="utf-8")
        res.stages_s["read"], _ = _time(lambda: load_scenario(path), repeats)
        scenario = load_scenario(path)
    profile = load_profile(scenario.rules)
    res.stages_s["currents"], _ = _time(lambda: design_segments(scenario, profile), repeats)
    segments = design_segments(scenario, profile)
    prep = prepare(scenario)
    catalogue = load_catalogue(profile.catalogue)
    res.stages_s["candidates"], _ = _time(
        lambda: build_candidates(segments, profile, catalogue, prep.prices,
                                 prep.runs.loss_pv_per_w(prep.economics),
                                 loss_a2=loss_current_squared_by_phase(
                                     prep.segments, prep.runs, prep.phases),
                                 neutral_a=prep.phases.neutral_a,
                                 neutral_a2=neutral_current_squared(
                                     prep.segments, prep.phases)), repeats)
    res.candidates = len(prep.table)
    problem = build_problem(prep, Objective.LIFECYCLE)
    res.stages_s["engine"], sol = _time(lambda: solve(problem, engine="tree"), repeats)
    res.tree_engine_s = res.stages_s["engine"]
    choice = sol.choice
    design = design_from_choice(prep, choice, status=DesignStatus.OPTIMAL, objective="lifecycle",
                                solution=sol)
    res.stages_s["verify"], ver = _time(lambda: verify_design(prep, choice), repeats)
    verified = with_verification(prep, design, choice, ver)
    res.stages_s["report"], _ = _time(
        lambda: (json_text(design_document(verified)), schedule_csv(verified)), repeats)
    res.total_s = sum(res.stages_s.values())
    rows = res.candidates
    res.candidate_rows_per_s = rows / max(res.stages_s["candidates"], 1e-9)
    res.peak_memory_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    if run_milp:
        t0 = time.perf_counter()
        milp = solve(problem, engine="milp", time_limit_s=milp_limit_s)
        res.milp_s = time.perf_counter() - t0
        res.milp_status = milp.status.value
        res.milp_gap = milp.gap
        if milp.has_solution:
            res.same_optimum = bool(np.isclose(milp.objective, sol.objective, rtol=1e-6))
            res.milp_excess_pct = 100.0 * (milp.objective / sol.objective - 1.0)
        res.speedup = res.milp_s / max(res.tree_engine_s, 1e-9)
        res.milp_peak_memory_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    return res


def _child(n: int, repeats: int, milp_limit_s: float, run_milp: bool, queue) -> None:
    try:
        queue.put(("ok", asdict(measure(n, repeats, milp_limit_s, run_milp))))
    except BaseException as exc:  # report, do not hang the parent
        queue.put(("error", f"{type(exc).__name__}: {exc}"))


def startup_s(repeats: int = 3) -> dict[str, float]:
    """Median wall time of each start-up command in a fresh interpreter (s)."""
    out = {}
    for name, argv in STARTUP_COMMANDS.items():
        cmd = [sys.executable, "-m", "sizer.cli", *argv]
        out[name], _ = _time(lambda cmd=cmd: subprocess.run(  # type: ignore[misc]
            cmd, capture_output=True, check=True, timeout=120), max(repeats, 1))
    return out


def run_bench(sizes: Sequence[int] = (100, 1000, 5000, 20000), repeats: int = 3,
              milp_limit_s: float = 60.0, progress: Callable[[str], None] = lambda s: None,
              ) -> dict[str, object]:
    """Measure every size in its own process; the MILP stops being tried once it times out.

    Start-up (``sizer --help``, ``sizer reach``) is timed first, each in a fresh process.
    """
    progress("bench: start-up")
    startup = startup_s(repeats)
    ctx = multiprocessing.get_context("spawn")
    results = []
    milp_ok = True
    for n in sizes:
        progress(f"bench: {n} segments")
        queue = ctx.Queue()
        proc = ctx.Process(target=_child, args=(n, repeats, milp_limit_s, milp_ok, queue))
        proc.start()
        status, payload = queue.get()
        proc.join()
        if status != "ok":
            raise RuntimeError(f"benchmark at {n} segments failed: {payload}")
        results.append(payload)
        if payload["milp_s"] is not None and payload["milp_status"] != "optimal":
            milp_ok = False  # it no longer finishes: larger trees would only time out
    return {
        "machine": {"cores": os.cpu_count(), "python": platform.python_version(),
                    "platform": platform.platform()},
        "repeats": repeats,
        "startup_s": startup,
        "milp_time_limit_s": milp_limit_s,
        "sizes": results,
    }


def table_text(doc: dict[str, object]) -> str:
    """The benchmark as a fixed-width table."""
    lines = [f"{'segments':>9} {'cands':>9} " + " ".join(f"{s:>10}" for s in STAGES)
             + f" {'total s':>8} {'rows/s':>10} {'MB':>6} {'MILP s':>8} {'speed-up':>9}"]
    for r in doc["sizes"]:  # type: ignore[attr-defined]
        milp = "-" if r["milp_s"] is None else f"{r['milp_s']:.2f}"
        if r["milp_s"] is not None and r["milp_status"] != "optimal":
            milp = f">{r['milp_s']:.0f}"
        speed = "-" if r["speedup"] is None else f"{r['speedup']:.0f}x"
        if r["speedup"] is not None and r["milp_status"] != "optimal":
            speed = f">={r['speedup']:.0f}x"
        lines.append(
            f"{r['segments']:>9} {r['candidates']:>9} "
            + " ".join(f"{r['stages_s'][s]:>10.3f}" for s in STAGES)
            + f" {r['total_s']:>8.2f} {r['candidate_rows_per_s']:>10.3g} "
            f"{r['peak_memory_mb']:>6.0f} {milp:>8} {speed:>9}")
    cores = doc["machine"]["cores"]  # type: ignore[index]
    startup = doc.get("startup_s")
    if isinstance(startup, dict) and startup:
        lines.append("start-up, fresh process, wall: " + ", ".join(
            f"sizer {name} {seconds:.2f} s" for name, seconds in startup.items()))
    for r in doc["sizes"]:  # type: ignore[attr-defined]
        if r["milp_excess_pct"] is not None:
            lines.append(f"{r['segments']:>9}: MILP {r['milp_status']}, its best design "
                         f"{r['milp_excess_pct']:+.3f} % against the tree engine's optimum")
    lines.append(f"median of {doc['repeats']} runs per stage; {cores} cores; MILP = CBC on "
                 f"the same problem, time limit {doc['milp_time_limit_s']:g} s "
                 f"(>= : it did not finish, so the speed-up is at least that)")
    return "\n".join(lines)


def write_json(doc: dict[str, object], path: str | Path) -> None:
    """Write the benchmark document."""
    from sizer.report.export import atomic_write

    atomic_write(path, json.dumps(doc, indent=2, sort_keys=True) + "\n")
