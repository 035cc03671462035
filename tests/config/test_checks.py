"""Cross-checks on a configuration built in code (no file, so no lines)."""

from __future__ import annotations

from typing import Any

import yaml

from ventsup.config import ConfigProblem, SiteConfig, cross_check, load_config_text

from .sites import SITE, edit


def site_data(text: str = SITE) -> dict[str, Any]:
    data: dict[str, Any] = yaml.safe_load(text)
    return data


def test_a_good_site_has_no_problems() -> None:
    assert cross_check(load_config_text(SITE)) == []


def test_without_a_source_map_problems_have_no_line() -> None:
    data = site_data(edit(SITE, ("cap_above: 8 m/s", "cap_above: 12 m/s")))
    data["zones"]["hall"]["co2"] = "t_out"
    config = SiteConfig.model_validate(data)
    assert cross_check(config) == [
        ConfigProblem(
            "<config>",
            None,
            "rules.standard.wind.cap_above",
            "got 12.0 m/s, expected below close_above (10.0 m/s): the openings are capped "
            "before they close",
        ),
        ConfigProblem(
            "<config>",
            None,
            "zones.hall.co2",
            "got 't_out', which is a temperature point, expected the name of a co2 point; "
            "there is no co2 point yet: add one under 'points' with 'kind: co2'",
        ),
    ]


def test_override_longer_than_allowed() -> None:
    text = SITE + "override: {default_duration: 3 d, max_duration: 1 d}\n"
    try:
        load_config_text(text, "site.yaml")
    except Exception as exc:
        assert str(exc) == (
            "site.yaml:41 override.default_duration: got '3 d', expected at most max_duration "
            "('1 d')"
        )
    else:
        raise AssertionError("expected a ConfigError")


def test_disabled_features_need_no_dew_point_point() -> None:
    data = site_data()
    del data["outdoor"]["humidity"]
    data["rules"]["standard"]["free_cooling"]["enabled"] = False
    # night flush is disabled by default
    assert cross_check(SiteConfig.model_validate(data)) == []


def test_a_dew_point_point_is_enough() -> None:
    data = site_data()
    del data["outdoor"]["humidity"]
    data["points"]["dp_out"] = {"topic": "weather/dew", "kind": "dew_point"}
    data["outdoor"]["dew_point"] = "dp_out"
    assert cross_check(SiteConfig.model_validate(data)) == []


def test_points_on_one_topic_with_different_json_paths_are_fine() -> None:
    data = site_data()
    data["points"]["t_out"] = {"topic": "weather", "kind": "temperature", "json_path": "t"}
    data["points"]["rh_out"] = {"topic": "weather", "kind": "humidity", "json_path": "rh"}
    assert cross_check(SiteConfig.model_validate(data)) == []
