"""The in-process closed loop: building, weather and scenario around the decision core.

Each step of ``step`` seconds, at time t:

1. the simulator publishes a :class:`~ventsup.core.inputs.Sample` for every
   point of the site config it can source (in SI, with the scenario's faults;
   an implausible value is dropped as the daemon's decoder would drop it), as
   the building's gateways report (:class:`~simulator.building.Reporting`:
   every step, or rounded to a resolution and only on change and when due
   again);
2. the samples are held (:class:`~ventsup.core.inputs.Held`) and each zone is
   decided by the controller: by default :func:`ventsup.core.decide.decide`
   on :func:`ventsup.core.inputs.zone_inputs`, exactly as the daemon and the
   replay do (where the core would only repeat its last outcome, as the
   replay's fast path shows from its comparisons, the outcome is repeated
   without asking it: see :mod:`simulator._steps`);
3. the actuators move toward the targets (released openings go where the
   fire system drives them, or stay);
4. the airflow through each zone follows from the openings' mean positions
   over the step; with infiltration and the air handler's outdoor air it sets
   the ventilation conductance, and the zone model advances to t + step, the
   ideal plant heating or cooling to its set points (the cooling set point
   rises while the decision reports the windows open: the HVAC interlock).

Steps 3 and 4 run in a compiled kernel (:mod:`simulator._kernel`, numba)
over spans of steps between decisions; it restates the formulas of
:mod:`simulator.building` and :mod:`simulator.openings` and is tested equal
to them to rounding.

A row of the result is labelled by the start of its step: the decision taken
at t, the positions reached by t + step, the step's mean temperatures and
flows. The stack flow uses the air temperature at the start of the step (an
explicit coupling; the air node's heat capacity keeps the change within a
step small).

Where each point's value comes from
-----------------------------------
=============================  =================================================
point (by its role)            value
=============================  =================================================
outdoor temperature, humidity  the weather at t
outdoor dew point              from temperature and humidity (ventsup.core.psychro)
wind speed                     the wind at the rooftop station's height
                               (``Building.station_height``), or the gust
wind direction                 the weather (or the gust's direction)
rain                           the weather's flag or a scripted rain spell
zone temperature sensor        zone air temperature on the stratified profile
                               at the sensor's height
CO2                            a well-mixed CO2 balance of the zone
smoke alarm                    false, or true in a smoke drill
heating status                 true while the zone's ideal heating delivers heat
opening feedback               the actuator's position
=============================  =================================================

Points with none of these roles are not published; :attr:`Result.unsourced_points`
lists them.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from datetime import datetime
from typing import Any, Protocol

import numpy as np
import numpy.typing as npt
import pandas as pd
from pydantic import BaseModel, ValidationError

from simulator import _kernel, _steps
from simulator.building import Building, ZoneModel, solar_gains
from simulator.errors import SimulatorError
from simulator.openings import OpeningModel, ventilation_heat
from simulator.scenario import Scenario, timeline
from simulator.solar import solar_position
from simulator.weather import Weather, to_epoch_seconds
from ventsup.config._schema import field_quantity
from ventsup.config.model import Period, PointKind, SiteConfig
from ventsup.core import physics, psychro
from ventsup.core.decide import decide
from ventsup.core.figures import FACTS, decisions_to_frame
from ventsup.core.horizon import Readings, grid_readings, outdoor_dew_point, zone_features
from ventsup.core.inputs import Held, zone_inputs, zone_points
from ventsup.core.state import Cause, Decision, Layer, Mode, ZoneState

__all__ = [
    "Controller",
    "CoreController",
    "FixedController",
    "Result",
    "in_periods",
    "rule_quantity",
    "rule_value",
    "run",
    "scale_opening_area",
    "set_rule",
    "what_if",
]

FloatArray = npt.NDArray[np.float64]
_SPECIFIC_HEAT_AIR = 1005.0  # [J/(kg·K)], as ventsup.core.physics.sensible_heat_flow


class Controller(Protocol):
    """Decides one zone at one time from the held samples, like the daemon does."""

    def __call__(
        self, zone: str, held: Held, state: ZoneState, t: float
    ) -> tuple[Decision, ZoneState]: ...


@dataclass(frozen=True)
class CoreController:
    """The decision core: :func:`~ventsup.core.inputs.zone_inputs` then :func:`~ventsup.core.decide.decide`."""

    config: SiteConfig
    #: In :func:`run`, repeat an outcome the core would repeat instead of asking
    #: it again (exact; see :mod:`simulator._steps`). False: ask it every step.
    skip_repeats: bool = True

    def __call__(
        self, zone: str, held: Held, state: ZoneState, t: float
    ) -> tuple[Decision, ZoneState]:
        """Decide ``zone`` at ``t`` [s since the epoch]."""
        return decide(self.config, zone, zone_inputs(self.config, zone, held, t), state, t)


@dataclass(frozen=True)
class FixedController:
    """Every opening at ``fraction`` [0-1], without the core: for calibration and benchmarks.

    It returns the same :class:`~ventsup.core.state.Decision` for a zone every
    time (its ``t`` is that of the first call), so that it costs next to
    nothing and a benchmark measures the simulator alone.
    """

    config: SiteConfig
    fraction: float = 0.0
    _decisions: dict[str, Decision] = field(
        default_factory=dict, init=False, repr=False, compare=False
    )

    def __call__(
        self, zone: str, held: Held, state: ZoneState, t: float
    ) -> tuple[Decision, ZoneState]:
        """A decision holding the zone's openings at ``fraction``."""
        decision = self._decisions.get(zone)
        if decision is None:
            openings = self.config.zones[zone].openings
            decision = Decision(
                zone=zone,
                t=t,
                targets=dict.fromkeys(openings, self.fraction),
                mode=Mode.IDLE,
                layer=Layer.COMFORT,
                cause=Cause.COMFORT,
                reason=f"fixed at {self.fraction:.0%} (no controller)",
                windows_open=self.fraction > 0.0,
                open_area=sum(o.area for o in openings.values()) * self.fraction,
            )
            self._decisions[zone] = decision
        return decision, state


