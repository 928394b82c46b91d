"""Command line: argument parsing and printing only; the work happens in the modules."""

from __future__ import annotations

import argparse
import gc
import os
import sys
import typing
from collections.abc import Callable, Iterator, Mapping, Sequence
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING

from sizer import CAUTION, __version__
from sizer.errors import InternalError, ScenarioError, SizerError
from sizer.stages import ENV as STAGE_LOG_ENV
from sizer.stages import open_log, stage, write_log

if TYPE_CHECKING:
    from sizer.model import Scenario
    from sizer.optimize import Prepared
    from sizer.outputs import Protected
    from sizer.results import Results

Command = Callable[[argparse.Namespace], int]


def _cmd_loads(args: argparse.Namespace) -> int:
    from sizer.loads import design_segments
    from sizer.rules import load_profile
    from sizer.scenario import load_scenario

    _outputs(args)
    scenario = load_scenario(args.file)
    _outputs(args, scenario)
    profile = load_profile(scenario.rules)
    segments = design_segments(scenario, profile)
    if args.csv:
        from sizer.scenario import schedule_csv_text

        _write_outputs(args, scenario, {"csv": lambda: schedule_csv_text(scenario)})
    print(f"{scenario.title} — design currents ({profile.name})")
    print(f"{'segment':<16} {'from':<16} {'kind':<7} {'V':>6} {'ph':>2} {'I A':>9} "
          f"{'need A':>9} {'device A':>9}")
    for s in segments:
        parent = scenario.nodes[s.parent_index].id if s.parent_index >= 0 else scenario.source.id
        chosen = "*" if s.ocpd_chosen else " "
        print(f"{s.id:<16} {parent:<16} {s.kind:<7} {s.voltage_v:6.0f} {s.phases:2d} "
              f"{s.current_a:9.1f} {s.required_ampacity_a:9.1f} {s.ocpd_a:8.0f}{chosen}")
    print("* device rating chosen by sizer (none given)")
    print(CAUTION)
    return 0


def _cmd_reach(args: argparse.Namespace) -> int:
    from sizer.reach import conductor_reach
    from sizer.rules import load_profile
    from sizer.rules.profile import table_status_line
    from sizer.units import M_PER_FT

    result = conductor_reach(
        args.conductor, voltage_v=args.voltage, phases=args.phases, limit_pct=args.limit,
        insulation_c=args.insulation, current_a=args.current, ocpd_a=args.ocpd,
        power_factor=args.power_factor, ambient_c=args.ambient, rules=args.rules,
        installation=args.installation, terminal_c=args.terminals,
        conductor_temperature_c=args.conductor_temperature,
    )
    # A run over its ampacity or unprotected has no reach worth giving: say so, exit 1
    # (the readers have already refused values no circuit could have).
    for line in result.warnings:
        print(f"sizer: warning: {line}", file=sys.stderr)
    code = 1 if result.warnings else 0
    if args.json:
        from sizer.report.export import json_text

        print(json_text({
            "reach_m": result.reach_m,
            "design_current_a": result.design_current_a,
            "current_basis": result.current_basis,
            "ampacity_a": result.ampacity_a,
            "conductor_temperature_c": result.conductor_temperature_c,
            "r_ohm_per_km": result.r_ohm_per_km,
            "x_ohm_per_km": result.x_ohm_per_km,
            "warnings": list(result.warnings),
            "table_status": result.table_status,
        }), end="")
        return code
    print(f"{args.conductor} at {result.design_current_a:.1f} A, {args.voltage:g} V "
          f"{args.phases}-phase, drop limit {args.limit:g} %:")
    print(f"  current      {result.current_basis}")
    print(f"  reach        {result.reach_m:.1f} m ({result.reach_m / M_PER_FT:.0f} ft)")
    print(f"  ampacity     {result.ampacity_a:.0f} A ({args.rules})")
    print(f"  running at   {result.conductor_temperature_c:.1f} degC "
          f"({result.conductor_temperature_c * 9 / 5 + 32:.0f} degF)")
    print(f"  R {result.r_ohm_per_km:.4f} ohm/km ({result.r_ohm_per_km * M_PER_FT:.4f} "
          f"ohm/kft), X {result.x_ohm_per_km:.4f} ohm/km "
          f"({result.x_ohm_per_km * M_PER_FT:.4f} ohm/kft)")
    if line := table_status_line(load_profile(args.rules)):
        print(f"  tables       {line}")
    print(CAUTION)
    return code


