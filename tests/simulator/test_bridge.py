"""The simulator over MQTT against the real daemon, in lock-step with a simulated clock.

The daemon is :class:`~ventsup.drivers.service.Service` with ``sim_clock=True``
(``ventsup run --sim-clock``) in a thread of this process, or the real
command in its own process (:func:`test_command_lines`); the broker is a real
mosquitto (``mosquitto_module``); the simulator is :func:`simulator.loop.run`
with :class:`simulator.bridge.MqttController`. Nothing is mocked, nothing
sleeps: every wait is the bridge's wait for the daemon's acknowledgement,
with a timeout that fails loudly; nothing is timed.

The scripted afternoon (demo building, 2024-07-02, a Tuesday, 18 °C outside,
the hall starting at 26 °C): free cooling from 13:00, a shower 14:00-14:30, a
smoke drill in the commons 15:15-15:25, the commons' three temperature
sensors dropping out 16:15-17:00.
"""

from __future__ import annotations

import signal
import subprocess
import sys
import uuid
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest

from simulator.bridge import BridgeStats, CommandedCore, MqttController, open_hours
from simulator.building import Building, load_building
from simulator.errors import ControllerError
from simulator.loop import Result, run
from simulator.scenario import parse_scenario
from simulator.weather import Weather
from ventsup.config import load_config
from ventsup.config.model import SiteConfig
from ventsup.core.state import Decision, Mode
from ventsup.drivers.service import Service
from ventsup.edges.ledger import Ledger

from .conftest import DEMO_BUILDING, DEMO_SITE, ROOT
from .test_loop import TZ, at, mild_afternoon

pytestmark = pytest.mark.broker

COMMONS_OPENINGS = ("low_north", "low_south", "high_north", "high_south")
START, END = "2024-07-02 13:00", "2024-07-02 17:30"
STEP = 60.0
#: The longest the bridge waits for the daemon, at the start and per step [s].
WAIT = 60.0
SCENARIO = """
events:
  - rain: {at: "2024-07-02 14:00", duration: 30 min}
  - smoke_drill: {at: "2024-07-02 15:15", duration: 10 min, zone: commons}
  - sensor: {point: commons_t_l1, fault: dropout, at: "2024-07-02 16:15", duration: 45 min}
  - sensor: {point: commons_t_l3, fault: dropout, at: "2024-07-02 16:15", duration: 45 min}
  - sensor: {point: commons_t_l4, fault: dropout, at: "2024-07-02 16:15", duration: 45 min}
"""


def site_text(
    prefix: str, port: int, *, tick: str = "60 s", edit: Callable[[str], str] | None = None
) -> str:
    """The demo site (``edit``-ed) with every point topic and the controller's prefix
    under ``prefix``."""
    text = DEMO_SITE.read_text(encoding="utf-8")
    text = (edit or str)(text).replace("topic: qlc/", f"topic: {prefix}/qlc/")
    return text + (
        f"\nprefix: {prefix}/ctl\n"
        f"mqtt: {{host: 127.0.0.1, port: {port}}}\n"
        f"controller: {{tick: {tick}, record_interval: 0.5 s}}\n"
    )


def write_site(
    directory: Path, port: int, edit: Callable[[str], str] | None = None, **options: str
) -> Path:
    directory.mkdir(parents=True, exist_ok=True)
    path = directory / "site.yaml"
    prefix = f"ventsup-test/bridge-{uuid.uuid4().hex}"
    path.write_text(site_text(prefix, port, edit=edit, **options), encoding="utf-8")
    return path


def epoch(local: str) -> float:
    return pd.Timestamp(local, tz=TZ).timestamp()


@dataclass(frozen=True)
class ClosedLoop:
    """One closed-loop run: what the simulator recorded and what the daemon's ledger holds."""

    site: SiteConfig
    building: Building
    result: Result
    stats: BridgeStats
    decisions: list[tuple[Decision, str]]  # (decision, trigger), as recorded
    frame: pd.DataFrame  # Ledger.decisions_frame()
    counts: dict[str, int]  # the daemon's counters at the end
    protocol: str  # of the simulator's own connection


