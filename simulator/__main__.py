"""``python -m simulator``: simulate a site in closed loop with the decision core, or compare.

Examples::

    python -m simulator --start 2024-07-01 --end 2024-08-01
    python -m simulator --weather greensboro.epw --start 1990-04-01 --end 1990-05-01 --step 600
    python -m simulator --scenario drill.yaml --start 2024-07-02 --end 2024-07-03
    python -m simulator --start 2024-05-01 --end 2024-06-01 --step 600 \\
        --what-if opening_area=0.5,1,1.5,2 --out what-if/
    ventsup run site.yaml --sim-clock &      # then, against that daemon over MQTT:
    python -m simulator --site site.yaml --mqtt --start 2024-07-01 --end 2024-07-08

Defaults: the demo site and building in ``config/``, synthetic weather of the
``humid_continental`` climate at the site's location (seed 0), one-minute
steps. Prints the per-zone summary and the monthly free-cooling hours (or the
what-if table); progress goes to stderr. With ``--what-if`` and ``--out DIR``
it also writes ``what-if.csv`` (the table: one row per value and zone, SI)
and ``what-if.svg`` (:func:`what_if_svg`: free-cooling hours, hours above the
comfort limit and the peak temperature against the value, a line per zone,
temperatures and the rule's values in the site's display units). A rule's
values may carry their unit as in the site file
(``free_cooling.open_above=72F,74F,76F``); a plain number is SI. Exit status
2 for a problem with an input file, with every problem listed as
``file:line key: what was expected``.

With ``--mqtt [HOST:PORT]`` the decisions come from a running ``ventsup run
SITE --sim-clock`` over the broker (default: the site's ``mqtt`` section) in
lock-step instead of the decision core in process (see
:mod:`simulator.bridge`); exit status 1 when the controller does not answer.
"""

from __future__ import annotations

import argparse
import math
import re
import sys
from collections.abc import Sequence
from pathlib import Path

import pandas as pd

from simulator.bridge import run_mqtt
from simulator.building import load_building
from simulator.errors import ControllerError, SimulatorError
from simulator.loop import Result, rule_quantity, run, what_if
from simulator.scenario import load_scenario
from simulator.weather import CLIMATES, Weather, read_csv, read_epw, synthetic
from ventsup.config import load_config
from ventsup.config.errors import VentsupError
from ventsup.config.model import SiteConfig
from ventsup.config.units import to_display
from ventsup.edges.charts import Panel, Series, panels_svg

_CONFIG = Path(__file__).resolve().parent.parent / "config"


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="python -m simulator", description=__doc__.splitlines()[0]
    )
    parser.add_argument("--site", type=Path, default=_CONFIG / "demo-site.yaml")
    parser.add_argument("--building", type=Path, default=_CONFIG / "demo-building.yaml")
    parser.add_argument("--weather", type=Path, help="an EPW file or a weather CSV")
    parser.add_argument(
        "--climate",
        default="humid_continental",
        choices=sorted(CLIMATES),
        help="synthetic weather when no --weather is given",
    )
    parser.add_argument("--seed", type=int, default=0, help="seed of the synthetic weather")
    parser.add_argument("--scenario", type=Path, help="a scenario file (YAML)")
    parser.add_argument("--start", required=True, help="site local time, e.g. 2024-07-01")
    parser.add_argument("--end", required=True, help="site local time, e.g. 2024-08-01")
    parser.add_argument("--step", type=float, default=60.0, help="time step [s]")
    parser.add_argument(
        "--what-if",
        metavar="PARAMETER=V1,V2,...",
        help=(
            "opening_area=0.5,1,2 or a rule path such as free_cooling.open_above=22,23,24 "
            "(SI) or =72F,74F,76F"
        ),
    )
    parser.add_argument(
        "--out",
        type=Path,
        metavar="DIR",
        help="with --what-if: write what-if.csv (the table) and what-if.svg (its chart) here",
    )
    mqtt = parser.add_argument_group(
        "over MQTT", "decide with a running `ventsup run SITE --sim-clock` instead of in process"
    )
    mqtt.add_argument(
        "--mqtt",
        nargs="?",
        const="",
        metavar="HOST:PORT",
        help="the broker (default: the site's mqtt section)",
    )
    mqtt.add_argument(
        "--prefix", help="the controller's topic prefix, if not the site file's prefix"
    )
    mqtt.add_argument(
        "--gateway-protocol",
        choices=("3.1.1", "5", "site"),
        default="3.1.1",
        help=(
            "MQTT version of the simulator's own connection (the gateways it plays; "
            "default 3.1.1); 'site': the site's, as the daemon uses"
        ),
    )
    mqtt.add_argument(
        "--timeout",
        type=float,
        default=30.0,
        help="seconds to wait for the controller, at the start and per step (default 30)",
    )
    return parser


