"""The site configuration as typed, frozen, validated objects.

A site file (YAML) becomes a :class:`SiteConfig`. Every threshold accepts a
unit (see :mod:`ventsup.config.units`); after loading, every value is SI:
temperatures in °C, differences in K, speeds in m/s, durations in s, areas in
m², lengths in m, CO2 in ppm, fractions 0-1, angles in degrees from north.

Field validators raise ``ValueError`` whose message begins "expected ..."; the
loader (:mod:`ventsup.config.load`) adds the file, line, key path and the value
that was given. Checks that need the whole site (every referenced point
exists, thresholds ordered across sections) live in
:func:`ventsup.config.checks.cross_check`, so that all errors are reported at
once.
"""

from __future__ import annotations

import re
import unicodedata
import zoneinfo
from enum import StrEnum
from typing import Annotated, Any, Literal

from pydantic import (
    BaseModel,
    BeforeValidator,
    ConfigDict,
    Field,
    ValidationInfo,
    field_validator,
)

from ventsup.config.units import UnitError, parse_quantity, unit_names

__all__ = [
    "Actuator",
    "Alarm",
    "Co2Rules",
    "Cold",
    "Comfort",
    "Controller",
    "FreeCooling",
    "Interlock",
    "Location",
    "Mqtt",
    "NightFlush",
    "Opening",
    "Outdoor",
    "Override",
    "Period",
    "Point",
    "PointKind",
    "Rain",
    "RuleSet",
    "Schedule",
    "Site",
    "SiteConfig",
    "TemperatureInput",
    "Tls",
    "Wind",
    "Zone",
    "site_slug",
]


def _quantity(name: str) -> BeforeValidator:
    def parse(raw: object) -> float:
        try:
            return parse_quantity(raw, name)
        except UnitError as exc:
            raise ValueError(str(exc)) from None

    return BeforeValidator(parse)


Temperature = Annotated[float, _quantity("temperature")]
TemperatureDelta = Annotated[float, _quantity("temperature_delta"), Field(ge=0)]
Speed = Annotated[float, _quantity("speed"), Field(ge=0)]
Duration = Annotated[float, _quantity("duration"), Field(ge=0)]
Area = Annotated[float, _quantity("area"), Field(gt=0)]
Length = Annotated[float, _quantity("length")]
Concentration = Annotated[float, _quantity("concentration"), Field(ge=0)]
Fraction = Annotated[float, _quantity("fraction"), Field(ge=0, le=1)]
Angle = Annotated[float, _quantity("angle"), Field(ge=0, le=360)]
Name = Annotated[str, Field(pattern=r"^[A-Za-z][A-Za-z0-9_-]*$")]
PositiveDuration = Annotated[Duration, Field(gt=0)]


class _Frozen(BaseModel):
    model_config = ConfigDict(frozen=True, extra="forbid", validate_default=True)


# --------------------------------------------------------------------------- site


class Location(_Frozen):
    """Where the building is: for solar geometry, weather and air density."""

    latitude: float = Field(ge=-90, le=90)
    longitude: float = Field(ge=-180, le=180)
    elevation: Length = 0.0


class Site(_Frozen):
    """The building as a whole."""

    name: str = Field(min_length=1)
    time_zone: str
    location: Location | None = None
    units: Literal["SI", "IP"] = "SI"

    @field_validator("time_zone")
    @classmethod
    def _known_zone(cls, value: str) -> str:
        try:
            zoneinfo.ZoneInfo(value)
        except (zoneinfo.ZoneInfoNotFoundError, ValueError):
            raise ValueError(
                "expected an IANA time zone name such as 'Europe/Berlin' or 'America/Denver'"
            ) from None
        return value


# --------------------------------------------------------------------------- points


class PointKind(StrEnum):
    """What a point measures; fixes its SI unit and default plausible range."""

    TEMPERATURE = "temperature"  # °C
    HUMIDITY = "humidity"  # relative humidity, % (0-100)
    DEW_POINT = "dew_point"  # °C
    WIND_SPEED = "wind_speed"  # m/s
    WIND_DIRECTION = "wind_direction"  # degrees from north, where the wind comes from
    CO2 = "co2"  # ppm
    POSITION = "position"  # opening fraction 0-1 (actuator feedback)
    BINARY = "binary"  # rain, alarms, plant heating: true/false

    @property
    def quantity(self) -> str | None:
        """The unit quantity of this kind's values, None for unitless kinds."""
        return _KIND_QUANTITY[self]


