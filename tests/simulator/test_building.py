"""The zone thermal model (ISO 13790 5R1C), gains, stratification and the building file.

Sources named beside each check (../shared/CHECKS.md, "Zone thermal models" and
"People, plant, operation").
"""

from __future__ import annotations

import itertools
import math
from dataclasses import replace

import numpy as np
import pandas as pd
import pytest
from hypothesis import given
from hypothesis import strategies as st

from simulator.building import (
    HEAT_TRANSFER_AIR_SURFACE,
    HEAT_TRANSFER_SURFACE_MASS,
    SURFACE_TO_FLOOR_RATIO,
    Building,
    MassClass,
    RCParameters,
    Schedule,
    Stratification,
    ThermalStep,
    condition_air,
    iso13790_parameters,
    parse_building,
    solar_gains,
    step_zone,
    stratification_gradient,
    temperature_at_height,
)
from simulator.errors import BuildingError
from simulator.solar import solar_position
from ventsup.config.model import PointKind, SiteConfig

from .conftest import DEMO_BUILDING


def one_node(capacity: float = 1e7, conductance: float = 500.0) -> RCParameters:
    """The 5R1C network reduced to 1R1C: no windows, no ventilation, one conductance."""
    return RCParameters(
        floor_area=100.0,
        conductance_window=0.0,
        conductance_opaque=conductance,
        conductance_air_surface=1000.0,
        conductance_surface_mass=1000.0,
        capacity=capacity,
        share_mass=0.5,
        share_window=0.0,
    )


def run_steps(
    params: RCParameters,
    start: float,
    outdoor: float,
    steps: int,
    dt: float,
    ventilation: float = 0.0,
    internal: float = 0.0,
    solar: float = 0.0,
) -> list[float]:
    mass = air = start
    trace = []
    for _ in range(steps):
        result = step_zone(
            params, mass, outdoor, outdoor, ventilation, internal, solar, 0.0, dt, air
        )
        mass, air = result.temp_mass, result.temp_air_end
        trace.append(result.temp_air)
    return trace


# ------------------------------------------------------------------------- ISO 13790 constants


def test_iso13790_constants() -> None:
    # ISO 13790:2008 7.2.2.2 and 12.2.2: h_is 3.45, h_ms 9.1 W/(m²K), Λ_at 4.5.
    assert HEAT_TRANSFER_AIR_SURFACE == 3.45
    assert HEAT_TRANSFER_SURFACE_MASS == 9.1
    assert SURFACE_TO_FLOOR_RATIO == 4.5


@pytest.mark.parametrize(
    ("mass_class", "area_factor", "capacity"),
    # ISO 13790:2008 Table 12: A_m / A_f and C_m / A_f [kJ/(K·m²)].
    [
        ("very_light", 2.5, 80),
        ("light", 2.5, 110),
        ("medium", 2.5, 165),
        ("heavy", 3.0, 260),
        ("very_heavy", 3.5, 370),
    ],
)
def test_mass_classes(mass_class: str, area_factor: float, capacity: float) -> None:
    assert MassClass(mass_class).area_factor == area_factor
    assert MassClass(mass_class).capacity_per_floor_area == capacity * 1000.0


def test_iso13790_parameters() -> None:
    # ISO 13790 Annex C: A_t = 4.5 A_f, H_tr,is = 3.45 A_t, H_tr,ms = 9.1 A_m,
    # H_tr,em = 1 / (1/H_tr,op - 1/H_tr,ms), window share H_tr,w / (9.1 A_t) [calc].
    p = iso13790_parameters(100.0, "medium", 100.0, 50.0)
    assert p.conductance_air_surface == pytest.approx(3.45 * 450.0)
    assert p.conductance_surface_mass == pytest.approx(9.1 * 250.0)
    assert p.conductance_opaque == pytest.approx(1.0 / (1.0 / 100.0 - 1.0 / 2275.0))
    assert p.capacity == 16.5e6
    assert p.share_mass == pytest.approx(250.0 / 450.0)
    assert p.share_window == pytest.approx(50.0 / (9.1 * 450.0))