# ---------------------------------------------------------------------------------- result


@dataclass(frozen=True, eq=False)
class Result:
    """What a run recorded, one row per step (labelled by the step's start, UTC).

    ``zones[name]`` columns: ``temp_air``, ``temp_operative``, ``temp_surface``
    (step means) and ``temp_mass``, ``temp_air_end`` (end of the step) [°C];
    ``temp_indoor`` [°C], the zone temperature as the zone's sensors (true
    values, no faults) aggregate it; ``gradient`` [K/m];
    ``flow``, ``flow_stack``, ``flow_wind`` (through the openings),
    ``flow_infiltration`` and ``flow_mechanical`` [m³/s]; ``cooling`` [W],
    heat the airflow through the openings removes (negative: it brings heat
    in); ``heating`` and ``cooling_mechanical`` [W] of the ideal plant;
    ``gains_internal``, ``gains_solar``, ``gains_latent`` [W]; ``people``;
    ``co2`` [ppm]; ``occupied`` (the rules' occupied hours); ``mode``,
    ``layer``, ``cause`` of the decision; ``windows_open``; per opening
    ``position.<name>`` [0-1] and ``target.<name>`` [0-1, NaN when released].

    ``outdoor``: ``temp_outdoor``, ``relative_humidity``, ``wind_speed`` (met
    station), ``wind_speed_station`` (what the wind point reads),
    ``wind_direction``, ``rain`` (with scripted rain), ``density``.
    ``sensors``: the value each point published (NaN: nothing published).
    ``changes``: one row whenever a zone's mode or targets change, with the
    reason. ``calls``: how often the controller (or the decision core) was
    asked, all zones together. ``published``: what ``sensors`` holds, in full
    precision (float64 per point). ``reasons``: ``time``, ``zone``, ``reason``,
    one row whenever the reason of a zone's latest decision changes (the core
    gives its reason at every call, also where the outcome stays the same).
    """

    config: SiteConfig
    building: Building
    step: float
    zones: Mapping[str, pd.DataFrame]
    outdoor: pd.DataFrame
    sensors: pd.DataFrame
    changes: pd.DataFrame
    unsourced_points: tuple[str, ...] = ()
    calls: int = 0
    published: Mapping[str, FloatArray] = field(default_factory=dict)
    reasons: pd.DataFrame = field(
        default_factory=lambda: pd.DataFrame(
            {"time": pd.to_datetime([], utc=True), "zone": [], "reason": []}
        )
    )

    def readings(self, names: Iterable[str] | None = None) -> dict[str, Readings]:
        """Each point's reading at every step as the core read it (all published points
        by default): the last sample published at or before the step, fresh while no
        older than the point's ``stale_after`` (as :func:`ventsup.core.inputs.read_point`).
        A point that published nothing is absent."""
        t = to_epoch_seconds(pd.DatetimeIndex(self.outdoor.index))
        found: dict[str, Readings] = {}
        for name in self.published if names is None else names:
            values = self.published.get(name)
            if values is not None:
                stale_after = self.config.points[name].stale_after
                found[name] = grid_readings(t, values, stale_after)[1]
        return found

    def decisions_frame(self) -> pd.DataFrame:
        """The decisions table of :func:`ventsup.core.figures.decisions_to_frame`, one row
        per step and zone (ordered by time, then zone), without asking the core again.

        The outcome (mode, layer, cause, targets, windows open) is the step's row of
        :attr:`zones`; the reason that of the zone's latest decision (:attr:`reasons`;
        where the core's outcome repeats, its reason text may differ from the one a
        call at that step would give, such as a temperature it quotes); the open area
        and the facts are read from what the points published, as the core reads them
        (:meth:`readings`, :func:`ventsup.core.horizon.zone_features` for the indoor
        temperature and the outdoor dew point).
        """
        config = self.config
        t = to_epoch_seconds(pd.DatetimeIndex(self.outdoor.index))
        n = t.size
        openings = sorted({name for zone in config.zones.values() for name in zone.openings})
        # Each reason's step: the one nearest its time (the steps are ``step`` apart).
        index_ns = pd.DatetimeIndex(self.outdoor.index).as_unit("ns").asi8
        half_step = round(self.step * 5e8)
        reason_ns = pd.DatetimeIndex(self.reasons["time"]).as_unit("ns").asi8
        reason_step = np.searchsorted(index_ns, reason_ns + half_step, side="right") - 1
        reason_zone = self.reasons["zone"].to_numpy(dtype=object)
        reason_text = self.reasons["reason"].to_numpy(dtype=object)
        outdoor = config.outdoor
        frames = []
        every = self.readings()  # once: the zones share the outdoor points
        dew_point = outdoor_dew_point(config, every, n)
        for order, (zone, frame) in enumerate(self.zones.items()):
            spec = config.zones[zone]
            readings = {name: every[name] for name in zone_points(config, zone) if name in every}
            features = zone_features(config, zone, readings, n, dew_point=dew_point)

            def values(name: str | None, readings: Mapping[str, Readings] = readings) -> FloatArray:
                found = readings.get(name) if name is not None else None
                return np.full(n, np.nan) if found is None else found.value

            mine = reason_zone == zone
            at = np.searchsorted(reason_step[mine], np.arange(n), side="right") - 1
            texts = np.append(reason_text[mine], "")  # "": before the zone's first decision
            reason = texts[np.where(at >= 0, at, texts.size - 1)]
            open_area = np.zeros(n)
            for name, opening in spec.openings.items():
                target = frame[f"target.{name}"].to_numpy()
                feedback = values(opening.feedback)
                position = np.where(np.isnan(target), np.nan_to_num(feedback, nan=1.0), target)
                open_area = open_area + opening.area * position
            columns: dict[str, Any] = {
                "t": t,
                "zone": np.full(n, zone, dtype=object),
                "mode": frame["mode"].astype(str).to_numpy(dtype=object),
                "layer": frame["layer"].to_numpy(dtype=np.int64),
                "cause": frame["cause"].astype(str).to_numpy(dtype=object),
                "reason": reason,
                "windows_open": frame["windows_open"].to_numpy(dtype=bool),
                "open_area": np.round(open_area, 9),
            }
            for name in openings:
                column = f"target.{name}"
                columns[f"target:{name}"] = (
                    frame[column].to_numpy(dtype=np.float64)
                    if name in spec.openings
                    else np.full(n, np.nan)
                )
            facts = {
                "temp_indoor": features.temp_indoor,
                "temp_outdoor": values(outdoor.temperature),
                "dew_point_outdoor": features.dew_point_outdoor,
                "co2": values(spec.co2),
                "heating": np.zeros(n) if spec.heating is None else values(spec.heating),
                "occupied": frame["occupied"].to_numpy(dtype=np.float64),
                "wind_speed": values(outdoor.wind_speed),
                "wind_direction": values(outdoor.wind_direction),
                "rain": values(outdoor.rain),
            }
            for name in FACTS:
                columns[f"fact:{name}"] = facts[name]
            columns["_order"] = np.full(n, order)
            frames.append(pd.DataFrame(columns))
        if not frames:
            return decisions_to_frame([], config)
        table = pd.concat(frames, ignore_index=True)
        table = table.sort_values(["t", "_order"], kind="stable", ignore_index=True)
        table = table.drop(columns="_order")
        for name in ("zone", "mode", "cause", "reason"):
            table[name] = pd.Series(table[name].to_numpy(), dtype=str)
        return table

    def summary(self) -> pd.DataFrame:
        """Per zone: hours by use, comfort and energy.

        ``free_cooling_hours`` and ``night_flush_hours``: time in those modes;
        ``open_hours``: any opening open; ``hours_above_comfort``: occupied
        hours with ``temp_indoor`` above the rules' ``comfort.high``;
        ``peak_temperature`` [°C] of ``temp_indoor``; ``cooling_kwh``: heat
        removed through the openings while it cooled; ``heating_kwh`` and
        ``cooling_mechanical_kwh`` of the ideal plant.
        """
        hours = self.step / 3600.0
        rows = {}
        for name, frame in self.zones.items():
            high = self.config.rules_for(name).comfort.high
            positions = frame[[c for c in frame.columns if c.startswith("position.")]]
            rows[name] = {
                "free_cooling_hours": float((frame["mode"] == Mode.FREE_COOLING.value).sum())
                * hours,
                "night_flush_hours": float((frame["mode"] == Mode.NIGHT_FLUSH.value).sum()) * hours,
                "open_hours": float((positions > 0.0).any(axis=1).sum()) * hours,
                "hours_above_comfort": float(
                    ((frame["temp_indoor"] > high) & frame["occupied"]).sum()
                )
                * hours,
                "peak_temperature": float(frame["temp_indoor"].max()),
                "cooling_kwh": float(frame["cooling"].clip(lower=0.0).sum()) * hours / 1000.0,
                "heating_kwh": float(frame["heating"].sum()) * hours / 1000.0,
                "cooling_mechanical_kwh": float(frame["cooling_mechanical"].sum()) * hours / 1000.0,
            }
        return pd.DataFrame.from_dict(rows, orient="index").rename_axis("zone")

    def monthly_hours(self, mode: Mode | str = Mode.FREE_COOLING) -> pd.DataFrame:
        """Hours per calendar month (site time) in ``mode``, one column per zone."""
        value = Mode(mode).value
        tz = self.config.site.time_zone
        hours = self.step / 3600.0
        columns = {}
        for name, frame in self.zones.items():
            local = pd.DatetimeIndex(frame.index).tz_convert(tz)
            in_mode = (frame["mode"] == value).astype(float) * hours
            columns[name] = in_mode.groupby([local.year, local.month]).sum()
        result = pd.DataFrame(columns)
        return result.rename_axis(["year", "month"])


