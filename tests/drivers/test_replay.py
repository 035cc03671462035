"""The per-step replay (evaluation times as live, runs) and ``ventsup replay`` end to end."""

from __future__ import annotations

import argparse
import io
import xml.etree.ElementTree as ET
from pathlib import Path

import pandas as pd
import pytest

from ventsup.config.load import load_config
from ventsup.config.model import SiteConfig
from ventsup.core.inputs import Sample
from ventsup.core.state import Mode
from ventsup.drivers.replay import (
    Evaluation,
    evaluation_plan,
    replay,
    replay_evaluations,
    run_key,
    runs_from_decisions,
    tick_times,
)
from ventsup.drivers.replay_cli import ProgressBar, add_replay_arguments, cli_replay, parse_instant
from ventsup.edges.logs import read_log

REPO = Path(__file__).resolve().parents[2]
DEMO = REPO / "config" / "demo-site.yaml"
DEMO_DAY = REPO / "ventsup" / "data" / "demo-day.csv"
T = 1_813_082_400.0  # 2027-06-15 13:00 in Chicago


@pytest.fixture(scope="module")
def demo() -> SiteConfig:
    return load_config(DEMO)


def calm(t: float) -> list[Sample]:
    """Every point the demo zones read, mild and dry, at ``t``."""
    values: dict[str, float | bool] = {
        "outdoor_temp": 18.0,
        "outdoor_rh": 50.0,
        "wind_speed": 2.0,
        "wind_direction": 90.0,
        "roof_rain": False,
        "commons_t_l1": 22.0,
        "commons_t_l3": 22.0,
        "commons_t_l4": 22.0,
        "commons_co2": 500.0,
        "commons_smoke": False,
        "ahu1_heating": False,
        "classroom_temp": 22.0,
        "classroom_co2": 500.0,
        "classroom_smoke": False,
        "studio_temp": 22.0,
        "studio_smoke": False,
        "vav_heating": False,
    }
    return [Sample(name, value, t) for name, value in values.items()]


# --------------------------------------------------------------------------- evaluations


def test_ticks_are_start_plus_whole_steps() -> None:
    assert tick_times(10.0, 200.0, 60.0) == [10.0, 70.0, 130.0, 190.0]
    with pytest.raises(ValueError, match="step must be positive"):
        tick_times(0.0, 1.0, 0.0)


def test_the_tick_only_replay_is_unchanged(demo: SiteConfig) -> None:
    samples = read_log(DEMO_DAY, demo).samples()
    decisions = list(replay(demo, samples, T, T + 600.0, 60.0))
    assert [d.t for d in decisions[:: len(demo.zones)]] == tick_times(T, T + 600.0, 60.0)
    assert [d.zone for d in decisions[:3]] == list(demo.zones)


def test_rain_alarms_and_wind_evaluate_at_once_as_live(demo: SiteConfig) -> None:
    samples = [
        *calm(T - 30.0),
        Sample("roof_rain", True, T),  # at the start: held, not urgent
        Sample("roof_rain", False, T + 10.0),  # a change: every zone at once
        Sample("wind_speed", 2.5, T + 20.0),  # within the same band: nothing
        Sample("classroom_smoke", True, T + 30.0),  # the classroom only
        Sample("wind_speed", 9.0, T + 30.0),  # every zone (the classroom already is)
        Sample("studio_smoke", False, T + 45.0),  # no change: nothing
        Sample("roof_rain", False, T + 60.0),  # unchanged, at a tick
    ]
    plan = evaluation_plan(demo, samples, T, T + 120.0, 60.0)
    seen = [(e.t - T, e.zone, e.trigger) for e in plan]
    assert seen == [
        (0.0, "commons", "tick"),
        (0.0, "classroom_east", "tick"),
        (0.0, "studio_west", "tick"),
        (10.0, "commons", "input:roof_rain"),
        (10.0, "classroom_east", "input:roof_rain"),
        (10.0, "studio_west", "input:roof_rain"),
        (30.0, "commons", "input:wind_speed"),
        (30.0, "classroom_east", "input:classroom_smoke"),
        (30.0, "studio_west", "input:wind_speed"),
        (60.0, "commons", "tick"),
        (60.0, "classroom_east", "tick"),
        (60.0, "studio_west", "tick"),
    ]
    # every sample of a time is held before its urgent evaluations
    decisions = dict(((d.t - T, d.zone), d) for d, _ in replay_evaluations(demo, samples, plan))
    assert decisions[(30.0, "classroom_east")].mode is Mode.RELEASED
    assert decisions[(30.0, "commons")].facts["wind_speed"] == 9.0


def test_a_value_that_becomes_known_again_is_a_change(demo: SiteConfig) -> None:
    stale_after = demo.points["roof_rain"].stale_after
    samples = [*calm(T), Sample("roof_rain", False, T + stale_after + 30.0)]
    plan = evaluation_plan(demo, samples, T, T + stale_after + 60.0, 3600.0)
    assert {e.trigger for e in plan if e.t == T + stale_after + 30.0} == {"input:roof_rain"}