_OUTPUT_OPTIONS = ("json", "csv", "xlsx", "report")


def _named_outputs(args: argparse.Namespace) -> list[tuple[str, str]]:
    """(option, path) of every output named on the command line."""
    return [(f"--{name}", value) for name in _OUTPUT_OPTIONS
            if isinstance(value := getattr(args, name, None), str)]


def _inputs(args: argparse.Namespace, scenario: Scenario | None = None) -> Protected:
    """Every file this run reads: never an output."""
    from sizer.outputs import run_inputs

    return run_inputs(getattr(args, "file", None), scenario)


def _outputs(args: argparse.Namespace, scenario: Scenario | None = None) -> list[Path]:
    """Output paths named on the command line, checked before any work.

    Called once before anything is read (against the named file) and again with every
    file the scenario read (head, CSV schedule, price list), so an input is never
    overwritten and no output is written when another would be refused.
    """
    from sizer.outputs import check_outputs

    return check_outputs(_named_outputs(args), _inputs(args, scenario))


def _write_outputs(args: argparse.Namespace, scenario: Scenario,
                   makers: Mapping[str, Callable[[], str | bytes]]) -> None:
    """Make every named output and write them together: all appear, or none changes."""
    from sizer.outputs import Staged

    with stage("write"), Staged(_inputs(args, scenario)) as staged:
        for name, make in makers.items():
            path = getattr(args, name, None)
            if isinstance(path, str):
                with stage(name):
                    staged.add(path, make())


def _design_makers(args: argparse.Namespace, results: Results,
                   extra: dict | None = None) -> dict[str, Callable[[], str | bytes]]:
    from sizer.report.export import json_text, schedule_csv, xlsx_bytes

    return {"json": lambda: json_text(results.document(extra)),
            "csv": lambda: schedule_csv(results.design),
            "xlsx": lambda: xlsx_bytes(results.design)}


def _written(args: argparse.Namespace) -> list[str]:
    """The data files this run wrote that hold the whole schedule (for the summary)."""
    return [p for p in (getattr(args, "csv", None), getattr(args, "xlsx", None),
                        getattr(args, "json", None)) if isinstance(p, str)]


def _rows(text: str) -> int | None:
    """``--rows``: a count of schedule rows to print, or "all"."""
    if text.strip().lower() == "all":
        return None
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"expected a whole number or 'all', got {text!r}") from None
    if value < 0:
        raise argparse.ArgumentTypeError(f"must be 0 or more, got {value}")
    return value


def _prepare(args: argparse.Namespace, *, keep_pins: bool = False) -> Prepared:
    from sizer.optimize import prepare
    from sizer.scenario import load_scenario

    with stage("read"):
        scenario = load_scenario(args.file)
        _outputs(args, scenario)
    return prepare(scenario, keep_pins=keep_pins)


def _run_notes(prep: Prepared) -> list[str]:
    """Circuit assumptions and the profile's stand-in / from-memory tables, for the console."""
    from sizer.loads import circuit_notes
    from sizer.rules.profile import table_status_line

    notes = list(circuit_notes(prep.segments))
    if line := table_status_line(prep.profile):
        notes.append(line)
    return notes


def _cmd_solve(args: argparse.Namespace) -> int:
    from sizer.optimize import Objective
    from sizer.report.terminal import summary
    from sizer.results import REPORT_FRONTIER_POINTS, solve_results

    _outputs(args)
    with _progress(args) as say:
        say("reading the scenario and building candidates")
        prep = _prepare(args)
        say(f"solving {len(prep.segments)} segments, {len(prep.table)} candidates")
        results = solve_results(prep, Objective(args.objective), engine=args.engine,
                                solver=args.solver, time_limit_s=args.time_limit,
                                motor_start=args.motor_start, compare=bool(args.report),
                                frontier_points=REPORT_FRONTIER_POINTS if args.report else 0,
                                progress=say)
        say("writing files")
        # What the solve built lives to the end of the run: keep the collector from
        # walking it again while the outputs are written (0.1-0.4 s at 20,000 runs).
        gc.freeze()
        makers = _design_makers(args, results)
        if args.report:   # an infeasible design's report carries its diagnosis
            from sizer.report.html import render_report

            makers["report"] = lambda: render_report(results, progress=say)
        _write_outputs(args, prep.scenario, makers)
    with stage("summary"):
        print(summary(results.design, prep.scenario.title, max_rows=args.rows,
                      written=_written(args), notes=_run_notes(prep)))
    return 0 if results.design.segments else 1


