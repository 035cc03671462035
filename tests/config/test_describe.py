"""What `ventsup check` prints about a site, in the site's own units."""

from __future__ import annotations

from ventsup.config import load_config_text
from ventsup.config.describe import describe

from .sites import SITE, SITE_IP, insert_after


def test_describe_si_site() -> None:
    text = describe(load_config_text(SITE))
    lines = text.splitlines()
    assert lines[:3] == [
        "Site       Larkfield Library",
        "Time zone  Europe/Berlin",
        "Units      SI (°C, m/s, m²)",
    ]
    assert (
        "  wind        wind_speed   weather/wind    -          km/h  10 min       "
        "0.0 m/s to 75.0 m/s (default)"
    ) in lines
    assert (
        "    north  4.0 m²  0° (N)  high   -       fb_north  0 %   0 %     release  "
        "controller topic, fraction" in lines
    )
    assert "  free_cooling    enabled                      yes" in lines
    assert "                  open_above                   24.0 °C" in lines
    assert "  schedule        occupied                     Mon-Fri 07:00-18:00" in lines
    assert "  alarm           clear_hold                   15 min" in lines
    assert "Rule set standard (zones: hall)" in lines


def test_describe_ip_site_converts_every_value() -> None:
    text = describe(load_config_text(SITE_IP))
    assert "Units      IP (°F, mph, ft²)" in text
    assert "open_above                   75.2 °F" in text
    assert "close_below                  71.6 °F" in text
    assert "cap_above                    17.9 mph" in text  # 8 m/s
    assert "43.1 ft²" in text  # 4 m²
    assert "min_difference               1.8 °F" in text  # 1 K, a difference
    assert "-58.0 °F to 158.0 °F (default)" in text  # -50 °C to 70 °C


def test_describe_location_and_sensor_aggregate() -> None:
    text = insert_after(SITE, 3, "  location: {latitude: 52.52, longitude: -1.5, elevation: 30 ft}")
    text = text.replace(
        "temperature: t_hall ", "temperature: {sensors: [t_hall, t_out], aggregate: mean}"
    )
    out = describe(load_config_text(text))
    assert "Location   52.5200° N, 1.5000° W, elevation 9.1 m" in out
    assert "  temperature   t_hall, t_out (aggregate: mean)" in out


def test_describe_daemon_section_names_broker_and_never_a_password() -> None:
    text = SITE + (
        "mqtt:\n"
        "  host: broker.example.net\n"
        "  tls: {ca_file: ca.pem}\n"
        "  username: vents\n"
        "  password_env: VENTS_PASSWORD\n"
        "prefix: plant/vents\n"
        "controller:\n"
        "  tick: 30 s\n"
        "  ledger: data/vents.db\n"
    )
    out = describe(load_config_text(text))
    daemon = out[out.index("Daemon (ventsup run)") :].splitlines()
    assert daemon[1].split(None, 1) == ["broker", "broker.example.net:8883, MQTT 5, TLS, CA ca.pem"]
    assert "  password             from environment variable VENTS_PASSWORD" in daemon
    assert "  topic prefix         plant/vents" in daemon
    assert "  tick                 30 s" in daemon
    assert "  ledger               data/vents.db" in daemon
    assert "  client id            ventsup-larkfield-library" in daemon


def test_describe_daemon_defaults() -> None:
    out = describe(load_config_text(SITE))
    assert "  broker               localhost:1883, MQTT 5, no TLS" in out
    assert "  ledger               var/ventsup-larkfield-library.db" in out
    assert "  password             none" in out
