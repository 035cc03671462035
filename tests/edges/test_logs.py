"""Logs for replay: CSV and Parquet, wide and long, time zones, units, and malformed files.

Each malformed log gives a LogError whose message names the file and the row
(the header is row 1) and says what was expected.
"""

from __future__ import annotations

from datetime import datetime
from pathlib import Path
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd
import pytest

from ventsup.config.load import load_config
from ventsup.config.model import SiteConfig
from ventsup.config.units import parse_quantity
from ventsup.core.inputs import Sample
from ventsup.edges.logs import (
    LogError,
    PointLog,
    needed_points,
    read_log,
    read_wide_csv,
    write_table,
)

REPO = Path(__file__).resolve().parents[2]
DEMO = REPO / "config" / "demo-site.yaml"
CHICAGO = "America/Chicago"
BERLIN = "Europe/Berlin"


@pytest.fixture(scope="module")
def demo() -> SiteConfig:
    return load_config(DEMO)


def in_zone(config: SiteConfig, time_zone: str) -> SiteConfig:
    return config.model_copy(
        update={"site": config.site.model_copy(update={"time_zone": time_zone})}
    )


def local(tz: str, *args: int, fold: int = 0) -> float:
    return datetime(*args, tzinfo=ZoneInfo(tz), fold=fold).timestamp()  # type: ignore[misc]


def write(tmp_path: Path, text: str, name: str = "log.csv") -> Path:
    path = tmp_path / name
    path.write_text(text.lstrip("\n"), encoding="utf-8")
    return path


def full_row(config: SiteConfig, values: dict[str, str]) -> list[str]:
    """A value for every point the zones read (mild, dry, calm), overridden by ``values``."""
    typical = {
        "temperature": "21",
        "humidity": "50",
        "wind_speed": "2",
        "wind_direction": "180",
        "binary": "0",
        "co2": "500",
        "position": "0",
        "dew_point": "8",
    }
    return [
        values.get(name, typical[config.points[name].kind.value]) for name in needed_points(config)
    ]


# --------------------------------------------------------------------------- reading


def test_the_bundled_demo_day_reads_with_offsets(demo: SiteConfig) -> None:
    log = read_log(REPO / "ventsup" / "data" / "demo-day.csv", demo)
    assert log.time_note == "timestamps with their UTC offset"
    assert log.first == local(CHICAGO, 2027, 6, 15, 0, 0)
    assert set(log.series) == set(needed_points(demo))
    samples = log.samples()
    assert samples == sorted(samples, key=lambda s: s.t)
    assert read_wide_csv(REPO / "ventsup" / "data" / "demo-day.csv", demo) == samples
    rain = log.series["roof_rain"].sample(0)
    assert rain.value is False  # binary points are held as bools, as live


def test_naive_timestamps_are_read_in_the_site_zone_and_said_so(
    tmp_path: Path, demo: SiteConfig
) -> None:
    path = write(
        tmp_path,
        """
timestamp,outdoor_temp
2027-06-15 14:00,18.5
2027-06-15T14:01:30,18.6
2027-06-16,18.7
""",
    )
    log = read_log(path, demo, allow_missing=True)
    assert "read in the site's time zone America/Chicago" in log.time_note
    assert log.series["outdoor_temp"].t.tolist() == [
        local(CHICAGO, 2027, 6, 15, 14, 0),
        local(CHICAGO, 2027, 6, 15, 14, 1, 30),
        local(CHICAGO, 2027, 6, 16, 0, 0),
    ]


@pytest.mark.parametrize(
    ("stamps", "note"),
    [
        (("2024-10-27T02:30:00+02:00", "2024-10-27T02:30:00+01:00"), "UTC offset"),
        (("2024-10-27T00:30:00Z", "2024-10-27T01:30:00Z"), "UTC offset"),
        (("1729989000", "1729992600"), "seconds since the epoch"),
    ],
)
def test_times_with_offsets_pass_the_autumn_change(
    tmp_path: Path, demo: SiteConfig, stamps: tuple[str, str], note: str
) -> None:
    config = in_zone(demo, BERLIN)
    path = write(tmp_path, f"timestamp,outdoor_temp\n{stamps[0]},10\n{stamps[1]},11\n")
    log = read_log(path, config, allow_missing=True)
    assert note in log.time_note
    # 02:30 CEST, then 02:30 CET an hour later: the repeated wall-clock hour
    assert log.series["outdoor_temp"].t.tolist() == [
        local(BERLIN, 2024, 10, 27, 2, 30, fold=0),
        local(BERLIN, 2024, 10, 27, 2, 30, fold=1),
    ]


