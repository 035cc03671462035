"""Weather: the frame, interpolation, EPW / CSV / TMY3 readers and the synthetic generator."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pandas as pd
import pvlib
import pytest

from simulator.errors import WeatherError
from simulator.solar import clear_sky_ghi, solar_position
from simulator.weather import (
    CLIMATES,
    COLUMNS,
    Climate,
    Weather,
    from_hour_ending,
    read_csv,
    read_epw,
    synthetic,
    to_epoch_seconds,
)

TMY3 = Path(pvlib.__file__).parent / "data" / "723170TYA.CSV"


def frame(hours: int = 4, **columns: list[float]) -> pd.DataFrame:
    index = pd.date_range("2024-07-01", periods=hours, freq="h", tz="UTC")
    data: dict[str, object] = {
        "temp_outdoor": [20.0] * hours,
        "relative_humidity": [50.0] * hours,
        "wind_speed": [3.0] * hours,
        "wind_direction": [180.0] * hours,
        "rain": [False] * hours,
        "ghi": [0.0] * hours,
        "dni": [0.0] * hours,
        "dhi": [0.0] * hours,
    }
    data.update(columns)
    return pd.DataFrame(data, index=index)


# ------------------------------------------------------------------------- the frame


def test_weather_checks_its_frame() -> None:
    with pytest.raises(WeatherError, match=r"missing columns \['rain'\]"):
        Weather(frame().drop(columns="rain"))
    with pytest.raises(WeatherError, match="tz-aware"):
        Weather(frame().tz_localize(None))
    with pytest.raises(WeatherError, match="temp_outdoor has 1 missing"):
        Weather(frame(temp_outdoor=[20.0, math.nan, 21.0, 22.0]))
    with pytest.raises(WeatherError, match=r"relative_humidity = 140.0 .* expected 0 to 100"):
        Weather(frame(relative_humidity=[50.0, 140.0, 50.0, 50.0]))
    with pytest.raises(WeatherError, match="sorted and unique"):
        Weather(frame().iloc[::-1])
    weather = Weather(frame())
    assert list(weather.frame.columns) == list(COLUMNS)
    assert str(weather.frame.index.tz) == "UTC"


def test_interpolation_to_the_step() -> None:
    weather = Weather(
        frame(
            temp_outdoor=[10.0, 20.0, 30.0, 30.0],
            wind_direction=[350.0, 10.0, 90.0, 270.0],
            rain=[False, True, False, False],
        )
    )
    times = pd.date_range("2024-07-01 00:00", "2024-07-01 02:00", freq="15min", tz="UTC")
    at = weather.at(times).frame
    assert at["temp_outdoor"].tolist()[:5] == [10.0, 12.5, 15.0, 17.5, 20.0]
    # The direction goes the short way round through north, not through south.
    assert at["wind_direction"].iloc[2] == pytest.approx(0.0, abs=1e-9) or at[
        "wind_direction"
    ].iloc[2] == pytest.approx(360.0, abs=1e-9)
    # Rain flags the interval that ends at its timestamp: (00:00, 01:00] was wet.
    assert at["rain"].tolist()[:6] == [False, True, True, True, True, False]


def test_interpolation_refuses_times_outside_the_data() -> None:
    weather = Weather(frame())
    inside = pd.date_range("2024-07-01 03:00", "2024-07-01 03:59", freq="min", tz="UTC")
    assert len(weather.at(inside).frame) == 60  # within one interval of the end: held
    outside = pd.date_range("2024-07-01 05:30", periods=2, freq="h", tz="UTC")
    with pytest.raises(WeatherError, match="covers 2024-07-01 00:00:00\\+00:00 to"):
        weather.at(outside)


# ------------------------------------------------------------------------- synthetic


def test_synthetic_is_reproducible_with_a_seed() -> None:
    args = (41.2, -88.1, "America/Chicago", "2024-01-01", "2024-03-01")
    first = synthetic(*args, seed=7).frame
    again = synthetic(*args, seed=7).frame
    other = synthetic(*args, seed=8).frame
    pd.testing.assert_frame_equal(first, again)
    assert not first["temp_outdoor"].equals(other["temp_outdoor"])


@pytest.mark.parametrize(
    ("climate", "latitude", "longitude", "time_zone"),
    [
        ("humid_continental", 41.2, -88.1, "America/Chicago"),
        ("marine", 53.3, -6.3, "Europe/Dublin"),
        ("hot_dry", -31.9, 115.9, "Australia/Perth"),
        ("tropical", 1.3, 103.8, "Asia/Singapore"),
    ],
)
def test_synthetic_monthly_means(
    climate: str, latitude: float, longitude: float, time_zone: str
) -> None:
    # The generator pins every calendar month (site time) to the requested mean;
    # tolerance 0.01 K.
    weather = synthetic(latitude, longitude, time_zone, "2023-01-01", "2024-01-01", climate, 3)
    means = weather.monthly_means(time_zone)["temp_outdoor"].loc[2023]
    wanted = np.asarray(CLIMATES[climate].monthly_temp)
    assert means.to_numpy() == pytest.approx(wanted, abs=0.01)


def test_synthetic_weather_is_plausible() -> None:
    climate = CLIMATES["humid_continental"]
    weather = synthetic(41.2, -88.1, "America/Chicago", "2024-01-01", "2025-01-01", seed=5)
    data = weather.frame
    t = to_epoch_seconds(data.index)
    zenith, _ = solar_position(t, 41.2, -88.1)
    assert (data["ghi"][zenith > 90.5] == 0.0).all()
    assert (data["ghi"] <= clear_sky_ghi(zenith) + 1e-9).all()
    assert data["wind_speed"].mean() == pytest.approx(climate.wind_speed, rel=1e-9)
    assert data["relative_humidity"].between(5.0, 100.0).all()
    assert 0.5 * climate.wet_fraction < data["rain"].mean() < 1.5 * climate.wet_fraction
    # The afternoon is warmer than the early morning (solar time about 15:00 vs 03:00).
    solar_hour = (t / 3600.0 - 88.1 / 15.0) % 24.0
    afternoon = data["temp_outdoor"][(solar_hour > 14) & (solar_hour < 16)].mean()
    night = data["temp_outdoor"][(solar_hour > 2) & (solar_hour < 4)].mean()
    assert afternoon - night == pytest.approx(climate.daily_range, rel=0.35)


def test_synthetic_time_zone_and_custom_climate() -> None:
    climate = Climate(tuple(float(m) for m in range(12)), wind_speed=2.0)
    weather = synthetic(0.0, 0.0, "Asia/Tokyo", "2024-05-01", "2024-05-02", climate, seed=1)
    assert weather.start == pd.Timestamp("2024-04-30 15:00", tz="UTC")  # local midnight
    assert weather.frame["temp_outdoor"].mean() == pytest.approx(4.0, abs=1e-6)
    with pytest.raises(ValueError, match="monthly_temp: got 3 values, expected 12"):
        Climate((1.0, 2.0, 3.0))


# ------------------------------------------------------------------------- readers


def test_tmy3_from_pvlib() -> None:
    # pvlib's NREL TMY3 sample: Greensboro NC, 8760 h, mean 14.42 °C, max 35.6 °C,
    # precipitation depth > 0 in 358 h (../shared/CHECKS.md, "Open weather data").
    data, meta = pvlib.iotools.read_tmy3(TMY3, coerce_year=1990)
    weather = from_hour_ending(
        data, latitude=meta["latitude"], longitude=meta["longitude"], source=TMY3.name
    )
    frame = weather.frame
    assert len(frame) == 8760
    assert frame["temp_outdoor"].mean() == pytest.approx(14.42, abs=0.005)
    assert frame["temp_outdoor"].max() == 35.6
    assert int(frame["rain"].sum()) == 358
    assert weather.start == pd.Timestamp("1990-01-01 06:00", tz="UTC")  # 01:00 EST
    # Irradiance moved from hour-ending sums to instants: the daily totals are kept.
    assert frame["ghi"].sum() == pytest.approx(data["ghi"].sum(), rel=1e-3)


EPW_HEADER = [
    "LOCATION,Quarry Lane,IL,USA,invented,000000,41.20,-88.10,-6.0,190.0",
    "DESIGN CONDITIONS,0",
    "TYPICAL/EXTREME PERIODS,0",
    "GROUND TEMPERATURES,0",
    "HOLIDAYS/DAYLIGHT SAVINGS,No,0,0,0",
    "COMMENTS 1,invented for a test",
    "COMMENTS 2,",
    "DATA PERIODS,1,1,Data,Monday,7/1,7/2",
]


def epw_row(
    hour: int,
    temp: float,
    ghi: float,
    depth: float = 0.0,
    direction: float = 200.0,
    codes: str = "999999999",
) -> str:
    fields = ["0"] * 35
    fields[0:5] = ["2024", "7", "1", str(hour), "60"]
    fields[5] = "?9?9?9?9E0?9?9?9?9?9?9?9?9?9?9?9?9?9?9*9*9?9?9?9"
    fields[6], fields[7], fields[8], fields[9] = str(temp), "12.0", "60", "99000"
    fields[13], fields[14], fields[15] = str(ghi), str(ghi * 0.8), str(ghi * 0.2)
    fields[20], fields[21] = str(direction), "3.5"
    fields[25], fields[26] = "0", codes
    fields[33] = str(depth)
    return ",".join(fields)


def test_read_epw(tmp_path: Path) -> None:
    rows = [epw_row(h, 20.0 + h / 2.0, 50.0 * h) for h in range(1, 25)]
    rows[4] = epw_row(5, 99.9, 250.0)  # a missing temperature, filled
    rows[9] = epw_row(10, 25.0, 500.0, depth=1.2)  # rain by depth
    rows[10] = epw_row(11, 25.5, 550.0, depth=999.0, codes="919999999")  # rain by code
    path = tmp_path / "test.epw"
    path.write_text("\n".join([*EPW_HEADER, *rows]) + "\n", encoding="latin-1")
    weather = read_epw(path)
    frame = weather.frame
    assert (weather.latitude, weather.longitude) == (41.2, -88.1)
    assert frame.index[0] == pd.Timestamp("2024-07-01 07:00", tz="UTC")  # 01:00 at UTC-6
    assert frame["temp_outdoor"].iloc[4] == pytest.approx(22.5)  # between 22.0 and 23.0
    assert frame["rain"].tolist()[8:12] == [False, True, True, False]
    # Hour-ending irradiance moved to the instants: the mean of neighbouring hours.
    assert frame["ghi"].iloc[0] == pytest.approx(75.0)


def test_read_epw_errors(tmp_path: Path) -> None:
    path = tmp_path / "bad.epw"
    path.write_text("not a weather file\n", encoding="latin-1")
    with pytest.raises(WeatherError, match=r"bad.epw:1: expected an EPW 'LOCATION,...' header"):
        read_epw(path)
    rows = [epw_row(h, 99.9 if 3 <= h <= 12 else 20.0, 0.0) for h in range(1, 25)]
    path.write_text("\n".join([*EPW_HEADER, *rows]) + "\n", encoding="latin-1")
    with pytest.raises(WeatherError, match="temp_outdoor has a gap of 10 missing hours"):
        read_epw(path)
    with pytest.raises(WeatherError, match="cannot read the weather file"):
        read_epw(tmp_path / "absent.epw")


def test_read_csv(tmp_path: Path) -> None:
    path = tmp_path / "weather.csv"
    path.write_text(
        "time,temp_outdoor,relative_humidity,wind_speed,wind_direction,rain,ghi,dni,dhi\n"
        "2024-07-01 00:00,18.5,70,2.0,180,0,0,0,0\n"
        "2024-07-01 01:00,18.0,72,2.5,190,true,0,0,0\n"
        "2024-07-01T02:00-05:00,17.5,75,3.0,200,1,0,0,0\n",
        encoding="utf-8",
    )
    weather = read_csv(path, time_zone="America/Chicago")
    assert weather.frame.index[0] == pd.Timestamp("2024-07-01 05:00", tz="UTC")
    assert weather.frame.index[2] == pd.Timestamp("2024-07-01 07:00", tz="UTC")
    assert weather.frame["rain"].tolist() == [False, True, True]


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("time,temp_outdoor\n2024-07-01,20\n", r"missing columns \['relative_humidity'"),
        (
            "time,temp_outdoor,relative_humidity,wind_speed,wind_direction,rain,ghi,dni,dhi\n"
            "2024-07-01 00:00,warm,70,2,180,0,0,0,0\n",
            r"weather.csv:2: column temp_outdoor: got 'warm', expected a number",
        ),
        (
            "time,temp_outdoor,relative_humidity,wind_speed,wind_direction,rain,ghi,dni,dhi\n"
            "2024-07-01 00:00,20,70,2,180,maybe,0,0,0\n",
            r"weather.csv:2: column rain: got 'maybe', expected 0, 1, true or false",
        ),
    ],
)
def test_read_csv_errors(tmp_path: Path, text: str, expected: str) -> None:
    path = tmp_path / "weather.csv"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(WeatherError, match=expected):
        read_csv(path)
