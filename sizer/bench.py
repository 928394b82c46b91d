"""`sizer bench`: the real commands on synthetic trees, stage by stage, against targets.

Three shapes are written as scenario files: buildings of a chosen size with the mix of a
large commercial or industrial site (switchboards, panels, 277 V and 120 V branch
circuits behind lighting transformers, motor and HVAC branches, long feeders where the
drop limit binds), a deep chain (a riser many thousands of runs deep) and one wide
panel. Every case runs the command a user runs (``sizer solve … --json``, with
``--csv --report``, ``sizer frontier``) in a fresh process; the command marks its own
stages (``sizer.stages``), so the bench times the very code path of the CLI, not a copy.
Per stage: seconds, rows per second and the peak memory after it, and the ratio to a
physical floor measured on the same machine (parsing the file alone, one numpy pass per
candidate row, one sort of the rows, one vectorised load-flow sweep, serialising the
rows). The tree engine is also timed against the straightforward MILP on the smaller
buildings, while the MILP finishes within its time limit.
"""

from __future__ import annotations

import json
import multiprocessing
import os
import platform
import random
import statistics
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TypeVar

from sizer.parallel import workers

T = TypeVar("T")

# The top-level stages the CLI marks (sizer.stages), in the order they run.
STAGES = ("read", "currents", "candidates", "engine", "design", "audit", "verify",
          "findings", "alternatives", "frontier", "frontier_verify", "write", "summary")
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




def deep_chain_scenario(depth: int, run_ft: float = 0.5, tap_every: int = 100) -> str:
    """A riser ``depth`` runs deep, runs of ``run_ft`` in series.

    A small 277 V load hangs every ``tap_every`` floors and at the top.
    """
    lines = [_HEAD.format(n=depth, seed=0)]
    parent = "UTIL"
    for i in range(depth):
        lines += ["[[node]]", f'id = "R{i}"', f'parent = "{parent}"',
                  f'length = "{run_ft:g} ft"', ""]
        if i % tap_every == tap_every - 1 or i == depth - 1:
            lines += ["[[node]]", f'id = "L{i}"', f'parent = "R{i}"', 'length = "30 ft"',
                      "phases = 1", 'voltage = "277 V"', 'load = "0.5 A"', ""]
        parent = f"R{i}"
    return "\n".join(lines)


def wide_panel_scenario(circuits: int) -> str:
    """One panel feeding ``circuits`` small 277 V branch circuits."""
    lines = [_HEAD.format(n=circuits, seed=0),
             "[[node]]", 'id = "P"', 'parent = "UTIL"', 'length = "50 ft"',
             'ocpd = "3000 A"', "max_sets = 10", ""]
    for i in range(circuits):
        lines += ["[[node]]", f'id = "B{i}"', 'parent = "P"', f'length = "{20 + i % 180} ft"',
                  "phases = 1", 'voltage = "277 V"', 'load = "0.05 A"', ""]
    return "\n".join(lines)


@dataclass(frozen=True)
class Case:
    """One command on one synthetic tree, with the issue's target for it."""

    name: str
    shape: str            # "building" | "chain" | "panel"
    size: int
    command: tuple[str, ...]   # after "sizer"; FILE and OUT/ stand for the paths
    target_s: float | None = None
    target_mb: float | None = None

    def argv(self, scenario: Path, out: Path) -> list[str]:
        """The command line with the scenario and output folder filled in."""
        return [str(scenario) if a == "FILE" else
                str(out / a[4:]) if a.startswith("OUT/") else a for a in self.command]


SOLVE_JSON = ("solve", "FILE", "--json", "OUT/design.json", "--quiet")
SOLVE_ALL = ("solve", "FILE", "--json", "OUT/design.json", "--csv", "OUT/schedule.csv",
             "--report", "OUT/report.html", "--quiet")


def default_cases(sizes: Sequence[int] = (5000, 20000, 100000), chain: int = 20000,
                  panel: int = 50000) -> list[Case]:
    """The issue's cases: buildings, a deep chain, a wide panel, a 20-point frontier."""
    targets = {20000: (4.0, 1024.0), 100000: (20.0, 4096.0)}
    cases = []
    for n in sizes:
        s, mb = targets.get(n, (None, None))
        cases.append(Case(f"building {n}: solve --json", "building", n, SOLVE_JSON, s, mb))
        if n <= 20000:
            cases.append(Case(f"building {n}: solve --json --csv --report", "building", n,
                              SOLVE_ALL, 10.0 if n == 20000 else None,
                              1024.0 if n == 20000 else None))
        if n == 5000:
            cases.append(Case(f"building {n}: frontier --points 20", "building", n,
                              ("frontier", "FILE", "--points", "20", "--quiet"), 5.0))
    if chain:
        cases.append(Case(f"chain {chain} deep: solve --json --report", "chain", chain,
                          ("solve", "FILE", "--json", "OUT/design.json", "--report",
                           "OUT/report.html", "--quiet"),
                          10.0 if chain == 20000 else None))
    if panel:
        cases.append(Case(f"panel of {panel}: solve --json", "panel", panel, SOLVE_JSON,
                          20.0 if panel == 50000 else None,
                          2048.0 if panel == 50000 else None))
    return cases