def test_envelope_too_leaky_for_the_method_is_refused() -> None:
    with pytest.raises(ValueError, match="expected less than H_tr,ms"):
        iso13790_parameters(10.0, "light", 500.0, 10.0)


# ------------------------------------------------------------------------- 1R1C case


def test_one_node_time_constant() -> None:
    # CHECKS.md "1R1C" [calc]: C 1e7 J/K, UA 500 W/K -> τ = 20 000 s; a step of the
    # outdoor temperature from 20 to 30 °C gives 20 + 10 (1 - 1/e) = 26.3212 °C at t = τ.
    params = one_node()
    tau = params.capacity / params.conductance_opaque
    assert tau == 20_000.0
    mass = 20.0
    for _ in range(400):  # 400 x 50 s = τ
        mass = step_zone(params, mass, 30.0, 30.0, 0.0, 0.0, 0.0, 0.0, 50.0).temp_mass
    assert mass == pytest.approx(26.3212, abs=1e-4)
    # The air (a step mean) lags half a step behind the end-of-step mass temperature.
    trace = run_steps(params, 20.0, 30.0, steps=400, dt=50.0)
    assert trace[-1] == pytest.approx(30.0 - 10.0 * math.exp(-(tau - 25.0) / tau), abs=1e-4)


def test_one_node_steady_state() -> None:
    # CHECKS.md "1R1C": steady T = T_e + Φ/UA: 1000 W on 500 W/K -> 2 K above outdoors.
    # All heat leaves through the one conductance, so the mass node settles there;
    # the air sits above it by the internal resistances it crosses first.
    params = one_node()
    mass = 20.0
    for _ in range(2000):
        result = step_zone(params, mass, 10.0, 10.0, 0.0, 1000.0, 0.0, 0.0, 3600.0)
        mass = result.temp_mass
    assert mass == pytest.approx(12.0, abs=1e-9)
    assert result.loss_opaque == pytest.approx(1000.0, abs=1e-6)


def network_steady_state(
    params: RCParameters,
    outdoor: float,
    ventilation: float,
    internal: float,
    solar: float,
    heating: float = 0.0,
) -> tuple[float, float, float]:
    """Air, surface and mass temperature of the 5R1C network at steady state, by a linear solve."""
    h_ve, h_is, h_w, h_ms, h_em = (
        ventilation,
        params.conductance_air_surface,
        params.conductance_window,
        params.conductance_surface_mass,
        params.conductance_opaque,
    )
    to_surfaces = 0.5 * internal + solar
    phi_ia = 0.5 * internal + heating
    phi_st = params.share_surface * to_surfaces
    phi_m = params.share_mass * to_surfaces
    matrix = np.array(
        [
            [h_is + h_ve, -h_is, 0.0],
            [-h_is, h_is + h_w + h_ms, -h_ms],
            [0.0, -h_ms, h_ms + h_em],
        ]
    )
    sources = np.array([phi_ia + h_ve * outdoor, phi_st + h_w * outdoor, phi_m + h_em * outdoor])
    air, surface, mass = np.linalg.solve(matrix, sources)
    return float(air), float(surface), float(mass)


def settle(
    params: RCParameters,
    outdoor: float,
    ventilation: float,
    internal: float,
    solar: float,
    heating: float = 0.0,
    steps: int = 3000,
) -> ThermalStep:
    """Step with constant inputs until steady, carrying the mass and the air temperature."""
    mass = air = 20.0
    for _ in range(steps):
        result = step_zone(
            params, mass, outdoor, outdoor, ventilation, internal, solar, heating, 3600.0, air
        )
        mass, air = result.temp_mass, result.temp_air_end
    return result