_KIND_QUANTITY: dict[PointKind, str | None] = {
    PointKind.TEMPERATURE: "temperature",
    PointKind.HUMIDITY: None,
    PointKind.DEW_POINT: "temperature",
    PointKind.WIND_SPEED: "speed",
    PointKind.WIND_DIRECTION: "angle",
    PointKind.CO2: "concentration",
    PointKind.POSITION: "fraction",
    PointKind.BINARY: None,
}

#: Default plausible range per kind, SI. Values outside are rejected as implausible.
DEFAULT_RANGES: dict[PointKind, tuple[float, float]] = {
    PointKind.TEMPERATURE: (-50.0, 70.0),
    PointKind.HUMIDITY: (0.0, 100.0),
    PointKind.DEW_POINT: (-60.0, 40.0),
    PointKind.WIND_SPEED: (0.0, 75.0),
    PointKind.WIND_DIRECTION: (0.0, 360.0),
    PointKind.CO2: (250.0, 10000.0),
    PointKind.POSITION: (0.0, 1.0),
    PointKind.BINARY: (0.0, 1.0),
}

DEFAULT_TRUE_WORDS = ("true", "on", "yes", "wet", "rain", "alarm", "active", "high")
DEFAULT_FALSE_WORDS = ("false", "off", "no", "dry", "normal", "clear", "inactive", "low")


def _range_value(raw: object, kind: PointKind, quantity: str | None) -> float:
    """One end of a point's ``valid_range``, in the kind's SI unit."""
    if quantity is not None:
        return parse_quantity(raw, quantity)
    if kind is PointKind.HUMIDITY:
        # relative humidity is kept in % (0-100), so '95 %' is 95
        text = raw.strip().removesuffix("%") if isinstance(raw, str) else raw
        try:
            return parse_quantity(text, "concentration")
        except UnitError:
            raise UnitError("expected a relative humidity in % such as 95 or '95 %'") from None
    try:
        return parse_quantity(raw, "concentration")
    except UnitError:
        raise UnitError("expected a plain number such as 1") from None


class Point(_Frozen):
    """One sensor or status value, as a site gateway publishes it.

    ``unit`` is the unit of the incoming number (``degF``, ``mph``, ``%``);
    values are converted to the kind's SI unit on arrival. ``json_path`` (dotted,
    e.g. ``data.temp``) picks a field of a JSON object; without it the payload is
    the value itself. Binary points read the true/false words
    (case-insensitive) and ``1``/``0``.
    """

    topic: str = Field(min_length=1)
    kind: PointKind
    unit: str | None = None
    json_path: str | None = None
    true_words: tuple[str, ...] = DEFAULT_TRUE_WORDS
    false_words: tuple[str, ...] = DEFAULT_FALSE_WORDS
    stale_after: Duration = 600.0
    valid_range: tuple[float, float] | None = None
    max_payload: int = Field(default=1024, gt=0)

    @field_validator("topic")
    @classmethod
    def _plain_topic(cls, value: str) -> str:
        if "+" in value or "#" in value:
            raise ValueError("expected a topic name without the wildcards '+' or '#'")
        return value

    @field_validator("unit")
    @classmethod
    def _unit_fits_kind(cls, value: str | None, info: ValidationInfo) -> str | None:
        kind = info.data.get("kind")
        if value is None or kind is None:
            return value
        quantity = PointKind(kind).quantity
        if kind is PointKind.HUMIDITY:
            if value.strip() != "%":
                raise ValueError("expected '%' for a relative humidity point")
            return value
        if quantity is None:
            raise ValueError(f"expected no unit for a {kind} point")
        try:
            parse_quantity(f"1 {value}", quantity)
        except UnitError:
            raise ValueError(
                f"expected a unit for a {kind} point: one of {unit_names(quantity)}"
            ) from None
        return value

    @field_validator("valid_range", mode="before")
    @classmethod
    def _parse_range(cls, value: Any, info: ValidationInfo) -> Any:
        kind = info.data.get("kind")
        if value is None or kind is None:
            return value
        if not isinstance(value, list | tuple) or len(value) != 2:
            raise ValueError("expected a list of two values [low, high]")
        quantity = PointKind(kind).quantity
        try:
            low, high = (_range_value(v, kind, quantity) for v in value)
        except UnitError as exc:
            raise ValueError(str(exc)) from None
        if not low < high:
            raise ValueError("expected [low, high] with low below high")
        return (low, high)

    @property
    def plausible_range(self) -> tuple[float, float]:
        """The configured valid range, or the kind's default."""
        return self.valid_range or DEFAULT_RANGES[self.kind]