def scenario_text(shape: str, size: int) -> str:
    """The scenario of one shape and size."""
    if shape == "chain":
        return deep_chain_scenario(size)
    if shape == "panel":
        return wide_panel_scenario(size)
    return synthetic_scenario(size)


def run_case(case: Case, scenario: Path, out: Path, timeout_s: float | None = None,
             ) -> dict[str, object]:
    """Run the command in a fresh process; its wall time, peak memory and stage log.

    A command still running after ``timeout_s`` is stopped and reported as such.
    """
    log = out / "stages.json"
    env = {**os.environ, "SIZER_STAGE_LOG": str(log)}
    argv = [sys.executable, "-m", "sizer.cli", *case.argv(scenario, out)]
    t0 = time.perf_counter()
    with tempfile.TemporaryFile() as err_file:
        proc = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=err_file, env=env)
        timed_out = False
        while True:
            pid, status, usage = os.wait4(proc.pid, os.WNOHANG)
            if pid:
                break
            if timeout_s is not None and time.perf_counter() - t0 > timeout_s:
                proc.kill()
                _, status, usage = os.wait4(proc.pid, 0)
                timed_out = True
                break
            time.sleep(0.05)
        wall = time.perf_counter() - t0
        proc.returncode = os.waitstatus_to_exitcode(status)
        err_file.seek(0)
        err = err_file.read().decode("utf-8", "replace")
    if timed_out:
        err = f"stopped after {timeout_s:g} s (--case-timeout)"
    stages = json.loads(log.read_text(encoding="utf-8")) if log.exists() else {}
    if log.exists():
        log.unlink()
    outputs = {p.name: p.stat().st_size for p in sorted(out.iterdir()) if p.is_file()}
    return {"case": case.name, "shape": case.shape, "size": case.size,
            "command": "sizer " + " ".join(case.command), "exit_code": proc.returncode,
            "stderr_tail": err.strip().splitlines()[-1:] if proc.returncode else [],
            "timed_out": timed_out,
            "wall_s": wall, "peak_mb": usage.ru_maxrss / 1024,
            "target_s": case.target_s, "target_mb": case.target_mb,
            "stages": stages.get("stages", []), "counts": stages.get("counts", {}),
            "output_bytes": outputs}


def _best_of(fn: Callable[[], object], repeats: int = 3) -> float:
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def physical_floors(scenario: Path, segments: int, rows: int) -> dict[str, float]:
    """Seconds the least work of each stage takes on this machine (its physical floor).

    read: parsing the file alone with the parser the reader uses; currents: one pass of
    30 float64 operations per segment; candidates: 30 float64 operations per candidate
    row (evaluating every candidate once); engine: one sort of the rows by segment, drop
    and cost (a pass of any engine); verify: a vectorised load flow of 8 sweeps of 10
    complex operations per segment; write: serialising one record of 40 numbers per
    segment as JSON.
    """
    import numpy as np

    try:  # the compiled parser when installed, as the reader prefers it
        import rtoml as toml_parser
    except ImportError:
        import tomllib as toml_parser  # type: ignore[no-redef]

    text = scenario.read_text(encoding="utf-8")
    rng = np.random.default_rng(0)
    rows = max(rows, 1)
    a = rng.random(rows)
    b = rng.random(rows)
    seg = np.sort(rng.integers(0, max(segments, 1), rows))

    def ops(x: np.ndarray, y: np.ndarray, k: int) -> None:
        z = x * y
        for _ in range(k - 1):
            z = z * x + y

    def sweeps(x: np.ndarray, k: int) -> None:
        for _ in range(k):
            ops(x, x, 10)

    s = rng.random(max(segments, 1)) + 1j * rng.random(max(segments, 1))
    record = {f"k{i}": 0.123456789 * i for i in range(40)}
    return {
        "read": _best_of(lambda: toml_parser.loads(text), 1),
        "currents": _best_of(lambda: ops(a[:segments].copy(), b[:segments].copy(), 30)),
        "candidates": _best_of(lambda: ops(a, b, 30)),
        "engine": _best_of(lambda: np.lexsort((b, a, seg))),
        "verify": _best_of(lambda: sweeps(s, 8)),
        "write": _best_of(lambda: json.dumps([record] * max(segments, 1))),
    }


