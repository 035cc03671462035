"""Scenario scripts: parsing, clear errors, and their layout on the simulation steps."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from simulator.errors import ScenarioError
from simulator.scenario import (
    ActuatorJam,
    Gust,
    OccupancyChange,
    RainSpell,
    SensorFault,
    SmokeDrill,
    Timing,
    load_scenario,
    parse_scenario,
    timeline,
)
from ventsup.config.errors import ConfigError
from ventsup.config.model import SiteConfig

SCRIPT = """\
name: July afternoon with a shower and a drill
events:
  - rain: {at: "2024-07-02 14:00", duration: 30 min}
  - gust: {after: 2 h, duration: 20 min, speed: 15 m/s, direction: 180 deg}
  - smoke_drill: {at: "2024-07-02 15:30", duration: 10 min, zone: commons}
  - sensor: {point: commons_t_l4, fault: dropout, after: 3 h, duration: 30 min}
  - sensor: {point: outdoor_temp, fault: spike, value: 185 degF, after: 50 h, duration: 5 min}
  - sensor: {point: commons_t_l1, fault: stick, after: 1 h}
  - actuator_jam: {zone: commons, opening: high_north, after: 3 d, position: 30 %}
  - occupancy: {zone: commons, people: 300, at: "2024-07-04 18:00", until: "2024-07-04 21:00"}
"""


def test_parse_every_event(site: SiteConfig) -> None:
    scenario = parse_scenario(SCRIPT, "drill.yaml", site)
    assert scenario.name == "July afternoon with a shower and a drill"
    start = pd.Timestamp("2024-07-02 14:00", tz="America/Chicago").timestamp()
    assert scenario.events == (
        RainSpell(Timing(start, start + 1800.0)),
        Gust(Timing(7200.0, 8400.0, relative=True), 15.0, 180.0),
        SmokeDrill(Timing(start + 5400.0, start + 6000.0), ("commons_smoke",)),
        SensorFault(Timing(10_800.0, 12_600.0, relative=True), "commons_t_l4", "dropout"),
        SensorFault(Timing(180_000.0, 180_300.0, relative=True), "outdoor_temp", "spike", 85.0),
        SensorFault(Timing(3600.0, math.inf, relative=True), "commons_t_l1", "stick"),
        ActuatorJam(Timing(259_200.0, math.inf, relative=True), "commons", "high_north", 0.3),
        OccupancyChange(Timing(start + 187_200.0, start + 198_000.0), "commons", 300.0),
    )


def test_load_scenario_file(site: SiteConfig, tmp_path: Path) -> None:
    path = tmp_path / "drill.yaml"
    path.write_text(SCRIPT, encoding="utf-8")
    assert len(load_scenario(path, site).events) == 8
    with pytest.raises(ScenarioError, match=r"absent\.yaml: cannot read the scenario"):
        load_scenario(tmp_path / "absent.yaml", site)


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        (
            "events:\n  - rain: {at: '2024-07-02 14:00', duration: forty}\n",
            "s.yaml:2 events[0].rain.duration: got 'forty', expected a duration such as "
            "'30 s', '15 min' or '2 h'",
        ),
        (
            "events:\n  - hail: {after: 1 h}\n",
            "s.yaml:2 events[0].hail: unknown event 'hail'; expected one of rain, gust, "
            "smoke_drill, sensor, actuator_jam, occupancy",
        ),
        (
            "events:\n  - rain: {duration: 10 min}\n",
            "s.yaml:2 events[0].rain: expected exactly one of 'at' (a local time) or 'after'",
        ),
        (
            "events:\n  - smoke_drill: {after: 1 h, zone: atrium}\n",
            "s.yaml:2 events[0].smoke_drill.zone: got 'atrium', expected a zone of the site: "
            "commons, classroom_east, studio_west",
        ),
        (
            "events:\n  - actuator_jam: {after: 1 h, zone: commons, opening: roof}\n",
            "events[0].actuator_jam.opening: got 'roof', expected an opening of zone 'commons': "
            "low_north, low_south, high_north, high_south",
        ),
        (
            "events:\n  - sensor: {after: 1 h, point: commons_t_l4, fault: melt}\n",
            "events[0].sensor.fault: got 'melt', expected one of 'dropout', 'stick', 'spike'",
        ),
        (
            "events:\n  - sensor: {after: 1 h, point: commons_t_l4, fault: spike}\n",
            "events[0].sensor: missing key 'value' (the value the sensor spikes to)",
        ),
        (
            "events:\n  - sensor: {after: 1 h, point: commons_t_l4, fault: spike, value: 3 m/s}\n",
            "events[0].sensor.value: got '3 m/s', expected a temperature",
        ),
        (
            "events:\n  - gust: {after: 1 h, speeed: 12 m/s}\n",
            "events[0].gust.speeed: unknown key 'speeed'",
        ),
        (
            "events:\n  - rain: {at: '2024-03-10 02:30'}\n",
            "events[0].rain.at: got '2024-03-10 02:30', expected a local time that exists "
            "exactly once in America/Chicago",
        ),
        ("events: rain\n", "s.yaml:1 events: got 'rain', expected a list of events"),
        ("name: nothing\n", "s.yaml:1: missing key 'events'"),
        ("", "s.yaml: the file is empty"),
        ("events: [\n", "s.yaml:2:1: YAML syntax error"),
    ],
)
def test_scenario_errors(site: SiteConfig, text: str, expected: str) -> None:
    with pytest.raises(ScenarioError) as caught:
        parse_scenario(text, "s.yaml", site)
    assert expected in str(caught.value), str(caught.value)
    assert isinstance(caught.value, ConfigError)  # callers may catch every file problem at once


def test_every_problem_is_reported_at_once(site: SiteConfig) -> None:
    text = (
        "events:\n"
        "  - rain: {after: soon}\n"
        "  - occupancy: {after: 1 h, zone: commons, people: many}\n"
    )
    with pytest.raises(ScenarioError) as caught:
        parse_scenario(text, "s.yaml", site)
    assert [p.line for p in caught.value.problems] == [2, 3]


def test_timeline(site: SiteConfig) -> None:
    scenario = parse_scenario(SCRIPT, "drill.yaml", site)
    run_start = pd.Timestamp("2024-07-02 12:00", tz="America/Chicago").timestamp()
    t = run_start + 60.0 * np.arange(4 * 24 * 60)
    laid = timeline(scenario, t, run_start)
    minutes = laid.rain.nonzero()[0]
    assert (minutes[0], minutes[-1], len(minutes)) == (120, 149, 30)  # 14:00 up to 14:30
    assert np.nanmax(laid.gust_speed) == 15.0 and np.isnan(laid.gust_speed).sum() == len(t) - 20
    assert laid.alarms["commons_smoke"].sum() == 10
    codes, values = laid.sensor_faults["outdoor_temp"]
    assert (codes == 3).sum() == 5 and np.nanmax(values) == pytest.approx(85.0)
    jammed, positions = laid.jams[("commons", "high_north")]
    assert jammed[4320:].all() and not jammed[:4320].any() and positions[-1] == 0.3
    assert np.nanmax(laid.occupancy["commons"]) == 300.0
    assert timeline(None, t, run_start).rain.sum() == 0