def _cmd_check(args: argparse.Namespace) -> int:
    from sizer.model import DesignStatus
    from sizer.report.terminal import summary
    from sizer.results import check_results

    _outputs(args)
    prep = _prepare(args, keep_pins=True)
    results = check_results(prep, engine=args.engine, solver=args.solver,
                            time_limit_s=args.time_limit)
    _write_outputs(args, prep.scenario, _design_makers(args, results))
    print(summary(results.design, prep.scenario.title, max_rows=args.rows,
                  written=_written(args), notes=_run_notes(prep)))
    return 0 if results.status is DesignStatus.COMPLIANT else 1


def _cmd_frontier(args: argparse.Namespace) -> int:
    from sizer.report.export import json_text
    from sizer.workflow import frontier

    _outputs(args)
    with _progress(args) as say:
        prep = _prepare(args)
        with stage("frontier"):
            points = frontier(prep, args.points, engine=args.engine, solver=args.solver,
                              time_limit_s=args.time_limit, progress=say)
    cur = prep.scenario.currency
    if not points:
        print("no feasible design: run `sizer solve` for the diagnosis")
        return 1
    print(f"{prep.scenario.title} — upfront cost against the present value of losses")
    print(f"{'upfront ' + cur:>16} {'loss PV ' + cur:>16} {'lifetime ' + cur:>16}  method")
    for p in points:
        proven = "" if p.proven_optimal else " (not proven)"
        print(f"{p.capex:16,.0f} {p.loss_pv:16,.0f} {p.lifecycle:16,.0f}  {p.method}{proven}")
    print(CAUTION)
    if args.json:
        doc = {"currency": cur, "rules": prep.profile.name, "points": [
            {"capex": p.capex, "loss_pv": p.loss_pv, "lifecycle": p.lifecycle,
             "method": p.method, "parameter": p.parameter,
             "proven_optimal": p.proven_optimal} for p in points]}
        _write_outputs(args, prep.scenario, {"json": lambda: json_text(doc)})
    return 0


def _cmd_sweep(args: argparse.Namespace) -> int:
    from sizer.optimize import Objective
    from sizer.report.sweep_plots import sweep_json_text, sweep_summary_text
    from sizer.scenario import load_scenario
    from sizer.sweep import sweep

    _outputs(args)
    scenario = load_scenario(args.file)
    _outputs(args, scenario)
    with _progress_bar(args) as bar:
        result = sweep(scenario, args.vary, mode=args.mode, objective=Objective(args.objective),
                       jobs=args.jobs, scheduler=args.scheduler, progress=bar,
                       engine=args.engine, solver=args.solver, time_limit_s=args.time_limit)
    makers: dict[str, Callable[[], str | bytes]] = {"json": lambda: sweep_json_text(result)}
    if args.report:
        from sizer.report.sweep_plots import sweep_section_html
        from sizer.results import REPORT_FRONTIER_POINTS, solve_results

        # The sweep's own baseline (the scenario's values) is the report's design.
        base = result.baseline_results
        assert base is not None   # a sweep without a baseline design raised already
        results = solve_results(base.prep, Objective(args.objective), engine=args.engine,
                                solver=args.solver, time_limit_s=args.time_limit,
                                compare=True, frontier_points=REPORT_FRONTIER_POINTS,
                                design=base.design, verification=base.verification)
        from sizer.report.html import render_report

        makers["report"] = lambda: render_report(
            results, extra_sections=[sweep_section_html(result)])
    _write_outputs(args, scenario, makers)
    print(sweep_summary_text(result))  # ends with the caution
    if result.interrupted:
        print("interrupted: the points finished so far are kept above", file=sys.stderr)
        return 130
    return 0


