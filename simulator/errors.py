"""The errors the simulator raises on purpose.

Hierarchy (the ventsup classes come from :mod:`ventsup.config.errors`)::

    VentsupError
    ├── ConfigError            a file cannot be used; ``problems`` lists each one
    │   ├── BuildingError      the building description (demo-building.yaml)
    │   └── ScenarioError      a scenario script
    └── SimulatorError         a run cannot go ahead
        ├── WeatherError       weather data missing, malformed or too short (also a ValueError)
        └── ControllerError    over MQTT: the broker or the controller did not answer as agreed

File problems read like the site loader's:
``scenario.yaml:7 events[2].rain.duration: got 'forty', expected a duration such as '30 s', '15 min' or '2 h'``.
"""

from __future__ import annotations

from ventsup.config.errors import ConfigError, VentsupError

__all__ = ["BuildingError", "ControllerError", "ScenarioError", "SimulatorError", "WeatherError"]


class BuildingError(ConfigError):
    """A building description cannot be used; ``problems`` holds every problem found."""


class ScenarioError(ConfigError):
    """A scenario script cannot be used; ``problems`` holds every problem found."""


class SimulatorError(VentsupError):
    """A simulation cannot go ahead as asked."""


class WeatherError(SimulatorError, ValueError):
    """Weather data are missing, malformed or do not cover the run."""


class ControllerError(SimulatorError):
    """Over MQTT (:mod:`simulator.bridge`): the broker or the controller failed the lock-step."""
