"""The compiled kernel restates the documented physics: equal to rounding for random inputs.

:mod:`simulator._kernel` computes the closed loop's physics in numba on plain
arrays; these tests hold it to :func:`simulator.building.step_zone`,
:func:`simulator.building.condition_air` and
:func:`simulator.openings.zone_airflow`, which the other tests check against
ISO 13790 and the published airflow formulas.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from simulator import _kernel
from simulator.building import Building, RCParameters, condition_air, step_zone
from simulator.openings import OpeningModel, zone_airflow

RELATIVE = 1e-12


def constants(
    params: RCParameters, max_heating: float = 0.0, max_cooling: float = 0.0
) -> np.ndarray:
    row = np.zeros(_kernel.ZONE_CONSTANTS)
    _kernel.set_rc_constants(row, params)  # as the closed loop fills it
    row[_kernel.Z_MAX_HEATING] = max_heating
    row[_kernel.Z_MAX_COOLING] = max_cooling
    return row


def close(a: float, b: float) -> bool:
    return math.isclose(a, b, rel_tol=RELATIVE, abs_tol=1e-9)


temperatures = st.floats(-25.0, 45.0)
gains = st.floats(0.0, 60_000.0)


@pytest.mark.parametrize("air_node", [False, True])
@settings(max_examples=60)
@given(
    zone_index=st.integers(0, 2),
    temp_mass=temperatures,
    temp_air=temperatures,
    temp_outdoor=temperatures,
    temp_opaque=temperatures,
    h_ve=st.floats(0.0, 20_000.0),
    gains_internal=gains,
    gains_solar=gains,
    heating=st.floats(-50_000.0, 50_000.0),
    dt=st.sampled_from([60.0, 600.0, 3600.0]),
)
def test_step_zone_is_the_documented_step(
    building: Building,
    air_node: bool,
    zone_index: int,
    temp_mass: float,
    temp_air: float,
    temp_outdoor: float,
    temp_opaque: float,
    h_ve: float,
    gains_internal: float,
    gains_solar: float,
    heating: float,
    dt: float,
) -> None:
    params = list(building.zones.values())[zone_index].rc_parameters()
    if not air_node:
        params = replace(params, capacity_air=0.0)
    args = (temp_mass, temp_outdoor, temp_opaque, h_ve, gains_internal, gains_solar, heating, dt)
    expected = step_zone(params, *args, temp_air)
    mass, surface, air, air_end, operative = _kernel.step_zone(constants(params), *args, temp_air)
    assert close(mass, expected.temp_mass)
    assert close(surface, expected.temp_surface)
    assert close(air, expected.temp_air)
    assert close(air_end, expected.temp_air_end)
    assert close(operative, expected.temp_operative)


@settings(max_examples=60)
@given(
    zone_index=st.integers(0, 2),
    temp_mass=temperatures,
    temp_air=temperatures,
    temp_outdoor=temperatures,
    h_ve=st.floats(0.0, 20_000.0),
    gains_internal=gains,
    setpoint_heating=st.floats(15.0, 22.0),
    setpoint_cooling=st.one_of(st.just(math.inf), st.floats(23.0, 28.0)),
    max_heating=st.floats(0.0, 200_000.0),
    max_cooling=st.floats(0.0, 200_000.0),
)
def test_condition_air_is_the_documented_plant(
    building: Building,
    zone_index: int,
    temp_mass: float,
    temp_air: float,
    temp_outdoor: float,
    h_ve: float,
    gains_internal: float,
    setpoint_heating: float,
    setpoint_cooling: float,
    max_heating: float,
    max_cooling: float,
) -> None:
    params = list(building.zones.values())[zone_index].rc_parameters()
    args = (temp_mass, temp_outdoor, temp_outdoor, h_ve, gains_internal, 0.0)
    expected = condition_air(
        params,
        *args,
        setpoint_heating,
        setpoint_cooling,
        max_heating,
        max_cooling,
        60.0,
        temp_air=temp_air,
    )
    row = constants(params, max_heating, max_cooling)
    free = _kernel.step_zone(row, *args, 0.0, 60.0, temp_air)
    step, power = _kernel.condition_air(
        row, *args, setpoint_heating, setpoint_cooling, 60.0, temp_air, free
    )
    assert math.isclose(power, expected.heating, rel_tol=1e-9, abs_tol=1e-6)
    assert close(step[2], expected.temp_air)
    assert close(step[0], expected.temp_mass)


opening = st.builds(
    OpeningModel,
    name=st.just("o"),
    area=st.floats(0.1, 5.0),
    facing=st.floats(0.0, 359.0),
    level=st.sampled_from(["low", "high"]),
    height=st.floats(0.0, 15.0),
    opening_height=st.floats(0.2, 2.0),
    discharge_coefficient=st.floats(0.3, 0.7),
    travel_time=st.just(60.0),
)


@settings(max_examples=150)
@given(
    openings=st.lists(opening, min_size=1, max_size=5),
    fractions=st.lists(
        st.one_of(st.just(0.0), st.just(1.0), st.floats(0.0, 1.0)), min_size=5, max_size=5
    ),
    temp_indoor=temperatures,
    temp_outdoor=temperatures,
    wind_speed=st.floats(0.0, 25.0),
    wind_direction=st.floats(0.0, 360.0),
)
def test_zone_airflow_is_the_documented_airflow(
    openings: list[OpeningModel],
    fractions: list[float],
    temp_indoor: float,
    temp_outdoor: float,
    wind_speed: float,
    wind_direction: float,
) -> None:
    used = fractions[: len(openings)]
    expected = zone_airflow(openings, used, temp_indoor, temp_outdoor, wind_speed, wind_direction)
    table = np.zeros((len(openings) + 1, _kernel.OPENING_CONSTANTS))  # one unused row first
    for i, o in enumerate(openings, start=1):
        table[i, _kernel.O_AREA] = o.area
        table[i, _kernel.O_FACING] = o.facing
        table[i, _kernel.O_LOW] = 1.0 if o.level == "low" else 0.0
        table[i, _kernel.O_HEIGHT] = o.height
        table[i, _kernel.O_OPENING_HEIGHT] = o.opening_height
        table[i, _kernel.O_DISCHARGE] = o.discharge_coefficient
    found = _kernel.zone_airflow(
        table,
        np.array([0.5, *used]),
        1,
        len(openings) + 1,
        temp_indoor,
        temp_outdoor,
        wind_speed,
        wind_direction,
    )
    for got, want in zip(found, expected, strict=True):
        assert close(got, want)