@contextmanager
def _progress_bar(args: argparse.Namespace) -> Iterator[Callable[[int, int], None]]:
    """A progress bar on stderr for work counted in points."""
    if getattr(args, "quiet", False) or not sys.stderr.isatty():
        yield lambda _done, _total: None
        return
    from rich.progress import Progress

    with Progress(transient=True) as progress:
        task = progress.add_task("sweep", total=None)

        def update(done: int, total: int) -> None:
            progress.update(task, completed=done, total=total)

        yield update


def _cmd_demo(args: argparse.Namespace) -> int:
    from sizer.demo import run_demo
    from sizer.report.terminal import summary

    with _progress(args) as say:
        result = run_demo(Path(args.folder), force=args.force, progress=say)
    print(summary(result.design, result.title, max_rows=args.rows,
                  written=[result.schedule_csv, result.results_json]))
    print(f"\nwrote in {result.seconds:.1f} s:")
    for path in result.files:
        print(f"  {path}")
    print(f"open {result.report} in a browser for the full report")
    return 0


def _cmd_bench(args: argparse.Namespace) -> int:
    from sizer.bench import default_cases, run_bench, table_text, write_json

    sizes = list(args.sizes) if args.sizes else [5000, 20000, 100000]
    cases = default_cases(sizes, chain=args.chain, panel=args.panel)
    _outputs(args)
    with _progress(args) as say:
        doc = run_bench(cases, compare_sizes=[n for n in (1000, 5000) if n <= max(sizes)]
                        or [min(sizes)], milp_limit_s=args.milp_time_limit,
                        repeats=args.repeats, case_timeout_s=args.case_timeout,
                        progress=say)
    print(table_text(doc))
    if args.json:
        write_json(doc, args.json)
    return 0


@contextmanager
def _progress(args: argparse.Namespace) -> Iterator[Callable[[str], None]]:
    """Progress lines on stderr for long work (quiet with --quiet)."""
    if getattr(args, "quiet", False) or not sys.stderr.isatty():
        yield lambda _msg: None
        return
    from rich.console import Console

    console = Console(stderr=True)
    with console.status("working") as status:
        yield lambda msg: status.update(msg)


# --- command-line values: read by the scenario's bounded readers ----------------------------

MAX_SECONDS = 7 * 86400.0     # a week: beyond it a time limit is a typo
MAX_POINTS = 500              # frontier points
MAX_JOBS = 1024               # worker processes
MAX_REPEATS = 100             # benchmark runs per case
MAX_BENCH_NODES = 1_000_000   # deep-chain and wide-panel cases


def _option(read: Callable[[str], object]) -> Callable[[str], object]:
    """An argparse type from a bounded reader: its ScenarioError becomes argparse's one line."""
    def parse(text: str) -> object:
        try:
            return read(text)
        except ScenarioError as exc:
            raise argparse.ArgumentTypeError(exc.message) from None
    parse.__name__ = getattr(read, "__name__", "value")
    return parse


def _scenario_reader(name: str) -> Callable[[str], object]:
    """The scenario's reader ``name`` applied to command-line text."""
    def read(text: str) -> object:
        from sizer import readers

        return getattr(readers, name)(text, True)
    read.__name__ = name
    return read


def _bounded_count(low: int, high: int, what: str) -> Callable[[str], int]:
    def read(text: str) -> int:
        from sizer.readers import read_number

        x = read_number(text, True)
        if not (x.is_integer() and low <= x <= high):
            raise ScenarioError(f"must be a whole number of {what} from {low:,} to {high:,}, "
                                f"got {text!r}")
        return int(x)
    return read


def _seconds(text: str) -> float:
    from sizer.readers import read_number

    x = read_number(text, True)
    if not 0 < x <= MAX_SECONDS:
        raise ScenarioError(f"must be a positive number of seconds up to {MAX_SECONDS:g} "
                            f"(a week), got {text!r}")
    return x


def _sizes(text: str) -> list[int]:
    from sizer.validation import MAX_NODES

    read = _bounded_count(10, MAX_NODES, "segments")
    parts = text.split(",")
    if not all(p.strip() for p in parts):
        raise ScenarioError(f"write segment counts separated by commas, e.g. 100,1000; "
                            f"got {text!r}")
    return [read(p.strip()) for p in parts]