# ---------------------------------------------------------------------------------- schedule


def in_periods(local: pd.DatetimeIndex, periods: Iterable[Period]) -> npt.NDArray[np.bool_]:
    """True where a local wall-clock time falls in any of ``periods``.

    The same rule as :func:`ventsup.core.layers.schedule.in_period`, over an
    index: a period that crosses midnight belongs to the day it starts on.
    """
    minute = np.asarray(local.hour * 60 + local.minute)
    day = np.asarray(local.day_of_week)
    result = np.zeros(len(local), dtype=bool)
    for period in periods:
        days = np.isin(day, list(period.days))
        if period.start_minute < period.end_minute:
            result |= days & (minute >= period.start_minute) & (minute < period.end_minute)
        else:
            before = np.isin((day - 1) % 7, list(period.days))
            result |= (days & (minute >= period.start_minute)) | (
                before & (minute < period.end_minute)
            )
    return result


# ---------------------------------------------------------------------------------- run


def _timestamp(value: object, time_zone: str) -> pd.Timestamp:
    if isinstance(value, pd.Timestamp | datetime | str | np.datetime64):
        stamp = pd.Timestamp(value)
    else:
        raise SimulatorError(f"expected a time, got {value!r}")
    if stamp.tz is None:
        stamp = stamp.tz_localize(time_zone)
    return stamp.tz_convert("UTC")


@dataclass
class _Zone:
    """Per-zone constants and per-step inputs of a run (internal)."""

    name: str
    model: ZoneModel
    openings: tuple[OpeningModel, ...]
    opening_index: tuple[int, ...]
    gains_internal: FloatArray
    gains_solar: FloatArray
    gains_latent: FloatArray
    people: FloatArray
    co2_generation: FloatArray
    setpoint_heating: FloatArray
    setpoint_cooling: FloatArray
    setpoint_cooling_open: float
    max_heating: float
    max_cooling: float
    mechanical_flow: FloatArray
    wind: FloatArray
    temp_opaque: FloatArray
    sensor_offsets: dict[str, float] = field(default_factory=dict)


