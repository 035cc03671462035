"""Read the model's annotations: what each place in a site file expects, in words.

Pydantic reports an error as a location (``loc``) and a type. To turn it into
"expected a positive area such as '4 m2'", :func:`resolve` follows the ``loc``
through the model's annotations to the field, its unit quantity and its
bounds, and :func:`expected` says in words what that field takes.
"""

from __future__ import annotations

import difflib
import enum
import types
import typing
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any, Literal, Union, get_args, get_origin

from pydantic import BaseModel, BeforeValidator
from pydantic.fields import FieldInfo

from ventsup.config import model
from ventsup.config.units import describe_quantity

__all__ = [
    "POINT_FIELDS",
    "SECRET_KEYS",
    "Resolved",
    "at_least_one",
    "did_you_mean",
    "expected",
    "field_quantity",
    "literal_choices",
    "quantity_of",
    "resolve",
    "sections_with",
]

_QUANTITY_OF_VALIDATOR: dict[BeforeValidator, str] = {
    get_args(alias)[1]: name
    for name, alias in (
        ("temperature", model.Temperature),
        ("temperature_delta", model.TemperatureDelta),
        ("speed", model.Speed),
        ("duration", model.Duration),
        ("area", model.Area),
        ("length", model.Length),
        ("concentration", model.Concentration),
        ("fraction", model.Fraction),
        ("angle", model.Angle),
    )
}

# Fields that name a point, and the kind that point must have.
POINT_FIELDS: dict[tuple[type[BaseModel], str], model.PointKind] = {
    (model.Outdoor, "temperature"): model.PointKind.TEMPERATURE,
    (model.Outdoor, "humidity"): model.PointKind.HUMIDITY,
    (model.Outdoor, "dew_point"): model.PointKind.DEW_POINT,
    (model.Outdoor, "wind_speed"): model.PointKind.WIND_SPEED,
    (model.Outdoor, "wind_direction"): model.PointKind.WIND_DIRECTION,
    (model.Outdoor, "rain"): model.PointKind.BINARY,
    (model.TemperatureInput, "sensors"): model.PointKind.TEMPERATURE,
    (model.Zone, "co2"): model.PointKind.CO2,
    (model.Zone, "smoke_alarms"): model.PointKind.BINARY,
    (model.Zone, "heating"): model.PointKind.BINARY,
    (model.Opening, "feedback"): model.PointKind.POSITION,
}

# Words for fields whose type alone says too little.
_FIELD_WORDS: dict[tuple[type[BaseModel], str], str] = {
    (model.Site, "name"): "the site's name, such as 'Larkfield Library'",
    (model.Location, "latitude"): "a latitude in degrees from -90 (south) to 90 (north)",
    (model.Location, "longitude"): "a longitude in degrees from -180 (west) to 180 (east)",
    (model.Site, "time_zone"): "an IANA time zone name such as 'Europe/Berlin' or 'America/Denver'",
    (model.Point, "topic"): "an MQTT topic such as 'building/atrium/temperature'",
    (model.Point, "unit"): "the unit of the incoming number, such as 'degF', 'mph' or '%'",
    (model.Point, "json_path"): "a dotted path into a JSON payload, such as 'data.temp'",
    (model.Point, "valid_range"): "a list of two values [low, high]",
    (model.Point, "true_words"): "a list of words, such as [wet, rain]",
    (model.Point, "false_words"): "a list of words, such as [dry]",
    (model.Zone, "rules"): "the name of a rule set defined under 'rules'",
    (model.Zone, "temperature"): (
        "a temperature point name, a list of them, or a mapping with 'sensors' and 'aggregate'"
    ),
    (model.TemperatureInput, "aggregate"): (
        "'max', 'mean', 'min' or the name of one of the zone's sensors"
    ),
    (model.Opening, "command_topic"): "an MQTT topic such as 'building/atrium/north/set'",
    (model.Period, "days"): "a list of weekday numbers, 0 for Monday to 6 for Sunday",
    (model.Schedule, "occupied"): "a list of periods such as ['Mon-Fri 07:00-18:00']",
    (model.Schedule, "security"): "a list of periods such as ['Mon-Sun 22:00-06:00']",
    (model.NightFlush, "hours"): "a list of periods such as ['22:00-06:00']",
    (model.Mqtt, "host"): "the broker's host name or address, such as 'broker.site.local' or "
    "'127.0.0.1'",
    (model.Mqtt, "port"): "a TCP port number from 1 to 65535, such as 1883 or 8883",
    (model.Mqtt, "client_id"): "an MQTT client id such as 'ventsup-larkfield'",
    (model.Mqtt, "username"): "the user name the controller logs in with",
    (model.Mqtt, "password_file"): (
        "the path of a file that holds the password, such as '/etc/ventsup/mqtt-password'"
    ),
    (model.Mqtt, "password_env"): (
        "the name of an environment variable that holds the password, such as "
        "'VENTSUP_MQTT_PASSWORD'"
    ),
    (model.Tls, "ca_file"): "the path of a CA certificate file (PEM), such as 'ca.crt'",
    (model.Tls, "cert_file"): "the path of a client certificate file (PEM)",
    (model.Tls, "key_file"): "the path of the client certificate's key file (PEM)",
    (model.Controller, "ledger"): "the path of the ledger file, such as 'var/ventsup.db'",
}

