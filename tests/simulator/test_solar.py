"""Sun position and irradiance, against pvlib (BSD-3) as the reference library."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pvlib
import pytest

from simulator.solar import (
    clear_sky_ghi,
    diffuse_fraction,
    extraterrestrial_irradiance,
    plane_irradiance,
    solar_position,
    split_global,
)
from simulator.weather import to_epoch_seconds

TIMES = pd.date_range("2023-01-01", "2025-01-01", freq="97min", tz="UTC")
PLACES = [(41.2, -88.1), (-33.9, 151.2), (64.1, -21.9), (1.3, 103.8), (36.1, -79.95)]


@pytest.mark.parametrize(("latitude", "longitude"), PLACES)
def test_solar_position_against_pvlib(latitude: float, longitude: float) -> None:
    # Meeus' low-precision solar coordinates (NOAA calculator) vs pvlib's NREL SPA
    # ('nrel_numpy'): within 0.05° of zenith; azimuth within 0.2° away from the zenith.
    zenith, azimuth = solar_position(to_epoch_seconds(TIMES), latitude, longitude)
    reference = pvlib.solarposition.get_solarposition(
        TIMES, latitude, longitude, method="nrel_numpy"
    )
    above = reference["zenith"].to_numpy() < 89.0
    assert np.abs(zenith - reference["zenith"].to_numpy())[above].max() < 0.05
    steep = above & (reference["zenith"].to_numpy() > 5.0)
    difference = (azimuth - reference["azimuth"].to_numpy() + 180.0) % 360.0 - 180.0
    assert np.abs(difference)[steep].max() < 0.2


def test_extraterrestrial_irradiance_against_pvlib() -> None:
    # Spencer (1971) with a 1367 W/m² solar constant; pvlib's 'spencer' uses 1366.1.
    mine = extraterrestrial_irradiance(to_epoch_seconds(TIMES))
    # Day numbers, not the index: pvlib reads them with an accessor pandas 3 deprecates.
    day_of_year = np.asarray(TIMES.day_of_year, dtype=np.float64)
    reference = pvlib.irradiance.get_extra_radiation(day_of_year, method="spencer")
    assert mine == pytest.approx(reference * 1367.0 / 1366.1, rel=1e-9)


def test_haurwitz_against_pvlib() -> None:
    # Haurwitz (1945) clear-sky GHI, as pvlib.clearsky.haurwitz.
    zenith = pd.Series(np.linspace(0.0, 100.0, 201))
    reference = pvlib.clearsky.haurwitz(zenith)["ghi"].to_numpy()
    assert clear_sky_ghi(zenith.to_numpy()) == pytest.approx(reference, rel=1e-12, abs=1e-12)


def test_erbs_against_pvlib() -> None:
    # Erbs, Klein and Duffie (1982) diffuse fraction and split, as pvlib.irradiance.erbs.
    times = pd.date_range("2024-06-21 10:00", periods=48, freq="h", tz="UTC")
    zenith, _ = solar_position(to_epoch_seconds(times), 41.2, -88.1)
    ghi = clear_sky_ghi(zenith) * np.linspace(0.1, 1.0, len(times))
    day_of_year = np.asarray(times.day_of_year, dtype=np.float64)
    reference = pd.DataFrame(pvlib.irradiance.erbs(ghi, zenith, day_of_year))
    kt = reference["kt"].to_numpy()
    up = ghi > 0.0
    fraction = reference["dhi"].to_numpy()[up] / ghi[up]
    # pvlib's output mixes in the guards near the horizon; compare where the sun is up.
    normal = up & (zenith < 87.0)
    assert diffuse_fraction(kt[normal]) == pytest.approx(
        reference["dhi"].to_numpy()[normal] / ghi[normal], rel=1e-9
    )
    assert fraction.min() >= 0.165 - 1e-12
    dni, dhi = split_global(ghi, zenith, to_epoch_seconds(times))
    ratio = 1367.0 / 1366.1  # the solar constant shifts k_t a little
    assert dhi[normal] == pytest.approx(reference["dhi"].to_numpy()[normal], rel=2e-3 * ratio)
    assert dni[normal] == pytest.approx(reference["dni"].to_numpy()[normal], rel=5e-3, abs=1.0)


def test_isotropic_plane_irradiance_against_pvlib() -> None:
    # Liu and Jordan isotropic sky on a tilted plane, as pvlib's get_total_irradiance.
    times = pd.date_range("2024-03-20 00:00", periods=96, freq="15min", tz="UTC")
    zenith, azimuth = solar_position(to_epoch_seconds(times), 41.2, -88.1)
    ghi = clear_sky_ghi(zenith)
    dni, dhi = split_global(ghi, zenith, to_epoch_seconds(times))
    for tilt, facing in [(90.0, 0.0), (90.0, 90.0), (90.0, 180.0), (90.0, 270.0), (30.0, 200.0)]:
        mine = plane_irradiance(tilt, facing, zenith, azimuth, dni, dhi, ghi, albedo=0.2)
        reference = np.asarray(
            pvlib.irradiance.get_total_irradiance(
                tilt, facing, zenith, azimuth, dni, ghi, dhi, albedo=0.2, model="isotropic"
            )["poa_global"]
        )
        assert mine == pytest.approx(reference, rel=1e-9, abs=1e-9)