def test_runs_cover_every_evaluation_and_collect_events(demo: SiteConfig) -> None:
    samples = [*calm(T - 30.0), Sample("commons_smoke", True, T + 90.0)]
    samples += [Sample("commons_smoke", True, T + 150.0 + i * 60.0) for i in range(3)]
    plan = evaluation_plan(demo, samples, T, T + 400.0, 60.0)
    pairs = list(replay_evaluations(demo, samples, plan))
    runs = runs_from_decisions(demo, pairs, T + 400.0)
    assert sum(run.evaluations for run in runs) == len(plan)
    commons = [run for run in runs if run.zone == "commons"]
    assert [run.decision.mode for run in commons] == [Mode.IDLE, Mode.RELEASED]
    assert commons[1].start == T + 90.0 and commons[1].trigger == "input:commons_smoke"
    assert commons[0].end == commons[1].start and commons[1].end == T + 400.0
    assert commons[1].events[0] == (T + 90.0, "alarm latched: commons_smoke")
    assert all(run_key(d) == run_key(commons[1].decision) for d, _ in pairs[-3:][:1])


def test_explicit_evaluations_carry_their_requests(demo: SiteConfig) -> None:
    from ventsup.core.state import OverrideRequest

    samples = calm(T - 30.0)
    request = OverrideRequest("open", duration=120.0, who="tester")
    plan = [
        Evaluation(T, "studio_west"),
        Evaluation(T + 10.0, "studio_west", "override", request),
        Evaluation(T + 60.0, "studio_west"),
        Evaluation(T + 200.0, "studio_west"),
    ]
    modes = [d.mode for d, _ in replay_evaluations(demo, samples, plan)]
    assert modes[1:3] == [Mode.OVERRIDE, Mode.OVERRIDE]
    assert modes[3] is not Mode.OVERRIDE


# --------------------------------------------------------------------------- the command


def parse(*argv: str) -> argparse.Namespace:
    parser = argparse.ArgumentParser(prog="ventsup replay")
    add_replay_arguments(parser)
    return parser.parse_args([str(a) for a in argv])


def run_cli(capsys: pytest.CaptureFixture[str], *argv: str | Path) -> tuple[int, str, str]:
    code = cli_replay(parse(*(str(a) for a in argv)))
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def rules_file(tmp_path: Path, name: str, text: str) -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def warmer(tmp_path: Path) -> Path:
    """The demo's hall rules with free cooling from 24 C (instead of 23 C)."""
    import yaml

    rules = yaml.safe_load(DEMO.read_text(encoding="utf-8"))["rules"]["hall"]
    rules["free_cooling"].update({"open_above": "24 C", "close_below": "23 C"})
    return rules_file(tmp_path, "warmer.yaml", yaml.safe_dump({"hall": rules}))