# --------------------------------------------------------------------------- zones


class TemperatureInput(_Frozen):
    """A zone's indoor temperature from one or several sensors.

    ``aggregate`` is ``max`` (default: the warmest fresh sensor, right for a
    tall space where occupied upper levels overheat first), ``mean``, ``min``,
    or the name of one of ``sensors`` (used while fresh; the mean of the other
    fresh sensors otherwise). Stale sensors are always skipped.
    """

    sensors: tuple[Name, ...] = Field(min_length=1)
    aggregate: str = "max"

    @field_validator("aggregate")
    @classmethod
    def _known_aggregate(cls, value: str, info: ValidationInfo) -> str:
        if "sensors" not in info.data:
            return value  # the sensors are wrong; that error is the one to report
        if value in ("max", "mean", "min") or value in info.data["sensors"]:
            return value
        raise ValueError("expected 'max', 'mean', 'min' or the name of one of the zone's sensors")


def _temperature_input(value: Any) -> Any:
    """Accept a point name or a list of names as shorthand for ``{sensors: [...]}``."""
    if isinstance(value, str):
        return {"sensors": [value]}
    if isinstance(value, list):
        return {"sensors": value}
    return value


class Opening(_Frozen):
    """One motorised opening (or a group driven by one actuator signal).

    ``area`` is the free area at full opening; ``facing`` the outward normal of
    its façade in degrees from north; ``level`` low or high (stack flow runs
    from low to high); ``height`` its centre above the zone floor. Positions
    caps: ``rain_position`` while it rains, ``secure_position`` during the
    security window; ``fire_position`` is ``release`` (stop commanding, the
    default) or the fraction the site's fire strategy requires.
    """

    area: Area
    facing: Angle
    level: Literal["low", "high"]
    height: Length | None = None
    feedback: Name | None = None
    rain_position: Fraction = 0.0
    secure_position: Fraction = 0.0
    fire_position: Literal["release"] | Fraction = "release"
    command_topic: str | None = None
    command_format: Literal["fraction", "percent", "words"] = "fraction"


class Zone(_Frozen):
    """A space whose openings are decided together."""

    rules: Name
    temperature: Annotated[TemperatureInput, BeforeValidator(_temperature_input)]
    co2: Name | None = None
    smoke_alarms: tuple[Name, ...] = ()
    heating: Name | None = None
    openings: dict[Name, Opening] = Field(min_length=1)


class Outdoor(_Frozen):
    """The site's weather points (shared by all zones)."""

    temperature: Name
    humidity: Name | None = None
    dew_point: Name | None = None
    wind_speed: Name
    wind_direction: Name | None = None
    rain: Name


# --------------------------------------------------------------------------- rules


_DAYS = ("mon", "tue", "wed", "thu", "fri", "sat", "sun")
_PERIOD = re.compile(
    r"^\s*(?:(?P<d1>[A-Za-z]{3})(?:\s*-\s*(?P<d2>[A-Za-z]{3}))?\s+)?"
    r"(?P<h1>\d{1,2}):(?P<m1>\d{2})\s*-\s*(?P<h2>\d{1,2}):(?P<m2>\d{2})\s*$"
)


