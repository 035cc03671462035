"""Building simulator: try ventsup against a building before it touches a real window.

A separate package that depends on ``ventsup`` only for configuration, shared
physics, (in the in-process loop) the decision core and (over MQTT) the
daemon's MQTT edge and lock-step protocol; ``ventsup`` never imports it.

>>> from ventsup.config import load_config
>>> from simulator import load_building, run, synthetic
>>> site = load_config("config/demo-site.yaml")  # doctest: +SKIP
>>> building = load_building("config/demo-building.yaml", site)  # doctest: +SKIP
>>> weather = synthetic(41.2, -88.1, "America/Chicago", "2024-06-30", "2024-08-02")  # doctest: +SKIP
>>> result = run(site, building, weather, start="2024-07-01", end="2024-08-01")  # doctest: +SKIP
>>> result.summary()  # doctest: +SKIP

Modules (each small and obvious):

- :mod:`simulator.weather`: the :class:`Weather` frame, EPW / CSV / hour-ending
  (TMY3) readers, a seeded synthetic generator, interpolation to the step.
- :mod:`simulator.solar`: sun position, clear sky, diffuse split, façade irradiance.
- :mod:`simulator.building`: the zone model (ISO 13790 5R1C, with an optional
  air-node capacity), gains, solar gains, stratification, ideal plant, and the
  building file (``config/demo-building.yaml``).
- :mod:`simulator.openings`: fraction to free area, actuator travel, stack and
  wind airflow, ventilation heat.
- :mod:`simulator.scenario`: scripted events and faults (YAML).
- :mod:`simulator.loop`: the in-process closed loop with the decision core,
  :class:`Result`, and the what-if helper.
- :mod:`simulator.bridge`: the same loop against a running ``ventsup run
  --sim-clock`` over MQTT, in lock-step with a simulated clock
  (:class:`MqttController`, :func:`run_mqtt`).
- ``python -m simulator``: run or compare from the command line (``--mqtt``
  for the daemon over the broker).

UNFINISHED: ``make demo`` on the simulator.
"""

from simulator.bridge import MqttController, run_mqtt
from simulator.building import Building, load_building
from simulator.errors import (
    BuildingError,
    ControllerError,
    ScenarioError,
    SimulatorError,
    WeatherError,
)
from simulator.loop import CoreController, FixedController, Result, run, what_if
from simulator.scenario import Scenario, load_scenario
from simulator.weather import (
    CLIMATES,
    Climate,
    Weather,
    from_hour_ending,
    read_csv,
    read_epw,
    synthetic,
)

__all__ = [
    "CLIMATES",
    "Building",
    "BuildingError",
    "Climate",
    "ControllerError",
    "CoreController",
    "FixedController",
    "MqttController",
    "Result",
    "Scenario",
    "ScenarioError",
    "SimulatorError",
    "Weather",
    "WeatherError",
    "from_hour_ending",
    "load_building",
    "load_scenario",
    "read_csv",
    "read_epw",
    "run",
    "run_mqtt",
    "synthetic",
    "what_if",
]