def _broker(text: str) -> tuple[str | None, int | None]:
    """``HOST:PORT``, ``HOST`` or ``""`` (the site's broker) -> (host, port)."""
    if not text:
        return None, None
    host, colon, port = text.rpartition(":")
    if not colon:
        return text, None
    try:
        number = int(port)
    except ValueError:
        raise SimulatorError(
            f"--mqtt: got {text!r}, expected HOST:PORT such as 127.0.0.1:1883"
        ) from None
    return host or None, number


def _weather(args: argparse.Namespace, time_zone: str, location: tuple[float, float]) -> Weather:
    if args.weather is None:
        start = pd.Timestamp(args.start) - pd.Timedelta(days=1)
        end = pd.Timestamp(args.end) + pd.Timedelta(days=1)
        return synthetic(*location, time_zone, start, end, args.climate, args.seed)
    if args.weather.suffix.lower() == ".epw":
        return read_epw(args.weather)
    return read_csv(args.weather, time_zone=time_zone)


def _progress(share: float) -> None:
    print(f"\r{share:6.1%}", end="" if share < 1.0 else "\n", file=sys.stderr, flush=True)


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the exit status."""
    args = _parser().parse_args(argv)
    try:
        site = load_config(args.site)
        building = load_building(args.building, site)
        scenario = load_scenario(args.scenario, site) if args.scenario else None
        if site.site.location is None and args.weather is None:
            raise SimulatorError("synthetic weather needs site.location in the site config")
        location = (
            (site.site.location.latitude, site.site.location.longitude)
            if site.site.location
            else (0.0, 0.0)
        )
        weather = _weather(args, site.site.time_zone, location)
        if args.prefix is not None:
            site = site.model_copy(update={"prefix": args.prefix})
        pd.set_option("display.width", 160)
        pd.set_option("display.max_columns", 20)
        if args.what_if and args.mqtt is not None:
            raise SimulatorError("--what-if runs in process only; leave out --mqtt")
        if args.out is not None and not args.what_if:
            raise SimulatorError("--out writes the what-if table and chart; give --what-if too")
        if args.mqtt is not None:
            host, port = _broker(args.mqtt)
            result, stats = run_mqtt(
                site,
                building,
                weather,
                scenario,
                args.start,
                args.end,
                args.step,
                host=host,
                port=port,
                timeout=args.timeout,
                config_dir=args.site.resolve().parent,
                progress=_progress,
                protocol=None if args.gateway_protocol == "site" else args.gateway_protocol,
            )
            print(
                f"over MQTT with the controller under {site.topic_prefix}: {stats.steps} steps, "
                f"{stats.published} messages out, {stats.outputs} in, {stats.rejected} values "
                f"rejected by the controller"
            )
            _print(site, args, weather, result)
            return 0
        if args.what_if:
            parameter, values = _what_if_values(args.what_if)
            if args.out is not None:
                _make_folder(args.out)  # before the runs, so a bad folder fails at once
            table = what_if(
                site,
                building,
                weather,
                parameter,
                values,
                scenario=scenario,
                start=args.start,
                end=args.end,
                step=args.step,
                progress=_progress,
            )
            print(table.round(2).to_string())
            if args.out is not None:
                title = f"{site.site.name}: what if {parameter}"
                for path in write_what_if(table, args.out, title, site):
                    print(f"wrote {path}")
            return 0
        result = run(
            site,
            building,
            weather,
            scenario,
            args.start,
            args.end,
            args.step,
            progress=_progress,
        )
    except ControllerError as exc:
        print(f"\nerror: {exc}", file=sys.stderr)
        return 1
    except VentsupError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    _print(site, args, weather, result)
    return 0


_WHAT_IF = re.compile(r"^\s*([A-Za-z][\w.]*)\s*=(.*)$")
_AMOUNT = re.compile(r"^\s*[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?\s*(\S.*?)?\s*$")


def _what_if_values(spec: str) -> tuple[str, list[float | str]]:
    """``PARAMETER=V1,V2,...``: the parameter, and each value as a number (SI) or,
    when it carries a unit, as text for the site loader (``"72F"``)."""
    expected = "expected PARAMETER=V1,V2,... with numbers (a rule's may carry a unit: 72F)"
    match = _WHAT_IF.match(spec)
    if match is None:
        raise SimulatorError(f"--what-if: got {spec!r}, {expected}")
    parameter, text = match.group(1), match.group(2)
    values: list[float | str] = []
    for item in (part.strip() for part in text.split(",")):
        if not item:
            continue
        amount = _AMOUNT.match(item)
        if amount is None:
            raise SimulatorError(f"--what-if: {item!r} in {spec!r} is not a number; {expected}")
        values.append(item if amount.group(1) else float(item))
    if not values:
        raise SimulatorError(f"--what-if: got {spec!r}, expected some values")
    return parameter, values


#: The what-if quantities charted: column, panel title, scale from zero, unit quantity.
WHAT_IF_CHART = (
    ("free_cooling_hours", "free-cooling hours [h]", True, None),
    ("hours_above_comfort", "occupied hours above comfort.high [h]", True, None),
    ("peak_temperature", "peak indoor temperature", False, "temperature"),
)


def what_if_svg(table: pd.DataFrame, title: str, site: SiteConfig | None = None) -> str:
    """The chart of a :func:`~simulator.loop.what_if` table as SVG text.

    One panel per quantity of :data:`WHAT_IF_CHART`, one line per zone, against
    the parameter's values in increasing order (a value given twice: its last
    run); drawn by :func:`ventsup.edges.charts.panels_svg`. Temperatures and a
    rule's values are shown in the ``site``'s display units (without a site: SI).
    """
    system = site.site.units if site is not None else "SI"
    parameter = str(table.index.names[0])
    records = table.reset_index().to_dict(orient="records")
    rows = {(float(r[parameter]), str(r["zone"])): r for r in records}
    values = sorted({value for value, _ in rows})
    zones = list(dict.fromkeys(zone for _, zone in rows))

    def shown(value: float, quantity: str | None) -> float:
        return value if quantity is None else to_display(value, quantity, system)[0]

    panels = []
    for column, name, zero, quantity in WHAT_IF_CHART:
        if quantity is not None:
            name = f"{name} [{to_display(0.0, quantity, system)[1]}]"
        series = tuple(
            Series(
                zone,
                tuple(
                    shown(float(rows[(value, zone)][column]), quantity)
                    if (value, zone) in rows
                    else math.nan
                    for value in values
                ),
            )
            for zone in zones
        )
        panels.append(Panel(name, series, from_zero=zero))
    if parameter == "opening_area":
        axis, quantity = "opening_area (factor on every opening's free area)", None
    elif site is None:
        axis, quantity = f"{parameter} (SI)", None
    else:
        quantity = rule_quantity(site, parameter)
        unit = "" if quantity is None else to_display(0.0, quantity, system)[1]
        axis = f"{parameter} [{unit}]" if unit else parameter
    x = [shown(value, quantity) for value in values]
    labels = [f"{round(value, 6):g}" for value in x]
    return panels_svg(x, labels, panels, title=title, x_title=axis)


def _make_folder(folder: Path) -> None:
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise SimulatorError(f"--out {folder}: cannot make the folder: {exc.strerror}") from exc


def write_what_if(
    table: pd.DataFrame, folder: Path, title: str, site: SiteConfig | None = None
) -> list[Path]:
    """Write ``what-if.csv`` (SI) and ``what-if.svg`` (the ``site``'s display units)
    of a what-if ``table`` into ``folder``."""
    _make_folder(folder)
    csv, svg = folder / "what-if.csv", folder / "what-if.svg"
    try:
        table.reset_index().to_csv(csv, index=False, lineterminator="\n")
        svg.write_text(what_if_svg(table, title, site), encoding="utf-8")
    except OSError as exc:
        raise SimulatorError(f"--out {folder}: cannot write: {exc.strerror}") from exc
    return [csv, svg]


def _print(site: SiteConfig, args: argparse.Namespace, weather: Weather, result: Result) -> None:
    print(f"{site.site.name}: {args.start} to {args.end}, {weather.source or 'weather'}")
    print(result.summary().round(1).to_string())
    print("\nfree-cooling hours per month")
    print(result.monthly_hours().round(1).to_string())


if __name__ == "__main__":
    raise SystemExit(main())