def test_a_long_log_with_words_and_units(tmp_path: Path, demo: SiteConfig) -> None:
    path = write(
        tmp_path,
        """
timestamp,point,value,unit
2027-06-15T14:00:00-05:00,outdoor_temp,64.4,degF
2027-06-15T14:00:00-05:00,commons_smoke,normal,
2027-06-15T14:00:00-05:00,roof_rain,1,
2027-06-15T14:05:00-05:00,outdoor_temp,66.2,degF
2027-06-15T14:05:00-05:00,commons_smoke,Alarm,
2027-06-15T14:05:00-05:00,commons_low_north_pos,40,%
""",
    )
    log = read_log(path, demo, allow_missing=True)
    assert log.series["outdoor_temp"].value.tolist() == [
        parse_quantity("64.4 degF", "temperature"),
        parse_quantity("66.2 degF", "temperature"),
    ]
    assert [s.value for s in log.samples() if s.point == "commons_smoke"] == [False, True]
    assert log.series["commons_low_north_pos"].value.tolist() == [0.4]


def test_a_unit_in_a_wide_header(tmp_path: Path, demo: SiteConfig) -> None:
    path = write(
        tmp_path, "timestamp,outdoor_temp [degF],wind_speed [mph]\n2027-06-15T14:00Z,50,11\n"
    )
    log = read_log(path, demo, allow_missing=True)
    assert log.series["outdoor_temp"].value.tolist() == [10.0]
    assert log.series["wind_speed"].value.tolist() == [parse_quantity("11 mph", "speed")]


def test_values_the_daemon_rejects_are_not_held_but_counted(
    tmp_path: Path, demo: SiteConfig
) -> None:
    path = write(
        tmp_path,
        """
timestamp,outdoor_temp,outdoor_rh
2027-06-15T14:00Z,18,50
2027-06-15T14:01Z,180,
2027-06-15T14:02Z,inf,nan
2027-06-15T14:03Z,19,101
""",
    )
    log = read_log(path, demo, allow_missing=True)
    assert log.series["outdoor_temp"].value.tolist() == [18.0, 19.0]
    assert log.series["outdoor_rh"].value.tolist() == [50.0]
    assert log.rejected == {
        "outdoor_temp": {"not_finite": 1, "out_of_range": 1},
        "outdoor_rh": {"out_of_range": 1},
    }


def test_parquet_wide_and_long_with_datetime_columns(tmp_path: Path, demo: SiteConfig) -> None:
    stamps = pd.to_datetime(["2027-06-15 14:00", "2027-06-15 14:01"])
    wide = pd.DataFrame(
        {
            "timestamp": stamps,  # naive: read in the site's zone
            "outdoor_temp": [18.0, np.nan],
            "roof_rain": [False, True],
        }
    )
    wide.to_parquet(tmp_path / "wide.parquet")
    log = read_log(tmp_path / "wide.parquet", demo, allow_missing=True)
    assert log.series["outdoor_temp"].t.tolist() == [local(CHICAGO, 2027, 6, 15, 14, 0)]
    assert [s.value for s in log.samples() if s.point == "roof_rain"] == [False, True]

    long = pd.DataFrame(
        {
            "timestamp": stamps.tz_localize("UTC"),
            "point": ["outdoor_temp", "outdoor_temp"],
            "value": ["18", "18.5"],
        }
    )
    long.to_parquet(tmp_path / "long.parquet")
    log = read_log(tmp_path / "long.parquet", demo, allow_missing=True)
    assert log.time_note == "timestamps with their time zone"
    assert log.series["outdoor_temp"].t.tolist() == [
        datetime(2027, 6, 15, 14, 0, tzinfo=ZoneInfo("UTC")).timestamp(),
        datetime(2027, 6, 15, 14, 1, tzinfo=ZoneInfo("UTC")).timestamp(),
    ]


def test_csv_and_parquet_give_the_same_log(tmp_path: Path, demo: SiteConfig) -> None:
    frame = pd.read_csv(REPO / "ventsup" / "data" / "demo-day.csv", dtype=str)
    write_table(frame, tmp_path / "day.parquet")
    csv_log = read_log(REPO / "ventsup" / "data" / "demo-day.csv", demo)
    parquet_log = read_log(tmp_path / "day.parquet", demo)
    assert parquet_log.samples() == csv_log.samples()