def run(
    site_config: SiteConfig,
    building: Building,
    weather: Weather,
    scenario: Scenario | None = None,
    start: object = None,
    end: object = None,
    step: float = 60.0,
    *,
    controller: Controller | None = None,
    zones: Sequence[str] | None = None,
    initial_temperature: float = 21.0,
    progress: Callable[[float], None] | None = None,
) -> Result:
    """Simulate the building in closed loop with a controller from ``start`` to ``end``.

    Parameters
    ----------
    site_config : SiteConfig
        The site: points, zones, openings and rules (the controller's config).
    building : Building
        The thermal side (:func:`simulator.building.load_building`).
    weather : Weather
        Outdoor weather covering the run.
    scenario : Scenario, optional
        Scripted events (:func:`simulator.scenario.load_scenario`).
    start, end : str, datetime or Timestamp, optional
        The span; naive times are in the site's time zone. Default: the
        weather's span.
    step : float, default 60.0
        Time step [s]; the controller decides every step.
    controller : Controller, optional
        Default :class:`CoreController` (the decision core).
    zones : sequence of str, optional
        Simulate only these zones (their points only are published).
    initial_temperature : float, default 21.0
        Temperature of every node at the start [°C].
    progress : callable, optional
        Called with the share done (0-1) about every 1 % of the run.

    Returns
    -------
    Result
    """
    controller = controller if controller is not None else CoreController(site_config)
    plan = _plan(site_config, building, weather, scenario, start, end, step, zones)
    return plan.simulate(controller, initial_temperature, progress)


def _plan(
    site_config: SiteConfig,
    building: Building,
    weather: Weather,
    scenario: Scenario | None,
    start: object,
    end: object,
    step: float,
    zones: Sequence[str] | None = None,
) -> _Plan:
    """The plan :func:`run` makes, its arguments checked (tests trace its loop)."""
    if not step > 0:
        raise SimulatorError(f"step: got {step!r} s, expected a positive number of seconds")
    tz = site_config.site.time_zone
    first = _timestamp(start, tz) if start is not None else weather.start.ceil(f"{step}s")
    last = _timestamp(end, tz) if end is not None else weather.end
    if not last > first:
        raise SimulatorError(f"end {last} is not after start {first}")
    times = pd.date_range(first, last, freq=pd.Timedelta(seconds=step), inclusive="left")
    names = list(site_config.zones) if zones is None else list(zones)
    for name in names:
        if name not in site_config.zones or name not in building.zones:
            raise SimulatorError(
                f"zone {name!r} is not in both the site config and the building; "
                f"zones: {', '.join(building.zones)}"
            )
    return _Plan(site_config, building, weather.at(times), scenario, times, names, step)