def _drop_limit(text: str) -> float:
    from sizer.readers import read_percent

    x = read_percent(text, True) * 100.0
    if not 0 < x < 100:
        raise ScenarioError(f"must be a percentage above 0 % and below 100 %, got {text!r}")
    return x


def _conductor_temperature(text: str) -> float:
    from sizer.model import AMBIENT_RANGE_C
    from sizer.readers import _quantity, _unit_text

    x = _quantity(_unit_text(text, "75 degC"), "degC")
    if not AMBIENT_RANGE_C[0] <= x <= 300:
        raise ScenarioError(f"must be a conductor temperature from {AMBIENT_RANGE_C[0]:g} degC "
                            f"to 300 degC, got {text!r}")
    return x


def _conductor(text: str) -> object:
    from sizer.units import parse_conductor

    return parse_conductor(text)


class _Parser(argparse.ArgumentParser):
    """argparse with a one-line error: bad input is one line and exit code 2."""

    def error(self, message: str) -> typing.NoReturn:
        head, sep, rest = message.partition(": ")
        if head.startswith("argument ") and sep:   # "argument --points: ..." names the option
            message = f"option '{head.removeprefix('argument ')}': {rest}"
        self.exit(2, f"{self.prog}: {message} (see {self.prog} --help)\n")