def closed_loop(
    directory: Path,
    port: int,
    script: str,
    start: str = START,
    end: str = END,
    *,
    weather: Weather | None = None,
    edit: Callable[[str], str] | None = None,
    protocol: str | None = "3.1.1",
    **site: str,
) -> ClosedLoop:
    """Run ``script`` with the daemon in simulated time; the ledger is the daemon's default.

    ``weather``: the mild afternoon unless given; ``edit`` changes the site file's text.
    """
    path = write_site(directory, port, edit, **site)
    config = load_config(path)
    building = load_building(DEMO_BUILDING, config)
    scenario = parse_scenario(script, "closed-loop.yaml", config)
    service = Service(config, config_dir=directory, sim_clock=True)
    service.start()
    try:
        with MqttController(config, timeout=WAIT, protocol=protocol) as controller:
            result = run(
                config,
                building,
                weather or mild_afternoon(),
                scenario,
                start,
                end,
                STEP,
                controller=controller,
                initial_temperature=26.0,
            )
    finally:
        service.stop("test over")
        assert service.wait(WAIT), "the daemon did not stop"
    assert service.error is None, service.error
    assert service.supervisor is not None
    # Simulated records go to a ledger of their own, beside the site's default one.
    assert service.ledger_path == directory / "var" / "ventsup-quarry-lane-commons-sim.db"
    with Ledger.open(service.ledger_path) as ledger:
        decisions = list(ledger.decisions())
        frame = ledger.decisions_frame()
    return ClosedLoop(
        config,
        building,
        result,
        controller.stats,
        decisions,
        frame,
        service.supervisor.counts,
        controller.settings.protocol,
    )


@pytest.fixture(scope="module")
def loops(mosquitto_module: Any, tmp_path_factory: pytest.TempPathFactory) -> list[ClosedLoop]:
    """The scripted afternoon, twice, each with a fresh daemon and ledger: the simulator
    on MQTT 3.1.1 (its default), then on the site's MQTT 5 (the daemon's)."""
    return [
        closed_loop(tmp_path_factory.mktemp(name), mosquitto_module.port, SCENARIO, protocol=p)
        for name, p in (("first", "3.1.1"), ("second", None))
    ]


@pytest.fixture(scope="module")
def loop(loops: list[ClosedLoop]) -> ClosedLoop:
    return loops[0]


def recorded(loop: ClosedLoop, zone: str, local: str) -> list[tuple[Decision, str]]:
    """The daemon's recorded (decision, trigger) pairs of ``zone`` at a local time."""
    t = epoch(local)
    return [(d, trigger) for d, trigger in loop.decisions if d.zone == zone and d.t == t]


def ledger_hours(frame: pd.DataFrame, zone: str, mode: str, end: float) -> float:
    """Hours in ``mode`` from the ledger: each decision weighted by the time to the next one."""
    rows = frame[frame["zone"] == zone]
    t = rows["t"].to_numpy()
    weight = np.append(t[1:], end) - t
    return float((weight * (rows["mode"] == mode).to_numpy()).sum()) / 3600.0


# --------------------------------------------------------------------------- the closed loop


def test_windows_open_on_a_warm_mild_afternoon(loop: ClosedLoop) -> None:
    row = at(loop.result, "commons", "2024-07-02 13:30")
    assert row["mode"] == Mode.FREE_COOLING.value
    assert all(row[f"position.{name}"] > 0.2 for name in COMMONS_OPENINGS)
    assert row["flow"] > 1.0 and row["cooling"] > 5_000.0
    # The first evaluation, at the first simulated time, opened every zone.
    for zone in loop.site.zones:
        (first, trigger), *_ = recorded(loop, zone, START)
        assert (first.mode, trigger) == (Mode.FREE_COOLING, "tick")
    assert loop.decisions[0][0].t == epoch(START)