class _Plan:
    """Everything precomputed for a run, then the step loop (internal)."""

    def __init__(
        self,
        config: SiteConfig,
        building: Building,
        weather: Weather,
        scenario: Scenario | None,
        times: pd.DatetimeIndex,
        names: list[str],
        step: float,
    ) -> None:
        self.config, self.building, self.times, self.names, self.step = (
            config,
            building,
            times,
            names,
            step,
        )
        t = to_epoch_seconds(times)
        self.t = t
        n = len(t)
        local = times.tz_convert(config.site.time_zone)
        events = timeline(scenario, t, float(t[0]))
        self.timeline = events

        temp = weather.array("temp_outdoor")
        humidity = weather.array("relative_humidity")
        rain = weather.array("rain").astype(bool) | events.rain
        met_speed = weather.array("wind_speed")
        station_ratio = float(
            physics.wind_speed_at_height(1.0, building.station_height, building.terrain)
        )
        station_speed = np.where(
            np.isnan(events.gust_speed), met_speed * station_ratio, events.gust_speed
        )
        direction = np.where(
            np.isnan(events.gust_direction), weather.array("wind_direction"), events.gust_direction
        )
        elevation = config.site.location.elevation if config.site.location else 0.0
        density = physics.air_density(temp, physics.standard_atmospheric_pressure(elevation))
        self.outdoor = pd.DataFrame(
            {
                "temp_outdoor": temp,
                "relative_humidity": humidity,
                "wind_speed": station_speed / station_ratio,
                "wind_speed_station": station_speed,
                "wind_direction": direction,
                "rain": rain,
                "density": density,
            },
            index=times,
        )

        latitude = weather.latitude
        longitude = weather.longitude
        if latitude is None or longitude is None:
            if config.site.location is None:
                raise SimulatorError(
                    "no location for the sun: give site.location in the site config or "
                    "weather with latitude and longitude"
                )
            latitude, longitude = config.site.location.latitude, config.site.location.longitude
        zenith, azimuth = solar_position(t, latitude, longitude)
        ground = (
            building.ground_temperature
            if building.ground_temperature is not None
            else float(np.mean(temp))
        )

        self.zones: list[_Zone] = []
        opening_count = 0
        for name in names:
            model = building.zones[name]
            site_zone = config.zones[name]
            openings = []
            for opening_name, opening in site_zone.openings.items():
                detail = model.openings[opening_name]
                height = opening.height if opening.height is not None else detail.height
                openings.append(
                    OpeningModel(
                        name=opening_name,
                        area=opening.area,
                        facing=opening.facing,
                        level=opening.level,
                        height=float(height if height is not None else 0.0),
                        opening_height=detail.opening_height,
                        discharge_coefficient=detail.discharge_coefficient,
                        travel_time=detail.travel_time,
                        fire_system_position=detail.fire_system_position,
                    )
                )
            people_count = np.zeros(n)
            if model.people is not None:
                people_count = model.people.count * model.people.schedule.values(local)
            override = events.occupancy.get(name)
            if override is not None:
                people_count = np.where(np.isnan(override), people_count, override)
            sensible = model.people.sensible if model.people else 0.0
            latent = model.people.latent if model.people else 0.0
            co2 = model.people.co2 if model.people else 0.0
            internal = people_count * sensible
            for load in (model.lights, model.equipment):
                if load is not None:
                    internal = (
                        internal
                        + load.power_density * model.floor_area * load.schedule.values(local)
                    )
            solar = solar_gains(
                model,
                zenith,
                azimuth,
                weather.array("dni"),
                weather.array("dhi"),
                weather.array("ghi"),
                building.ground_albedo,
            )
            setpoint_heating = np.full(n, -math.inf)
            if model.heating is not None:
                scheduled = model.heating.schedule.values(local)
                setpoint_heating = np.where(
                    scheduled > 0.5, model.heating.setpoint, model.heating.setback
                )
            setpoint_cooling = np.full(n, math.inf)
            if model.cooling is not None:
                scheduled = model.cooling.schedule.values(local)
                setpoint_cooling = np.where(scheduled > 0.5, model.cooling.setpoint, math.inf)
            mechanical = np.zeros(n)
            if model.ventilation is not None:
                mechanical = model.ventilation.flow * model.ventilation.schedule.values(local)
            zone_ratio = float(
                physics.wind_speed_at_height(1.0, model.wind_height, building.terrain)
            )
            self.zones.append(
                _Zone(
                    name=name,
                    model=model,
                    openings=tuple(openings),
                    opening_index=tuple(range(opening_count, opening_count + len(openings))),
                    gains_internal=np.asarray(internal, dtype=np.float64),
                    gains_solar=np.asarray(solar, dtype=np.float64),
                    gains_latent=np.asarray((people_count * latent), dtype=np.float64),
                    people=np.asarray(people_count, dtype=np.float64),
                    co2_generation=np.asarray((people_count * co2), dtype=np.float64),
                    setpoint_heating=np.asarray(setpoint_heating, dtype=np.float64),
                    setpoint_cooling=np.asarray(setpoint_cooling, dtype=np.float64),
                    setpoint_cooling_open=(
                        model.cooling.setpoint_windows_open if model.cooling else math.inf
                    ),
                    max_heating=model.heating.max_power if model.heating else 0.0,
                    max_cooling=model.cooling.max_power if model.cooling else 0.0,
                    mechanical_flow=np.asarray(mechanical, dtype=np.float64),
                    wind=np.asarray((station_speed / station_ratio * zone_ratio), dtype=np.float64),
                    temp_opaque=np.asarray(
                        model.opaque_exterior_temperature(temp, ground), dtype=np.float64
                    ),
                    sensor_offsets={
                        sensor: height - 0.5 * model.height
                        for sensor, height in model.sensors.items()
                    },
                )
            )
            opening_count += len(openings)
        self.temp = np.asarray(temp, dtype=np.float64)
        self.direction = np.asarray(direction, dtype=np.float64)
        self.rho_cp = np.asarray(density * _SPECIFIC_HEAT_AIR, dtype=np.float64)
        self.density = density
        self.occupied = {
            name: in_periods(local, config.rules_for(name).schedule.occupied) for name in names
        }
        self._plan_points(humidity, rain, station_speed, direction, temp)

    # ------------------------------------------------------------------ points

    def _plan_points(
        self,
        humidity: FloatArray,
        rain: npt.NDArray[np.bool_],
        station_speed: FloatArray,
        direction: FloatArray,
        temp: FloatArray,
    ) -> None:
        """Sort every point into precomputed (static) or per-step (dynamic) sources."""
        config, events, n = self.config, self.timeline, len(self.t)
        outdoor = config.outdoor
        static: dict[str, FloatArray | npt.NDArray[np.bool_]] = {
            outdoor.temperature: temp,
            outdoor.wind_speed: station_speed,
            outdoor.rain: rain,
        }
        if outdoor.humidity is not None:
            static[outdoor.humidity] = humidity
        if outdoor.wind_direction is not None:
            static[outdoor.wind_direction] = direction
        if outdoor.dew_point is not None:
            fraction = np.clip(humidity / 100.0, 0.01, 1.0)
            static[outdoor.dew_point] = psychro.dew_point_from_relative_humidity(temp, fraction)
        self.temperature_points: list[tuple[str, int, float]] = []
        self.co2_points: list[tuple[str, int]] = []
        self.heating_points: list[tuple[str, tuple[int, ...]]] = []
        self.position_points: list[tuple[str, int]] = []
        heating_zones: dict[str, list[int]] = {}
        for index, zone in enumerate(self.zones):
            site_zone = config.zones[zone.name]
            for sensor, offset in zone.sensor_offsets.items():
                self.temperature_points.append((sensor, index, offset))
            if site_zone.co2 is not None:
                self.co2_points.append((site_zone.co2, index))
            for alarm in site_zone.smoke_alarms:
                static[alarm] = events.alarms.get(alarm, np.zeros(n, dtype=bool))
            if site_zone.heating is not None:
                heating_zones.setdefault(site_zone.heating, []).append(index)
            for opening, global_index in zip(zone.openings, zone.opening_index, strict=True):
                feedback = site_zone.openings[opening.name].feedback
                if feedback is not None:
                    self.position_points.append((feedback, global_index))
        self.heating_points = [(p, tuple(z)) for p, z in heating_zones.items()]
        dynamic = {p[0] for p in self.temperature_points}
        dynamic |= {p[0] for p in self.co2_points}
        dynamic |= {p[0] for p in self.heating_points}
        dynamic |= {p[0] for p in self.position_points}
        self.static_published = self._publish_static(static, dynamic)
        sourced = set(static) | dynamic
        self.unsourced = tuple(sorted(set(config.points) - sourced))

    def _publish_static(
        self, static: Mapping[str, Any], dynamic: set[str]
    ) -> dict[str, FloatArray]:
        """Each precomputed point's value published at each step (NaN: nothing):
        rounded to the reporting resolution, faults and plausibility applied, and
        reported on change (with the points of its topic) if the building says so."""
        candidates = {name: self._candidate(name, values) for name, values in static.items()}
        reporting = self.building.reporting
        if not reporting.on_change or not candidates:
            return candidates
        names = list(candidates)
        for name in names:
            topic = self.config.points[name].topic
            shared = sorted(p for p in dynamic if self.config.points[p].topic == topic)
            if shared:
                raise SimulatorError(
                    f"points {name} and {', '.join(shared)} share the topic {topic!r}, but the "
                    "simulator computes the first before the run and the others step by step: "
                    "it cannot report them together on change (unfinished); give them topics "
                    "of their own or leave reporting.on_change out"
                )
        matrix = np.stack([candidates[name] for name in names], axis=1)
        sent = ~np.isnan(matrix)
        nothing = np.full(len(names), np.nan)
        _kernel.report_on_change(
            matrix,
            sent,
            self.t,
            reporting.repeat,
            nothing,
            nothing.copy(),
            _steps.topic_groups(self.config, names),
        )
        matrix[~sent] = np.nan
        return {name: np.ascontiguousarray(matrix[:, j]) for j, name in enumerate(names)}

    def _candidate(self, name: str, values: Any) -> FloatArray:
        """What a precomputed point would publish at each step (NaN: nothing), before
        reporting on change: rounded, faults and plausibility applied."""
        point = self.config.points[name]
        binary = point.kind is PointKind.BINARY
        reporting = self.building.reporting
        published = np.asarray(values, dtype=np.float64).copy()
        resolution = 0.0 if binary else reporting.resolution.get(point.kind, 0.0)
        if resolution > 0.0:
            published = _steps.round_to(published, resolution)
        fault = self.timeline.sensor_faults.get(name)
        if fault is not None:
            codes, fault_values = fault
            for code in (1, 2, 3):
                mask = codes == code
                if not mask.any():
                    continue
                if code == 1:
                    published[mask] = np.nan
                elif code == 3:
                    published[mask] = fault_values[mask]
                else:
                    starts = np.flatnonzero(mask & ~np.concatenate(([False], mask[:-1])))
                    for begin in starts:
                        stop = begin
                        while stop < len(mask) and mask[stop]:
                            stop += 1
                        given = float(fault_values[begin])
                        held = given if not np.isnan(given) else published[max(int(begin) - 1, 0)]
                        published[begin:stop] = held
        if not binary:
            low, high = point.plausible_range
            published[(published < low) | (published > high)] = np.nan
        return published

    # ------------------------------------------------------------------ loop

    def simulate(
        self,
        controller: Controller,
        initial_temperature: float,
        progress: Callable[[float], None] | None,
        trace: _steps.Trace | None = None,
    ) -> Result:
        """Run the step loop and collect the result.

        Everything that does not depend on the state was computed before (see
        :class:`_Plan`); the physics runs in the compiled kernel of
        :mod:`simulator._kernel` over spans of steps between decisions, and the
        decision core is asked only at the steps whose outcome is not known
        (see :mod:`simulator._steps`). ``trace`` (for tests) is told each
        zone's state whenever the loop holds it: after each decision, and at
        the end of each stretch of repeated outcomes.
        """
        zones = self.zones
        names = [zone.name for zone in zones]
        flat_openings = [o for zone in zones for o in zone.openings]
        opening_zone = [i for i, zone in enumerate(zones) for _ in zone.openings]
        kernel = self._kernel_arrays(flat_openings, opening_zone)
        points = _steps.Points(
            self.config,
            self.t,
            self.static_published,
            [
                *(
                    (name, _steps.TEMPERATURE, zi, offset)
                    for name, zi, offset in self.temperature_points
                ),
                *((name, _steps.CO2, zi, 0.0) for name, zi in self.co2_points),
                *((name, _steps.HEATING, zis, 0.0) for name, zis in self.heating_points),
                *((name, _steps.POSITION, oi, 0.0) for name, oi in self.position_points),
            ],
            self.timeline.sensor_faults,
            self.building.reporting,
        )
        skip = type(controller) is CoreController and controller.skip_repeats
        core_config = controller.config if skip else None  # type: ignore[attr-defined]
        outdoor = self.config.outdoor
        rain = points.readings[outdoor.rain]
        speed = points.readings[outdoor.wind_speed]
        loop = _steps.Loop(
            self.config,
            core_config,
            controller,
            type(controller) is FixedController,
            self.t,
            self.step,
            kernel,
            points,
            names,
            [zone.opening_index for zone in zones],
            self._dependents(opening_zone),
            initial_temperature,
            ~rain.ok | (rain.value == 1.0),
            np.where(speed.ok, speed.value, np.inf),
            trace,
        )
        loop.run(progress)
        self.decide_calls = loop.calls
        return self._result(
            loop.zone_rows,
            loop.outcomes,
            loop.target_rows,
            loop.position_rows,
            {name: points.rows[:, j] for name, j in points.column.items()},
            loop.changes,
            opening_zone,
            loop.reasons,
        )

    def _kernel_arrays(
        self, flat_openings: list[OpeningModel], opening_zone: list[int]
    ) -> _steps.Kernel:
        """The run's inputs in the layouts of :func:`simulator._kernel.run_steps`."""
        zones, n = self.zones, len(self.t)
        series = np.ascontiguousarray(np.stack([self.temp, self.direction, self.rho_cp], axis=1))
        zone_series = np.empty((len(zones), 8, n))
        zone_const = np.zeros((len(zones), _kernel.ZONE_CONSTANTS))
        for zi, zone in enumerate(zones):
            model = zone.model
            zone_series[zi] = [
                zone.wind,
                zone.mechanical_flow,
                zone.gains_internal,
                zone.gains_solar,
                zone.temp_opaque,
                zone.setpoint_heating,
                zone.setpoint_cooling,
                zone.co2_generation,
            ]
            params = model.rc_parameters()
            row = zone_const[zi]
            _kernel.set_rc_constants(row, params)
            row[_kernel.Z_INFILTRATION] = model.infiltration_flow
            row[_kernel.Z_VOLUME] = model.volume
            row[_kernel.Z_HEIGHT] = model.height
            row[_kernel.Z_PLUME_SHARE] = model.stratification.plume_share
            row[_kernel.Z_MIXING_AIR_CHANGES] = model.stratification.mixing_air_changes
            row[_kernel.Z_MAX_GRADIENT] = model.stratification.max_gradient
            row[_kernel.Z_SETPOINT_COOLING_OPEN] = zone.setpoint_cooling_open
            row[_kernel.Z_MAX_HEATING] = zone.max_heating
            row[_kernel.Z_MAX_COOLING] = zone.max_cooling
            row[_kernel.Z_FIRST_OPENING] = zone.opening_index[0] if zone.opening_index else 0
            row[_kernel.Z_END_OPENING] = zone.opening_index[-1] + 1 if zone.opening_index else 0
        opening_const = np.zeros((len(flat_openings), _kernel.OPENING_CONSTANTS))
        jammed = np.zeros((len(flat_openings), n), dtype=np.bool_)
        jam_position = np.full((len(flat_openings), n), np.nan)
        for oi, opening in enumerate(flat_openings):
            row = opening_const[oi]
            row[_kernel.O_AREA] = opening.area
            row[_kernel.O_FACING] = opening.facing
            row[_kernel.O_LOW] = 1.0 if opening.level == "low" else 0.0
            row[_kernel.O_HEIGHT] = opening.height
            row[_kernel.O_OPENING_HEIGHT] = opening.opening_height
            row[_kernel.O_DISCHARGE] = opening.discharge_coefficient
            row[_kernel.O_TRAVEL_TIME] = opening.travel_time
            fire = opening.fire_system_position
            row[_kernel.O_FIRE_POSITION] = math.nan if fire is None else fire
            laid = self.timeline.jams.get((zones[opening_zone[oi]].name, opening.name))
            if laid is not None:
                jammed[oi], jam_position[oi] = laid
        return _steps.Kernel(
            series,
            zone_series,
            zone_const,
            opening_const,
            jammed,
            jam_position,
            float(self.building.co2_outdoor),
            opening_zone,
            [o.name for o in flat_openings],
        )

    def _dependents(self, opening_zone: list[int]) -> list[set[int]]:
        """For each zone, the other zones whose inputs its physics feeds."""
        feeds: dict[str, set[int]] = {}
        for name, zi, _ in self.temperature_points:
            feeds.setdefault(name, set()).add(zi)
        for name, zi in self.co2_points:
            feeds.setdefault(name, set()).add(zi)
        for name, zis in self.heating_points:
            feeds.setdefault(name, set()).update(zis)
        for name, oi in self.position_points:
            feeds.setdefault(name, set()).add(opening_zone[oi])
        dependents: list[set[int]] = [set() for _ in self.zones]
        for reader, zone in enumerate(self.zones):
            for point in _steps.zone_points(self.config, zone.name):
                for source in feeds.get(point, ()):
                    if source != reader:
                        dependents[source].add(reader)
        return dependents

    def _result(
        self,
        zone_rows: FloatArray,
        outcomes: npt.NDArray[np.int8],
        targets: FloatArray,
        positions: FloatArray,
        dynamic_rows: dict[str, FloatArray],
        changes: list[_steps.Change],
        opening_zone: list[int],
        reasons: list[tuple[float, str, str]],
    ) -> Result:
        times = self.times
        n = len(times)
        temp_outdoor = self.outdoor["temp_outdoor"].to_numpy()
        frames: dict[str, pd.DataFrame] = {}
        opening_names = [o.name for zone in self.zones for o in zone.openings]
        for zi, zone in enumerate(self.zones):
            rows = zone_rows[:, zi, :]
            data: dict[str, Any] = {key: rows[:, j].copy() for j, key in enumerate(_ZONE_COLUMNS)}
            data["flow_infiltration"] = np.full(n, zone.model.infiltration_flow)
            data["flow_mechanical"] = np.asarray(zone.mechanical_flow)
            data["cooling_mechanical"] = np.clip(-data["heating"], 0.0, None)
            data["heating"] = np.clip(data["heating"], 0.0, None)
            data["cooling"] = ventilation_heat(
                data["flow"], data["temp_air"], temp_outdoor, self.density
            )
            data["gains_internal"] = np.asarray(zone.gains_internal)
            data["gains_solar"] = np.asarray(zone.gains_solar)
            data["gains_latent"] = np.asarray(zone.gains_latent)
            data["people"] = np.asarray(zone.people)
            data["temp_indoor"] = self._indoor(zone, data["temp_air"], data["gradient"])
            data["occupied"] = self.occupied[zone.name]
            decided = outcomes[zi]
            data["mode"] = pd.Categorical.from_codes(
                decided[:, 0], categories=[m.value for m in _steps.MODES]
            )
            data["layer"] = decided[:, 1].copy()
            data["cause"] = pd.Categorical.from_codes(
                decided[:, 2], categories=[c.value for c in _steps.CAUSES]
            )
            data["windows_open"] = decided[:, 3].astype(bool)
            for oi, name in enumerate(opening_names):
                if opening_zone[oi] == zi:
                    data[f"position.{name}"] = positions[:, oi].copy()
                    data[f"target.{name}"] = targets[:, oi].copy()
            frames[zone.name] = pd.DataFrame(data, index=times)
        # What the points published, as the run published them (NaN: nothing).
        sensor_data: dict[str, FloatArray] = {**self.static_published, **dynamic_rows}
        published = {
            name: np.asarray(sensor_data[name], dtype=np.float64)
            for name in self.config.points
            if name in sensor_data
        }
        sensor_frame = pd.DataFrame(
            {
                name: np.asarray(sensor_data[name], dtype=np.float32)
                for name in self.config.points
                if name in sensor_data
            },
            index=times,
        )
        change_frame = pd.DataFrame(
            changes, columns=["t", "zone", "mode", "layer", "cause", "targets", "reason"]
        )
        change_frame.insert(0, "time", pd.to_datetime(change_frame.pop("t"), unit="s", utc=True))
        reason_frame = pd.DataFrame(reasons, columns=["t", "zone", "reason"])
        reason_frame.insert(0, "time", pd.to_datetime(reason_frame.pop("t"), unit="s", utc=True))
        return Result(
            config=self.config,
            building=self.building,
            step=self.step,
            zones=frames,
            outdoor=self.outdoor,
            sensors=sensor_frame,
            changes=change_frame,
            unsourced_points=self.unsourced,
            calls=self.decide_calls,
            published=published,
            reasons=reason_frame,
        )

    def _indoor(self, zone: _Zone, temp_air: FloatArray, gradient: FloatArray) -> FloatArray:
        """The zone temperature as its configured aggregate of the (true) sensor values."""
        spec = self.config.zones[zone.name].temperature
        values = {
            sensor: temp_air + gradient * offset for sensor, offset in zone.sensor_offsets.items()
        }
        stacked = np.vstack([values[s] for s in spec.sensors])
        if spec.aggregate == "max":
            return np.asarray(stacked.max(axis=0))
        if spec.aggregate == "min":
            return np.asarray(stacked.min(axis=0))
        if spec.aggregate == "mean":
            return np.asarray(stacked.mean(axis=0))
        return np.asarray(values[spec.aggregate])