def test_samples_and_points_round_trip(demo: SiteConfig) -> None:
    samples = [
        Sample("outdoor_temp", 18.0, 10.0),
        Sample("roof_rain", True, 10.0),
        Sample("outdoor_temp", 18.5, 10.0),  # the same time: the later one is held
        Sample("outdoor_temp", 19.0, 5.0),
    ]
    log = PointLog.from_samples(samples, demo)
    assert log.samples() == [samples[3], samples[0], samples[1], samples[2]]
    assert log.only(["roof_rain"]).samples() == [samples[1]]


# --------------------------------------------------------------------------- malformed


MALFORMED = [
    (
        "no timestamp column",
        "time,outdoor_temp\n2027-06-15T14:00Z,18\n",
        "log.csv:1: expected a 'timestamp' column, got ['time', 'outdoor_temp']",
    ),
    (
        "an unknown point column",
        "timestamp,outdoor_temp,attic_temp\n2027-06-15T14:00Z,18,30\n",
        "log.csv:1: 'attic_temp' is not a point of site 'Quarry Lane Commons'",
    ),
    (
        "a point twice",
        "timestamp,outdoor_temp,outdoor_temp [degF]\n2027-06-15T14:00Z,18,64\n",
        "log.csv:1: point 'outdoor_temp' has two columns; keep one",
    ),
    (
        "an unparseable timestamp",
        "timestamp,outdoor_temp\n2027-06-15T14:00Z,18\nlunchtime,19\n",
        "log.csv:3: timestamp 'lunchtime' is not an ISO 8601 time",
    ),
    (
        "an empty timestamp",
        "timestamp,outdoor_temp\n2027-06-15T14:00Z,18\n,19\n",
        "log.csv:3: empty timestamp; expected an ISO 8601 time",
    ),
    (
        "a repeated row",
        "timestamp,outdoor_temp\n2027-06-15T14:00Z,18\n2027-06-15T14:01Z,19\n"
        "2027-06-15T14:01Z,19\n",
        "log.csv:4: timestamp '2027-06-15T14:01Z' repeats the row above",
    ),
    (
        "rows out of order",
        "timestamp,outdoor_temp\n2027-06-15T14:00Z,18\n2027-06-15T13:59Z,19\n",
        "log.csv:3: timestamp '2027-06-15T13:59Z' goes back in time from the row above",
    ),
    (
        "a word for a number",
        "timestamp,outdoor_temp\n2027-06-15T14:00Z,18\n2027-06-15T14:01Z,warm\n",
        "log.csv:3 column outdoor_temp: got 'warm', expected a number (SI: °C)",
    ),
    (
        "an unknown word for a binary point",
        "timestamp,roof_rain\n2027-06-15T14:00Z,drizzle\n",
        "log.csv:2 column roof_rain: got 'drizzle', expected one of",
    ),
    (
        "a binary number other than 0 or 1",
        "timestamp,roof_rain\n2027-06-15T14:00Z,2\n",
        "log.csv:2 column roof_rain: got '2', expected one of",
    ),
    (
        "offsets on some times only",
        "timestamp,outdoor_temp\n2027-06-15T14:00-05:00,18\n2027-06-15T14:01,19\n",
        "log.csv:3: timestamp '2027-06-15T14:01' has no UTC offset, but the first one "
        "('2027-06-15T14:00-05:00') has",
    ),
    (
        "an unknown unit",
        "timestamp,outdoor_temp [furlongs]\n2027-06-15T14:00Z,18\n",
        "log.csv:1 column outdoor_temp [furlongs]: unit 'furlongs'",
    ),
    (
        "a unit on a binary point",
        "timestamp,roof_rain [mm]\n2027-06-15T14:00Z,1\n",
        "log.csv:1 column roof_rain [mm]: unit 'mm', but a binary point takes no unit",
    ),
    (
        "a long log with an unknown point",
        "timestamp,point,value\n2027-06-15T14:00Z,outdoor_temp,18\n2027-06-15T14:00Z,attic,3\n",
        "log.csv:3: 'attic' is not a point of site 'Quarry Lane Commons'",
    ),
    (
        "a long log with a point twice at one time",
        "timestamp,point,value\n2027-06-15T14:00Z,outdoor_temp,18\n"
        "2027-06-15T14:00Z,roof_rain,0\n2027-06-15T14:00Z,outdoor_temp,19\n",
        "log.csv:4: point 'outdoor_temp' at '2027-06-15T14:00Z' repeats row 2",
    ),
    (
        "a long log out of order",
        "timestamp,point,value\n2027-06-15T14:00Z,outdoor_temp,18\n"
        "2027-06-15T13:00Z,outdoor_temp,17\n",
        "log.csv:3: timestamp '2027-06-15T13:00Z' goes back in time from the row above",
    ),
]


