"""The in-process closed loop: building, weather and scenario around the decision core.

Each step of ``step`` seconds, at time t:

1. the simulator publishes a :class:`~ventsup.core.inputs.Sample` for every
   point of the site config it can source (in SI, with the scenario's faults;
   an implausible value is dropped as the daemon's decoder would drop it);
2. the samples are held (:class:`~ventsup.core.inputs.Held`) and each zone is
   decided by the controller: by default :func:`ventsup.core.decide.decide`
   on :func:`ventsup.core.inputs.zone_inputs`, exactly as the daemon and the
   replay do;
3. the actuators move toward the targets (released openings go where the
   fire system drives them, or stay);
4. the airflow through each zone follows from the openings' mean positions
   over the step; with infiltration and the air handler's outdoor air it sets
   the ventilation conductance, and the zone model advances to t + step, the
   ideal plant heating or cooling to its set points (the cooling set point
   rises while the decision reports the windows open: the HVAC interlock).

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

from simulator.building import (
    Building,
    ZoneModel,
    condition_air,
    solar_gains,
    step_zone,
    stratification_gradient,
)
from simulator.errors import SimulatorError
from simulator.openings import Airflow, OpeningModel, move_toward, ventilation_heat, zone_airflow
from simulator.scenario import Scenario, timeline
from simulator.solar import solar_position
from simulator.weather import Weather, to_epoch_seconds
from ventsup.config.model import Period, PointKind, SiteConfig
from ventsup.core import physics, psychro
from ventsup.core.decide import decide, initial_state
from ventsup.core.inputs import Held, Sample, zone_inputs
from ventsup.core.state import Cause, Decision, Layer, Mode, ZoneState

__all__ = [
    "Controller",
    "CoreController",
    "FixedController",
    "Result",
    "in_periods",
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
    reason.
    """

    config: SiteConfig
    building: Building
    step: float
    zones: Mapping[str, pd.DataFrame]
    outdoor: pd.DataFrame
    sensors: pd.DataFrame
    changes: pd.DataFrame
    unsourced_points: tuple[str, ...] = ()

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
    gains_internal: list[float]
    gains_solar: list[float]
    gains_latent: list[float]
    people: list[float]
    co2_generation: list[float]
    setpoint_heating: list[float]
    setpoint_cooling: list[float]
    setpoint_cooling_open: float
    max_heating: float
    max_cooling: float
    mechanical_flow: list[float]
    wind: list[float]
    temp_opaque: list[float]
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
    controller = controller if controller is not None else CoreController(site_config)
    plan = _Plan(site_config, building, weather.at(times), scenario, times, names, step)
    return plan.simulate(controller, initial_temperature, progress)


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
                    gains_internal=internal.tolist(),
                    gains_solar=solar.tolist(),
                    gains_latent=(people_count * latent).tolist(),
                    people=people_count.tolist(),
                    co2_generation=(people_count * co2).tolist(),
                    setpoint_heating=setpoint_heating.tolist(),
                    setpoint_cooling=setpoint_cooling.tolist(),
                    setpoint_cooling_open=(
                        model.cooling.setpoint_windows_open if model.cooling else math.inf
                    ),
                    max_heating=model.heating.max_power if model.heating else 0.0,
                    max_cooling=model.cooling.max_power if model.cooling else 0.0,
                    mechanical_flow=mechanical.tolist(),
                    wind=(station_speed / station_ratio * zone_ratio).tolist(),
                    temp_opaque=model.opaque_exterior_temperature(temp, ground).tolist(),
                    sensor_offsets={
                        sensor: height - 0.5 * model.height
                        for sensor, height in model.sensors.items()
                    },
                )
            )
            opening_count += len(openings)
        self.temp = temp.tolist()
        self.direction = direction.tolist()
        self.rho_cp = (density * _SPECIFIC_HEAT_AIR).tolist()
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
        self.dynamic_names = [
            *(p[0] for p in self.temperature_points),
            *(p[0] for p in self.co2_points),
            *(p[0] for p in self.heating_points),
            *(p[0] for p in self.position_points),
        ]
        dynamic = {p[0] for p in self.temperature_points}
        dynamic |= {p[0] for p in self.co2_points}
        dynamic |= {p[0] for p in self.heating_points}
        dynamic |= {p[0] for p in self.position_points}
        self.static: list[tuple[str, list[Any]]] = []
        self.static_published: dict[str, FloatArray] = {}
        for name, values in static.items():
            published = self._publish_static(name, values)
            self.static_published[name] = published
            binary = config.points[name].kind is PointKind.BINARY
            as_list = [
                None if math.isnan(v) else (bool(v) if binary else v) for v in published.tolist()
            ]
            self.static.append((name, as_list))
        sourced = set(static) | dynamic
        self.unsourced = tuple(sorted(set(config.points) - sourced))

    def _publish_static(self, name: str, values: Any) -> FloatArray:
        """The value published at each step (NaN: nothing), faults and plausibility applied."""
        point = self.config.points[name]
        binary = point.kind is PointKind.BINARY
        published = np.asarray(values, dtype=np.float64).copy()
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
    ) -> Result:
        """Run the step loop and collect the result.

        The loop works on plain floats and lists; everything that does not
        depend on the state was computed before (see :class:`_Plan`).
        """
        t_all = self.t.tolist()
        n = len(t_all)
        dt = self.step
        zones = self.zones
        names = [zone.name for zone in zones]
        zone_range = range(len(zones))
        params = [zone.model.rc_parameters() for zone in zones]
        flat_openings = [o for zone in zones for o in zone.openings]
        opening_zone = [i for i, zone in enumerate(zones) for _ in zone.openings]
        jams: list[tuple[list[bool], list[float]] | None] = []
        for oi, opening in enumerate(flat_openings):
            laid = self.timeline.jams.get((names[opening_zone[oi]], opening.name))
            jams.append(None if laid is None else (laid[0].tolist(), laid[1].tolist()))
        opening_range = range(len(flat_openings))

        mass = [initial_temperature] * len(zones)
        air = [initial_temperature] * len(zones)
        gradient = [0.0] * len(zones)
        co2 = [self.building.co2_outdoor] * len(zones)
        heating_on = [False] * len(zones)
        position = [0.0] * len(flat_openings)
        mean_position = [0.0] * len(flat_openings)
        states = [initial_state() for _ in zones]
        decisions: list[Decision] = []
        current: dict[str, Sample] = {}
        stuck: dict[str, float | bool] = {}
        last_published: dict[str, float | bool] = {}

        zone_rows: list[list[tuple[float, ...]]] = [[] for _ in zones]
        decision_rows: list[list[tuple[Mode, Layer, Cause, bool]]] = [[] for _ in zones]
        position_rows: list[list[float]] = []
        target_rows: list[list[float]] = []
        changes: list[tuple[float, str, str, int, str, str, str]] = []
        last_mode: list[Mode | None] = [None] * len(zones)
        last_targets: list[dict[str, float | None] | None] = [None] * len(zones)

        static = self.static
        faults = self.timeline.sensor_faults
        ranges = {name: point.plausible_range for name, point in self.config.points.items()}
        # Points without scripted faults take the fast paths; the others the general one.
        temperature_fast = [
            (name, zi, offset, *ranges[name])
            for name, zi, offset in self.temperature_points
            if name not in faults
        ]
        co2_fast = [(name, zi, *ranges[name]) for name, zi in self.co2_points if name not in faults]
        heating_fast = [(name, zis) for name, zis in self.heating_points if name not in faults]
        position_fast = [
            (name, oi, *ranges[name]) for name, oi in self.position_points if name not in faults
        ]
        faulted: list[tuple[str, int, Any, float, bool, float, float, list[int], list[float]]] = []
        sources: tuple[list[Any], ...] = (
            self.temperature_points,
            self.co2_points,
            self.heating_points,
            self.position_points,
        )
        for kind, points in enumerate(sources):
            for point in points:
                name = point[0]
                if name in faults:
                    low, high = ranges[name]
                    laid_codes, laid_values = faults[name]
                    binary = self.config.points[name].kind is PointKind.BINARY
                    offset = point[2] if kind == 0 else 0.0
                    faulted.append(
                        (
                            name,
                            kind,
                            point[1],
                            offset,
                            binary,
                            low,
                            high,
                            laid_codes.tolist(),
                            laid_values.tolist(),
                        )
                    )
        faulted_rows: dict[str, list[float]] = {entry[0]: [] for entry in faulted}
        temp_out, direction, rho_cp = self.temp, self.direction, self.rho_cp
        co2_outdoor = self.building.co2_outdoor
        report_every = max(1, n // 100)
        no_flow = Airflow(0.0, 0.0, 0.0)

        for k in range(n):
            t = t_all[k]
            # 1. publish samples
            for name, published_values in static:
                value = published_values[k]
                if value is not None:
                    current[name] = Sample(name, value, t)
            for name, zi, offset, low, high in temperature_fast:
                value = air[zi] + gradient[zi] * offset
                if low <= value <= high:
                    current[name] = Sample(name, value, t)
            for name, zi, low, high in co2_fast:
                value = co2[zi]
                if low <= value <= high:
                    current[name] = Sample(name, value, t)
            for name, zis in heating_fast:
                current[name] = Sample(name, any([heating_on[zi] for zi in zis]), t)
            for name, oi, low, high in position_fast:
                value = position[oi]
                if low <= value <= high:
                    current[name] = Sample(name, value, t)
            for name, kind, source, offset, binary, low, high, codes, fault_values in faulted:
                if kind == 0:
                    value = air[source] + gradient[source] * offset
                elif kind == 1:
                    value = co2[source]
                elif kind == 2:
                    value = any([heating_on[zi] for zi in source])
                else:
                    value = position[source]
                code = codes[k]
                if code == 0:
                    stuck.pop(name, None)
                elif code == 1:  # dropout: nothing published
                    faulted_rows[name].append(math.nan)
                    continue
                elif code == 2:  # stuck at the given value or the last one published
                    if name not in stuck:
                        given = fault_values[k]
                        stuck[name] = (
                            given if not math.isnan(given) else last_published.get(name, value)
                        )
                    value = stuck[name]
                else:  # spike
                    value = bool(fault_values[k]) if binary else fault_values[k]
                if not binary and not low <= value <= high:
                    faulted_rows[name].append(math.nan)  # the decoder would reject it
                    continue
                last_published[name] = value
                current[name] = Sample(name, value, t)
                faulted_rows[name].append(float(value))
            held = Held(current)

            # 2. decide
            decisions = []
            for zi in zone_range:
                decision, states[zi] = controller(names[zi], held, states[zi], t)
                decisions.append(decision)
                mode, wanted = decision.mode, decision.targets
                if mode is not last_mode[zi] or wanted != last_targets[zi]:
                    last_mode[zi], last_targets[zi] = mode, wanted
                    changes.append(_change(t, decision))
                decision_rows[zi].append(
                    (mode, decision.layer, decision.cause, decision.windows_open)
                )

            # 3. move the actuators
            target_row: list[float] = []
            for oi in opening_range:
                opening = flat_openings[oi]
                target = decisions[opening_zone[oi]].targets.get(opening.name)
                before = position[oi]
                if target is None:
                    target_row.append(math.nan)
                    target = opening.fire_system_position
                    if target is None:
                        target = before
                else:
                    target_row.append(target)
                jam = jams[oi]
                if jam is not None and jam[0][k]:
                    after = before if math.isnan(jam[1][k]) else jam[1][k]
                else:
                    after = move_toward(before, target, dt, opening.travel_time)
                position[oi] = after
                mean_position[oi] = 0.5 * (before + after)
            target_rows.append(target_row)
            position_rows.append(position.copy())

            # 4. airflow and heat
            t_out = temp_out[k]
            for zi in zone_range:
                zone = zones[zi]
                model = zone.model
                fractions = [mean_position[oi] for oi in zone.opening_index]
                airflow = (
                    zone_airflow(
                        zone.openings, fractions, air[zi], t_out, zone.wind[k], direction[k]
                    )
                    if any(fractions)
                    else no_flow
                )
                through = airflow.total + model.infiltration_flow + zone.mechanical_flow[k]
                gains_internal = zone.gains_internal[k]
                gains_solar = zone.gains_solar[k]
                step = step_zone(
                    params[zi],
                    mass[zi],
                    t_out,
                    zone.temp_opaque[k],
                    rho_cp[k] * through,
                    gains_internal,
                    gains_solar,
                    0.0,
                    dt,
                    air[zi],
                )
                cooling_at = zone.setpoint_cooling[k]
                if decisions[zi].windows_open and cooling_at < zone.setpoint_cooling_open:
                    cooling_at = zone.setpoint_cooling_open  # the HVAC interlock
                if step.temp_air < zone.setpoint_heating[k] or step.temp_air > cooling_at:
                    step = condition_air(
                        params[zi],
                        mass[zi],
                        t_out,
                        zone.temp_opaque[k],
                        rho_cp[k] * through,
                        gains_internal,
                        gains_solar,
                        zone.setpoint_heating[k],
                        cooling_at,
                        zone.max_heating,
                        zone.max_cooling,
                        dt,
                        free=step,
                        temp_air=air[zi],
                    )
                mass[zi] = step.temp_mass
                air[zi] = step.temp_air_end
                heating_on[zi] = step.heating > 0.0
                equilibrium = co2_outdoor + zone.co2_generation[k] / through * 1e6
                co2[zi] = equilibrium + (co2[zi] - equilibrium) * math.exp(
                    -through * dt / model.volume
                )
                gradient[zi] = stratification_gradient(
                    model.stratification,
                    gains_internal + gains_solar + step.heating,
                    through,
                    model.volume,
                    model.height,
                    rho_cp[k] / _SPECIFIC_HEAT_AIR,
                )
                zone_rows[zi].append(
                    (
                        step.temp_air,
                        step.temp_air_end,
                        step.temp_operative,
                        step.temp_surface,
                        step.temp_mass,
                        gradient[zi],
                        airflow.total,
                        airflow.stack,
                        airflow.wind,
                        step.heating,
                        co2[zi],
                    )
                )
            if progress is not None and k % report_every == 0:
                progress(k / n)
        if progress is not None:
            progress(1.0)
        return self._result(
            zone_rows,
            decision_rows,
            np.asarray(target_rows, dtype=np.float64).reshape(n, len(flat_openings)),
            np.asarray(position_rows, dtype=np.float64).reshape(n, len(flat_openings)),
            faulted_rows,
            changes,
            opening_zone,
            initial_temperature,
        )

    def _result(
        self,
        zone_rows: list[list[tuple[float, ...]]],
        decision_rows: list[list[tuple[Mode, Layer, Cause, bool]]],
        targets: FloatArray,
        positions: FloatArray,
        faulted_rows: dict[str, list[float]],
        changes: list[tuple[float, str, str, int, str, str, str]],
        opening_zone: list[int],
        initial_temperature: float,
    ) -> Result:
        times = self.times
        n = len(times)
        temp_outdoor = self.outdoor["temp_outdoor"].to_numpy()
        frames: dict[str, pd.DataFrame] = {}
        opening_names = [o.name for zone in self.zones for o in zone.openings]
        for zi, zone in enumerate(self.zones):
            rows = np.asarray(zone_rows[zi], dtype=np.float64).reshape(n, len(_ZONE_COLUMNS))
            data: dict[str, Any] = {key: rows[:, j] for j, key in enumerate(_ZONE_COLUMNS)}
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
            decided = decision_rows[zi]
            data["mode"] = pd.Categorical(
                [row[0].value for row in decided], categories=[m.value for m in Mode]
            )
            data["layer"] = np.asarray([int(row[1]) for row in decided], dtype=np.int8)
            data["cause"] = pd.Categorical(
                [row[2].value for row in decided], categories=[c.value for c in Cause]
            )
            data["windows_open"] = np.asarray([row[3] for row in decided], dtype=bool)
            for oi, name in enumerate(opening_names):
                if opening_zone[oi] == zi:
                    data[f"position.{name}"] = positions[:, oi]
                    data[f"target.{name}"] = targets[:, oi]
            frames[zone.name] = pd.DataFrame(data, index=times)
        sensor_data: dict[str, FloatArray] = dict(self.static_published)

        # What the per-step points published: the state at the start of each step.
        def before(values: FloatArray, first: float) -> FloatArray:
            return np.concatenate(([first], values[:-1]))

        for name, zi, offset in self.temperature_points:
            frame = frames[self.zones[zi].name]
            sensor_data[name] = before(
                frame["temp_air_end"].to_numpy() + frame["gradient"].to_numpy() * offset,
                initial_temperature,
            )
        for name, zi in self.co2_points:
            sensor_data[name] = before(
                frames[self.zones[zi].name]["co2"].to_numpy(), self.building.co2_outdoor
            )
        for name, zis in self.heating_points:
            heat = np.zeros(n, dtype=bool)
            for zi in zis:
                heat |= frames[self.zones[zi].name]["heating"].to_numpy() > 0.0
            sensor_data[name] = before(heat.astype(np.float64), 0.0)
        for name, oi in self.position_points:
            sensor_data[name] = before(positions[:, oi], 0.0)
        for name in list(sensor_data):
            if name in self.dynamic_names:
                low, high = self.config.points[name].plausible_range
                values = sensor_data[name]
                sensor_data[name] = np.where((values < low) | (values > high), np.nan, values)
        for name, recorded in faulted_rows.items():
            sensor_data[name] = np.asarray(recorded)
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
        return Result(
            config=self.config,
            building=self.building,
            step=self.step,
            zones=frames,
            outdoor=self.outdoor,
            sensors=sensor_frame,
            changes=change_frame,
            unsourced_points=self.unsourced,
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


def _change(t: float, decision: Decision) -> tuple[float, str, str, int, str, str, str]:
    """One row of :attr:`Result.changes`."""
    shown = ", ".join(
        f"{name}={'released' if value is None else f'{value:.0%}'}"
        for name, value in decision.targets.items()
    )
    return (
        t,
        decision.zone,
        decision.mode.value,
        int(decision.layer),
        decision.cause.value,
        shown,
        decision.reason,
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


def set_rule(config: SiteConfig, path: str, value: float) -> SiteConfig:
    """The site with one rule threshold set to ``value`` (SI).

    ``path`` is ``section.field`` for every rule set (``free_cooling.open_above``)
    or ``ruleset.section.field`` for one (``hall.free_cooling.open_above``).
    """
    parts = path.split(".")
    data = config.model_dump()
    if len(parts) == 2:
        rule_sets = list(data["rules"])
    elif len(parts) == 3 and parts[0] in data["rules"]:
        rule_sets, parts = [parts[0]], parts[1:]
    else:
        raise SimulatorError(
            f"rule path {path!r}: expected 'section.field' or 'ruleset.section.field' "
            f"(rule sets: {', '.join(data['rules'])})"
        )
    section, name = parts
    for rule_set in rule_sets:
        rules = data["rules"][rule_set]
        if (
            section not in rules
            or not isinstance(rules[section], dict)
            or name not in rules[section]
        ):
            raise SimulatorError(
                f"rule path {path!r}: no {section}.{name} in rule set {rule_set!r}"
            )
        rules[section][name] = value
    return SiteConfig.model_validate(data)


def what_if(
    site_config: SiteConfig,
    building: Building,
    weather: Weather,
    parameter: str,
    values: Iterable[float],
    *,
    scenario: Scenario | None = None,
    start: object = None,
    end: object = None,
    step: float = 600.0,
    zones: Sequence[str] | None = None,
) -> pd.DataFrame:
    """Run once per value of one parameter and tabulate the outcome per zone.

    Parameters
    ----------
    parameter : str
        ``"opening_area"`` (a factor on every opening's free area, for the
        controller and the building alike) or a rule path for
        :func:`set_rule` (value in SI).
    values : iterable of float
        The values to try.

    Returns
    -------
    DataFrame
        Indexed by (value, zone), with ``free_cooling_hours``,
        ``hours_above_comfort``, ``peak_temperature`` [°C] and ``cooling_kwh``
        (see :meth:`Result.summary`).
    """
    frames = []
    for value in values:
        if parameter == "opening_area":
            config = scale_opening_area(site_config, value)
        else:
            config = set_rule(site_config, parameter, value)
        result = run(config, building, weather, scenario, start, end, step, zones=zones)
        summary = result.summary()[
            ["free_cooling_hours", "hours_above_comfort", "peak_temperature", "cooling_kwh"]
        ]
        frames.append(summary.assign(value=value).set_index("value", append=True))
    table = pd.concat(frames).reorder_levels(["value", "zone"])
    return table.rename_axis([parameter, "zone"])