_ZONE_COLUMNS = (
    "temp_air",
    "temp_air_end",
    "temp_operative",
    "temp_surface",
    "temp_mass",
    "gradient",
    "flow",
    "flow_stack",
    "flow_wind",
    "heating",
    "co2",
)


# ---------------------------------------------------------------------------------- what-if


def scale_opening_area(config: SiteConfig, factor: float) -> SiteConfig:
    """The site with every opening's free area multiplied by ``factor`` (> 0)."""
    if not factor > 0:
        raise SimulatorError(f"opening area factor: got {factor!r}, expected a positive number")
    data = config.model_dump()
    for zone in data["zones"].values():
        for opening in zone["openings"].values():
            opening["area"] = opening["area"] * factor
    return SiteConfig.model_validate(data)


def _rule_field(config: SiteConfig, path: str) -> tuple[list[str], str, str]:
    """(rule sets, section, field) that a rule ``path`` names, or SimulatorError."""
    parts = path.split(".")
    if len(parts) == 2:
        rule_sets = list(config.rules)
    elif len(parts) == 3 and parts[0] in config.rules:
        rule_sets, parts = [parts[0]], parts[1:]
    else:
        raise SimulatorError(
            f"rule path {path!r}: expected 'section.field' or 'ruleset.section.field' "
            f"(rule sets: {', '.join(config.rules)})"
        )
    section, name = parts
    for rule_set in rule_sets:
        rules = config.rules[rule_set]
        part = getattr(rules, section, None) if section in type(rules).model_fields else None
        if not isinstance(part, BaseModel) or name not in type(part).model_fields:
            raise SimulatorError(
                f"rule path {path!r}: no {section}.{name} in rule set {rule_set!r}"
            )
    return rule_sets, section, name


