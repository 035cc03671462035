"""The ``ventsup`` command: run | check | replay | report | override | status | demo.

Exit status: 0 success, 1 a run-time failure (the broker cannot be reached or
refuses us, the ledger cannot be used, an override was refused or not answered,
a zone without state), 2 a bad configuration or bad command line, 3 a
subcommand that is not implemented yet.
"""

from __future__ import annotations

import argparse
import os
import sys
from collections.abc import Callable, Sequence
from importlib import metadata
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from ventsup.config import Mqtt, SiteConfig

__all__ = ["main"]

EXIT_OK = 0
EXIT_FAILED = 1
EXIT_BAD_CONFIG = 2
EXIT_UNFINISHED = 3

_UNFINISHED: dict[str, str] = {}


def _version() -> str:
    try:
        return metadata.version("ventsup")
    except metadata.PackageNotFoundError:  # running from a source tree that is not installed
        return "unknown (not installed)"


def _load(path: str) -> SiteConfig | None:
    """The site at ``path``, or None after printing every problem to stderr."""
    from ventsup.config import ConfigError, load_config

    try:
        return load_config(path)
    except ConfigError as exc:
        for problem in exc.problems:
            print(problem, file=sys.stderr)
        count = len(exc.problems)
        print(f"FAILED: {count} problem{'s' if count != 1 else ''} in {path}", file=sys.stderr)
        return None


def _check(args: argparse.Namespace) -> int:
    from ventsup.config.describe import describe

    config = _load(args.config)
    if config is None:
        return EXIT_BAD_CONFIG
    openings = sum(len(zone.openings) for zone in config.zones.values())
    print(describe(config))
    print(
        f"OK: {len(config.points)} points, {len(config.zones)} zones, {openings} openings",
    )
    return EXIT_OK


def _demo(args: argparse.Namespace) -> int:
    from ventsup import demo

    result: int = demo.main(args)
    return result


def _run(args: argparse.Namespace) -> int:
    from pathlib import Path

    from ventsup.drivers.live import run

    config = _load(args.config)
    if config is None:
        return EXIT_BAD_CONFIG
    return run(
        config,
        config_path=Path(args.config),
        observe=args.observe,
        ledger=None if args.ledger is None else Path(args.ledger),
        log_format=args.log_format,
        sim_clock=args.sim_clock,
    )


def _who() -> str:
    import getpass

    try:
        return getpass.getuser()
    except (KeyError, OSError):  # no login name (a container without a passwd entry)
        return "operator"


def _login(args: argparse.Namespace, config: SiteConfig) -> Mqtt:
    from ventsup.drivers.live import login

    return login(
        config.mqtt,
        username=args.username,
        password_file=args.password_file,
        password_env=args.password_env,
    )


def _override(args: argparse.Namespace) -> int:
    from pathlib import Path

    from ventsup.drivers.live import send_override

    config = _load(args.config)
    if config is None:
        return EXIT_BAD_CONFIG
    return send_override(
        config,
        config_dir=Path(args.config).resolve().parent,
        zone=args.zone,
        action=args.action,
        reason=args.reason,
        who=args.who or _who(),
        duration=args.duration,
        position=args.position,
        timeout=args.timeout,
        mqtt=_login(args, config),
        out=sys.stdout,
        err=sys.stderr,
    )


def _status(args: argparse.Namespace) -> int:
    from pathlib import Path

    from ventsup.drivers.live import show_status

    config = _load(args.config)
    if config is None:
        return EXIT_BAD_CONFIG
    return show_status(
        config,
        config_dir=Path(args.config).resolve().parent,
        timeout=args.timeout,
        mqtt=_login(args, config),
        out=sys.stdout,
        err=sys.stderr,
    )


