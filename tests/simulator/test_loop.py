"""The in-process closed loop with the decision core: scenarios, faults, records, what-if, a year.

The behaviour checked here is the core's (see ventsup/core/layers); these tests
check that the simulator feeds it what a real site would (samples in SI,
faults, feedback) and carries its decisions back into the building.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pandas as pd
import pvlib
import pytest

from simulator.building import Building
from simulator.errors import SimulatorError
from simulator.loop import (
    CoreController,
    FixedController,
    Result,
    in_periods,
    rule_quantity,
    rule_value,
    run,
    scale_opening_area,
    set_rule,
    what_if,
)
from simulator.scenario import parse_scenario
from simulator.weather import Climate, Weather, from_hour_ending, synthetic
from ventsup.config.model import PointKind, SiteConfig
from ventsup.core.layers.schedule import in_period
from ventsup.core.state import Mode

TZ = "America/Chicago"
COMMONS_OPENINGS = ("low_north", "low_south", "high_north", "high_south")


def mild_afternoon(hours: int = 12, **columns: float) -> Weather:
    """A dry, mild, calm day from 2024-07-02 08:00 (a Tuesday): 18 °C outside, some sun."""
    index = pd.date_range("2024-07-02 08:00", periods=hours, freq="h", tz=TZ)
    values: dict[str, float | bool] = {
        "temp_outdoor": 18.0,
        "relative_humidity": 50.0,
        "wind_speed": 2.0,
        "wind_direction": 270.0,  # along the north and south façades
        "rain": False,
        "ghi": 300.0,
        "dni": 300.0,
        "dhi": 100.0,
    }
    values.update(columns)
    return Weather(pd.DataFrame(values, index=index), source="mild afternoon")


def at(result: Result, zone: str, time: str) -> pd.Series:
    """The zone's row at a local time."""
    return result.zones[zone].loc[pd.Timestamp(time, tz=TZ)]


def scenario_run(
    site: SiteConfig, building: Building, script: str, end: str = "2024-07-02 17:00"
) -> Result:
    scenario = parse_scenario(script, "test.yaml", site)
    return run(
        site,
        building,
        mild_afternoon(),
        scenario,
        start="2024-07-02 13:00",
        end=end,
        step=60.0,
        initial_temperature=26.0,
    )


# ------------------------------------------------------------------------- closed loop


@pytest.fixture(scope="module")
def drill(site: SiteConfig, building: Building) -> Result:
    """A warm hall on a mild afternoon, a shower at 14:00 and a smoke drill at 15:30."""
    return scenario_run(
        site,
        building,
        """
        events:
          - rain: {at: "2024-07-02 14:00", duration: 30 min}
          - smoke_drill: {at: "2024-07-02 15:30", duration: 10 min, zone: commons}
        """,
    )


def test_free_cooling_opens_a_warm_hall(drill: Result) -> None:
    row = at(drill, "commons", "2024-07-02 13:30")
    assert row["mode"] == Mode.FREE_COOLING.value
    assert all(row[f"position.{name}"] > 0.2 for name in COMMONS_OPENINGS)
    assert row["flow"] > 1.0 and row["cooling"] > 5_000.0
    # The hall cools from 26 °C toward the free-cooling band.
    assert at(drill, "commons", "2024-07-02 13:59")["temp_indoor"] < 24.5


def test_rain_closes_the_windows(drill: Result) -> None:
    # Layer 2: rain caps every opening at its rain position (high vents 10 %, low 0).
    for time in ("2024-07-02 14:02", "2024-07-02 14:29"):
        row = at(drill, "commons", time)
        assert row["mode"] == Mode.PROTECTED.value and row["cause"] == "rain"
        assert row["position.low_north"] == 0.0 and row["position.low_south"] == 0.0
        assert row["position.high_north"] == pytest.approx(0.1)
    # Still closed during the 20 min dry delay, open again after it.
    assert at(drill, "commons", "2024-07-02 14:45")["cause"] == "rain"
    assert at(drill, "commons", "2024-07-02 14:52")["mode"] == Mode.FREE_COOLING.value


