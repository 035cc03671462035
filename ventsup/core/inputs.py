"""Readings, sample-and-hold, staleness and multi-sensor aggregation (pure).

Inputs are sampled and held: a point keeps its last valid value until it is
stale (its own ``stale_after``). The live daemon and the replay both feed
decoded :class:`Sample` objects through :func:`hold` and read them back with
:func:`read_point` / :func:`zone_inputs`, so both apply exactly this rule.

Nothing here reads a clock, does I/O or keeps state: every function takes the
evaluation time ``t`` (seconds since the Unix epoch, UTC) and returns new
frozen values.

Rules (each tested in ``tests/core/test_inputs.py``)
----------------------------------------------------
- **Out-of-order samples.** :func:`hold` keeps a sample only if it is not older
  than the one already held; an older sample (a late retained message, a
  gateway replaying its buffer) is ignored. At an equal timestamp the later
  arrival wins.
- **Staleness edge.** A held sample is ``"ok"`` while ``t - sample.t <=
  stale_after`` and ``"stale"`` once ``t - sample.t > stale_after``: at exactly
  ``stale_after`` seconds it is still ok.
- **Samples from the future.** A sample stamped later than ``t`` (clock skew
  between gateways, or a log whose source clock runs ahead) counts as ``"ok"``
  with age 0. It stays ok until ``t`` passes ``sample.t + stale_after``.
- **Only ok readings carry a value.** A stale or missing :class:`Reading` has
  ``value=None`` so that a stale value can never be used as a good one by
  mistake; ``sample_t`` still tells when the point was last heard.
- **Unconfigured optional points** (no humidity, dew point, wind direction,
  CO2 or heating point) appear in :class:`ZoneInputs` as a Reading with
  ``status="missing"`` and ``point=""`` (see :data:`NOT_CONFIGURED`), never as
  ``None``, so the decision core can test ``reading.known`` on every field.
- **Indoor temperature aggregation** (see :func:`aggregate_temperature`):
  ``max``, ``mean`` or ``min`` over the fresh sensors; a named sensor is used
  while fresh, otherwise the mean of the other fresh sensors.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Iterator, Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Literal

from ventsup.config.model import SiteConfig

__all__ = [
    "NOT_CONFIGURED",
    "Held",
    "Reading",
    "Sample",
    "Status",
    "ZoneInputs",
    "ZoneTemperature",
    "aggregate_temperature",
    "hold",
    "read_point",
    "zone_inputs",
    "zone_points",
]

Status = Literal["ok", "stale", "missing"]
Value = float | bool


@dataclass(frozen=True)
class Sample:
    """One valid, decoded value of a point, in SI, at time ``t`` [s since the epoch, UTC]."""

    point: str
    value: Value
    t: float


@dataclass(frozen=True)
class Reading:
    """What the core knows about one point at an evaluation time.

    ``status`` is ``"ok"`` (a fresh value), ``"stale"`` (heard before, but
    longer ago than the point's ``stale_after``) or ``"missing"`` (never heard,
    or not configured: then ``point`` is ``""``). ``value`` is set only when
    the status is ok; ``sample_t`` is the time of the held sample [s], None
    when missing.
    """

    point: str
    value: Value | None
    status: Status
    sample_t: float | None

    @property
    def known(self) -> bool:
        """True when the reading holds a fresh, valid value."""
        return self.status == "ok"

    def age(self, t: float) -> float | None:
        """Seconds since the held sample at ``t`` (0 for a future sample); None if never heard."""
        if self.sample_t is None:
            return None
        return max(0.0, t - self.sample_t)

    @classmethod
    def ok(cls, point: str, value: Value, t: float) -> Reading:
        """A fresh reading of ``value`` sampled at ``t``."""
        return cls(point, value, "ok", t)

    @classmethod
    def stale(cls, point: str, sample_t: float) -> Reading:
        """A reading whose last sample (at ``sample_t``) is too old to use."""
        return cls(point, None, "stale", sample_t)

    @classmethod
    def missing(cls, point: str = "") -> Reading:
        """A point never heard (or, with ``point=""``, not configured)."""
        return cls(point, None, "missing", None)


#: How an optional point that the site does not configure appears in :class:`ZoneInputs`.
NOT_CONFIGURED = Reading.missing("")


@dataclass(frozen=True)
class ZoneTemperature(Reading):
    """A zone's indoor temperature aggregated from one or several sensors.

    A :class:`Reading` (``point`` is a label for the configured source:
    ``"max(t_low,t_high)"``, ``"t_low|mean(t_high)"`` for a named sensor with its
    fallback, or the sensor name for a single sensor) that also says how it was made:
    ``aggregate`` as configured, ``used`` the sensors whose values went into
    ``value`` and ``skipped`` the sensors that were stale or missing. A fresh
    sensor left out because a named sensor was preferred is in neither.
    ``sample_t`` is the oldest sample used (when ok) or the newest sample heard
    (when stale), so ``age`` is never understated.
    """

    aggregate: str = "max"
    used: tuple[str, ...] = ()
    skipped: tuple[str, ...] = ()


# --------------------------------------------------------------------------- hold


@dataclass(frozen=True, eq=False)
class Held(Mapping[str, Sample]):
    """An immutable mapping point name -> last valid :class:`Sample`; compares by value.

    Build with ``Held()`` (empty), ``Held({"t1": sample})`` or
    :meth:`from_samples`; update with :func:`hold`, which returns a new Held.
    """

    samples: Mapping[str, Sample] = field(default_factory=dict)

    def __post_init__(self) -> None:
        # Copy so that a caller's dict can never change a Held afterwards.
        object.__setattr__(self, "samples", MappingProxyType(dict(self.samples)))

    @classmethod
    def from_samples(cls, samples: Iterable[Sample]) -> Held:
        """Hold each sample in turn (older ones ignored, as with :func:`hold`)."""
        held = cls()
        for sample in samples:
            held = hold(held, sample)
        return held

    def __getitem__(self, name: str) -> Sample:
        return self.samples[name]

    def __iter__(self) -> Iterator[str]:
        return iter(self.samples)

    def __len__(self) -> int:
        return len(self.samples)

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, Held):
            return NotImplemented
        return dict(self.samples) == dict(other.samples)

    def __hash__(self) -> int:
        return hash(frozenset(self.samples.items()))

    def __repr__(self) -> str:
        return f"Held({dict(self.samples)!r})"


def hold(held: Held, sample: Sample) -> Held:
    """Return ``held`` with ``sample`` kept as its point's last valid value.

    A sample older than the one already held for the same point is ignored
    (``held`` is returned unchanged): a late, out-of-order message must not
    replace a newer value. At an equal timestamp the new sample wins. Only
    valid samples belong here; a rejected payload leaves the held value alone.
    """
    current = held.samples.get(sample.point)
    if current is not None and sample.t < current.t:
        return held
    samples = dict(held.samples)
    samples[sample.point] = sample
    return Held(samples)


# --------------------------------------------------------------------------- read


def read_point(config: SiteConfig, name: str, held: Held, t: float) -> Reading:
    """Read point ``name`` at time ``t`` [s] under sample-and-hold.

    ``"missing"`` if no valid sample was ever held; ``"stale"`` if
    ``t - sample.t > stale_after`` (strictly: at exactly ``stale_after`` the
    value is still ok); otherwise ``"ok"``, including a sample from the future.

    Raises
    ------
    KeyError
        If ``name`` is not a point of ``config``.
    """
    try:
        point = config.points[name]
    except KeyError:
        raise KeyError(f"unknown point {name!r}; expected one of {sorted(config.points)}") from None
    sample = held.samples.get(name)
    if sample is None:
        return Reading.missing(name)
    if t - sample.t > point.stale_after:
        return Reading.stale(name, sample.t)
    return Reading.ok(name, sample.value, sample.t)


def _read_optional(config: SiteConfig, name: str | None, held: Held, t: float) -> Reading:
    return NOT_CONFIGURED if name is None else read_point(config, name, held, t)


def _bounded_mean(values: list[float]) -> float:
    # fsum is exact before the division; the clamp removes the last rounding step,
    # which could otherwise put the mean of equal values one ulp above them.
    return min(max(math.fsum(values) / len(values), min(values)), max(values))


def _label(sensors: tuple[str, ...], aggregate: str) -> str:
    if len(sensors) == 1:
        return sensors[0]
    if aggregate in ("max", "mean", "min"):
        return f"{aggregate}({','.join(sensors)})"
    others = ",".join(name for name in sensors if name != aggregate)
    return f"{aggregate}|mean({others})"


def aggregate_temperature(
    config: SiteConfig, zone_name: str, held: Held, t: float
) -> ZoneTemperature:
    """A zone's indoor temperature [°C] at time ``t`` from its fresh sensors.

    - ``max`` / ``mean`` / ``min``: over the sensors that are fresh; stale and
      never-heard sensors are skipped.
    - a sensor name: that sensor while it is fresh; otherwise the mean of the
      other fresh sensors (a degraded but still measured value beats none).
    - no fresh sensor: status ``"stale"`` if any sensor was ever heard,
      ``"missing"`` if none was.
    """
    spec = config.zones[zone_name].temperature
    sensors = spec.sensors
    aggregate = spec.aggregate
    readings = {name: read_point(config, name, held, t) for name in sensors}
    # The held samples behind the fresh readings: they carry the value and time as plain floats.
    fresh = {name: held.samples[name] for name, r in readings.items() if r.known}
    skipped = tuple(name for name in sensors if name not in fresh)
    label = _label(sensors, aggregate)

    if not fresh:
        heard = [r.sample_t for r in readings.values() if r.sample_t is not None]
        return ZoneTemperature(
            point=label,
            value=None,
            status="stale" if heard else "missing",
            sample_t=max(heard) if heard else None,
            aggregate=aggregate,
            used=(),
            skipped=skipped,
        )

    # A named sensor while fresh; otherwise (and for max/mean/min) every fresh sensor.
    used = (aggregate,) if aggregate in fresh else tuple(fresh)
    values = [float(fresh[name].value) for name in used]
    if aggregate == "max":
        value = max(values)
    elif aggregate == "min":
        value = min(values)
    else:
        value = _bounded_mean(values)
    return ZoneTemperature(
        point=label,
        value=value,
        status="ok",
        sample_t=min(fresh[name].t for name in used),
        aggregate=aggregate,
        used=used,
        skipped=skipped,
    )


# --------------------------------------------------------------------------- zone


@dataclass(frozen=True)
class ZoneInputs:
    """Everything the decision core reads about one zone at one time.

    Every field is a :class:`Reading` (indoor temperature a
    :class:`ZoneTemperature`); optional points the site does not configure are
    :data:`NOT_CONFIGURED` (status ``"missing"``, point ``""``). Values are SI:
    ``temp_indoor``, ``temp_outdoor``, ``dew_point_outdoor`` [°C],
    ``humidity_outdoor`` [% RH], ``wind_speed`` [m/s], ``wind_direction``
    [degrees from north, where the wind comes from], ``rain`` [bool], ``co2``
    [ppm], ``heating`` [bool, the plant heats the zone], ``alarms`` [bool each,
    in the order of the zone's ``smoke_alarms``], ``feedback`` [opening fraction
    0-1, per opening that has a feedback point; others absent].

    ``dew_point_outdoor`` is only a measured dew point point; deriving one from
    humidity is the core's job. Build test inputs with :meth:`of`.
    """

    temp_indoor: ZoneTemperature
    temp_outdoor: Reading
    humidity_outdoor: Reading
    dew_point_outdoor: Reading
    wind_speed: Reading
    wind_direction: Reading
    rain: Reading
    co2: Reading
    heating: Reading
    alarms: tuple[Reading, ...]
    feedback: Mapping[str, Reading]

    def __post_init__(self) -> None:
        object.__setattr__(self, "feedback", MappingProxyType(dict(self.feedback)))

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, ZoneInputs):
            return NotImplemented
        return self._key() == other._key()

    def __hash__(self) -> int:
        return hash(self._key())

    def _key(self) -> tuple[object, ...]:
        return (
            self.temp_indoor,
            self.temp_outdoor,
            self.humidity_outdoor,
            self.dew_point_outdoor,
            self.wind_speed,
            self.wind_direction,
            self.rain,
            self.co2,
            self.heating,
            self.alarms,
            frozenset(self.feedback.items()),
        )

    @classmethod
    def of(
        cls,
        *,
        temp_indoor: float | Reading | None = None,
        temp_outdoor: float | Reading | None = None,
        humidity_outdoor: float | Reading | None = None,
        dew_point_outdoor: float | Reading | None = None,
        wind_speed: float | Reading | None = None,
        wind_direction: float | Reading | None = None,
        rain: bool | Reading | None = None,
        co2: float | Reading | None = None,
        heating: bool | Reading | None = None,
        alarms: Iterable[bool | Reading | None] = (),
        feedback: Mapping[str, float | Reading | None] | None = None,
        stale: Iterable[str] = (),
        t: float = 0.0,
    ) -> ZoneInputs:
        """Build inputs from plain values, for tests and examples.

        A plain value becomes an ``"ok"`` Reading sampled at ``t`` (pass the
        evaluation time to make ages 0; the default 0.0 suits tests that do
        not look at ages); ``None`` becomes ``"missing"``; a :class:`Reading`
        is used as given. Point names are the field names (``"temp_indoor"``
        ...), ``alarm_1``, ``alarm_2`` ... for alarms and ``<opening>_feedback``
        for feedback; the names listed in ``stale`` become ``"stale"`` readings
        (value dropped, sampled at ``t``), and a name that matches no input is
        a ``ValueError``.

        >>> inputs = ZoneInputs.of(temp_indoor=24.0, temp_outdoor=18.0, rain=False)
        >>> inputs.temp_indoor.value, inputs.rain.known, inputs.co2.status
        (24.0, True, 'missing')
        """
        stale_names = frozenset(stale)
        made: set[str] = set()

        def make(point: str, value: Value | Reading | None) -> Reading:
            made.add(point)
            if isinstance(value, Reading):
                return value
            if point in stale_names:
                return Reading.stale(point, t)
            if value is None:
                return Reading.missing(point)
            return Reading.ok(point, value, t)

        indoor = make("temp_indoor", temp_indoor)
        if not isinstance(indoor, ZoneTemperature):
            indoor = ZoneTemperature(
                point=indoor.point,
                value=indoor.value,
                status=indoor.status,
                sample_t=indoor.sample_t,
                aggregate="max",
                used=(indoor.point,) if indoor.known else (),
                skipped=() if indoor.known else (indoor.point,),
            )
        inputs = cls(
            temp_indoor=indoor,
            temp_outdoor=make("temp_outdoor", temp_outdoor),
            humidity_outdoor=make("humidity_outdoor", humidity_outdoor),
            dew_point_outdoor=make("dew_point_outdoor", dew_point_outdoor),
            wind_speed=make("wind_speed", wind_speed),
            wind_direction=make("wind_direction", wind_direction),
            rain=make("rain", rain),
            co2=make("co2", co2),
            heating=make("heating", heating),
            alarms=tuple(make(f"alarm_{i}", a) for i, a in enumerate(alarms, start=1)),
            feedback={
                name: make(f"{name}_feedback", value) for name, value in (feedback or {}).items()
            },
        )
        # A misspelt name would otherwise leave the reading fresh and the test passing.
        unknown = sorted(stale_names - made)
        if unknown:
            raise ValueError(
                f"stale names {unknown} match no input; expected some of {sorted(made)}"
            )
        return inputs


def zone_points(config: SiteConfig, zone: str) -> list[str]:
    """Every point :func:`zone_inputs` reads for ``zone``, each once, in a fixed order."""
    outdoor = config.outdoor
    spec = config.zones[zone]
    names = [
        outdoor.temperature,
        outdoor.humidity,
        outdoor.dew_point,
        outdoor.wind_speed,
        outdoor.wind_direction,
        outdoor.rain,
        *spec.temperature.sensors,
        spec.co2,
        spec.heating,
        *spec.smoke_alarms,
        *(o.feedback for o in spec.openings.values()),
    ]
    return list(dict.fromkeys(n for n in names if n is not None))


def zone_inputs(config: SiteConfig, zone_name: str, held: Held, t: float) -> ZoneInputs:
    """Read everything zone ``zone_name`` needs at time ``t`` [s] from the held samples."""
    zone = config.zones[zone_name]
    outdoor = config.outdoor
    return ZoneInputs(
        temp_indoor=aggregate_temperature(config, zone_name, held, t),
        temp_outdoor=read_point(config, outdoor.temperature, held, t),
        humidity_outdoor=_read_optional(config, outdoor.humidity, held, t),
        dew_point_outdoor=_read_optional(config, outdoor.dew_point, held, t),
        wind_speed=read_point(config, outdoor.wind_speed, held, t),
        wind_direction=_read_optional(config, outdoor.wind_direction, held, t),
        rain=read_point(config, outdoor.rain, held, t),
        co2=_read_optional(config, zone.co2, held, t),
        heating=_read_optional(config, zone.heating, held, t),
        alarms=tuple(read_point(config, name, held, t) for name in zone.smoke_alarms),
        feedback={
            name: read_point(config, opening.feedback, held, t)
            for name, opening in zone.openings.items()
            if opening.feedback is not None
        },
    )
