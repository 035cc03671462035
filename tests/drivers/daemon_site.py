"""A small invented site for the daemon tests, with every topic under a test's prefix.

Two zones: ``hall`` (two openings; ``south`` has a site command topic in
percent) and ``room`` (one window). Free cooling runs at any hour, actuator
care is off, so that a test sees a move as soon as the rules call for one.
"""

from __future__ import annotations

import textwrap
from pathlib import Path

# Inputs of a warm, dry, calm day: the hall (24 °C) calls for free cooling, the
# room (21 °C) does not. Urgent points (wind, alarms, rain) come last, so that the
# evaluation they trigger sees every value.
WARM_DAY: tuple[tuple[str, str], ...] = (
    ("t_out", "18"),
    ("rh_out", "50"),
    ("t_hall", "24"),
    ("t_room", "21"),
    ("wind", "2"),
    ("smoke_hall", "false"),
    ("smoke_room", "false"),
    ("rain", "dry"),
)


def site_text(
    prefix: str,
    *,
    port: int = 1883,
    host: str = "127.0.0.1",
    tick: str = "0.2 s",
    reassert: str = "1 h",
    stale_indoor: str = "1 h",
    clear_hold: str = "1 h",
    mqtt_extra: str = "",
    ledger: str | None = None,
) -> str:
    """The site file text; every point topic is ``<prefix>/in/<point>``."""
    ledger_line = f"  ledger: {ledger}\n" if ledger is not None else ""
    text = textwrap.dedent(
        f"""\
        site: {{name: Test Hall, time_zone: Europe/Berlin}}
        points:
          t_out: {{topic: {prefix}/in/t_out, kind: temperature}}
          rh_out: {{topic: {prefix}/in/rh_out, kind: humidity}}
          wind: {{topic: {prefix}/in/wind, kind: wind_speed}}
          rain: {{topic: {prefix}/in/rain, kind: binary}}
          t_hall: {{topic: {prefix}/in/t_hall, kind: temperature, stale_after: {stale_indoor}}}
          smoke_hall: {{topic: {prefix}/in/smoke_hall, kind: binary}}
          t_room: {{topic: {prefix}/in/t_room, kind: temperature, json_path: value}}
          smoke_room: {{topic: {prefix}/in/smoke_room, kind: binary}}
        outdoor: {{temperature: t_out, humidity: rh_out, wind_speed: wind, rain: rain}}
        zones:
          hall:
            rules: test
            temperature: t_hall
            smoke_alarms: [smoke_hall]
            openings:
              north: {{area: 2 m2, facing: 0, level: low}}
              south:
                area: 2 m2
                facing: 180
                level: high
                command_topic: {prefix}/site/hall/south/set
                command_format: percent
          room:
            rules: test
            temperature: t_room
            smoke_alarms: [smoke_room]
            openings:
              window: {{area: 1 m2, facing: 90, level: low}}
        rules:
          test:
            alarm: {{clear_hold: {clear_hold}}}
            rain: {{dry_delay: 0 s}}
            wind: {{hold: 0 s}}
            free_cooling:
              open_above: 23 C
              close_below: 22 C
              full_open_at: 25 C
              min_opening: 20 %
              when: always
            actuator: {{min_open_time: 0 s, min_closed_time: 0 s, min_step: 1 %, max_moves_per_hour: 1000}}
            schedule: {{occupied: ["00:00-24:00"]}}
        override: {{default_duration: 2 h, max_duration: 1 d}}
        prefix: {prefix}/ctl
        """
    )
    text += f"mqtt:\n  host: {host}\n  port: {port}\n  reconnect_min: 1 s\n  reconnect_max: 1 s\n"
    text += textwrap.indent(textwrap.dedent(mqtt_extra), "  ")
    text += (
        f"controller:\n  tick: {tick}\n  reassert: {reassert}\n  heartbeat: 0.2 s\n"
        "  startup_settle: 0.5 s\n  record_interval: 0.2 s\n  state_save_interval: 0.2 s\n"
        + ledger_line
    )
    return text


def write_site(directory: Path, prefix: str, **options: object) -> Path:
    """Write the site file into ``directory`` and return its path."""
    path = directory / "site.yaml"
    path.write_text(site_text(prefix, **options), encoding="utf-8")  # type: ignore[arg-type]
    return path


def payload(point: str, value: str) -> str:
    """The payload a gateway sends for ``point`` (the room sensor sends JSON)."""
    return f'{{"value": {value}}}' if point == "t_room" else value