def _parse_hours(text: str) -> tuple[frozenset[int], int, int]:
    """``"Mon-Fri 07:00-18:00"`` -> (weekdays 0-6, start minute, end minute)."""
    match = _PERIOD.match(text)
    expected = "expected a period such as 'Mon-Fri 07:00-18:00', 'Sat 09:00-13:00' or '22:00-06:00'"
    if match is None:
        raise ValueError(expected)
    d1, d2 = match.group("d1"), match.group("d2")
    try:
        first = _DAYS.index(d1.lower()) if d1 else 0
        last = _DAYS.index(d2.lower()) if d2 else (first if d1 else 6)
    except ValueError:
        raise ValueError(f"{expected}; days are {', '.join(d.title() for d in _DAYS)}") from None
    days = frozenset((first + i) % 7 for i in range((last - first) % 7 + 1))
    h1, m1, h2, m2 = (int(match.group(k)) for k in ("h1", "m1", "h2", "m2"))
    if h1 > 24 or h2 > 24 or m1 > 59 or m2 > 59 or (h1 == 24 and m1) or (h2 == 24 and m2):
        raise ValueError(f"{expected}; hours run from 00:00 to 24:00")
    start, end = h1 * 60 + m1, h2 * 60 + m2
    if start == end:
        raise ValueError(f"{expected}; start and end are the same")
    return days, start, end


class Period(_Frozen):
    """A weekly period in local wall-clock time; may cross midnight.

    A period that crosses midnight belongs to the day it starts on.
    """

    days: frozenset[Annotated[int, Field(ge=0, le=6)]]  # 0 Monday .. 6 Sunday
    start_minute: int = Field(ge=0, le=1440)
    end_minute: int = Field(ge=0, le=1440)

    @classmethod
    def parse(cls, text: str) -> Period:
        """Build from ``"Mon-Fri 07:00-18:00"``."""
        days, start, end = _parse_hours(text)
        return cls(days=days, start_minute=start, end_minute=end)


def _period(value: Any) -> Any:
    return Period.parse(value) if isinstance(value, str) else value


def _periods(value: Any) -> Any:
    """Accept one period as shorthand for a list of one."""
    return [value] if isinstance(value, str) else value


# Each item is parsed on its own, so that an error names the item that is wrong.
Periods = Annotated[
    tuple[Annotated[Period, BeforeValidator(_period)], ...], BeforeValidator(_periods)
]


class Alarm(_Frozen):
    """Life safety: how long an alarm must stay clear before the latch releases."""

    clear_hold: Duration = 900.0


class Rain(_Frozen):
    """Close (or cap at each opening's rain position) while wet; reopen after a dry delay."""

    dry_delay: Duration = 1200.0


class Wind(_Frozen):
    """Cap above one speed, close above another, lower limits for windward openings.

    An opening is windward when its facing is within ``windward_angle`` of the
    direction the wind comes from. A limit, once exceeded, holds until the
    speed has stayed at or below ``reopen_ratio`` times the limit for ``hold``.
    """

    cap_above: Speed = 8.0
    cap_position: Fraction = 0.3
    close_above: Speed = 10.0
    windward_cap_above: Speed | None = None
    windward_close_above: Speed | None = None
    windward_angle: Angle = 45.0
    reopen_ratio: float = Field(default=0.8, gt=0, le=1)
    hold: Duration = 900.0


class Cold(_Frozen):
    """Close below an outdoor temperature floor (cold draughts, freezing)."""

    outdoor_below: Temperature = 5.0


class Comfort(_Frozen):
    """A fixed comfort band, used for reporting comfort hours."""

    low: Temperature = 20.0
    high: Temperature = 25.0


class FreeCooling(_Frozen):
    """Open when the zone is warm and the outdoor air can cool it.

    Opens at ``open_above`` (indoor), closes below ``close_below``, and opens
    proportionally from ``min_opening`` at ``open_above`` to fully at
    ``full_open_at``. The outdoor air must lie within
    [``outdoor_min``, ``outdoor_max``], be at least ``min_difference`` cooler
    than indoors and have a dew point at or below ``dew_point_max``.
    """

    enabled: bool = True
    open_above: Temperature = 23.0
    close_below: Temperature = 22.0
    full_open_at: Temperature = 25.0
    min_opening: Fraction = 0.2
    outdoor_min: Temperature = 10.0
    outdoor_max: Temperature = 23.0
    min_difference: TemperatureDelta = 1.0
    dew_point_max: Temperature | None = 16.8
    when: Literal["occupied", "always"] = "occupied"