def engine_compare(n_segments: int, milp_limit_s: float) -> dict[str, object]:
    """Tree engine and straightforward MILP on one building's problem (same process)."""
    import numpy as np

    from sizer.engines import solve
    from sizer.optimize import Objective, build_problem, prepare
    from sizer.scenario import load_scenario

    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "bench.toml"
        path.write_text(synthetic_scenario(n_segments), encoding="utf-8")
        prep = prepare(load_scenario(path))
    problem = build_problem(prep, Objective.LIFECYCLE)
    t0 = time.perf_counter()
    tree = solve(problem, engine="tree")
    tree_s = time.perf_counter() - t0
    t0 = time.perf_counter()
    milp = solve(problem, engine="milp", time_limit_s=milp_limit_s)
    milp_s = time.perf_counter() - t0
    same = (bool(np.isclose(milp.objective, tree.objective, rtol=1e-6))
            if milp.has_solution else None)
    return {"segments": n_segments, "candidates": problem.n_candidates, "tree_s": tree_s,
            "milp_s": milp_s, "milp_status": milp.status.value, "same_optimum": same,
            "milp_excess_pct": (100.0 * (milp.objective / tree.objective - 1.0)
                                if milp.has_solution else None),
            "speedup": milp_s / max(tree_s, 1e-9)}


def _compare_child(n: int, milp_limit_s: float, queue) -> None:
    try:
        queue.put(("ok", engine_compare(n, milp_limit_s)))
    except BaseException as exc:  # report, do not hang the parent
        queue.put(("error", f"{type(exc).__name__}: {exc}"))


def startup_s(repeats: int = 3) -> dict[str, float]:
    """Median wall time of each start-up command in a fresh interpreter (s)."""
    out = {}
    for name, argv in STARTUP_COMMANDS.items():
        cmd = [sys.executable, "-m", "sizer.cli", *argv]
        times = []
        for _ in range(max(repeats, 1)):
            t0 = time.perf_counter()
            subprocess.run(cmd, capture_output=True, check=True, timeout=120)
            times.append(time.perf_counter() - t0)
        out[name] = statistics.median(times)
    return out


def run_bench(cases: Sequence[Case], *, compare_sizes: Sequence[int] = (1000, 5000),
              milp_limit_s: float = 60.0, repeats: int = 1, case_timeout_s: float = 1200.0,
              progress: Callable[[str], None] = lambda s: None) -> dict[str, object]:
    """Run every case (the fastest of ``repeats`` runs is kept) and the engine comparison."""
    progress("bench: start-up")
    startup = startup_s(max(repeats, 1))
    results = []
    with tempfile.TemporaryDirectory() as tmp:
        for case in cases:
            progress(f"bench: {case.name}")
            scenario = Path(tmp) / f"{case.shape}-{case.size}.toml"
            if not scenario.exists():
                scenario.write_text(scenario_text(case.shape, case.size), encoding="utf-8")
            runs = []
            for _ in range(max(repeats, 1)):
                out = Path(tmp) / "out"
                out.mkdir(exist_ok=True)
                runs.append(run_case(case, scenario, out, case_timeout_s))
                for f in out.iterdir():
                    f.unlink()
            best = min(runs, key=lambda r: float(r["wall_s"]))  # type: ignore[arg-type]
            counts = best["counts"]
            assert isinstance(counts, dict)
            best["floors_s"] = physical_floors(scenario, int(counts.get("segments", 0)),
                                               int(counts.get("candidate_rows", 0)))
            results.append(best)
    compare = []
    ctx = multiprocessing.get_context("spawn")
    for n in compare_sizes:
        progress(f"bench: tree engine against the MILP at {n} segments")
        queue = ctx.Queue()
        proc = ctx.Process(target=_compare_child, args=(n, milp_limit_s, queue))
        proc.start()
        status, payload = queue.get()
        proc.join()
        if status != "ok":
            raise RuntimeError(f"engine comparison at {n} segments failed: {payload}")
        compare.append(payload)
        if payload["milp_status"] != "optimal":
            break  # it no longer finishes: larger trees would only time out
    return {
        "machine": {"cores": os.cpu_count(), "workers": workers(),
                    "python": platform.python_version(),
                    "platform": platform.platform()},
        "repeats": repeats,
        "startup_s": startup,
        "milp_time_limit_s": milp_limit_s,
        "case_timeout_s": case_timeout_s,
        "cases": results,
        "engine_compare": compare,
    }