# Keys that must never be written in a site file, and what to write instead. The
# loader reports them as unknown keys with this advice, never echoing the value.
SECRET_KEYS: dict[tuple[type[BaseModel], str], str] = {
    (model.Mqtt, "password"): (
        "a password never goes in the site file; put it in a file only the service can "
        "read and name that file with password_file, or pass it in an environment "
        "variable named by password_env"
    ),
}

_PERIOD_WORDS = "a period such as 'Mon-Fri 07:00-18:00', 'Sat 09:00-13:00' or '22:00-06:00'"

# "at least one ..." for collections that must not be empty
_AT_LEAST_ONE: dict[tuple[type[BaseModel], str], str] = {
    (model.SiteConfig, "points"): "at least one point, such as 't_out: {topic: weather/temp, "
    "kind: temperature}'",
    (model.SiteConfig, "zones"): "at least one zone",
    (model.SiteConfig, "rules"): "at least one rule set, such as 'standard: {}' "
    "(every value at its default)",
    (model.Zone, "openings"): "at least one opening, such as 'north: {area: 2 m2, facing: 0, "
    "level: low}'",
    (model.TemperatureInput, "sensors"): "at least one temperature point name",
}

_NOUN: dict[type[BaseModel], str] = {
    model.Point: "point settings",
    model.Zone: "zone settings",
    model.Opening: "opening settings",
    model.RuleSet: "rule sets",
}


@dataclass
class Resolved:
    """Where a pydantic ``loc`` leads in the model.

    ``path`` is ``loc`` without pydantic's union-member tags. ``annotation``
    and ``metadata`` describe the value at the end (None when unknown);
    ``owner`` and ``field`` name the last model field passed; ``parent`` is the
    model that holds the last key (for unknown keys); ``union`` says that the
    value matched none of several alternatives; ``key`` that the error is about
    a mapping key itself.
    """

    path: tuple[Any, ...]
    annotation: Any = None
    metadata: list[Any] = field(default_factory=list)
    owner: type[BaseModel] | None = None
    field: str | None = None
    parent: type[BaseModel] | None = None
    union: bool = False
    key: bool = False


def _is_model(tp: Any) -> bool:
    return isinstance(tp, type) and issubclass(tp, BaseModel)


def _unwrap(tp: Any, metadata: list[Any]) -> tuple[Any, list[Any]]:
    """Peel ``Annotated`` (collecting its metadata) and ``X | None`` (no pydantic tag)."""
    while True:
        if get_origin(tp) is typing.Annotated:
            tp, *extra = get_args(tp)
            for item in extra:
                if isinstance(item, FieldInfo):
                    metadata.extend(item.metadata)
                else:
                    metadata.append(item)
            continue
        if _is_union(tp):
            members = [a for a in get_args(tp) if a is not type(None)]
            if len(members) == 1:
                tp = members[0]
                continue
        return tp, metadata


def _is_union(tp: Any) -> bool:
    return get_origin(tp) in (Union, types.UnionType)


