"""The daemon's sections of a site file: ``mqtt``, ``prefix`` and ``controller``.

Line numbers in expected messages: :data:`.sites.SITE` has 40 lines, so the
first added line is line 41.
"""

from __future__ import annotations

import pytest

from ventsup.config import ConfigError, Controller, Mqtt, SiteConfig, Tls, load_config_text
from ventsup.config.model import site_slug

from .sites import SITE, edit

# (id, text added after SITE, every expected line of str(ConfigError))
MALFORMED: list[tuple[str, str, list[str]]] = [
    (
        "password_in_the_site_file",
        "mqtt:\n  username: ventsup\n  password: hunter2\n",
        [
            "site.yaml:43 mqtt.password: unknown key 'password': a password never goes in the "
            "site file; put it in a file only the service can read and name that file with "
            "password_file, or pass it in an environment variable named by password_env"
        ],
    ),
    (
        "unknown_protocol",
        "mqtt:\n  protocol: 4\n",
        ["site.yaml:42 mqtt.protocol: got 4, expected '5' or '3.1.1'"],
    ),
    (
        "protocol_misspelled",
        "mqtt:\n  protocol: '3.1'\n",
        ["site.yaml:42 mqtt.protocol: got '3.1', expected '5' or '3.1.1'; did you mean '3.1.1'?"],
    ),
    (
        "port_out_of_range",
        "mqtt:\n  port: 70000\n",
        [
            "site.yaml:42 mqtt.port: got 70000, expected a TCP port number from 1 to 65535, "
            "such as 1883 or 8883"
        ],
    ),
    (
        "empty_host",
        "mqtt:\n  host: ''\n",
        [
            "site.yaml:42 mqtt.host: got '', expected the broker's host name or address, such "
            "as 'broker.site.local' or '127.0.0.1'"
        ],
    ),
    (
        "keepalive_too_short",
        "mqtt:\n  keepalive: 2 s\n",
        [
            "site.yaml:42 mqtt.keepalive: got '2 s', expected a duration from 5 to 65535, such "
            "as '30 s', '15 min' or '2 h'"
        ],
    ),
    (
        "two_password_sources",
        "mqtt:\n  username: u\n  password_file: pw\n  password_env: PW\n",
        [
            "site.yaml:44 mqtt.password_env: got 'PW' as well as password_file ('pw'), expected "
            "one of them: the password comes from a file or from an environment variable"
        ],
    ),
    (
        "password_without_user_name",
        "mqtt:\n  password_env: PW\n",
        [
            "site.yaml:42 mqtt.password_env: a password needs a user name, expected 'username' "
            "under 'mqtt' as well"
        ],
    ),
    (
        "tls_key_without_certificate",
        "mqtt:\n  tls: {ca_file: ca.crt, key_file: client.key}\n",
        [
            "site.yaml:42 mqtt.tls.key_file: got 'client.key' without cert_file, expected the "
            "client certificate in cert_file beside its key"
        ],
    ),
    (
        "tls_key_misspelled",
        "mqtt:\n  tls: {cafile: ca.crt}\n",
        ["site.yaml:42 mqtt.tls.cafile: unknown key 'cafile'; did you mean 'ca_file'?"],
    ),
    (
        "tls_insecure_not_a_boolean",
        "mqtt:\n  tls: {insecure: maybe}\n",
        ["site.yaml:42 mqtt.tls.insecure: got 'maybe', expected true or false"],
    ),
    (
        "reconnect_delays_reversed",
        "mqtt:\n  reconnect_min: 2 min\n  reconnect_max: 30 s\n",
        [
            "site.yaml:42 mqtt.reconnect_min: got '2 min', expected at or below reconnect_max "
            "('30 s'): the delay between attempts doubles from reconnect_min up to reconnect_max"
        ],
    ),
    (
        "reconnect_max_below_the_default_min",
        "mqtt:\n  reconnect_max: 0.5 s\n",
        [
            "site.yaml:42 mqtt.reconnect_max: got '0.5 s', expected at or above reconnect_min "
            "(1 s, the default): the delay between attempts doubles from reconnect_min up to "
            "reconnect_max"
        ],
    ),
    (
        "mqtt_not_a_mapping",
        "mqtt: broker.local\n",
        [
            "site.yaml:41 mqtt: got 'broker.local', expected a mapping of settings (write {} "
            "to take every default)"
        ],
    ),
    (
        "prefix_with_trailing_slash",
        "prefix: ventsup/site/\n",
        [
            "site.yaml:41 prefix: got 'ventsup/site/', expected a topic prefix such as "
            "'ventsup/larkfield': no wildcards '+' or '#', no empty levels, not starting with "
            "'/' or '$', not ending with '/'"
        ],
    ),
    (
        "prefix_with_wildcard",
        "prefix: ventsup/+/x\n",
        [
            "site.yaml:41 prefix: got 'ventsup/+/x', expected a topic prefix such as "
            "'ventsup/larkfield': no wildcards '+' or '#', no empty levels, not starting with "
            "'/' or '$', not ending with '/'"
        ],
    ),
    (
        "tick_zero",
        "controller:\n  tick: 0 s\n",
        [
            "site.yaml:42 controller.tick: got '0 s', expected a positive duration such as "
            "'30 s', '15 min' or '2 h'"
        ],
    ),
    (
        "tick_of_another_quantity",
        "controller:\n  tick: 5 m/s\n",
        [
            "site.yaml:42 controller.tick: got '5 m/s', expected a duration such as '30 s', "
            "'15 min' or '2 h'; 'm/s' is not one of s, sec, min, h, hr, d"
        ],
    ),
    (
        "command_qos_three",
        "controller:\n  command_qos: 3\n",
        ["site.yaml:42 controller.command_qos: got 3, expected 0, 1 or 2"],
    ),
    (
        "log_format_misspelled",
        "controller:\n  log_format: jsn\n",
        [
            "site.yaml:42 controller.log_format: got 'jsn', expected 'text' or 'json'; did you "
            "mean 'json'?"
        ],
    ),
    (
        "controller_key_misspelled",
        "controller:\n  tik: 1 s\n",
        ["site.yaml:42 controller.tik: unknown key 'tik'; did you mean 'tick'?"],
    ),
    (
        "daemon_key_in_the_wrong_section",
        "controller:\n  keepalive: 30 s\n",
        [
            "site.yaml:42 controller.keepalive: unknown key 'keepalive'; expected one of tick, "
            "reassert, command_qos, ledger, retention, record_interval, state_save_interval, "
            "heartbeat, log_format, startup_settle"
        ],
    ),
    (
        "several_at_once",
        "mqtt:\n  port: 0\n  password: x\ncontroller:\n  reassert: -1 min\n",
        [
            "site.yaml:42 mqtt.port: got 0, expected a TCP port number from 1 to 65535, such "
            "as 1883 or 8883",
            "site.yaml:43 mqtt.password: unknown key 'password': a password never goes in the "
            "site file; put it in a file only the service can read and name that file with "
            "password_file, or pass it in an environment variable named by password_env",
            "site.yaml:45 controller.reassert: got '-1 min', expected a positive duration such "
            "as '30 s', '15 min' or '2 h'",
        ],
    ),
]