class NightFlush(_Frozen):
    """Cool the building's mass at night, stopping above the next morning's heating point."""

    enabled: bool = False
    hours: Periods = (Period.parse("22:00-06:00"),)
    start_above: Temperature = 24.0
    stop_below: Temperature = 19.0
    min_difference: TemperatureDelta = 3.0
    outdoor_min: Temperature = 12.0
    dew_point_max: Temperature | None = 12.0
    position: Fraction = 1.0


class Co2Rules(_Frozen):
    """A minimum opening for indoor air quality while occupied."""

    enabled: bool = True
    open_above: Concentration = 1000.0
    close_below: Concentration = 800.0
    position: Fraction = 0.15
    outdoor_min: Temperature = 10.0


class Interlock(_Frozen):
    """HVAC interlock: no cooling by windows while the plant heats the zone."""

    block_cooling_while_heating: bool = True
    allow_co2_while_heating: bool = True


class Actuator(_Frozen):
    """Actuator care and feedback supervision."""

    min_open_time: Duration = 600.0
    min_closed_time: Duration = 600.0
    min_step: Fraction = 0.1
    max_moves_per_hour: int = Field(default=6, ge=1)
    feedback_tolerance: Fraction = 0.1
    feedback_timeout: Duration = 180.0


class Schedule(_Frozen):
    """Occupied hours and a security window, in the site's time zone."""

    occupied: Periods = (Period.parse("Mon-Fri 07:00-19:00"),)
    security: Periods = ()


class RuleSet(_Frozen):
    """A named set of thresholds; zones refer to one by name."""

    alarm: Alarm = Alarm()
    rain: Rain = Rain()
    wind: Wind = Wind()
    cold: Cold = Cold()
    comfort: Comfort = Comfort()
    free_cooling: FreeCooling = FreeCooling()
    night_flush: NightFlush = NightFlush()
    co2: Co2Rules = Co2Rules()
    interlock: Interlock = Interlock()
    actuator: Actuator = Actuator()
    schedule: Schedule = Schedule()
    indoor_unknown: Literal["closed", "hold"] | Fraction = "closed"


class Override(_Frozen):
    """Defaults for operator overrides."""

    default_duration: Duration = 7200.0
    max_duration: Duration = 7 * 86400.0


# --------------------------------------------------------------------------- the daemon


def site_slug(name: str) -> str:
    """The site's name as a topic- and file-safe word: ``"Larkfield Library"`` -> ``"larkfield-library"``.

    >>> site_slug("Quarry Lane Commons (east)")
    'quarry-lane-commons-east'
    """
    ascii_name = unicodedata.normalize("NFKD", name).encode("ascii", "ignore").decode("ascii")
    slug = re.sub(r"[^a-z0-9]+", "-", ascii_name.lower()).strip("-")
    return slug or "site"


def _protocol_word(value: Any) -> Any:
    """YAML reads ``protocol: 5`` as a number; the setting is the word ``"5"``."""
    if isinstance(value, int | float) and not isinstance(value, bool) and value == 5:
        return "5"
    return value


class Tls(_Frozen):
    """TLS to the broker.

    ``ca_file`` is the CA certificate (PEM) that signed the broker's
    certificate (none: the system's trusted CAs); ``cert_file`` and
    ``key_file`` a client certificate and its key, for brokers that require
    one. ``insecure: true`` skips the check that the certificate names the
    host, for commissioning only. Relative paths are read from the config
    file's folder.
    """

    ca_file: str | None = Field(default=None, min_length=1)
    cert_file: str | None = Field(default=None, min_length=1)
    key_file: str | None = Field(default=None, min_length=1)
    insecure: bool = False


class Mqtt(_Frozen):
    """How the daemon reaches the site's MQTT broker.

    ``port`` defaults to 1883, or 8883 with ``tls``. ``protocol`` is ``"5"``
    (MQTT 5, the default) or ``"3.1.1"``. ``client_id`` defaults to
    ``ventsup-<site slug>``: keep it stable and unique on the broker. The
    password is never written here: ``password_file`` names a file holding it
    (relative to the config file's folder), ``password_env`` an environment
    variable. Lost connections are retried with a delay doubling from
    ``reconnect_min`` to ``reconnect_max``; at start-up the broker must answer
    within ``connect_timeout``.
    """

    host: str = Field(default="localhost", min_length=1)
    port: int | None = Field(default=None, ge=1, le=65535)
    protocol: Annotated[Literal["5", "3.1.1"], BeforeValidator(_protocol_word)] = "5"
    client_id: str | None = Field(default=None, min_length=1, max_length=128)
    keepalive: Annotated[Duration, Field(ge=5, le=65535)] = 60.0
    tls: Tls | None = None
    username: str | None = Field(default=None, min_length=1)
    password_file: str | None = Field(default=None, min_length=1)
    password_env: str | None = Field(default=None, min_length=1)
    reconnect_min: PositiveDuration = 1.0
    reconnect_max: PositiveDuration = 60.0
    connect_timeout: PositiveDuration = 10.0

    @property
    def effective_port(self) -> int:
        """The port given, else 8883 with TLS and 1883 without."""
        if self.port is not None:
            return self.port
        return 8883 if self.tls is not None else 1883