def build_parser() -> argparse.ArgumentParser:
    """The argument parser for every subcommand."""
    parser = _Parser(
        prog="sizer",
        description="Least-cost conductor sizing for low-voltage distribution trees.",
        epilog=CAUTION,
    )
    parser.add_argument("--version", action="version", version=f"sizer {__version__}")
    sub = parser.add_subparsers(dest="command", required=True)

    p = sub.add_parser("loads", help="read a scenario and print every segment's design current")
    p.add_argument("file", help="scenario file (.toml, or .csv schedule)")
    p.add_argument("--csv", help="also write the nodes back as a CSV schedule here")
    p.set_defaults(run=_cmd_loads)

    def solver_options(p: argparse.ArgumentParser) -> None:
        p.add_argument("--engine", default="auto", choices=("auto", "tree", "milp"))
        p.add_argument("--solver", default="cbc", choices=("cbc", "highs"))
        p.add_argument("--time-limit", type=_option(_seconds), default=300.0,
                       help="seconds for the MILP (default 300); past it the best design "
                            "found is returned with status time_limit and its gap")
        p.add_argument("--quiet", action="store_true", help="no progress display")

    p = sub.add_parser("solve", help="size every run of a scenario at least cost")
    p.add_argument("file", help="scenario file")
    p.add_argument("--objective", default="lifecycle", choices=("capex", "lifecycle"))
    p.add_argument("--json", help="write the results document here")
    p.add_argument("--csv", help="write the schedule as CSV here")
    p.add_argument("--xlsx", help="write the schedule as XLSX here (needs sizer[xlsx])")
    p.add_argument("--report", help="write the HTML report here")
    p.add_argument("--rows", type=_rows, default=40, metavar="N|all",
                   help="schedule rows to print (default 40; all: every run)")
    p.add_argument("--motor-start", action="store_true",
                   help="size so that every motor's starting dip meets the profile's limit")
    solver_options(p)
    p.set_defaults(run=_cmd_solve)

    p = sub.add_parser("check", help="check the design as pinned against the rules")
    p.add_argument("file", help="scenario file")
    p.add_argument("--json", help="write the results document here")
    p.add_argument("--csv", help="write the schedule as CSV here")
    p.add_argument("--rows", type=_rows, default=40, metavar="N|all",
                   help="schedule rows to print (default 40; all: every run)")
    solver_options(p)
    p.set_defaults(run=_cmd_check)

    p = sub.add_parser("frontier", help="upfront cost against the present value of losses")
    p.add_argument("file", help="scenario file")
    p.add_argument("--points", type=_option(_bounded_count(2, MAX_POINTS, "points")),
                   default=12, help=f"designs on the frontier, 2 to {MAX_POINTS} (default 12)")
    p.add_argument("--json", help="write the frontier here")
    solver_options(p)
    p.set_defaults(run=_cmd_frontier)

    p = sub.add_parser("sweep", help="how the best design moves with energy and metal prices")
    p.add_argument("file", help="scenario file")
    p.add_argument("--vary", action="append", required=True, metavar="FIELD=START:STOP:COUNT",
                   help="a field and its range, with units like the scenario (bare numbers in "
                        "its unit); repeat for a grid. Fields: energy_price, demand_charge, "
                        "escalation, discount_rate, load_growth, lifetime, load_factor, "
                        "loss_load_factor, hours, emission_factor, copper, aluminium")
    p.add_argument("--mode", choices=("grid", "oat"), default="grid",
                   help="every combination, or one field at a time around the scenario's values")
    p.add_argument("--objective", default="lifecycle", choices=("capex", "lifecycle"))
    p.add_argument("--jobs", type=_option(_bounded_count(1, MAX_JOBS, "processes")),
                   default=None,
                   help="worker processes (default: the core count; small sweeps run here)")
    p.add_argument("--scheduler", metavar="ADDRESS",
                   help="run the points on a Dask cluster, e.g. tcp://host:8786 (sizer[dask])")
    p.add_argument("--json", help="write the sweep results here")
    p.add_argument("--report", help="write the HTML report with a sweep section here")
    solver_options(p)
    p.set_defaults(run=_cmd_sweep)

    p = sub.add_parser("demo", help="solve a bundled demo scenario and write its report")
    p.add_argument("folder", nargs="?", default="sizer-demo",
                   help="where to put the scenario and the outputs (default ./sizer-demo)")
    p.add_argument("--force", action="store_true", help="overwrite files from an earlier demo")
    p.add_argument("--rows", type=_rows, default=12, metavar="N|all",
                   help="schedule rows to print (default 12; all: every run)")
    p.add_argument("--quiet", action="store_true", help="no progress display")
    p.set_defaults(run=_cmd_demo)

    p = sub.add_parser("bench", help="time every stage on synthetic trees of growing size")
    p.add_argument("--sizes", type=_option(_sizes),
                   help="comma-separated building sizes in segments "
                        "(default 5000,20000,100000)")
    p.add_argument("--chain", type=_option(_bounded_count(0, MAX_BENCH_NODES, "runs")),
                   default=20000, help="depth of the deep-chain case (0: none; default 20000)")
    p.add_argument("--panel", type=_option(_bounded_count(0, MAX_BENCH_NODES, "circuits")),
                   default=50000,
                   help="circuits of the one-panel case (0: none; default 50000)")
    p.add_argument("--repeats", type=_option(_bounded_count(1, MAX_REPEATS, "runs")), default=1,
                   help="runs per case, each in a fresh process; the fastest is kept")
    p.add_argument("--milp-time-limit", type=_option(_seconds), default=60.0,
                   help="seconds the straightforward MILP may take per size")
    p.add_argument("--case-timeout", type=_option(_seconds), default=1200.0,
                   help="seconds one case may run before it is stopped (default 1200)")
    p.add_argument("--json", help="write the measurements here")
    p.add_argument("--quiet", action="store_true", help="no progress display")
    p.set_defaults(run=_cmd_bench)

    p = sub.add_parser("reach", help="how far one conductor can run within a drop limit")
    p.add_argument("--conductor", required=True, type=_option(_conductor),
                   help='e.g. "4 AWG Cu" or "2x 500 kcmil Al"')
    p.add_argument("--insulation", required=True, type=_option(_scenario_reader(
        "read_temperature")), help='insulation rating, e.g. "90 degC"')
    load = p.add_mutually_exclusive_group(required=True)
    load.add_argument("--current", type=_option(_scenario_reader("read_current")),
                      help='design current, e.g. "50 A"')
    load.add_argument("--ocpd", type=_option(_scenario_reader("read_current")),
                      help="device rating; the profile's unknown-load rule applies")
    p.add_argument("--voltage", required=True, type=_option(_scenario_reader("read_voltage")),
                   help='circuit voltage, e.g. "240 V"')
    p.add_argument("--phases", type=int, choices=(1, 3), required=True)
    p.add_argument("--limit", required=True, type=_option(_drop_limit),
                   help='drop limit, e.g. "3 %%"')
    p.add_argument("--power-factor", type=_option(_scenario_reader("read_fraction")),
                   default=0.9)
    p.add_argument("--ambient", type=_option(_scenario_reader("read_ambient")), default=30.0)
    p.add_argument("--rules", default="nec", choices=("nec", "cec", "iec"))
    p.add_argument("--installation", default="conduit")
    p.add_argument("--terminals", type=_option(_scenario_reader("read_temperature")),
                   help="terminal rating; default: the profile's terminal rule")
    p.add_argument("--conductor-temperature", type=_option(_conductor_temperature),
                   help="fix the conductor temperature instead of deriving it from the load")
    p.add_argument("--json", action="store_true", help="print the answer as JSON")
    p.set_defaults(run=_cmd_reach)
    return parser