def test_smoke_drill_releases_the_openings(drill: Result) -> None:
    # Layer 1: the core stops commanding the openings (target NaN = released); the
    # fire system (simulated) drives the hall's vents fully open.
    row = at(drill, "commons", "2024-07-02 15:32")
    assert row["mode"] == Mode.RELEASED.value and row["layer"] == 1 and row["cause"] == "smoke"
    for name in COMMONS_OPENINGS:
        assert math.isnan(row[f"target.{name}"])
        assert row[f"position.{name}"] == 1.0
    # The latch holds for the clear hold (15 min) after the alarm clears at 15:40.
    assert at(drill, "commons", "2024-07-02 15:54")["mode"] == Mode.RELEASED.value
    assert at(drill, "commons", "2024-07-02 15:56")["mode"] != Mode.RELEASED.value
    # Zones on other fire zones are not released.
    assert at(drill, "classroom_east", "2024-07-02 15:32")["mode"] != Mode.RELEASED.value


def test_changes_log_says_why(drill: Result) -> None:
    commons = drill.changes[drill.changes["zone"] == "commons"]
    reasons = " | ".join(commons["reason"])
    assert "rain since 14:00 (roof_rain = wet)" in reasons
    assert "released to the fire system: smoke alarm commons_smoke active since 15:30" in reasons
    assert commons["time"].is_monotonic_increasing


def test_what_the_sensors_published(drill: Result, building: Building) -> None:
    # The demo's gateways report on change (see the next test): what the
    # controller holds at each step is the last value published.
    sensors = drill.sensors.ffill()
    # SI values: the rooftop station's °F and mph points are published in °C and m/s.
    assert sensors["outdoor_temp"].iloc[0] == pytest.approx(18.0)
    assert sensors["roof_rain"].loc["2024-07-02 19:10Z"] == 1.0
    assert sensors["commons_smoke"].loc["2024-07-02 20:35Z"] == 1.0
    # Feedback is the actuator's position (to its 1 % resolution); upper sensors
    # read warmer (stratification; rounding keeps the order).
    commons = drill.zones["commons"]
    assert building.reporting.resolution[PointKind.POSITION] == 0.01
    assert sensors["commons_high_north_pos"].iloc[1:].to_numpy() == pytest.approx(
        commons["position.high_north"].iloc[:-1].to_numpy(), abs=0.005 + 1e-9
    )
    assert (sensors["commons_t_l4"] >= sensors["commons_t_l3"]).all()
    assert (sensors["commons_t_l3"] >= sensors["commons_t_l1"]).all()
    assert (sensors["commons_t_l4"] - sensors["commons_t_l1"]).max() > 0.5
    assert drill.unsourced_points == ()


# ------------------------------------------------------------------------- faults


def test_indoor_sensors_drop_out_to_the_fault_state(site: SiteConfig, building: Building) -> None:
    result = scenario_run(
        site,
        building,
        """
        events:
          - sensor: {point: commons_t_l1, fault: dropout, at: "2024-07-02 14:00", duration: 1 h}
          - sensor: {point: commons_t_l3, fault: dropout, at: "2024-07-02 14:00", duration: 1 h}
          - sensor: {point: commons_t_l4, fault: dropout, at: "2024-07-02 14:00", duration: 1 h}
        """,
        end="2024-07-02 15:30",
    )
    # Held values stay usable until stale (stale_after 10 min), then the zone's
    # fallback: closed (layer 3).
    assert at(result, "commons", "2024-07-02 14:05")["mode"] == Mode.FREE_COOLING.value
    row = at(result, "commons", "2024-07-02 14:15")
    assert row["mode"] == Mode.FAULT.value and row["cause"] == "fault"
    assert all(row[f"position.{name}"] == 0.0 for name in COMMONS_OPENINGS)
    assert result.sensors["commons_t_l1"].loc["2024-07-02 19:00Z":"2024-07-02 19:59Z"].isna().all()
    assert at(result, "commons", "2024-07-02 15:20")["mode"] != Mode.FAULT.value


def test_implausible_spike_is_rejected_and_sticking_values_stay(
    site: SiteConfig, building: Building
) -> None:
    result = scenario_run(
        site,
        building,
        """
        events:
          - sensor: {point: outdoor_temp, fault: spike, value: 185 degF, at: "2024-07-02 14:00"}
          - sensor: {point: commons_t_l4, fault: stick, value: 30 C, at: "2024-07-02 13:30"}
        """,
        end="2024-07-02 14:30",
    )
    # 85 °C is outside the temperature range (-50 to 70 °C): never held, so the
    # outdoor temperature goes stale after 10 min and layer 3 closes the zone.
    assert result.sensors["outdoor_temp"].loc["2024-07-02 19:00Z":].isna().all()
    assert at(result, "commons", "2024-07-02 14:05")["mode"] == Mode.FREE_COOLING.value
    row = at(result, "commons", "2024-07-02 14:15")
    assert row["mode"] == Mode.FAULT.value
    # The stuck upper sensor keeps reporting 30 °C, so the max aggregate keeps it open wide;
    # its gateway sends the steady value again every 4 min (reporting.repeat).
    stuck = result.sensors["commons_t_l4"].loc["2024-07-02 18:30Z":"2024-07-02 19:29Z"]
    assert (stuck.ffill() == 30.0).all()
    assert stuck.notna().sum() == 60 // 4
    assert at(result, "commons", "2024-07-02 13:50")["target.high_north"] == 1.0