@pytest.mark.parametrize(
    ("extra", "expected"),
    [pytest.param(extra, expected, id=name) for name, extra, expected in MALFORMED],
)
def test_malformed_daemon_settings_report_every_problem(extra: str, expected: list[str]) -> None:
    with pytest.raises(ConfigError) as caught:
        load_config_text(SITE + extra, "site.yaml")
    assert str(caught.value).splitlines() == expected


def test_the_password_is_never_echoed() -> None:
    with pytest.raises(ConfigError) as caught:
        load_config_text(SITE + "mqtt:\n  username: u\n  password: s3cr3t-Value\n", "site.yaml")
    assert "s3cr3t" not in str(caught.value)


def test_command_topic_without_wildcards() -> None:
    text = edit(SITE, ("feedback: fb_north", "feedback: fb_north\n        command_topic: a/+/b"))
    with pytest.raises(ConfigError) as caught:
        load_config_text(text, "site.yaml")
    assert str(caught.value) == (
        "site.yaml:31 zones.hall.openings.north.command_topic: got 'a/+/b', expected a topic "
        "name without the wildcards '+' or '#'"
    )


def test_without_daemon_sections_everything_is_default() -> None:
    config = load_config_text(SITE, "site.yaml")
    assert config.mqtt == Mqtt()
    assert config.controller == Controller()
    assert config.prefix is None
    assert config.topic_prefix == "ventsup/larkfield-library"
    assert config.client_id == "ventsup-larkfield-library"
    assert config.mqtt.effective_port == 1883
    controller = config.controller
    assert (controller.tick, controller.reassert, controller.command_qos) == (60.0, 900.0, 1)
    assert (controller.retention, controller.record_interval) == (400 * 86400.0, 2.0)
    assert (controller.log_format, controller.ledger) == ("text", None)


def test_daemon_sections_in_si() -> None:
    extra = """\
mqtt:
  host: broker.site.local
  protocol: 3.1.1
  client_id: ventsup-east
  keepalive: 1 min
  tls: {ca_file: /etc/ventsup/ca.crt, cert_file: c.crt, key_file: c.key}
  username: ventsup
  password_env: VENTSUP_MQTT_PASSWORD
prefix: bldg/east/ventsup
controller:
  tick: 30 s
  reassert: 10 min
  command_qos: 2
  ledger: /var/lib/ventsup/east.db
  retention: 90 d
  heartbeat: 2 min
  log_format: json
"""
    config = load_config_text(SITE + extra, "site.yaml")
    assert isinstance(config, SiteConfig)
    assert config.mqtt.protocol == "3.1.1"
    assert config.mqtt.keepalive == 60.0
    assert config.mqtt.tls == Tls(
        ca_file="/etc/ventsup/ca.crt", cert_file="c.crt", key_file="c.key"
    )
    assert config.mqtt.effective_port == 8883  # TLS without a port
    assert (config.client_id, config.topic_prefix) == ("ventsup-east", "bldg/east/ventsup")
    assert (config.controller.tick, config.controller.reassert) == (30.0, 600.0)
    assert (config.controller.retention, config.controller.heartbeat) == (90 * 86400.0, 120.0)
    assert config.controller.command_qos == 2


def test_protocol_five_as_a_number() -> None:
    config = load_config_text(SITE + "mqtt: {protocol: 5}\n", "site.yaml")
    assert config.mqtt.protocol == "5"


@pytest.mark.parametrize(
    ("name", "slug"),
    [
        ("Larkfield Library", "larkfield-library"),
        ("Quarry Lane Commons (east wing)", "quarry-lane-commons-east-wing"),
        ("  École No. 5  ", "ecole-no-5"),
        ("???", "site"),
    ],
)
def test_site_slug(name: str, slug: str) -> None:
    assert site_slug(name) == slug