def test_rain_spell_closes_them_at_once(loop: ClosedLoop) -> None:
    for time in ("2024-07-02 14:02", "2024-07-02 14:29"):
        row = at(loop.result, "commons", time)
        assert row["mode"] == Mode.PROTECTED.value and row["cause"] == "rain"
        assert row["position.low_north"] == 0.0 and row["position.low_south"] == 0.0
        assert row["position.high_north"] == pytest.approx(0.1)
    # The rain point's change evaluated every zone as it arrived, before the tick.
    for zone in loop.site.zones:
        (urgent, trigger), *_ = recorded(loop, zone, "2024-07-02 14:00")
        assert (urgent.mode, trigger) == (Mode.PROTECTED, "input:roof_rain")
    assert at(loop.result, "commons", "2024-07-02 14:45")["cause"] == "rain"  # dry delay
    assert at(loop.result, "commons", "2024-07-02 14:52")["mode"] == Mode.FREE_COOLING.value


def test_smoke_drill_releases_them(loop: ClosedLoop) -> None:
    row = at(loop.result, "commons", "2024-07-02 15:17")
    assert row["mode"] == Mode.RELEASED.value and row["layer"] == 1 and row["cause"] == "smoke"
    for name in COMMONS_OPENINGS:
        assert np.isnan(row[f"target.{name}"])  # no command: the opening states said released
        assert row[f"position.{name}"] == 1.0  # where the (simulated) fire system drives them
    (urgent, trigger), *_ = recorded(loop, "commons", "2024-07-02 15:15")
    assert (urgent.mode, trigger) == (Mode.RELEASED, "input:commons_smoke")
    assert at(loop.result, "classroom_east", "2024-07-02 15:17")["mode"] != Mode.RELEASED.value
    # Latched for the clear hold (15 min) after the alarm cleared at 15:25.
    assert at(loop.result, "commons", "2024-07-02 15:39")["mode"] == Mode.RELEASED.value
    assert at(loop.result, "commons", "2024-07-02 15:41")["mode"] == Mode.FREE_COOLING.value


def test_indoor_sensor_dropout_falls_to_the_fault_state(loop: ClosedLoop) -> None:
    # Held until stale (10 min after the last value, at 16:14), then layer 3: closed.
    assert at(loop.result, "commons", "2024-07-02 16:20")["mode"] == Mode.FREE_COOLING.value
    row = at(loop.result, "commons", "2024-07-02 16:27")
    assert row["mode"] == Mode.FAULT.value and row["layer"] == 3 and row["cause"] == "fault"
    assert all(row[f"position.{name}"] == 0.0 for name in COMMONS_OPENINGS)
    assert (
        loop.result.sensors["commons_t_l1"]
        .loc["2024-07-02 21:15Z":"2024-07-02 21:59Z"]
        .isna()
        .all()
    )
    assert at(loop.result, "commons", "2024-07-02 17:05")["mode"] != Mode.FAULT.value


def test_ledger_free_cooling_hours_equal_the_simulators_open_time(loop: ClosedLoop) -> None:
    opened = open_hours(loop.result, Mode.FREE_COOLING)
    for zone in loop.site.zones:
        hours = ledger_hours(loop.frame, zone, Mode.FREE_COOLING.value, epoch(END))
        assert hours == pytest.approx(opened[zone], abs=STEP / 3600.0 + 1e-9), zone
    assert opened["commons"] > 1.0


def test_every_value_was_accepted_and_every_output_counted(loop: ClosedLoop) -> None:
    stats = loop.stats
    steps = len(loop.result.zones["commons"])
    assert stats.steps == steps
    assert stats.rejected == 0
    assert stats.accepted == stats.published - steps  # every point message; the rest are clocks
    assert stats.unexpected_outputs == 0 and stats.disconnects == 0
    assert loop.counts["evaluation_errors"] == 0 and loop.counts["publish_errors"] == 0
    assert loop.counts["accepted"] == stats.accepted