def test_jammed_actuator_is_caught_by_its_feedback(site: SiteConfig, building: Building) -> None:
    result = scenario_run(
        site,
        building,
        """
        events:
          - actuator_jam: {zone: commons, opening: high_north, at: "2024-07-02 12:00", position: 0 %}
        """,
        end="2024-07-02 13:30",
    )
    commons = result.zones["commons"]
    assert (commons["position.high_north"] == 0.0).all()
    # Layer 2 declares an actuator fault once the feedback disagrees for 3 min.
    faults = result.changes[result.changes["cause"] == "actuator"]
    assert not faults.empty
    assert "actuator fault: high_north reads 0 %" in faults["reason"].iloc[0]
    assert faults["time"].iloc[0] - pd.Timestamp("2024-07-02 13:00", tz=TZ) <= pd.Timedelta(
        minutes=5
    )


def test_gust_and_occupancy(site: SiteConfig, building: Building) -> None:
    result = scenario_run(
        site,
        building,
        """
        events:
          - gust: {at: "2024-07-02 13:30", duration: 10 min, speed: 15 m/s, direction: 0 deg}
          - occupancy: {zone: commons, people: 300, at: "2024-07-02 13:00", duration: 1 h}
        """,
        end="2024-07-02 14:30",
    )
    row = at(result, "commons", "2024-07-02 13:35")
    assert row["mode"] == Mode.PROTECTED.value and row["cause"] == "wind"
    assert result.outdoor["wind_speed_station"].loc["2024-07-02 18:35Z"] == 15.0
    commons = result.zones["commons"]
    before = commons["gains_internal"].loc["2024-07-02 18:30Z"]
    after = commons["gains_internal"].loc["2024-07-02 19:15Z"]
    people_after = commons["people"].loc["2024-07-02 19:15Z"]
    assert before - after == pytest.approx((300.0 - people_after) * 70.0)


# ------------------------------------------------------------------------- records


def test_recorded_heat_flows_close_the_balance(site: SiteConfig, building: Building) -> None:
    # Over a run, the recorded series close the ISO 13790 balance per step: gains minus the
    # routed window share = ventilation (openings, infiltration, plant air, through
    # physics.sensible_heat_flow) + windows + opaque envelope + storage.
    weather = synthetic(41.2, -88.1, TZ, "2024-04-30", "2024-05-05", seed=4)
    result = run(
        site, building, weather, start="2024-05-01", end="2024-05-04", step=600.0, zones=["commons"]
    )
    frame = result.zones["commons"]
    zone = building.zones["commons"]
    params = zone.rc_parameters()
    outdoor = result.outdoor
    t_out = outdoor["temp_outdoor"].to_numpy()
    density = outdoor["density"].to_numpy()
    flow = frame[["flow", "flow_infiltration", "flow_mechanical"]].sum(axis=1).to_numpy()
    ventilation = density * 1005.0 * flow * (frame["temp_air"].to_numpy() - t_out)
    assert frame["cooling"].to_numpy() == pytest.approx(
        density * 1005.0 * frame["flow"].to_numpy() * (frame["temp_air"].to_numpy() - t_out)
    )
    window = params.conductance_window * (frame["temp_surface"].to_numpy() - t_out)
    mass_end = frame["temp_mass"].to_numpy()
    mass_start = np.concatenate(([21.0], mass_end[:-1]))
    air_end = frame["temp_air_end"].to_numpy()
    air_start = np.concatenate(([21.0], air_end[:-1]))
    storage = (
        params.capacity * (mass_end - mass_start) + params.capacity_air * (air_end - air_start)
    ) / 600.0
    # The mass temperature the fluxes used is recovered from the surface node balance.
    ground = float(np.mean(t_out))
    opaque_exterior = zone.opaque_exterior_temperature(t_out, ground)
    gains = frame["gains_internal"].to_numpy() + frame["gains_solar"].to_numpy()
    heating = frame["heating"].to_numpy() - frame["cooling_mechanical"].to_numpy()
    routed = params.share_window * (0.5 * frame["gains_internal"].to_numpy() + frame["gains_solar"])
    to_surfaces = 0.5 * frame["gains_internal"].to_numpy() + frame["gains_solar"].to_numpy()
    surface = frame["temp_surface"].to_numpy()
    air = frame["temp_air"].to_numpy()
    mass_used = (
        surface
        * (
            params.conductance_air_surface
            + params.conductance_window
            + params.conductance_surface_mass
        )
        - params.share_surface * to_surfaces
        - params.conductance_window * t_out
        - params.conductance_air_surface * air
    ) / params.conductance_surface_mass
    opaque = params.conductance_opaque * (mass_used - opaque_exterior)
    residual = gains + heating - routed - (ventilation + window + opaque + storage)
    assert np.abs(residual).max() < 1e-6 * np.abs(gains).max()