@pytest.mark.parametrize(
    ("text", "message"), [m[1:] for m in MALFORMED], ids=[m[0] for m in MALFORMED]
)
def test_a_malformed_log_names_file_and_row(
    tmp_path: Path, demo: SiteConfig, text: str, message: str
) -> None:
    path = write(tmp_path, text)
    with pytest.raises(LogError) as caught:
        read_log(path, demo, allow_missing=True)
    assert str(caught.value).startswith(str(tmp_path) + "/")
    assert message in str(caught.value)


def test_an_ambiguous_local_time_is_an_error_naming_the_row(
    tmp_path: Path, demo: SiteConfig
) -> None:
    path = write(tmp_path, "timestamp,outdoor_temp\n2024-10-27 01:30,10\n2024-10-27 02:30,10\n")
    with pytest.raises(LogError) as caught:
        read_log(path, in_zone(demo, BERLIN), allow_missing=True)
    assert str(caught.value) == (
        f"{path}:3: timestamp '2024-10-27 02:30' is ambiguous in Europe/Berlin: that "
        "wall-clock time happens twice when daylight saving time ends; write it with its "
        "UTC offset (+02:00 the first time, +01:00 the second)"
    )


def test_a_skipped_local_time_is_an_error_naming_the_row(tmp_path: Path, demo: SiteConfig) -> None:
    path = write(tmp_path, "timestamp,outdoor_temp\n2024-03-10 01:59,10\n2024-03-10 02:30,10\n")
    with pytest.raises(LogError) as caught:
        read_log(path, in_zone(demo, "America/New_York"), allow_missing=True)
    assert str(caught.value).startswith(
        f"{path}:3: timestamp '2024-03-10 02:30' does not exist in America/New_York: "
        "the clocks skip that hour"
    )


def test_missing_points_are_an_error_unless_allowed(tmp_path: Path, demo: SiteConfig) -> None:
    names = needed_points(demo)
    kept = [n for n in names if n not in ("roof_rain", "studio_temp")]
    row = [v for n, v in zip(names, full_row(demo, {}), strict=True) if n in kept]
    path = write(tmp_path, f"timestamp,{','.join(kept)}\n2027-06-15T14:00Z,{','.join(row)}\n")
    with pytest.raises(LogError) as caught:
        read_log(path, demo)
    assert str(caught.value).startswith(
        f"{path}: no values for the points roof_rain, studio_temp, which the zones read"
    )
    assert "--allow-missing" in str(caught.value)
    assert "roof_rain" not in read_log(path, demo, allow_missing=True).series


def test_feedback_points_may_be_absent(tmp_path: Path, demo: SiteConfig) -> None:
    names = needed_points(demo)
    path = write(
        tmp_path,
        f"timestamp,{','.join(names)}\n2027-06-15T14:00Z,{','.join(full_row(demo, {}))}\n",
    )
    assert set(read_log(path, demo).series) == set(names)


@pytest.mark.parametrize(
    ("name", "message"),
    [
        ("log.xlsx", "unknown log type '.xlsx'; expected .csv or .parquet (.pq)"),
        ("absent.csv", "no such file; check the path"),
    ],
)
def test_a_file_that_is_not_a_log(
    tmp_path: Path, demo: SiteConfig, name: str, message: str
) -> None:
    if name != "absent.csv":
        write(tmp_path, "x", name)
    with pytest.raises(LogError) as caught:
        read_log(tmp_path / name, demo)
    assert str(caught.value) == f"{tmp_path / name}: {message}"


def test_write_table_by_suffix(tmp_path: Path) -> None:
    frame = pd.DataFrame({"a": [1.5, 2.0], "b": ["x", "y"]})
    assert pd.read_csv(write_table(frame, tmp_path / "t.csv")).equals(frame)
    assert pd.read_parquet(write_table(frame, tmp_path / "t.parquet")).equals(frame)
    with pytest.raises(LogError, match=r"unknown table type '\.txt2'"):
        write_table(frame, tmp_path / "t.txt2")
