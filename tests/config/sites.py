"""Small invented site files for the config tests.

Line numbers in expected messages refer to :data:`SITE` as printed here (the
comment at the end of each line is its number).
"""

from __future__ import annotations

import textwrap

SITE = textwrap.dedent(
    """\
    site:                                                           # 1
      name: Larkfield Library                                       # 2
      time_zone: Europe/Berlin                                      # 3
    points:                                                         # 4
      t_out: {topic: weather/temp, kind: temperature}               # 5
      rh_out: {topic: weather/rh, kind: humidity}                   # 6
      wind: {topic: weather/wind, kind: wind_speed, unit: km/h}     # 7
      rain: {topic: weather/rain, kind: binary}                     # 8
      t_hall:                                                       # 9
        topic: hall/temp                                            # 10
        kind: temperature                                           # 11
        json_path: data.t                                           # 12
      hall_smoke: {topic: fire/hall, kind: binary}                  # 13
      fb_north: {topic: hall/north/pos, kind: position, unit: '%'}  # 14
    outdoor:                                                        # 15
      temperature: t_out                                            # 16
      humidity: rh_out                                              # 17
      wind_speed: wind                                              # 18
      rain: rain                                                    # 19
    zones:                                                          # 20
      hall:                                                         # 21
        rules: standard                                             # 22
        temperature: t_hall                                         # 23
        smoke_alarms: [hall_smoke]                                  # 24
        openings:                                                   # 25
          north:                                                    # 26
            area: 4 m2                                              # 27
            facing: 0                                               # 28
            level: high                                             # 29
            feedback: fb_north                                      # 30
    rules:                                                          # 31
      standard:                                                     # 32
        free_cooling:                                               # 33
          open_above: 24 C                                          # 34
          close_below: 22 C                                         # 35
        wind:                                                       # 36
          cap_above: 8 m/s                                          # 37
          close_above: 10 m/s                                       # 38
        schedule:                                                   # 39
          occupied: [Mon-Fri 07:00-18:00]                           # 40
    """
)


def edit(text: str, *replacements: tuple[str, str]) -> str:
    """``text`` with each ``(old, new)`` applied; each ``old`` must occur exactly once."""
    for old, new in replacements:
        count = text.count(old)
        assert count == 1, f"{old!r} occurs {count} times in the site text, expected once"
        text = text.replace(old, new)
    return text


def drop(text: str, *numbers: int) -> str:
    """``text`` without the lines with these (1-based) numbers."""
    return "".join(
        line
        for number, line in enumerate(text.splitlines(keepends=True), 1)
        if number not in numbers
    )


def insert_after(text: str, number: int, *lines: str) -> str:
    """``text`` with ``lines`` inserted after line ``number`` (0 inserts at the top)."""
    old = text.splitlines(keepends=True)
    return "".join([*old[:number], *(line + "\n" for line in lines), *old[number:]])


# The same site with every value in US customary units (IP) and IP display.
SITE_IP = edit(
    insert_after(SITE, 3, "  units: IP"),
    ("time_zone: Europe/Berlin", "time_zone: America/Denver"),
    ("area: 4 m2", "area: 43.05564 ft2"),
    ("open_above: 24 C", "open_above: 75.2 degF"),
    ("close_below: 22 C", "close_below: 71.6 degF"),
    ("cap_above: 8 m/s", "cap_above: 28.8 km/h"),
    ("close_above: 10 m/s", "close_above: 36 km/h"),
)