def test_summary_and_monthly_hours(drill: Result) -> None:
    summary = drill.summary()
    assert list(summary.index) == ["commons", "classroom_east", "studio_west"]
    assert summary.loc["commons", "free_cooling_hours"] == pytest.approx(
        (drill.zones["commons"]["mode"] == "free_cooling").sum() / 60.0
    )
    assert summary.loc["commons", "peak_temperature"] == pytest.approx(
        drill.zones["commons"]["temp_indoor"].max()
    )
    monthly = drill.monthly_hours()
    assert monthly.loc[(2024, 7), "commons"] == pytest.approx(
        summary.loc["commons", "free_cooling_hours"]
    )


def test_occupied_hours_match_the_core_schedule(site: SiteConfig) -> None:
    local = pd.date_range("2024-03-08", "2024-03-18", freq="7min", tz=TZ)
    for rules in site.rules.values():
        for periods in (rules.schedule.occupied, rules.schedule.security):
            mine = in_periods(local, periods)
            core = [any(in_period(p, t.to_pydatetime()) for p in periods) for t in local]
            assert mine.tolist() == core


def test_run_refuses_what_it_cannot_do(site: SiteConfig, building: Building) -> None:
    weather = mild_afternoon()
    with pytest.raises(SimulatorError, match="step: got 0"):
        run(site, building, weather, step=0.0)
    with pytest.raises(SimulatorError, match="zone 'atrium' is not in both"):
        run(site, building, weather, zones=["atrium"])
    with pytest.raises(SimulatorError, match="is not after start"):
        run(site, building, weather, start="2024-07-02 15:00", end="2024-07-02 14:00")
    with pytest.raises(SimulatorError, match="covers"):
        run(site, building, weather, start="2024-07-03 15:00", end="2024-07-03 16:00")


def test_fixed_controller_holds_the_openings(site: SiteConfig, building: Building) -> None:
    result = run(
        site,
        building,
        mild_afternoon(),
        start="2024-07-02 13:00",
        end="2024-07-02 14:00",
        controller=FixedController(site, 0.5),
    )
    assert (result.zones["commons"]["position.low_north"].iloc[1:] == 0.5).all()
    assert CoreController(site).config is site


# ------------------------------------------------------------------------- what-if


def test_what_if_opening_area_and_threshold(site: SiteConfig, building: Building) -> None:
    mild = Climate(
        (0.0, 0.0, 5.0, 10.0, 17.0, 20.0, 22.0, 22.0, 18.0, 12.0, 5.0, 0.0),
        daily_range=10.0,
        dew_point_depression=10.0,
        wind_speed=3.0,
        wet_fraction=0.03,
    )
    weather = synthetic(41.2, -88.1, TZ, "2024-05-19", "2024-05-27", mild, seed=2)
    span = {"start": "2024-05-20", "end": "2024-05-25", "step": 600.0, "zones": ["commons"]}
    seen: list[float] = []
    area = what_if(
        site, building, weather, "opening_area", [0.25, 1.0, 2.0], progress=seen.append, **span
    )
    # Progress over all three runs: never back, each run's end once, 1.0 once at the end.
    assert seen == sorted(seen) and seen[-1] == 1.0 and seen.count(1.0) == 1
    assert seen.count(pytest.approx(1 / 3)) == 1 and seen.count(pytest.approx(2 / 3)) == 1
    assert list(area.columns) == [
        "free_cooling_hours",
        "hours_above_comfort",
        "peak_temperature",
        "cooling_kwh",
    ]
    assert area.index.names == ["opening_area", "zone"]
    peaks = area["peak_temperature"].to_numpy()
    cooling = area["cooling_kwh"].to_numpy()
    assert peaks[0] > peaks[1] > peaks[2]  # more free area, a cooler hall
    assert cooling[0] < cooling[1] < cooling[2]
    threshold = what_if(
        site, building, weather, "hall.free_cooling.open_above", [22.0, 24.0], **span
    )
    hours = threshold["free_cooling_hours"].to_numpy()
    assert hours[0] > hours[1] > 0.0  # opening earlier cools for longer


