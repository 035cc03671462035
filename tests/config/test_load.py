"""Loading a site file: every problem reported at once, with file, line, key path, value and fix."""

from __future__ import annotations

import pickle
import textwrap
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from ventsup.config import (
    ConfigError,
    ConfigProblem,
    SiteConfig,
    VentsupError,
    load_config,
    load_config_text,
)

from .sites import SITE, SITE_IP, drop, edit, insert_after

_FIELDS = "name, time_zone, location, units"
_PERIOD = "expected a period such as 'Mon-Fri 07:00-18:00', 'Sat 09:00-13:00' or '22:00-06:00'"
_KINDS = "'temperature', 'humidity', 'dew_point', 'wind_speed', 'wind_direction', 'co2', "
_KINDS += "'position' or 'binary'"
_TOP = "expected a mapping with the keys 'site', 'points', 'outdoor', 'zones' and 'rules'"
_NO_MOISTURE = (
    "but 'outdoor' has neither a humidity nor a dew_point point to compare it with; "
    "add one under 'outdoor', or write 'dew_point_max: null' for no dew point limit"
)

# (id, site text, every expected line of str(ConfigError)); line numbers refer to sites.SITE.
MALFORMED: list[tuple[str, str, list[str]]] = [
    (
        "wrong_unit",
        edit(SITE, ("area: 4 m2", "area: 4 mph")),
        [
            "site.yaml:27 zones.hall.openings.north.area: got '4 mph', expected an area such as "
            "'4 m2' or '40 ft2'; 'mph' is not one of m2, m², cm2, ft2, ft², sqft"
        ],
    ),
    (
        "negative_area",
        edit(SITE, ("area: 4 m2", "area: -2 m2")),
        [
            "site.yaml:27 zones.hall.openings.north.area: got '-2 m2', expected a positive area "
            "such as '4 m2' or '40 ft2'"
        ],
    ),
    (
        "unknown_key_did_you_mean",
        insert_after(SITE, 3, "  unit: IP"),
        ["site.yaml:4 site.unit: unknown key 'unit'; did you mean 'units'?"],
    ),
    (
        "unknown_key_without_close_match",
        insert_after(SITE, 3, "  colour: blue"),
        [f"site.yaml:4 site.colour: unknown key 'colour'; expected one of {_FIELDS}"],
    ),
    (
        "misspelled_nested_key",
        edit(SITE, ("close_below: 22 C", "close_bellow: 22 C")),
        [
            "site.yaml:35 rules.standard.free_cooling.close_bellow: unknown key 'close_bellow'; "
            "did you mean 'close_below'?"
        ],
    ),
    (
        "key_in_the_wrong_section",
        insert_after(SITE, 32, "    dew_point_max: 15 C"),
        [
            "site.yaml:33 rules.standard.dew_point_max: unknown key 'dew_point_max' here; "
            "it belongs under 'free_cooling' or 'night_flush'"
        ],
    ),
    (
        "missing_required_key",
        drop(SITE, 11),
        [f"site.yaml:9 points.t_hall.kind: missing, expected {_KINDS}"],
    ),
    (
        "missing_section",
        drop(SITE, 15, 16, 17, 18, 19),
        [
            "site.yaml:1 outdoor: missing, expected a mapping with the keys 'temperature', "
            "'wind_speed' and 'rain'"
        ],
    ),
    (
        "bad_time_zone",
        edit(SITE, ("Europe/Berlin", "Europe/Berln")),
        [
            "site.yaml:3 site.time_zone: got 'Europe/Berln', expected an IANA time zone name "
            "such as 'Europe/Berlin' or 'America/Denver'"
        ],
    ),
    (
        "close_threshold_above_open_threshold",
        edit(SITE, ("close_below: 22 C", "close_below: 25 C")),
        [
            "site.yaml:35 rules.standard.free_cooling.close_below: got '25 C', expected below "
            "open_above ('24 C'): the windows close at a lower temperature than they open"
        ],
    ),
    (
        "open_threshold_above_the_default_full_open",
        edit(SITE, ("open_above: 24 C", "open_above: 26 C")),
        [
            "site.yaml:34 rules.standard.free_cooling.open_above: got '26 C', expected at or "
            "below full_open_at (25.0 °C, the default): the opening grows from open_above to "
            "full open at full_open_at"
        ],
    ),
    (
        "outdoor_band_reversed",
        insert_after(SITE, 35, "      outdoor_min: 20 C", "      outdoor_max: 15 C"),
        [
            "site.yaml:36 rules.standard.free_cooling.outdoor_min: got '20 C', expected below "
            "outdoor_max ('15 C'): outdoor air between outdoor_min and outdoor_max is used for "
            "cooling"
        ],
    ),
    (
        "referenced_point_missing",
        edit(SITE, ("  rain: rain  ", "  rain: gauge  ")),
        [
            "site.yaml:19 outdoor.rain: got 'gauge', expected the name of a binary point defined "
            "under 'points'; the binary points are hall_smoke, rain"
        ],
    ),
    (
        "referenced_point_misspelled",
        edit(SITE, ("temperature: t_hall", "temperature: t_hal")),
        [
            "site.yaml:23 zones.hall.temperature: got 't_hal', expected the name of a "
            "temperature point defined under 'points'; did you mean 't_hall'?"
        ],
    ),
    (
        "point_of_wrong_kind",
        edit(SITE, ("humidity: rh_out", "humidity: t_out")),
        [
            "site.yaml:17 outdoor.humidity: got 't_out', which is a temperature point, expected "
            "the name of a humidity point; the humidity points are rh_out"
        ],
    ),
    (
        "sensor_in_a_list_of_wrong_kind",
        edit(SITE, ("temperature: t_hall", "temperature: [t_hall, rain]")),
        [
            "site.yaml:23 zones.hall.temperature[1]: got 'rain', which is a binary point, "
            "expected the name of a temperature point; the temperature points are t_hall, t_out"
        ],
    ),
    (
        "zone_rules_name_unknown_rule_set",
        edit(SITE, ("rules: standard", "rules: standrd")),
        [
            "site.yaml:22 zones.hall.rules: got 'standrd', expected the name of a rule set "
            "defined under 'rules'; did you mean 'standard'?"
        ],
    ),
    (
        "zone_without_openings",
        edit(drop(SITE, 26, 27, 28, 29, 30), ("openings:  ", "openings: {}")),
        [
            "site.yaml:25 zones.hall.openings: got {}, expected at least one opening, such as "
            "'north: {area: 2 m2, facing: 0, level: low}'"
        ],
    ),
    (
        "fraction_above_one",
        insert_after(SITE, 30, "        rain_position: 150 %"),
        [
            "site.yaml:31 zones.hall.openings.north.rain_position: got '150 %', expected a "
            "fraction from 0 to 1 or a percentage such as '30 %'"
        ],
    ),
    (
        "fire_position_neither_word_nor_fraction",
        insert_after(SITE, 30, "        fire_position: open"),
        [
            "site.yaml:31 zones.hall.openings.north.fire_position: got 'open', expected "
            "'release' or a fraction from 0 to 1 or a percentage such as '30 %'"
        ],
    ),
    (
        "word_misspelled",
        edit(SITE, ("level: high", "level: hihg")),
        [
            "site.yaml:29 zones.hall.openings.north.level: got 'hihg', expected 'low' or "
            "'high'; did you mean 'high'?"
        ],
    ),
    (
        "point_kind_misspelled",
        edit(SITE, ("{topic: weather/rain, kind: binary}", "{topic: weather/rain, kind: binray}")),
        [f"site.yaml:8 points.rain.kind: got 'binray', expected {_KINDS}; did you mean 'binary'?"],
    ),
    (
        "point_unit_of_another_quantity",
        edit(SITE, ("unit: km/h", "unit: C")),
        [
            "site.yaml:7 points.wind.unit: got 'C', expected a unit for a wind_speed point: one "
            "of m/s, km/h, kph, mph, kn, kt, knots, ft/min, fpm"
        ],
    ),
    (
        "bad_schedule_period",
        edit(SITE, ("[Mon-Fri 07:00-18:00]", "[Mon-Fri 07:00-18:00, Sat 09:00-25:00]")),
        [
            "site.yaml:40 rules.standard.schedule.occupied[1]: got 'Sat 09:00-25:00', "
            f"{_PERIOD}; hours run from 00:00 to 24:00"
        ],
    ),
    (
        "bad_schedule_period_without_list",
        edit(SITE, ("[Mon-Fri 07:00-18:00]", "Mon-Fry 07:00-18:00")),
        [
            "site.yaml:40 rules.standard.schedule.occupied: got 'Mon-Fry 07:00-18:00', "
            f"{_PERIOD}; days are Mon, Tue, Wed, Thu, Fri, Sat, Sun"
        ],
    ),
    (
        "duplicate_key",
        insert_after(SITE, 28, "        facing: 90"),
        [
            "site.yaml:29 zones.hall.openings.north.facing: duplicate key 'facing', first given "
            "on line 28; keep one of them"
        ],
    ),
    (
        "yaml_syntax_error",
        edit(SITE, ("time_zone: Europe/Berlin", "time_zone: Europe/Berlin: CET")),
        ["site.yaml:3:27: YAML syntax error: mapping values are not allowed here"],
    ),
    (
        "yaml_tab_indentation",
        edit(SITE, ("        facing: 0", "\tfacing: 0")),
        [
            "site.yaml:28:1: YAML syntax error: found character '\\t' that cannot start any "
            "token (while scanning for the next token); indent with spaces, not tabs"
        ],
    ),
    (
        "top_level_a_list",
        "- site\n- points\n",
        [f"site.yaml:1: got a list at the top level, {_TOP}"],
    ),
    ("empty_file", "", [f"site.yaml: the file is empty, {_TOP}"]),
    ("only_comments", "# nothing here yet\n", [f"site.yaml: the file is empty, {_TOP}"]),
    (
        "valid_range_reversed",
        insert_after(SITE, 12, "    valid_range: [30 C, 10 C]"),
        [
            "site.yaml:13 points.t_hall.valid_range: got ['30 C', '10 C'], expected [low, high] "
            "with low below high"
        ],
    ),
    (
        "wind_cap_above_close",
        edit(SITE, ("cap_above: 8 m/s", "cap_above: 12 m/s")),
        [
            "site.yaml:37 rules.standard.wind.cap_above: got '12 m/s', expected below "
            "close_above ('10 m/s'): the openings are capped before they close"
        ],
    ),
    (
        "windward_cap_above_windward_close",
        insert_after(
            SITE, 38, "      windward_cap_above: 7 m/s", "      windward_close_above: 6 m/s"
        ),
        [
            "site.yaml:39 rules.standard.wind.windward_cap_above: got '7 m/s', expected below "
            "windward_close_above ('6 m/s'): windward openings are capped before they close"
        ],
    ),
    (
        "dew_point_limit_without_humidity_point",
        drop(SITE, 17),
        [
            f"site.yaml:32 rules.standard.free_cooling.dew_point_max: the default limit of "
            f"16.8 °C applies, {_NO_MOISTURE}"
        ],
    ),
    (
        "night_flush_dew_point_limit_without_humidity_point",
        drop(
            insert_after(
                SITE,
                35,
                "      dew_point_max: null",
                "    night_flush:",
                "      enabled: true",
                "      dew_point_max: 14 C",
            ),
            17,
        ),
        [f"site.yaml:38 rules.standard.night_flush.dew_point_max: got '14 C', {_NO_MOISTURE}"],
    ),
    (
        "two_points_for_one_reading",
        edit(drop(SITE, 12), ("topic: hall/temp", "topic: weather/temp")),
        [
            "site.yaml:10 points.t_hall.topic: point 't_hall' reads the same topic "
            "'weather/temp' as point 't_out' on line 5; expected one point per reading: use "
            "'t_out' wherever 't_hall' is used"
        ],
    ),
    (
        "point_name_not_a_name",
        edit(SITE, ("  hall_smoke: {", "  hall smoke: {")),
        [
            "site.yaml:13 points.hall smoke: got the name 'hall smoke', expected a name of "
            "letters, digits, '_' and '-' that starts with a letter"
        ],
    ),
    (
        "several_model_errors_at_once_sorted_by_line",
        edit(
            insert_after(SITE, 28, "        facing: 90"),
            ("level: high", "level: up"),
            ("Europe/Berlin", "Mars/Olympus"),
            ("area: 4 m2", "area: 0 ft2"),
            ("{topic: weather/rh, kind: humidity}", "{kind: humidity}"),
        ),
        [
            "site.yaml:3 site.time_zone: got 'Mars/Olympus', expected an IANA time zone name "
            "such as 'Europe/Berlin' or 'America/Denver'",
            "site.yaml:6 points.rh_out.topic: missing, expected an MQTT topic such as "
            "'building/atrium/temperature'",
            "site.yaml:27 zones.hall.openings.north.area: got '0 ft2', expected a positive area "
            "such as '4 m2' or '40 ft2'",
            "site.yaml:29 zones.hall.openings.north.facing: duplicate key 'facing', first given "
            "on line 28; keep one of them",
            "site.yaml:30 zones.hall.openings.north.level: got 'up', expected 'low' or 'high'",
        ],
    ),
    (
        "several_cross_check_errors_at_once_sorted_by_line",
        edit(
            SITE,
            ("cap_above: 8 m/s", "cap_above: 11 m/s"),
            ("humidity: rh_out", "humidity: rain"),
            ("feedback: fb_north", "feedback: fb_nort"),
        ),
        [
            "site.yaml:17 outdoor.humidity: got 'rain', which is a binary point, expected the "
            "name of a humidity point; the humidity points are rh_out",
            "site.yaml:30 zones.hall.openings.north.feedback: got 'fb_nort', expected the name "
            "of a position point defined under 'points'; did you mean 'fb_north'?",
            "site.yaml:37 rules.standard.wind.cap_above: got '11 m/s', expected below "
            "close_above ('10 m/s'): the openings are capped before they close",
        ],
    ),
]