@pytest.mark.parametrize("air_node", ["iso", "with_air_capacity"])
def test_steady_state_equals_the_network(building: Building, air_node: str) -> None:
    # ISO 13790 Annex C: at steady state the step gives the solution of the
    # three-node network (air, surface, mass) [calc]; a heat capacity on the air
    # node (this simulator's extension) changes the dynamics, not the steady state.
    params = building.zones["commons"].rc_parameters()
    assert params.capacity_air > 0.0
    if air_node == "iso":
        params = replace(params, capacity_air=0.0)
    result = settle(params, 12.0, 1500.0, 15_000.0, 8_000.0, 2_000.0)
    air, surface, mass = network_steady_state(params, 12.0, 1500.0, 15_000.0, 8_000.0, 2_000.0)
    assert result.temp_air == pytest.approx(air, abs=1e-9)
    assert result.temp_surface == pytest.approx(surface, abs=1e-9)
    assert result.temp_mass == pytest.approx(mass, abs=1e-9)


def test_air_capacity_slows_the_air_not_the_mass(building: Building) -> None:
    # Opening up (4 m³/s of 10 °C air) cools the air at once in ISO's 5R1C; with
    # the air's own capacity it takes minutes (τ of order C_air / (H_ve + H_is)).
    with_air = building.zones["commons"].rc_parameters()
    iso = replace(with_air, capacity_air=0.0)
    h_ve = 1.2 * 1005.0 * 4.0
    first = {
        name: step_zone(p, 24.0, 10.0, 10.0, h_ve, 10_000.0, 0.0, 0.0, 60.0, 24.0).temp_air_end
        for name, p in (("iso", iso), ("air", with_air))
    }
    assert first["iso"] < first["air"] < 24.0
    assert 24.0 - first["air"] < 0.5 * (24.0 - first["iso"])


# ------------------------------------------------------------------------- energy balance


@given(
    mass=st.floats(-10.0, 40.0),
    outdoor=st.floats(-25.0, 40.0),
    opaque=st.floats(-25.0, 40.0),
    ventilation=st.floats(0.0, 20_000.0),
    internal=st.floats(0.0, 50_000.0),
    solar=st.floats(0.0, 50_000.0),
    heating=st.floats(-50_000.0, 50_000.0),
    dt=st.sampled_from([1.0, 60.0, 600.0, 3600.0, 86_400.0]),
)
def test_energy_balance_closes(
    building: Building,
    mass: float,
    outdoor: float,
    opaque: float,
    ventilation: float,
    internal: float,
    solar: float,
    heating: float,
    dt: float,
) -> None:
    # ISO 13790 Annex C: Φ_int + Φ_sol + Φ_HC minus the share H_tr,w/(9.1 A_t) of the
    # surface gains routed out through the windows = ventilation + window + opaque
    # losses + storage, to rounding.
    zones = [zone.rc_parameters() for zone in building.zones.values()]
    for params in [*zones, *(replace(p, capacity_air=0.0) for p in zones)]:
        result = step_zone(
            params, mass, outdoor, opaque, ventilation, internal, solar, heating, dt, mass + 1.0
        )
        # Rounding: each term is a product of a conductance (or C/Δt) and a temperature.
        largest = 1.0 + max(abs(mass), abs(outdoor), abs(opaque), abs(result.temp_air))
        terms = ventilation + params.conductance_window + params.conductance_opaque
        inertia = (params.capacity + params.capacity_air) / dt
        scale = abs(internal) + abs(solar) + abs(heating) + (terms + inertia) * largest
        assert abs(result.balance(internal, solar)) <= 1e-12 * scale
        assert result.gains_routed_out == pytest.approx(
            params.share_window * (0.5 * internal + solar)
        )


def test_window_share_is_why_gains_and_losses_differ(building: Building) -> None:
    # CHECKS.md "5R1C energy split": losses ≠ gains exactly; the difference is the routed share.
    params = building.zones["commons"].rc_parameters()
    result = settle(params, 10.0, 1000.0, 10_000.0, 6_000.0)
    losses = result.loss_ventilation + result.loss_window + result.loss_opaque
    assert losses < 16_000.0
    assert 16_000.0 - losses == pytest.approx(params.share_window * (5_000.0 + 6_000.0), rel=1e-9)


# ------------------------------------------------------------------------- stability


