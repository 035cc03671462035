"""Write the invented one-day log that `ventsup demo` replays.

The day is made up for Quarry Lane Commons (an invented building): a warm
June Tuesday with a night flush, a late-morning free-cooling spell, a short
shower, a hot early afternoon, a smoke-alarm drill, gusts, a temperature
sensor that drops out, and an evening that cools again. The curves are
shaped by hand, not simulated: the building simulator replaces this file
once it lands.

Values are SI (°C, % RH, m/s, degrees, ppm, opening fraction) with binary
points as 0/1; timestamps carry the site's UTC offset.

Run: python tools/make_demo_log.py > ventsup/data/demo-day.csv
"""

from __future__ import annotations

import csv
import math
import sys
from datetime import datetime, timedelta
from zoneinfo import ZoneInfo

ZONE = ZoneInfo("America/Chicago")
START = datetime(2027, 6, 15, 0, 0, tzinfo=ZONE)
STEP = timedelta(minutes=5)


def bump(hour: float, centre: float, width: float) -> float:
    """A smooth 0-1 bump around ``centre`` [h]."""
    return math.exp(-(((hour - centre) / width) ** 2))


def row(hour: float) -> dict[str, object]:
    outdoor = 17.5 + 6.5 * math.sin((hour - 9.0) / 24.0 * 2 * math.pi) - 2.5 * bump(hour, 12.9, 0.4)
    rh = 60.0 - 25.0 * math.sin((hour - 9.0) / 24.0 * 2 * math.pi)
    occupied = 7.0 <= hour < 21.0
    # The hall warms with people and sun, cools with the night flush and free cooling.
    hall = (
        24.6
        - 4.0 * min(hour, 6.0) / 6.0
        + 4.8 * max(0.0, min(hour - 6.0, 8.0)) / 8.0
        - 1.2 * max(0.0, min(hour - 15.0, 7.0)) / 7.0
        + 0.9 * max(0.0, min(hour - 22.0, 2.0)) / 2.0
    )
    wind = 2.5 + 1.5 * math.sin(hour / 3.0) + 8.5 * bump(hour, 16.1, 0.25)
    classroom = (
        21.5 + 3.2 * max(0.0, min(hour - 7.5, 7.0)) / 7.0 - 1.5 * max(0.0, hour - 17.0) / 7.0
    )
    studio = classroom + 1.0 * bump(hour, 16.5, 1.5)
    co2_hall = 450 + (650 * bump(hour, 11.5, 2.5) if occupied else 0.0)
    co2_room = 450 + (800 * bump(hour, 10.5, 1.6) if 7.5 <= hour < 18.0 else 0.0)
    drill = 14.15 <= hour < 14.25
    l4_missing = 16.0 <= hour < 17.0
    return {
        "outdoor_temp": round(outdoor, 2),
        "outdoor_rh": round(rh, 1),
        "wind_speed": round(wind, 2),
        "wind_direction": round((190.0 + 40.0 * math.sin(hour / 5.0)) % 360.0, 0),
        "roof_rain": int(12.6 <= hour < 13.0),
        "commons_t_l1": round(hall - 1.4, 2),
        "commons_t_l3": round(hall - 0.5, 2),
        "commons_t_l4": "" if l4_missing else round(hall, 2),
        "commons_co2": round(co2_hall),
        "commons_smoke": int(drill),
        "ahu1_heating": 0,
        "classroom_temp": round(classroom, 2),
        "classroom_co2": round(co2_room),
        "classroom_smoke": 0,
        "studio_temp": round(studio, 2),
        "studio_smoke": 0,
        "vav_heating": 0,
    }


def main() -> None:
    t = START
    writer = None
    while t < START + timedelta(days=1):
        hour = (t - START).total_seconds() / 3600.0
        values = row(hour)
        if writer is None:
            writer = csv.DictWriter(sys.stdout, ["timestamp", *values], lineterminator="\n")
            writer.writeheader()
        writer.writerow({"timestamp": t.isoformat(), **values})
        t += STEP


if __name__ == "__main__":
    main()