def rule_quantity(config: SiteConfig, path: str) -> str | None:
    """The unit quantity of the rule a ``path`` names (``"temperature"``), if it has one."""
    rule_sets, section, name = _rule_field(config, path)
    return field_quantity(type(getattr(config.rules[rule_sets[0]], section)), name)


def rule_value(config: SiteConfig, path: str) -> float:
    """The value [SI] of the rule a ``path`` names (of its first rule set)."""
    rule_sets, section, name = _rule_field(config, path)
    return float(getattr(getattr(config.rules[rule_sets[0]], section), name))


def set_rule(config: SiteConfig, path: str, value: float | str) -> SiteConfig:
    """The site with one rule threshold set to ``value``: a number in SI, or text
    read as the site file reads it (``"75 F"``, ``"20 min"``).

    ``path`` is ``section.field`` for every rule set (``free_cooling.open_above``)
    or ``ruleset.section.field`` for one (``hall.free_cooling.open_above``).
    """
    rule_sets, section, name = _rule_field(config, path)
    data = config.model_dump()
    for rule_set in rule_sets:
        data["rules"][rule_set][section][name] = value
    try:
        return SiteConfig.model_validate(data)
    except ValidationError as exc:
        why = "; ".join(str(error["msg"]) for error in exc.errors())
        raise SimulatorError(f"rule path {path!r} = {value!r}: {why}") from None