def test_two_runs_decide_identically(loops: list[ClosedLoop]) -> None:
    first, second = loops
    # Whichever MQTT version the simulator's gateways speak.
    assert (first.protocol, second.protocol) == ("3.1.1", "5")
    assert len(first.decisions) > 3 * len(first.result.zones["commons"])
    # Every recorded decision, with its reason, limits, facts and trigger.
    assert first.decisions == second.decisions
    pd.testing.assert_frame_equal(first.frame, second.frame)
    for zone, frame in first.result.zones.items():
        pd.testing.assert_frame_equal(frame, second.result.zones[zone])
    pd.testing.assert_frame_equal(first.result.changes, second.result.changes)


def test_the_daemon_decides_as_the_core_does_in_process(loop: ClosedLoop) -> None:
    # Same inputs at the same simulated times, so the same decisions and the same building,
    # step for step: the lock-step adds transport, not behaviour.
    scenario = parse_scenario(SCENARIO, "closed-loop.yaml", loop.site)
    in_process = run(
        loop.site,
        loop.building,
        mild_afternoon(),
        scenario,
        START,
        END,
        STEP,
        controller=CommandedCore(loop.site),
        initial_temperature=26.0,
    )
    for zone, frame in in_process.zones.items():
        pd.testing.assert_frame_equal(loop.result.zones[zone], frame)


def test_urgent_points_act_between_ticks_in_simulated_time(
    mosquitto_module: Any, tmp_path: Path
) -> None:
    script = """
    events:
      - rain: {at: "2024-07-02 13:22", duration: 10 min}
      - smoke_drill: {at: "2024-07-02 14:07", duration: 5 min, zone: commons}
    """
    loop = closed_loop(
        tmp_path, mosquitto_module.port, script, START, "2024-07-02 14:30", tick="15 min"
    )
    ticks = sorted({d.t for d, trigger in loop.decisions if trigger == "tick"})
    assert ticks == [epoch(START) + 900.0 * k for k in range(6)]
    for zone in loop.site.zones:
        [(rain, trigger)] = recorded(loop, zone, "2024-07-02 13:22")
        assert (rain.mode, rain.cause.value, trigger) == (Mode.PROTECTED, "rain", "input:roof_rain")
    [(smoke, trigger)] = recorded(loop, "commons", "2024-07-02 14:07")
    assert (smoke.mode, trigger) == (Mode.RELEASED, "input:commons_smoke")
    # The simulator saw each at the step it happened, not at the next tick.
    assert at(loop.result, "commons", "2024-07-02 13:22")["mode"] == Mode.PROTECTED.value
    assert at(loop.result, "commons", "2024-07-02 14:07")["mode"] == Mode.RELEASED.value
    assert recorded(loop, "commons", "2024-07-02 14:08") == []  # between ticks: nothing new


def test_points_sharing_a_topic_go_out_in_one_message(
    mosquitto_module: Any, tmp_path: Path
) -> None:
    # The rooftop station sends temperature and humidity in one JSON document. Its
    # gateway reports on change (the demo building's reporting): when the
    # temperature changes, the humidity goes along in the same message, so the
    # daemon never meets a document without one of its fields.
    def one_document(text: str) -> str:
        old = 'outdoor_rh:     {topic: qlc/weather/roof/rh, kind: humidity, unit: "%",'
        assert old in text
        return text.replace(
            old, 'outdoor_rh: {topic: qlc/weather/roof, json_path: rh, kind: humidity, unit: "%",'
        )

    index = pd.date_range("2024-07-02 08:00", periods=12, freq="h", tz=TZ)
    warming = mild_afternoon()
    frame = warming.frame.copy()
    frame["temp_outdoor"] = np.linspace(15.0, 21.0, len(index))  # 0.1 K every 5-6 min
    weather = Weather(frame, source="a warming afternoon")
    loop = closed_loop(
        tmp_path, mosquitto_module.port, SCENARIO, START, "2024-07-02 15:00",
        weather=weather, edit=one_document,
    )  # fmt: skip
    assert loop.site.points["outdoor_rh"].topic == loop.site.points["outdoor_temp"].topic
    published = loop.result.published
    temp, rh = (~np.isnan(published[name]) for name in ("outdoor_temp", "outdoor_rh"))
    assert (temp == rh).all()
    # The humidity went out unchanged, before its own repeat, because the temperature changed.
    t = np.flatnonzero(rh) * STEP
    values = published["outdoor_rh"][rh]
    assert ((values[1:] == values[:-1]) & (np.diff(t) < 240.0)).any()
    assert loop.stats.rejected == 0 and loop.counts["accepted"] == loop.stats.accepted
    in_process = run(
        loop.site, loop.building, weather, parse_scenario(SCENARIO, "s.yaml", loop.site),
        START, "2024-07-02 15:00", STEP, controller=CommandedCore(loop.site),
        initial_temperature=26.0,
    )  # fmt: skip
    for zone, frame in in_process.zones.items():
        pd.testing.assert_frame_equal(loop.result.zones[zone], frame)