def _add_broker_login(parser: argparse.ArgumentParser) -> None:
    login = parser.add_argument_group(
        "broker login", "override the site file's mqtt login (operators log in as themselves)"
    )
    login.add_argument("--username", help="the MQTT user name")
    secret = login.add_mutually_exclusive_group()
    secret.add_argument("--password-file", metavar="FILE", help="a file holding the password")
    secret.add_argument(
        "--password-env", metavar="VAR", help="an environment variable holding the password"
    )


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

    run = commands.add_parser(
        "run",
        help="run the controller against the site's MQTT broker",
        description="Run the controller: read the site's points from the MQTT broker, decide "
        "every tick and at once on alarms, rain and wind, publish commands, state, interlock "
        "and heartbeat, and record everything in the ledger. Stops cleanly on SIGTERM or "
        "SIGINT.",
    )
    run.add_argument("config", metavar="CONFIG", help="the site file (YAML)")
    run.add_argument(
        "--observe",
        action="store_true",
        help="observe-only: decide and publish state and reasons, but send no command "
        "(for commissioning)",
    )
    run.add_argument(
        "--ledger",
        metavar="PATH",
        help="the SQLite ledger file (default: controller.ledger, or var/ventsup-<site>.db "
        "beside the site file)",
    )
    run.add_argument(
        "--log-format",
        choices=("text", "json"),
        help="log lines as text or as JSON objects (default: controller.log_format)",
    )
    run.add_argument(
        "--sim-clock",
        action="store_true",
        help="take the time from a simulator over MQTT (<prefix>/sim/clock) in lock-step, "
        "for `python -m simulator --mqtt`; the ledger defaults to a -sim file",
    )
    run.set_defaults(handler=_run)

    override = commands.add_parser(
        "override",
        help="open, close or hold a zone for a while, or return it to automatic",
        description="Send an operator override to the running controller and print its "
        "answer. The override ends by itself after --for (default: override.default_duration).",
    )
    override.add_argument("config", metavar="CONFIG", help="the site file (YAML)")
    override.add_argument("zone", metavar="ZONE", help="the zone to override")
    override.add_argument("action", choices=("open", "close", "hold", "auto"))
    override.add_argument(
        "--position", help="for open and hold: a fraction such as 0.3, or '30 %%'"
    )
    override.add_argument(
        "--for", dest="duration", metavar="DURATION", help="how long, such as 2h or '90 min'"
    )
    override.add_argument("--reason", required=True, help="why: recorded with the override")
    override.add_argument("--who", help="who asks (default: your login name)")
    override.add_argument(
        "--timeout",
        type=float,
        default=10.0,
        help="seconds to wait for the controller's answer (default 10)",
    )
    _add_broker_login(override)
    override.set_defaults(handler=_override)

    status = commands.add_parser(
        "status",
        help="show what the running controller is doing",
        description="Read the controller's retained state topics and print every zone's "
        "mode, openings and reason.",
    )
    status.add_argument("config", metavar="CONFIG", help="the site file (YAML)")
    status.add_argument(
        "--timeout",
        type=float,
        default=3.0,
        help="seconds to wait for the retained states (default 3)",
    )
    _add_broker_login(status)
    status.set_defaults(handler=_status)

    from ventsup.drivers import replay_cli, reporting  # here, not at the top: they bring pandas

    replay = commands.add_parser(
        "replay", help="run the rules over logged data; rule sets side by side; a sweep"
    )
    replay_cli.add_replay_arguments(replay)
    replay.set_defaults(handler=replay_cli.cli_replay)

    report = commands.add_parser(
        "report", help="write the free-cooling report for a month or a period (HTML, CSV, JSON)"
    )
    reporting.add_report_arguments(report)
    report.set_defaults(handler=reporting.cli_report)

    for command, summary in _UNFINISHED.items():
        sub = commands.add_parser(command, help=f"{summary} (not implemented yet)")
        sub.add_argument("rest", nargs=argparse.REMAINDER, help=argparse.SUPPRESS)
        sub.set_defaults(handler=_unfinished(command))

    demo = commands.add_parser(
        "demo", help="a simulated June of the invented demo building, ending with its report"
    )
    from ventsup import demo as demo_module

    demo_module.add_arguments(demo)
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