class _Terminated(BaseException):
    """SIGTERM, raised where the process is.

    So every ``finally`` and context manager runs: temporary files and staged outputs
    are removed.
    """


def _raise_terminated(_signum: int, _frame: object) -> None:
    raise _Terminated


@contextmanager
def _sigterm_as_exception() -> Iterator[None]:
    """Turn SIGTERM into ``_Terminated`` while a command runs (main thread only)."""
    import signal
    import threading

    if threading.current_thread() is not threading.main_thread():
        yield
        return
    previous = signal.signal(signal.SIGTERM, _raise_terminated)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit code.

    0 done; 1 no design (infeasible, or none found in time) or rule violations; 2 bad
    input; 3 an internal error of sizer's own; 130 interrupted; 141 the output pipe was
    closed; 143 terminated (SIGTERM).
    """
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse already printed its one-line usage error
        return int(exc.code or 0)
    from sizer.safe_text import TerminalStream, for_terminal

    stdout = sys.stdout
    if os.environ.get(STAGE_LOG_ENV):  # `sizer bench` times this very run
        open_log()
    try:
        # Names from the scenario are data: nothing in them may steer the terminal.
        sys.stdout = TerminalStream(stdout)
        with _sigterm_as_exception():
            code = int(args.run(args))
        sys.stdout.flush()  # inside the try: a closed pipe shows here, not at exit
        return code
    except BrokenPipeError:
        # The reader went away (`sizer solve x | head`): stop quietly. Point stdout at
        # the null device so the interpreter's final flush does not complain either.
        _silence_stdout(stdout)
        return 141  # 128 + SIGPIPE, as the shell reports a writer the pipe closed on
    except _Terminated:
        print("sizer: terminated", file=sys.stderr)
        return 143  # 128 + SIGTERM, the shell's convention
    except SizerError as exc:
        # A located error already starts with its file; others say who is speaking.
        located = isinstance(exc, ScenarioError) and exc.file
        print(for_terminal(str(exc) if located else f"sizer: {exc}"), file=sys.stderr)
        return exc.exit_code
    except (RecursionError, MemoryError, ArithmeticError, LookupError, TypeError,
            AttributeError, AssertionError) as exc:  # our bug, not the user's input
        if os.environ.get("SIZER_TRACEBACK"):
            raise
        print(for_terminal(f"sizer: internal error: {type(exc).__name__}: {exc} (please "
                           f"report this; SIZER_TRACEBACK=1 shows where)"), file=sys.stderr)
        return InternalError.exit_code
    except OSError as exc:  # disk full, permission denied, read-only folder, ...
        where = f"{exc.filename}: " if exc.filename else ""
        print(for_terminal(f"sizer: {where}cannot read or write: {exc.strerror or exc}"),
              file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("sizer: interrupted", file=sys.stderr)
        return 130
    finally:
        sys.stdout = stdout
        write_log()


def _silence_stdout(stdout: typing.TextIO) -> None:
    """Point the process's stdout at /dev/null so the exit flush cannot fail again."""
    try:
        fd = stdout.fileno()
    except (OSError, ValueError, AttributeError):  # not a real file (a test's StringIO)
        return
    null = os.open(os.devnull, os.O_WRONLY)
    os.dup2(null, fd)
    os.close(null)

if __name__ == "__main__":
    sys.exit(main())