class Controller(_Frozen):
    """How the daemon runs.

    Every zone is evaluated each ``tick`` (and at once when a smoke alarm,
    rain or wind point changes); commands go out when a target changes and
    again every ``reassert``, at ``command_qos``. ``ledger`` is the SQLite file
    (default ``var/ventsup-<site slug>.db``; relative paths are read from the
    config file's folder), keeping records for ``retention``. Records are
    written at least every ``record_interval``; zone states whose targets,
    override or alarm latch changed are saved at once, other state changes
    (timers) within ``state_save_interval``. ``heartbeat`` is the interval of
    the heartbeat message; ``log_format`` ``text`` or ``json`` (one object a
    line). ``startup_settle`` is the longest the first evaluation waits for
    the broker's retained values after connecting.
    """

    tick: PositiveDuration = 60.0
    reassert: PositiveDuration = 900.0
    command_qos: Literal[0, 1, 2] = 1
    ledger: str | None = Field(default=None, min_length=1)
    retention: PositiveDuration = 400 * 86400.0
    record_interval: PositiveDuration = 2.0
    state_save_interval: PositiveDuration = 10.0
    heartbeat: PositiveDuration = 60.0
    log_format: Literal["text", "json"] = "text"
    startup_settle: Duration = 2.0


def _prefix(value: Any) -> Any:
    if not isinstance(value, str):
        return value
    if (
        not value
        or "+" in value
        or "#" in value
        or value.startswith(("/", "$"))
        or value.endswith("/")
        or "//" in value
    ):
        raise ValueError(
            "expected a topic prefix such as 'ventsup/larkfield': no wildcards '+' or '#', "
            "no empty levels, not starting with '/' or '$', not ending with '/'"
        )
    return value


class SiteConfig(_Frozen):
    """A whole site: what the loader returns and what every part of ventsup reads.

    ``mqtt``, ``prefix`` (the controller's own topics, default
    ``ventsup/<site slug>``) and ``controller`` are for the daemon; every
    other command ignores them.
    """

    site: Site
    points: dict[Name, Point] = Field(min_length=1)
    outdoor: Outdoor
    zones: dict[Name, Zone] = Field(min_length=1)
    rules: dict[Name, RuleSet] = Field(min_length=1)
    override: Override = Override()
    mqtt: Mqtt = Mqtt()
    prefix: Annotated[str | None, BeforeValidator(_prefix)] = None
    controller: Controller = Controller()

    def rules_for(self, zone: str) -> RuleSet:
        """The rule set a zone refers to."""
        return self.rules[self.zones[zone].rules]

    @property
    def slug(self) -> str:
        """The site's name as a topic- and file-safe word (:func:`site_slug`)."""
        return site_slug(self.site.name)

    @property
    def topic_prefix(self) -> str:
        """The controller's own topics live under this: ``prefix`` or ``ventsup/<slug>``."""
        return self.prefix if self.prefix is not None else f"ventsup/{self.slug}"

    @property
    def client_id(self) -> str:
        """The daemon's MQTT client id: ``mqtt.client_id`` or ``ventsup-<slug>``."""
        return self.mqtt.client_id if self.mqtt.client_id is not None else f"ventsup-{self.slug}"

    @property
    def ledger_name(self) -> str:
        """The ledger file as configured: ``controller.ledger`` or ``var/ventsup-<slug>.db``.

        Relative to the config file's folder; the daemon resolves it.
        """
        return self.controller.ledger or f"var/ventsup-{self.slug}.db"