def resolve(loc: Sequence[int | str]) -> Resolved:
    """Follow a pydantic error location from :class:`SiteConfig` to the value it names."""
    tp: Any = model.SiteConfig
    metadata: list[Any] = []
    result = Resolved(path=())
    path: list[Any] = []
    index = 0
    while index < len(loc):
        tp, metadata = _unwrap(tp, metadata)
        element = loc[index]
        if _is_union(tp):  # pydantic tags each alternative; the alternatives are ours to word
            result.union = True
            break
        origin = get_origin(tp)
        path.append(element)
        index += 1
        if _is_model(tp):
            result.parent = tp
            found = tp.model_fields.get(element) if isinstance(element, str) else None
            if found is None:
                tp, metadata = None, []
                break
            result.owner, result.field = tp, str(element)
            tp, metadata = found.annotation, list(found.metadata)
        elif origin is dict:
            key_type, value_type = get_args(tp)
            if index < len(loc) and loc[index] == "[key]":
                result.key = True
                tp, metadata = key_type, []
                break
            tp, metadata = value_type, []
        elif origin in (tuple, list, frozenset, set):
            args = [a for a in get_args(tp) if a is not Ellipsis]
            if origin is tuple and len(args) > 1 and Ellipsis not in get_args(tp):
                tp = args[element] if isinstance(element, int) and element < len(args) else None
            else:
                tp = args[0] if args else None
            metadata = []
        else:
            tp, metadata = None, []
            break
    if tp is not None and not result.union:
        tp, metadata = _unwrap(tp, metadata)
    result.path, result.annotation, result.metadata = tuple(path), tp, metadata
    return result


def quantity_of(metadata: Sequence[Any]) -> str | None:
    """The unit quantity a field is read as (``"area"``), from its validators."""
    for item in metadata:
        if isinstance(item, BeforeValidator) and item in _QUANTITY_OF_VALIDATOR:
            return _QUANTITY_OF_VALIDATOR[item]
    return None


def field_quantity(owner: type[BaseModel], name: str) -> str | None:
    """The unit quantity of ``owner.name``, also through ``X | None`` and ``"word" | X``."""
    info = owner.model_fields[name]
    return _quantity_in(info.annotation, list(info.metadata))


def _quantity_in(tp: Any, metadata: list[Any]) -> str | None:
    tp, metadata = _unwrap(tp, metadata)
    found = quantity_of(metadata)
    if found is None and _is_union(tp):
        for member in get_args(tp):
            found = found or _quantity_in(member, [])
    return found


def _number(value: float) -> str:
    return f"{value:g}"


def _bounds(metadata: Sequence[Any]) -> tuple[str, str]:
    """(adjective, bounds phrase) for the numeric limits in ``metadata``."""
    low: tuple[float, bool] | None = None  # (limit, inclusive)
    high: tuple[float, bool] | None = None
    for item in metadata:  # annotated_types Gt, Ge, Lt, Le, as pydantic's Field() makes them
        for name in ("gt", "ge", "lt", "le"):
            limit = getattr(item, name, None)
            if isinstance(limit, int | float) and not isinstance(limit, bool):
                if name in ("gt", "ge"):
                    low = (float(limit), name == "ge")
                else:
                    high = (float(limit), name == "le")
    if low == (0.0, False) and high is None:
        return "positive", ""
    if low is not None and high is not None:
        if low[1] and high[1]:
            return "", f"from {_number(low[0])} to {_number(high[0])}"
        lower = f"{'at least' if low[1] else 'above'} {_number(low[0])}"
        upper = f"{'at most' if high[1] else 'below'} {_number(high[0])}"
        return "", f"{lower} and {upper}"
    if low is not None:
        return "", f"of {_number(low[0])} or more" if low[1] else f"above {_number(low[0])}"
    if high is not None:
        return "", f"of {_number(high[0])} or less" if high[1] else f"below {_number(high[0])}"
    return "", ""


def _join(words: Sequence[str], conjunction: str = "or") -> str:
    if len(words) == 1:
        return words[0]
    return f"{', '.join(words[:-1])} {conjunction} {words[-1]}"


