"""Site configuration: YAML -> frozen, validated objects, with errors that say where and why.

>>> from ventsup.config import load_config
>>> config = load_config("site.yaml")  # doctest: +SKIP

:func:`load_config` raises :class:`ConfigError` listing every problem, each as
``file:line key.path: got ..., expected ...``. After loading every value is in
SI units (see :mod:`ventsup.config.units`). :func:`ventsup.config.describe.describe`
gives the text that ``ventsup check`` prints (not re-exported here, so that the
name ``ventsup.config.describe`` stays the module).
"""

from ventsup.config.checks import cross_check
from ventsup.config.errors import ConfigError, ConfigProblem, VentsupError
from ventsup.config.load import load_config, load_config_text
from ventsup.config.model import (
    Actuator,
    Alarm,
    Co2Rules,
    Cold,
    Comfort,
    Controller,
    FreeCooling,
    Interlock,
    Location,
    Mqtt,
    NightFlush,
    Opening,
    Outdoor,
    Override,
    Period,
    Point,
    PointKind,
    Rain,
    RuleSet,
    Schedule,
    Site,
    SiteConfig,
    TemperatureInput,
    Tls,
    Wind,
    Zone,
)
from ventsup.config.source import SourceMap
from ventsup.config.units import UnitError, UnitSystem, format_quantity, parse_quantity

__all__ = [
    "Actuator",
    "Alarm",
    "Co2Rules",
    "Cold",
    "Comfort",
    "ConfigError",
    "ConfigProblem",
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
    "SourceMap",
    "TemperatureInput",
    "Tls",
    "UnitError",
    "UnitSystem",
    "VentsupError",
    "Wind",
    "Zone",
    "cross_check",
    "format_quantity",
    "load_config",
    "load_config_text",
    "parse_quantity",
]
