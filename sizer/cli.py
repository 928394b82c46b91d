"""Command line: argument parsing and printing only; the work happens in the modules."""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable, Sequence

from sizer import CAUTION
from sizer.errors import SizerError

Command = Callable[[argparse.Namespace], int]


def _cmd_loads(args: argparse.Namespace) -> int:
    from sizer.loads import design_segments
    from sizer.rules import load_profile
    from sizer.scenario import load_scenario

    scenario = load_scenario(args.file)
    profile = load_profile(scenario.rules)
    segments = design_segments(scenario, profile)
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


def build_parser() -> argparse.ArgumentParser:
    """The argument parser for every subcommand."""
    parser = argparse.ArgumentParser(
        prog="sizer",
        description="Least-cost conductor sizing for low-voltage distribution trees.",
        epilog=CAUTION,
    )
    sub = parser.add_subparsers(dest="command", required=True)

    p = sub.add_parser("loads", help="read a scenario and print every segment's design current")
    p.add_argument("file", help="scenario file (.toml, or .csv schedule)")
    p.set_defaults(run=_cmd_loads)
    return parser




def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit code (0 done, 1 infeasible/violations, 2 bad input)."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse already printed its one-line usage error
        return int(exc.code or 0)
    try:
        return int(args.run(args))
    except SizerError as exc:
        print(f"sizer: {exc}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt:
        print("sizer: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