# --------------------------------------------------------------------------- failures


def test_a_missing_or_silent_controller_fails_loudly(mosquitto_module: Any, tmp_path: Path) -> None:
    path = write_site(tmp_path, mosquitto_module.port)
    config = load_config(path)
    building = load_building(DEMO_BUILDING, config)
    with pytest.raises(ControllerError, match=r"no controller online on .* within 0\.5 s"):
        MqttController(config, timeout=0.5).connect()
    # A daemon on the wall clock is online but never answers the simulated clock.
    service = Service(config, config_dir=tmp_path)
    service.start()
    try:
        with (
            MqttController(config, timeout=1.0) as controller,
            pytest.raises(ControllerError, match=r"no acknowledgement of step 0 \(2024-07-02"),
        ):
            run(config, building, mild_afternoon(), None, START, "2024-07-02 13:05", STEP,
                controller=controller)  # fmt: skip
    finally:
        service.stop("test over")
        assert service.wait(WAIT)
    assert service.error is None


def test_command_lines(mosquitto_module: Any, tmp_path: Path) -> None:
    path = write_site(tmp_path, mosquitto_module.port)
    log = (tmp_path / "daemon.log").open("w", encoding="utf-8")
    daemon = subprocess.Popen(
        [sys.executable, "-m", "ventsup.cli", "run", str(path), "--sim-clock"],
        stdin=subprocess.DEVNULL,
        stdout=log,
        stderr=subprocess.STDOUT,
    )
    try:
        simulated = subprocess.run(
            [
                *(sys.executable, "-m", "simulator", "--site", str(path)),
                *("--mqtt", f"127.0.0.1:{mosquitto_module.port}", "--timeout", str(WAIT)),
                *("--start", "2024-07-01 12:00", "--end", "2024-07-01 13:00"),
            ],
            cwd=ROOT,
            stdin=subprocess.DEVNULL,
            capture_output=True,
            text=True,
            timeout=10 * WAIT,
            check=False,
        )
    finally:
        daemon.send_signal(signal.SIGTERM)
        code = daemon.wait(WAIT)
        log.close()
    daemon_log = (tmp_path / "daemon.log").read_text(encoding="utf-8")
    assert simulated.returncode == 0, simulated.stderr + daemon_log
    assert code == 0, daemon_log
    assert "over MQTT with the controller under ventsup-test/bridge-" in simulated.stdout
    assert "60 steps" in simulated.stdout and "0 values rejected" in simulated.stdout
    assert "free_cooling_hours" in simulated.stdout
    assert "simulated clock: the time comes from" in daemon_log
    with Ledger.open(tmp_path / "var" / "ventsup-quarry-lane-commons-sim.db") as ledger:
        times = {d.t for d, _ in ledger.decisions()}
    assert min(times) == epoch("2024-07-01 12:00") and max(times) == epoch("2024-07-01 12:59")