@given(x=st.floats(0.0, 1e6))
def test_crank_nicolson_amplification_is_bounded(x: float) -> None:
    # CHECKS.md "stability": Crank-Nicolson is unconditionally stable, |g| <= 1 for
    # g = (1 - x/2) / (1 + x/2), x = Δt / τ [calc].
    assert abs((1.0 - x / 2.0) / (1.0 + x / 2.0)) <= 1.0


@pytest.mark.parametrize("dt", [60.0, 600.0, 3600.0])
def test_no_ringing_at_the_steps_used(building: Building, dt: float) -> None:
    # The mass node has no sign-alternating error while Δt < 2 τ_min, where the
    # shortest time constant is C_m / (H_tr,ms + H_tr,em) (ventilation -> ∞); the
    # air node is damped by the θ-method where the step does not resolve it.
    for zone in building.zones.values():
        params = zone.rc_parameters()
        shortest = params.capacity / (params.conductance_surface_mass + params.conductance_opaque)
        assert dt < 2.0 * shortest, zone.name
        # A step response with huge ventilation approaches the outdoor air monotonically.
        trace = run_steps(params, 30.0, 10.0, steps=200, dt=dt, ventilation=1e6)
        assert all(b <= a + 1e-12 for a, b in itertools.pairwise(trace))
        assert trace[-1] >= 10.0 - 1e-9


def test_huge_step_stays_bounded() -> None:
    # Explicit Euler would diverge for Δt > 2τ (|1 - Δt/τ| > 1); Crank-Nicolson at
    # Δt = 100 τ rings around the target but the error never grows.
    params = one_node()
    mass, errors = 20.0, []
    for _ in range(50):
        mass = step_zone(params, mass, 30.0, 30.0, 0.0, 0.0, 0.0, 0.0, 2e6).temp_mass
        errors.append(abs(mass - 30.0))
    assert errors[0] < 10.0
    assert all(b < a for a, b in itertools.pairwise(errors))


# ------------------------------------------------------------------------- plant


def test_ideal_heating_meets_the_setpoint_within_its_power(building: Building) -> None:
    # ISO 13790 C.4.2: the air temperature is linear in Φ_HC; two probes find the power.
    params = building.zones["commons"].rc_parameters()
    args = (params, 15.0, -5.0, -5.0, 2000.0, 3000.0, 0.0)
    held = condition_air(*args, 20.0, math.inf, 1e6, 0.0, 3600.0)
    assert held.temp_air == pytest.approx(20.0, abs=1e-9)
    assert held.heating > 0.0
    capped = condition_air(*args, 20.0, math.inf, 5_000.0, 0.0, 3600.0)
    assert capped.heating == 5_000.0
    assert capped.temp_air < 20.0


def test_ideal_cooling_holds_the_air_down(building: Building) -> None:
    params = building.zones["classroom_east"].rc_parameters()
    args = (params, 28.0, 30.0, 30.0, 300.0, 4000.0, 2000.0)
    cooled = condition_air(*args, -math.inf, 26.0, 0.0, 1e6, 600.0)
    assert cooled.temp_air == pytest.approx(26.0, abs=1e-9)
    assert cooled.heating < 0.0
    free = condition_air(*args, -math.inf, math.inf, 0.0, 1e6, 600.0)
    assert free.heating == 0.0 and free.temp_air > 26.0


# ------------------------------------------------------------------------- gains


def test_people_default_to_the_handbook_values(building: Building) -> None:
    # ASHRAE Fundamentals ch. 18 Table 1: seated, very light work, 70 W sensible, 45 W latent.
    people = building.zones["classroom_east"].people
    assert people is not None
    assert (people.sensible, people.latent) == (70.0, 45.0)