@pytest.mark.parametrize(
    ("text", "expected"),
    [pytest.param(text, expected, id=name) for name, text, expected in MALFORMED],
)
def test_malformed_site_reports_every_problem(text: str, expected: list[str]) -> None:
    with pytest.raises(ConfigError) as caught:
        load_config_text(text, "site.yaml")
    assert str(caught.value).splitlines() == expected
    assert [str(problem) for problem in caught.value.problems] == expected


def test_good_site_loads_in_si() -> None:
    config = load_config_text(SITE, "site.yaml")
    assert isinstance(config, SiteConfig)
    north = config.zones["hall"].openings["north"]
    assert north.area == 4.0
    assert north.feedback == "fb_north"
    assert config.zones["hall"].temperature.sensors == ("t_hall",)
    rules = config.rules["standard"]
    assert (rules.free_cooling.open_above, rules.free_cooling.close_below) == (24.0, 22.0)
    assert rules.schedule.occupied[0].days == frozenset(range(5))
    assert (rules.schedule.occupied[0].start_minute, rules.schedule.occupied[0].end_minute) == (
        7 * 60,
        18 * 60,
    )


def test_ip_twin_gives_the_same_rules() -> None:
    si = load_config_text(SITE, "site.yaml")
    ip = load_config_text(SITE_IP, "site-ip.yaml")
    assert ip.site.units == "IP"
    assert ip.rules == si.rules
    assert ip.points == si.points
    # 43.05564 ft2 is 4 m2 to the 7 significant figures written
    assert ip.zones["hall"].openings["north"].area == pytest.approx(4.0, rel=1e-6)