def test_what_if_helpers(site: SiteConfig) -> None:
    bigger = scale_opening_area(site, 2.0)
    assert bigger.zones["commons"].openings["low_north"].area == pytest.approx(6.4)
    assert bigger.rules == site.rules
    changed = set_rule(site, "free_cooling.open_above", 24.0)
    assert {r.free_cooling.open_above for r in changed.rules.values()} == {24.0}
    one = set_rule(site, "rooms.free_cooling.open_above", 24.0)
    assert one.rules["hall"].free_cooling.open_above == 23.0
    with pytest.raises(SimulatorError, match=r"no free_cooling\.open_abov in rule set"):
        set_rule(site, "free_cooling.open_abov", 24.0)
    with pytest.raises(SimulatorError, match=r"expected 'section\.field'"):
        set_rule(site, "open_above", 24.0)
    # Text is read as the site file reads it: 75 °F is (75 - 32) x 5/9 °C (the
    # definition of the Fahrenheit scale; the site loader keeps 9 decimals), 2 h
    # is 7200 s.
    fahrenheit = set_rule(site, "free_cooling.open_above", "75 F")
    assert rule_value(fahrenheit, "free_cooling.open_above") == pytest.approx(
        (75.0 - 32.0) * 5.0 / 9.0, abs=1e-9
    )
    assert rule_quantity(site, "free_cooling.open_above") == "temperature"
    assert rule_value(set_rule(site, "hall.wind.hold", "2 h"), "hall.wind.hold") == 7200.0
    assert rule_quantity(site, "wind.hold") == "duration"
    with pytest.raises(SimulatorError, match=r"rule path 'free_cooling.open_above' = '75 mph'"):
        set_rule(site, "free_cooling.open_above", "75 mph")


# ------------------------------------------------------------------------- a real year


@pytest.fixture(scope="module")
def tmy_year(site: SiteConfig, building: Building) -> Result:
    """pvlib's TMY3 sample (Greensboro NC), read from the installed package, at 1-h steps."""
    path = Path(pvlib.__file__).parent / "data" / "723170TYA.CSV"
    data, meta = pvlib.iotools.read_tmy3(path, coerce_year=1990)
    weather = from_hour_ending(
        data, latitude=meta["latitude"], longitude=meta["longitude"], source=path.name
    )
    return run(site, building, weather, start="1990-01-01", end="1991-01-01", step=3600.0)


def test_tmy_year_runs_with_plausible_temperatures(tmy_year: Result) -> None:
    for name, frame in tmy_year.zones.items():
        assert len(frame) == 8760, name
        assert frame["temp_air"].between(5.0, 45.0).all(), name
    summary = tmy_year.summary()
    assert (summary["heating_kwh"] > 0.0).all()
    assert summary.loc["classroom_east", "cooling_mechanical_kwh"] > 0.0
    assert summary.loc["commons", "cooling_mechanical_kwh"] == 0.0  # the hall has no chiller


def test_tmy_year_monthly_free_cooling_hours(tmy_year: Result) -> None:
    # Plausibility bounds for the hall (rules "hall"): free cooling needs an occupied hour,
    # a warm hall (>= 23 °C) and outdoor air of 12-23 °C with a dew point <= 16 °C.
    # - January (Greensboro mean about 4 °C) hardly ever qualifies: <= 10 h.
    # - The shoulder months (Apr, May, Sep, Oct) have mild, dry air while gains warm the
    #   hall: each >= 20 h and more than January.
    # - Midsummer (Jun-Aug) air is too warm or too humid (dew point above 16 °C) most of
    #   the time: on average less than half the shoulder months.
    # - No month exceeds its occupied hours (about 14 h x 22 days + 8 h x 4 Saturdays).
    hours = tmy_year.monthly_hours()["commons"].loc[1990]
    assert hours[1] <= 10.0
    shoulder = hours[[4, 5, 9, 10]]
    assert (shoulder >= 20.0).all() and (shoulder > hours[1]).all()
    assert hours[[6, 7, 8]].mean() < 0.5 * shoulder.mean()
    assert (hours <= 350.0).all()
    assert 100.0 <= hours.sum() <= 1500.0