def what_if(
    site_config: SiteConfig,
    building: Building,
    weather: Weather,
    parameter: str,
    values: Iterable[float | str],
    *,
    scenario: Scenario | None = None,
    start: object = None,
    end: object = None,
    step: float = 600.0,
    zones: Sequence[str] | None = None,
    progress: Callable[[float], None] | None = None,
) -> pd.DataFrame:
    """Run once per value of one parameter and tabulate the outcome per zone.

    Parameters
    ----------
    parameter : str
        ``"opening_area"`` (a factor on every opening's free area, for the
        controller and the building alike) or a rule path for
        :func:`set_rule`.
    values : iterable of float or str
        The values to try: numbers (SI), or for a rule text with its unit
        (``"75 F"``).
    progress : callable, optional
        Called with the share of all the runs done (0-1), as :func:`run` does.

    Returns
    -------
    DataFrame
        Indexed by (value [SI], zone), with ``free_cooling_hours``,
        ``hours_above_comfort``, ``peak_temperature`` [°C] and ``cooling_kwh``
        (see :meth:`Result.summary`).
    """
    frames = []
    values = list(values)
    for index, value in enumerate(values):

        def share(done: float, index: int = index) -> None:
            if progress is not None:
                progress((index + done) / len(values))

        if parameter == "opening_area":
            if isinstance(value, str):
                raise SimulatorError(f"opening_area: got {value!r}, expected a number (a factor)")
            config = scale_opening_area(site_config, value)
        else:
            config = set_rule(site_config, parameter, value)
            value = rule_value(config, parameter)
        result = run(
            config, building, weather, scenario, start, end, step, zones=zones, progress=share
        )
        summary = result.summary()[
            ["free_cooling_hours", "hours_above_comfort", "peak_temperature", "cooling_kwh"]
        ]
        frames.append(summary.assign(value=value).set_index("value", append=True))
    table = pd.concat(frames).reorder_levels(["value", "zone"])
    return table.rename_axis([parameter, "zone"])