def test_schedule_values_follow_local_weekdays_and_daylight_saving() -> None:
    schedule = Schedule(
        "test",
        tuple(1.0 if 8 <= h < 17 else 0.0 for h in range(24)),
        tuple(0.5 if 9 <= h < 13 else 0.0 for h in range(24)),
        (0.0,) * 24,
    )
    # 2024-03-08 Fri to 2024-03-11 Mon in Chicago; DST starts Sunday 10 March.
    local = pd.date_range("2024-03-08", "2024-03-12", freq="h", tz="America/Chicago")
    values = pd.Series(schedule.values(local), index=local)

    def at(text: str) -> float:
        return float(values.loc[pd.Timestamp(text, tz="America/Chicago")])

    assert values["2024-03-08 08:00":"2024-03-08 16:00"].eq(1.0).all()
    assert at("2024-03-08 17:00") == 0.0
    assert at("2024-03-09 10:00") == 0.5
    assert values["2024-03-10 00:00":"2024-03-10 23:00"].eq(0.0).all()
    assert at("2024-03-11 07:00") == 0.0  # local wall clock after the change
    assert at("2024-03-11 08:00") == 1.0


def test_solar_gains_by_facade(building: Building) -> None:
    # At a clear winter noon (41 °N) a south window gains far more than a north one.
    times = pd.date_range("2024-01-15 17:30", periods=1, freq="h", tz="UTC")
    t = np.asarray([times[0].timestamp()])
    zenith, azimuth = solar_position(t, 41.2, -88.1)
    dni, dhi, ghi = np.array([850.0]), np.array([80.0]), np.array([450.0])
    commons = building.zones["commons"]
    north, south = commons.glazing
    gains = solar_gains(commons, zenith, azimuth, dni, dhi, ghi, 0.2)
    only_north = solar_gains(
        type(commons)(**{**commons.__dict__, "glazing": (north,)}),
        zenith,
        azimuth,
        dni,
        dhi,
        ghi,
        0.2,
    )
    assert gains[0] > 4 * only_north[0] > 0.0
    # ISO 13790 11.3.3: A_sol = F_sh g F_w (1 - F_F) A with F_w = 0.9.
    assert south.solar_aperture == pytest.approx(0.7 * 0.35 * 0.9 * 0.8 * 150.0)


# ------------------------------------------------------------------------- stratification


def test_stratification_grows_with_gains_and_shrinks_with_airflow() -> None:
    model = Stratification(plume_share=0.5, mixing_air_changes=1.5, max_gradient=0.6)
    args = (6300.0, 14.0, 1.2)
    base = stratification_gradient(model, 20_000.0, 1.0, *args)
    assert stratification_gradient(model, 30_000.0, 1.0, *args) > base
    assert stratification_gradient(model, 20_000.0, 5.0, *args) < base
    assert stratification_gradient(model, 0.0, 1.0, *args) == 0.0
    assert stratification_gradient(model, 1e9, 0.0, *args) == 0.6
    # ΔT_vertical = s Φ / (ρ c_p (V̇ + n V/3600)), over the height [calc].
    expected = 0.5 * 20_000.0 / (1.2 * 1005.0 * (1.0 + 1.5 * 6300.0 / 3600.0)) / 14.0
    assert base == pytest.approx(expected)


def test_upper_sensors_read_warmer(building: Building) -> None:
    commons = building.zones["commons"]
    readings = {
        name: temperature_at_height(24.0, 0.2, height, commons.height)
        for name, height in commons.sensors.items()
    }
    assert readings["commons_t_l1"] < readings["commons_t_l3"] < readings["commons_t_l4"]
    assert temperature_at_height(24.0, 0.2, 7.0, 14.0) == 24.0  # the mean at mid-height


# ------------------------------------------------------------------------- the file


def test_demo_building_loads(building: Building, site: SiteConfig) -> None:
    assert set(building.zones) == set(site.zones)
    commons = building.zones["commons"]
    assert commons.sensors == {"commons_t_l1": 1.5, "commons_t_l3": 8.5, "commons_t_l4": 12.0}
    assert commons.mass_class is MassClass.HEAVY
    assert commons.openings["high_north"].fire_system_position == 1.0
    assert building.station_height == 18.0
    reporting = building.reporting
    assert (reporting.on_change, reporting.repeat) == (True, 240.0)
    assert reporting.resolution == {
        PointKind.TEMPERATURE: 0.1,
        PointKind.DEW_POINT: 0.1,
        PointKind.HUMIDITY: 1.0,  # % RH, the SI unit of a humidity point
        PointKind.WIND_SPEED: 0.1,
        PointKind.WIND_DIRECTION: 1.0,
        PointKind.CO2: 10.0,
        PointKind.POSITION: 0.01,
    }