_RATE_COUNT = {"read": "segments", "currents": "segments", "candidates": "candidate_rows",
               "engine": "candidate_rows", "verify": "segments", "write": "segments"}


def table_text(doc: dict[str, object]) -> str:
    """The benchmark as text: one block per case, one line per stage, then the targets."""
    lines = []
    verdicts = []
    for r in doc["cases"]:  # type: ignore[attr-defined]
        counts = r["counts"]
        head = (f"{r['case']}: {r['wall_s']:.2f} s wall, peak {r['peak_mb']:.0f} MB, "
                f"{int(counts.get('segments', 0)):,} segments, "
                f"{int(counts.get('candidate_rows', 0)):,} candidate rows")
        if r.get("timed_out"):
            head += f" — STOPPED: {' '.join(r['stderr_tail'])}"
        elif r["exit_code"] not in (0, 1):
            head += f" — EXIT {r['exit_code']}: {' '.join(r['stderr_tail'])}"
        lines.append(head)
        lines.append(f"  {'stage':<22} {'s':>8} {'calls':>5} {'rows/s':>10} "
                     f"{'MB after':>8} {'floor s':>8} {'x floor':>7}")
        floors = r["floors_s"]
        for st in r["stages"]:
            name = st["stage"]
            top = name.split("/")[0]
            rate_key = _RATE_COUNT.get(top)
            rate = (f"{counts[rate_key] / max(st['seconds'], 1e-9):10.3g}"
                    if rate_key and rate_key in counts and "/" not in name else f"{'':>10}")
            floor = floors.get(name) if "/" not in name else None
            ratio = ""
            if floor:
                ratio = f"{st['seconds'] / st['calls'] / floor:7.1f}"
            lines.append(f"  {name:<22} {st['seconds']:8.3f} {st['calls']:5d} {rate} "
                         f"{st['peak_mb_after']:8.0f} "
                         f"{'' if not floor else f'{floor:8.3f}':>8} {ratio:>7}")
        sizes = ", ".join(f"{k} {v / 1e6:.1f} MB" for k, v in r["output_bytes"].items())
        if sizes:
            lines.append(f"  files: {sizes}")
        if r["target_s"] is not None:
            ok_s = r["wall_s"] <= r["target_s"]
            ok_mb = r["target_mb"] is None or r["peak_mb"] <= r["target_mb"]
            want = f"<= {r['target_s']:g} s" + (
                f", <= {r['target_mb']:.0f} MB" if r["target_mb"] is not None else "")
            verdicts.append(f"  {'met    ' if ok_s and ok_mb else 'NOT MET'} {r['case']}: "
                            f"{r['wall_s']:.2f} s, {r['peak_mb']:.0f} MB (target {want})")
    if verdicts:
        lines.append("targets:")
        lines.extend(verdicts)
    for c in doc.get("engine_compare", []):  # type: ignore[attr-defined]
        bound = ">=" if c["milp_status"] != "optimal" else ""
        excess = ("" if c["milp_excess_pct"] is None
                  else f", its best {c['milp_excess_pct']:+.3f} % against the tree optimum")
        lines.append(f"engines at {c['segments']} segments: tree {c['tree_s']:.2f} s, MILP "
                     f"{c['milp_s']:.2f} s ({c['milp_status']}{excess}), speed-up "
                     f"{bound}{c['speedup']:.0f}x")
    startup = doc.get("startup_s")
    if isinstance(startup, dict) and startup:
        lines.append("start-up, fresh process, wall: " + ", ".join(
            f"sizer {name} {seconds:.2f} s" for name, seconds in startup.items()))
    cores = doc["machine"]["cores"]  # type: ignore[index]
    side = doc["machine"].get("workers", 1)  # type: ignore[attr-defined]
    lines.append(f"fastest of {doc['repeats']} run(s) per case, each in a fresh process; "
                 f"{cores} cores, {side} worker process(es) for the independent solves "
                 "(frontier weights, options: their own stages are not in the table, "
                 "their wall time is); peak MB is the command's resident peak (the "
                 "largest process; workers share the command's pages); x floor = "
                 "stage seconds per call over the stage's physical floor (sizer.bench."
                 "physical_floors); MILP = CBC, time limit "
                 f"{doc['milp_time_limit_s']:g} s (>= : it did not finish)")
    return "\n".join(lines)


def write_json(doc: dict[str, object], path: str | Path) -> None:
    """Write the benchmark document."""
    from sizer.report.export import atomic_write

    atomic_write(path, json.dumps(doc, indent=2, sort_keys=True) + "\n")