def test_replay_of_the_demo_day_writes_timeline_figures_and_report(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    code, out, err = run_cli(capsys, DEMO, "--data", DEMO_DAY, "--out", tmp_path)
    assert code == 0, err
    assert "Quarry Lane Commons, 2027-06-15 00:00 CDT" in out
    assert "timestamps with their UTC offset" in out
    assert "every 60 s and at once on alarm, rain and wind changes" in out
    assert "(site)" in out and "free cooling h" in out
    timeline = pd.read_csv(tmp_path / "timeline.csv")
    assert list(timeline.columns[:8]) == [
        "start",
        "end",
        "duration_s",
        "zone",
        "evaluations",
        "mode",
        "layer",
        "cause",
    ]
    assert timeline["start"].iloc[0] == "2027-06-15T00:00:00-05:00"
    assert {"target:low_north", "target:windows", "reason", "trigger"} <= set(timeline.columns)
    figures = pd.read_csv(tmp_path / "figures.csv")
    site = figures[figures["zone"] == "(site)"].iloc[0]
    assert site["free_cooling_hours"] > 0 and site["moves"] > 0
    assert site["evaluations"] == timeline["evaluations"].sum()
    # each run holds until the zone's next run: the durations fill the replayed period
    per_zone = timeline.groupby("zone")["duration_s"].sum()
    assert per_zone.nunique() == 1
    assert list((tmp_path / "report").glob("*.html"))


def test_rule_sets_side_by_side(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    code, out, err = run_cli(
        capsys,
        DEMO,
        "--data",
        DEMO_DAY,
        "--rules",
        warmer(tmp_path),
        "--out",
        tmp_path / "out",
        "--no-report",
    )
    assert code == 0, err
    assert "rule sets side by side" in out
    table = pd.read_csv(tmp_path / "out" / "comparison.csv", index_col="figure")
    assert list(table.columns) == ["site", "warmer"]
    assert table.loc["free_cooling_hours", "warmer"] < table.loc["free_cooling_hours", "site"]
    assert table.loc["above_comfort_hours", "warmer"] == table.loc["above_comfort_hours", "site"]
    assert (tmp_path / "out" / "timeline-warmer.csv").exists()


def test_a_bad_rules_file_names_its_lines(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    bad = rules_file(
        tmp_path,
        "bad.yaml",
        "hall:\n  free_cooling:\n    open_above: 24 C\n    close_below: 25 C\n"
        "  wind:\n    cap_above: fast\nlobby:\n  rain: {dry_delay: 5 min}\n",
    )
    code, _, err = run_cli(capsys, DEMO, "--data", DEMO_DAY, "--rules", bad)
    assert code == 2
    assert f"{bad}:6 hall.wind.cap_above: got 'fast', expected a speed" in err
    assert f"{bad}:7 lobby: the site has no rule set 'lobby'; its rule sets are hall, rooms" in err


def test_a_sweep_gives_a_table_and_a_chart(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    code, out, err = run_cli(
        capsys,
        DEMO,
        "--data",
        DEMO_DAY,
        "--sweep",
        "free_cooling.open_above=22C:25C:0.5K",
        "--out",
        tmp_path,
        "--no-report",
    )
    assert code == 0, err
    assert "left out: --sweep free_cooling.open_above=22 C" in err  # close_below is 22 C
    assert "sweep of free_cooling.open_above" in out
    sweep = pd.read_csv(tmp_path / "sweep.csv")
    assert list(sweep["value"]) == ["22.5 C", "23 C", "23.5 C", "24 C", "24.5 C", "25 C"]
    hours = list(sweep["free_cooling_hours"])
    assert hours == sorted(hours, reverse=True) and hours[0] > hours[-1]
    svg = ET.parse(tmp_path / "sweep.svg").getroot()
    assert svg.tag.endswith("svg") and len(svg.findall(".//{*}polyline")) == 4


def test_two_jobs_and_the_reference_write_the_same_timeline(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    common = (DEMO, "--data", DEMO_DAY, "--no-report")
    outputs = {}
    for name, extra in {"one": (), "two": ("--jobs", "2"), "ref": ("--reference",)}.items():
        code, _, err = run_cli(capsys, *common, "--out", tmp_path / name, *extra)
        assert code == 0, err
        outputs[name] = (tmp_path / name / "timeline.csv").read_bytes()
    assert outputs["two"] == outputs["one"]
    assert outputs["ref"] == outputs["one"]


def test_parquet_timeline_and_a_period(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    code, _, err = run_cli(
        capsys,
        DEMO,
        "--data",
        DEMO_DAY,
        "--from",
        "2027-06-15T12:00",
        "--to",
        "2027-06-15T18:00",
        "--step",
        "2 min",
        "--format",
        "parquet",
        "--out",
        tmp_path,
        "--no-report",
    )
    assert code == 0, err
    timeline = pd.read_parquet(tmp_path / "timeline.parquet")
    assert timeline["start"].min() == "2027-06-15T12:00:00-05:00"
    assert timeline["end"].max() == "2027-06-15T18:00:00-05:00"


@pytest.mark.parametrize(
    ("argv", "code", "message"),
    [
        (("--step", "soon"), 2, "expected a duration"),
        (("--from", "2027-13-01"), 2, "is not an ISO 8601 time"),
        (("--from", "2027-06-15T12:00", "--to", "2027-06-15T11:00"), 2, "--to must be after"),
        (("--jobs", "0"), 2, "--jobs must be at least 1"),
        (("--sweep", "free_cooling.open_above=22C"), 2, "expected --sweep SECTION.KEY="),
    ],
)
def test_bad_command_lines(
    capsys: pytest.CaptureFixture[str], argv: tuple[str, ...], code: int, message: str
) -> None:
    got, _, err = run_cli(capsys, DEMO, "--data", DEMO_DAY, *argv)
    assert got == code
    assert message in err


def test_a_bad_log_is_a_failure_with_its_message(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    log = tmp_path / "log.csv"
    log.write_text("timestamp,outdoor_temp\n2027-06-15T14:00Z,18\n", encoding="utf-8")
    code, _, err = run_cli(capsys, DEMO, "--data", log)
    assert code == 1
    assert f"{log}: no values for the points" in err
    code, _, err = run_cli(capsys, DEMO, "--data", log, "--allow-missing")
    assert code == 0, err


def test_local_times_on_the_command_line() -> None:
    assert parse_instant("2027-06-15T12:00", "America/Chicago") == T - 3600.0
    assert parse_instant("2027-06-15T18:00Z", "America/Chicago") == T
    with pytest.raises(ValueError, match="is ambiguous in Europe/Berlin"):
        parse_instant("2024-10-27T02:30", "Europe/Berlin")
    with pytest.raises(ValueError, match="does not exist in Europe/Berlin"):
        parse_instant("2024-03-31T02:30", "Europe/Berlin")


def test_the_progress_bar_shows_only_on_a_terminal_or_when_asked() -> None:
    quiet = io.StringIO()
    bar = ProgressBar(100, quiet)
    bar(50)
    bar.close()
    assert quiet.getvalue() == ""
    loud = io.StringIO()
    ticks = iter([0.0, 1.0, 2.0, 3.0])
    bar = ProgressBar(100, loud, force=True, clock=lambda: next(ticks))
    bar(50)
    bar.close()
    assert "50.0%" in loud.getvalue() and "100.0%" not in loud.getvalue()
    assert loud.getvalue().endswith("\n")