def parse_with(site: SiteConfig, edit: tuple[str, str]) -> str:
    text = DEMO_BUILDING.read_text(encoding="utf-8")
    old, new = edit
    assert old in text
    with pytest.raises(BuildingError) as caught:
        parse_building(text.replace(old, new, 1), "demo-building.yaml", site)
    return str(caught.value)


@pytest.mark.parametrize(
    ("edit", "expected"),
    [
        (
            ("floor_area: 800 m2", "floor_area: 800 m3"),
            "zones.commons.floor_area: got '800 m3', expected an area such as '4 m2' or '40 ft2'; "
            "'m3' is not one of m2, m², cm2, ft2, ft², sqft",
        ),
        (
            ("thermal_mass: heavy ", "thermal_mass: massive "),
            "zones.commons.thermal_mass: got 'massive', expected one of 'very_light', 'light', "
            "'medium', 'heavy', 'very_heavy'",
        ),
        (
            ("infiltration: 0.25 /h", "infiltraton: 0.25 /h"),
            "zones.commons.infiltraton: unknown key 'infiltraton'",
        ),
        (
            ("commons_t_l4: 12.0 m", "commons_t_l5: 12.0 m"),
            "zones.commons.sensors.commons_t_l5: 'commons_t_l5' is not a temperature sensor "
            "of zone 'commons'",
        ),
        (
            ("schedule: hall_occupancy}", "schedule: hall_ocupancy}"),
            "zones.commons.people.schedule: got 'hall_ocupancy', expected the name of a schedule",
        ),
        (
            ("  classroom_east:\n    floor_area", "  classroom_west:\n    floor_area"),
            "zones.classroom_west: zone 'classroom_west' is not in the site config",
        ),
        (
            ("g_value: 0.42", "g_value: 1.42"),
            "zones.commons.glazing[0].g_value: got 1.42, expected a fraction from 0 to 1",
        ),
        (
            ("repeat: 4 min", "repeat: 6 min"),
            "reporting.repeat: got '6 min', expected at most 300 s: point 'wind_speed' goes "
            "stale after that long without a new value",
        ),
        (
            ("  repeat: 4 min\n", ""),
            "reporting: on_change needs repeat (how often an unchanged value is published "
            "again, such as '4 min')",
        ),
        (
            ("co2: 10 ppm,", "co2: 10 ppm, binary: 1,"),
            "reporting.resolution.binary: unknown key 'binary'",
        ),
        (
            ("humidity: 1 %", "humidity: 1 K"),
            "reporting.resolution.humidity: got '1 K', expected a relative humidity such as '1 %'",
        ),
        (
            ("on_change: true", "on_change: sometimes"),
            "reporting.on_change: got 'sometimes', expected true or false",
        ),
    ],
)
def test_building_file_errors_name_file_line_and_key(
    site: SiteConfig, edit: tuple[str, str], expected: str
) -> None:
    message = parse_with(site, edit)
    assert "demo-building.yaml:" in message
    assert expected in message, message


def test_building_error_gives_the_line(site: SiteConfig) -> None:
    message = parse_with(site, ("volume: 6300 m3", "volume: lots"))
    line = next(
        i
        for i, text in enumerate(DEMO_BUILDING.read_text(encoding="utf-8").splitlines(), 1)
        if "volume: 6300 m3" in text
    )
    assert f"demo-building.yaml:{line} zones.commons.volume: got 'lots'" in message


def test_missing_zone_is_reported(site: SiteConfig) -> None:
    text = DEMO_BUILDING.read_text(encoding="utf-8")
    cut = text[: text.index("  studio_west:")]
    with pytest.raises(BuildingError, match="missing zone 'studio_west' of the site config"):
        parse_building(cut, "b.yaml", site)