def _alternatives(tp: Any, metadata: list[Any]) -> list[str]:
    """Each accepted form of ``tp`` in words; literals and enum values one by one."""
    tp, metadata = _unwrap(tp, metadata)
    if _is_union(tp):
        return [words for member in get_args(tp) for words in _alternatives(member, [])]
    if get_origin(tp) is Literal:
        return [repr(value) for value in get_args(tp)]
    if isinstance(tp, type) and issubclass(tp, enum.Enum):
        return [repr(member.value) for member in tp]
    return [_words(tp, metadata)]


def _words(tp: Any, metadata: list[Any]) -> str:
    quantity = quantity_of(metadata)
    adjective, bounds = _bounds(metadata)
    if quantity is not None:
        return describe_quantity(quantity, adjective, bounds)
    if tp is bool:
        return "true or false"
    if tp is int:
        return _phrase("whole number", adjective, bounds)
    if tp is float:
        return _phrase("number", adjective, bounds)
    if tp is str:
        if any(getattr(item, "pattern", None) for item in metadata):
            return "a name of letters, digits, '_' and '-' that starts with a letter"
        if any(getattr(item, "min_length", 0) for item in metadata):
            return "a non-empty text"
        return "a text"
    if tp is model.Period:
        return _PERIOD_WORDS
    if _is_model(tp):
        required = [name for name, info in tp.model_fields.items() if info.is_required()]
        if required:
            keys = _join([repr(name) for name in required], "and")
            return f"a mapping with {'the key' if len(required) == 1 else 'the keys'} {keys}"
        return "a mapping of settings (write {} to take every default)"
    origin = get_origin(tp)
    if origin is dict:
        value_type = get_args(tp)[1]
        what = _NOUN.get(value_type, "settings")
        return f"a mapping of names to {what}"
    if origin in (tuple, list, frozenset, set):
        return "a list"
    return "a valid value"


def _phrase(noun: str, adjective: str, bounds: str) -> str:
    words = f"{adjective} {noun}" if adjective else noun
    article = "an" if words[0] in "aeiou" else "a"
    return f"{article} {words}{' ' + bounds if bounds else ''}"


def _owner_field(resolved: Resolved) -> tuple[type[BaseModel], str] | None:
    if resolved.owner is None or resolved.field is None:
        return None
    return resolved.owner, resolved.field


def expected(resolved: Resolved) -> str:
    """What the value at ``resolved`` should be, in words (without "expected")."""
    if resolved.key:
        return _words(resolved.annotation, resolved.metadata)
    owner_field = _owner_field(resolved)
    whole_field = len(resolved.path) > 0 and resolved.path[-1] == resolved.field
    if owner_field in POINT_FIELDS and (whole_field or resolved.owner is model.TemperatureInput):
        kind = POINT_FIELDS[owner_field]
        if owner_field == (model.Zone, "smoke_alarms") and whole_field:
            return f"a list of names of {kind} points defined under 'points'"
        return f"the name of a {kind} point defined under 'points'"
    if whole_field and owner_field in _FIELD_WORDS:
        return _FIELD_WORDS[owner_field]
    if resolved.annotation is None and not resolved.union:
        return "a valid value"
    return _join(_alternatives(resolved.annotation, list(resolved.metadata)))


def at_least_one(resolved: Resolved) -> str:
    """What an empty collection that must not be empty needs: "at least one opening, ..."."""
    owner_field = _owner_field(resolved)
    if owner_field is None:
        return "at least one item"
    return _AT_LEAST_ONE.get(owner_field, "at least one item")


def did_you_mean(word: str, choices: Sequence[str]) -> str | None:
    """The closest of ``choices`` to ``word`` (case-insensitive), if any is close."""
    lowered = {choice.lower(): choice for choice in choices}
    match = difflib.get_close_matches(word.lower(), list(lowered), n=1, cutoff=0.6)
    return lowered[match[0]] if match else None


def literal_choices(resolved: Resolved) -> list[str]:
    """The fixed words a value may take (literals and enum values), for did-you-mean."""
    return [text[1:-1] for text in _alternatives(resolved.annotation, []) if text[:1] == "'"]


def sections_with(parent: type[BaseModel], key: str) -> list[str]:
    """The fields of ``parent`` that are sections (models) having a key ``key``."""
    homes = []
    for name, info in parent.model_fields.items():
        tp, _ = _unwrap(info.annotation, [])
        if _is_model(tp) and key in tp.model_fields:
            homes.append(name)
    return homes
