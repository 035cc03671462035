"""How the simulated gateways publish: rounded to a resolution, reported on change.

A gateway that reports by exception sends a point when its value changes and
otherwise repeats it every so often, so that the controller can tell a steady
value from a dead sensor (common practice for MQTT gateways; BACnet's
change-of-value reporting works alike). The demo building's gateways do so
(``reporting`` in config/demo-building.yaml): a temperature at 0.1 K, sent
when that changes and at least every 4 minutes.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pandas as pd
import pytest

from simulator import _kernel
from simulator._steps import round_to
from simulator.building import Building, Reporting
from simulator.errors import SimulatorError
from simulator.loop import Result, run
from simulator.scenario import parse_scenario
from simulator.weather import synthetic, to_epoch_seconds
from ventsup.config.load import load_config_text
from ventsup.config.model import SiteConfig

from .conftest import ROOT

TZ = "America/Chicago"


def test_round_to_the_nearest_multiple() -> None:
    values = np.array([27.24, 27.26, -0.04, 0.125, 0.375, np.nan])
    assert round_to(values[:3], 0.1).tolist() == [27.2, 27.3, -0.0]
    # Half-way goes to the even multiple (numpy's rounding): 0.5 -> 0, 1.5 -> 2 quarters.
    assert round_to(values[3:5], 0.25).tolist() == [0.0, 0.5]
    assert np.isnan(round_to(values[5:], 0.25)).all()
    # Per column; 0 leaves a column as it is.
    both = round_to(np.array([[21.04, 833.0]]), np.array([0.1, 0.0]))
    assert both.tolist() == [[21.0, 833.0]]


def test_report_on_change_by_hand() -> None:
    t = np.arange(8, dtype=np.float64) * 60.0
    values = np.array(
        [
            [20.0, 20.0, 20.0, 20.0, 20.0, 20.1, 20.1, 20.0],
            [5.0, 5.0, 5.0, 5.0, 6.0, 6.0, 6.0, 6.0],
        ]
    ).T.copy()
    sent = np.ones_like(values, dtype=np.bool_)
    sent[1:3, 1] = False  # the second point drops out at steps 1 and 2
    # The first point has published nothing yet; the second sent 5.0 a step before t[0].
    last_t = np.array([np.nan, -60.0])
    last_value = np.array([np.nan, 5.0])
    alone = np.array([0, 1])  # each point on a topic of its own
    _kernel.report_on_change(values, sent, t, 240.0, last_t, last_value, alone)
    # First: the first value; the same again only when 240 s old (step 4); each change.
    assert sent[:, 0].tolist() == [True, False, False, False, True, True, False, True]
    # Second: 60 s old at step 0; 240 s old at step 3; the change at 4; 180 s old at 7.
    assert sent[:, 1].tolist() == [False, False, False, True, True, False, False, False]
    assert last_t.tolist() == [420.0, 240.0]
    assert last_value.tolist() == [20.0, 6.0]


def test_points_of_one_topic_are_reported_together() -> None:
    # One message carries both (a weather station's JSON document): whenever one
    # of them is due, both go out; the repeat counts from the last message.
    t = np.arange(8, dtype=np.float64) * 60.0
    values = np.array(
        [
            [20.0, 20.0, 20.1, 20.1, 20.1, 20.1, 20.1, 20.1],
            [50.0, 50.0, 50.0, 50.0, 50.0, 51.0, 51.0, 51.0],
        ]
    ).T.copy()
    sent = np.ones_like(values, dtype=np.bool_)
    sent[3, 1] = False  # the second has no value at step 3 (a dropout)
    nothing = np.full(2, np.nan)
    _kernel.report_on_change(values, sent, t, 240.0, nothing, nothing.copy(), np.array([7, 7]))
    # 0: first; 2: the first changed; 3: nothing due; 5: the second changed; 6, 7: not due.
    assert sent[:, 0].tolist() == [True, False, True, False, False, True, False, False]
    assert sent[:, 1].tolist() == [True, False, True, False, False, True, False, False]
    # When the second has no value at step 2, the message then carries the first
    # alone; the second's last report stays the one of step 0, so it is due again
    # at step 4 (240 s) and takes the first along.
    sent = np.ones_like(values, dtype=np.bool_)
    sent[2, 1] = False
    _kernel.report_on_change(values, sent, t, 240.0, nothing, nothing.copy(), np.array([7, 7]))
    assert sent[:, 0].tolist() == [True, False, True, False, True, True, False, False]
    assert sent[:, 1].tolist() == [True, False, False, False, True, True, False, False]


@pytest.fixture(scope="module")
def afternoon(site: SiteConfig, building: Building) -> Result:
    """Six hours of the demo building in July, with a shower and a smoke drill."""
    weather = synthetic(41.2, -88.1, TZ, "2024-07-01", "2024-07-04", seed=3)
    scenario = parse_scenario(
        """
        events:
          - rain: {at: "2024-07-02 14:00", duration: 30 min}
          - smoke_drill: {at: "2024-07-02 15:30", duration: 10 min, zone: commons}
        """,
        "test.yaml",
        site,
    )
    return run(site, building, weather, scenario, start="2024-07-02 11:00", end="2024-07-02 17:00")


def test_each_report_is_a_change_or_a_repeat(
    afternoon: Result, site: SiteConfig, building: Building
) -> None:
    reporting = building.reporting
    t = to_epoch_seconds(pd.DatetimeIndex(afternoon.outdoor.index))
    checked = 0
    for name, values in afternoon.published.items():
        sent = np.flatnonzero(~np.isnan(values))
        assert sent[0] == 0, name  # every point reports at the start
        gaps = np.diff(t[sent])
        same = values[sent][1:] == values[sent][:-1]
        # Never the same value again before it is due; never silent for longer
        # (no sensor faults in this run).
        assert (gaps[same] >= reporting.repeat).all(), name
        assert (gaps <= reporting.repeat).all(), name
        resolution = reporting.resolution.get(site.points[name].kind)
        if resolution is not None:
            multiples = values[sent] / resolution
            assert np.abs(multiples - np.round(multiples)).max() < 1e-6, name
        checked += 1
    assert checked == len(site.points) - len(afternoon.unsourced_points)
    # Something was left out: that is the point of reporting on change.
    total = sum(int(np.isnan(values).sum()) for values in afternoon.published.values())
    assert total > 0


def test_the_held_value_is_the_current_value_rounded(afternoon: Result) -> None:
    # Every change of the rounded value is reported, so what the controller holds
    # (the last report) is at each step what a gateway sending every step would send.
    held = afternoon.sensors.ffill()
    outdoor = afternoon.outdoor["temp_outdoor"].to_numpy()
    assert held["outdoor_temp"].to_numpy() == pytest.approx(round_to(outdoor, 0.1), abs=1e-4)
    commons = afternoon.zones["commons"]
    # Feedback reports the position reached at the end of the step before.
    position = commons["position.high_north"].to_numpy()[:-1]
    assert held["commons_high_north_pos"].to_numpy()[1:] == pytest.approx(
        round_to(position, 0.01), abs=1e-6
    )
    assert commons["windows_open"].any()  # the openings did move in this run


def test_without_reporting_every_point_publishes_every_step(
    site: SiteConfig, building: Building
) -> None:
    ideal = replace(building, reporting=Reporting())
    weather = synthetic(41.2, -88.1, TZ, "2024-07-01", "2024-07-04", seed=3)
    result = run(site, ideal, weather, start="2024-07-02 11:00", end="2024-07-02 12:00")
    frame = pd.DataFrame(result.published)
    assert frame.notna().all().all()
    # Unrounded: the outdoor temperature is the weather's.
    assert frame["outdoor_temp"].to_numpy() == pytest.approx(
        result.outdoor["temp_outdoor"].to_numpy(), abs=1e-9
    )


def test_a_topic_shared_by_outdoor_and_zone_points_is_refused(
    site: SiteConfig, building: Building
) -> None:
    # The outdoor points are computed before the run, the zone's step by step: the
    # simulator cannot report them together on change, and says so (unfinished).
    text = (ROOT / "config" / "demo-site.yaml").read_text(encoding="utf-8")
    old = "studio_temp:    {topic: qlc/studio_w/temp,"
    assert old in text
    shared = load_config_text(text.replace(old, "studio_temp: {topic: qlc/weather/roof,"), "s.yaml")
    weather = synthetic(41.2, -88.1, TZ, "2024-07-01", "2024-07-04", seed=3)
    with pytest.raises(SimulatorError, match="share the topic 'qlc/weather/roof'"):
        run(shared, building, weather, start="2024-07-02 11:00", end="2024-07-02 12:00")
    # Every step (no reporting on change) it can.
    ideal = replace(building, reporting=Reporting())
    run(shared, ideal, weather, start="2024-07-02 11:00", end="2024-07-02 12:00")