def test_config_is_frozen() -> None:
    config = load_config_text(SITE, "site.yaml")
    with pytest.raises(ValueError, match="frozen"):
        config.site.name = "Other"  # type: ignore[misc]


def test_load_config_names_the_file_as_given(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.chdir(tmp_path)
    Path("site.yaml").write_text(edit(SITE, ("area: 4 m2", "area: -2 m2")), encoding="utf-8")
    with pytest.raises(ConfigError, match=r"^site\.yaml:27 zones\.hall\.openings\.north\.area: "):
        load_config("site.yaml")
    Path("good.yaml").write_text(SITE, encoding="utf-8")
    assert load_config(tmp_path / "good.yaml").site.name == "Larkfield Library"


def test_missing_file(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(tmp_path)
    with pytest.raises(ConfigError) as caught:
        load_config("nowhere.yaml")
    assert str(caught.value) == "nowhere.yaml: no such file; check the path"


def test_directory_instead_of_file(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(tmp_path)
    Path("sites").mkdir()
    with pytest.raises(ConfigError) as caught:
        load_config("sites")
    assert str(caught.value) == "sites: is a directory, expected a YAML site file"


def test_file_not_utf8(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(tmp_path)
    Path("site.yaml").write_bytes(b"site:\n  name: Caf\xe9\n")
    with pytest.raises(ConfigError) as caught:
        load_config("site.yaml")
    assert str(caught.value) == (
        "site.yaml: not UTF-8 text (byte 0xe9 at offset 17); save the file as UTF-8"
    )


def test_config_error_carries_problems() -> None:
    with pytest.raises(VentsupError) as caught:
        load_config_text(edit(SITE, ("area: 4 m2", "area: -2 m2")), "atrium.yaml")
    error = caught.value
    assert isinstance(error, ConfigError)
    assert error.problems == [
        ConfigProblem(
            file="atrium.yaml",
            line=27,
            path="zones.hall.openings.north.area",
            message="got '-2 m2', expected a positive area such as '4 m2' or '40 ft2'",
        )
    ]
    copy = pickle.loads(pickle.dumps(error))
    assert copy.problems == error.problems
    assert str(copy) == str(error)


def test_default_filename() -> None:
    with pytest.raises(ConfigError, match=r"^<string>:3 site\.time_zone: "):
        load_config_text(edit(SITE, ("Europe/Berlin", "Nowhere")))


def test_yaml_anchors_and_merge_keys_keep_lines() -> None:
    # A merged mapping keeps the lines of the keys written beside the merge key.
    text = textwrap.dedent(
        """\
        site: {name: Larkfield Library, time_zone: Europe/Berlin}
        points:
          t_out: {topic: weather/temp, kind: temperature}
          wind: {topic: weather/wind, kind: wind_speed}
          rain: {topic: weather/rain, kind: binary}
          t_hall: {topic: hall/temp, kind: temperature}
        outdoor: {temperature: t_out, wind_speed: wind, rain: rain}
        window: &window
          facing: 90
          level: low
        zones:
          hall:
            rules: standard
            temperature: t_hall
            openings:
              east: {<<: *window, area: -1 m2}
        rules:
          standard:
            free_cooling: {dew_point_max: null}
        """
    )
    with pytest.raises(ConfigError) as caught:
        load_config_text(text, "site.yaml")
    assert str(caught.value).splitlines() == [
        "site.yaml:8 window: unknown key 'window'; expected one of site, points, outdoor, "
        "zones, rules, override, mqtt, prefix, controller",
        "site.yaml:16 zones.hall.openings.east.area: got '-1 m2', expected a positive area "
        "such as '4 m2' or '40 ft2'",
    ]


@settings(max_examples=150)
@given(st.text(max_size=200))
def test_any_text_loads_or_raises_config_error(text: str) -> None:
    try:
        load_config_text(text, "fuzz.yaml")
    except ConfigError as exc:
        assert exc.problems
        assert all(problem.file == "fuzz.yaml" for problem in exc.problems)


@settings(max_examples=150)
@given(st.sets(st.integers(min_value=0, max_value=len(SITE.splitlines()) - 1), min_size=1))
def test_dropping_lines_gives_problems_within_the_file(dropped: set[int]) -> None:
    lines = SITE.splitlines()
    text = "\n".join(line for number, line in enumerate(lines) if number not in dropped)
    try:
        load_config_text(text, "site.yaml")
    except ConfigError as exc:
        count = len(text.splitlines())
        assert all(p.line is None or 1 <= p.line <= max(count, 1) for p in exc.problems), exc
        assert [p.sort_key() for p in exc.problems] == sorted(p.sort_key() for p in exc.problems)
