"""The ``ventsup`` command: run | check | replay | report | override | status | demo.

Exit status: 0 success, 2 a bad configuration or bad command line, 3 a
subcommand that is not implemented yet.
"""

from __future__ import annotations

import argparse
import os
import sys
from collections.abc import Callable, Sequence
from importlib import metadata

__all__ = ["main"]

EXIT_OK = 0
EXIT_BAD_CONFIG = 2
EXIT_UNFINISHED = 3

_UNFINISHED = {
    "run": "run the controller against the site's MQTT broker",
    "replay": "run the rules over logged data",
    "report": "write the monthly free-cooling report",
    "override": "open, close or hold a zone for a while",
    "status": "show what the running controller is doing",
}


def _version() -> str:
    try:
        return metadata.version("ventsup")
    except metadata.PackageNotFoundError:  # running from a source tree that is not installed
        return "unknown (not installed)"


def _check(args: argparse.Namespace) -> int:
    from ventsup.config import ConfigError, load_config
    from ventsup.config.describe import describe

    try:
        config = load_config(args.config)
    except ConfigError as exc:
        for problem in exc.problems:
            print(problem, file=sys.stderr)
        count = len(exc.problems)
        print(
            f"FAILED: {count} problem{'s' if count != 1 else ''} in {args.config}",
            file=sys.stderr,
        )
        return EXIT_BAD_CONFIG
    openings = sum(len(zone.openings) for zone in config.zones.values())
    print(describe(config))
    print(
        f"OK: {len(config.points)} points, {len(config.zones)} zones, {openings} openings",
    )
    return EXIT_OK


def _demo(args: argparse.Namespace) -> int:
    try:
        from ventsup import demo
    except ModuleNotFoundError as exc:
        if exc.name != "ventsup.demo":
            raise
        print("ventsup demo: not implemented yet (UNFINISHED)", file=sys.stderr)
        return EXIT_UNFINISHED
    result: int = demo.main(args)
    return result


def _unfinished(command: str) -> Callable[[argparse.Namespace], int]:
    def handler(args: argparse.Namespace) -> int:
        print(f"ventsup {command}: not implemented yet (UNFINISHED)", file=sys.stderr)
        return EXIT_UNFINISHED

    return handler


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every subcommand."""
    parser = argparse.ArgumentParser(
        prog="ventsup",
        description="Supervisory controller for motorised operable windows.",
    )
    parser.add_argument("--version", action="version", version=f"ventsup {_version()}")
    commands = parser.add_subparsers(dest="command", metavar="COMMAND")

    check = commands.add_parser(
        "check",
        help="validate a site file and show what was understood",
        description="Validate a site file; print its points, zones and rules in the "
        "site's units, or every problem found.",
    )
    check.add_argument("config", metavar="CONFIG", help="the site file (YAML)")
    check.set_defaults(handler=_check)

    for command, summary in _UNFINISHED.items():
        sub = commands.add_parser(command, help=f"{summary} (not implemented yet)")
        sub.add_argument("rest", nargs=argparse.REMAINDER, help=argparse.SUPPRESS)
        sub.set_defaults(handler=_unfinished(command))

    demo = commands.add_parser("demo", help="run the demo building in the simulator")
    demo.add_argument("rest", nargs=argparse.REMAINDER, help=argparse.SUPPRESS)
    demo.set_defaults(handler=_demo)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the ``ventsup`` command line; return the exit status."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # --help, --version and usage errors
        return (
            exc.code
            if isinstance(exc.code, int)
            else (EXIT_OK if exc.code is None else EXIT_BAD_CONFIG)
        )
    handler: Callable[[argparse.Namespace], int] | None = getattr(args, "handler", None)
    if handler is None:
        parser.print_help(sys.stderr)
        return EXIT_BAD_CONFIG
    try:
        return handler(args)
    except BrokenPipeError:  # `ventsup check site.yaml | head`: stop quietly
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return EXIT_OK


if __name__ == "__main__":
    raise SystemExit(main())
