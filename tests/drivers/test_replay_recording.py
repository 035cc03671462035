"""A replay of the daemon's own recording gives the recorded decisions, step for step.

The daemon's logic (:class:`Supervisor`, without threads or broker) runs a
session on a manual clock: random input messages, ticks, urgent evaluations,
operator overrides and their expiry, all recorded in a real ledger file. The
recording is then replayed by the per-step core and by the fast path.
"""

from __future__ import annotations

import argparse
import json
from pathlib import Path

import numpy as np
import pytest

from ventsup.config import SiteConfig, load_config_text
from ventsup.drivers.messages import Topics
from ventsup.drivers.recording import read_recording
from ventsup.drivers.replay import replay_evaluations, runs_from_decisions
from ventsup.drivers.replay_cli import add_replay_arguments, cli_replay
from ventsup.drivers.replay_fast import plan_from_evaluations, replay_fast
from ventsup.drivers.supervisor import Supervisor
from ventsup.edges.ledger import Ledger
from ventsup.edges.logs import LogError
from ventsup.edges.mqtt import Message

from .daemon_site import payload, site_text

PREFIX = "rec"
T0 = 1_750_000_000.0


class Broker:
    """Takes what the supervisor publishes and forgets it."""

    def publish(
        self, topic: str, payload: bytes | str, *, qos: int = 1, retain: bool = False
    ) -> int:
        return 0


def site_yaml() -> str:
    """The daemon tests' site, with actuator care that holds and skips moves."""
    return site_text(PREFIX).replace(
        "actuator: {min_open_time: 0 s, min_closed_time: 0 s, min_step: 1 %, "
        "max_moves_per_hour: 1000}",
        "actuator: {min_open_time: 3 min, min_closed_time: 2 min, min_step: 10 %, "
        "max_moves_per_hour: 4}",
    )


@pytest.fixture
def config() -> SiteConfig:
    return load_config_text(site_yaml(), "site.yaml")


def session(config: SiteConfig, path: Path, seed: int) -> None:
    """Two hours of a live run, recorded in the ledger at ``path``."""
    rng = np.random.default_rng(seed)
    topics = Topics(config)
    now = T0

    def message(point: str, value: str) -> Message:
        return Message(f"{PREFIX}/in/{point}", payload(point, value).encode(), 1, False, now)

    values = {
        "t_out": lambda: f"{rng.uniform(12, 24):.1f}",
        "rh_out": lambda: f"{rng.choice([40, 60, 95])}",
        "wind": lambda: f"{rng.choice([1.0, 5.0, 6.5, 8.5, 11.0])}",
        "rain": lambda: str(rng.random() < 0.1).lower(),
        "t_hall": lambda: f"{rng.uniform(21, 26):.1f}",
        "smoke_hall": lambda: str(rng.random() < 0.03).lower(),
        "t_room": lambda: f"{rng.uniform(21, 26):.1f}",
        "smoke_room": lambda: "false",
    }
    with Ledger.open(path) as ledger:
        sup = Supervisor(config, Broker(), ledger=ledger, mono=lambda: now)
        sup.restore(now)
        for point, make in values.items():
            sup.on_message(message(point, make()))
        sup.begin(now)
        next_tick = now + 60.0
        while now < T0 + 7200.0:
            now += float(rng.uniform(1.0, 40.0))
            while next_tick <= now:
                sup.evaluate(config.zones, next_tick, "tick")
                sup.expire(next_tick)
                next_tick += 60.0
            if rng.random() < 0.02:
                zone = str(rng.choice(list(config.zones)))
                action = str(rng.choice(["open", "close", "hold", "auto"]))
                request = {"action": action, "who": "tester", "reason": "replay test"}
                if action != "auto":
                    request["duration"] = f"{int(rng.integers(2, 20))} min"
                body = json.dumps(request).encode()
                sup.on_message(Message(topics.override(zone), body, 1, False, now))
                continue
            point = str(rng.choice(list(values)))
            sup.on_message(message(point, values[point]()))
        sup.shutdown(now, "end of the test session")


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_the_replay_of_a_recording_gives_the_recorded_runs(
    tmp_path: Path, config: SiteConfig, seed: int
) -> None:
    path = tmp_path / "ledger.db"
    session(config, path, seed)
    recording = read_recording(path, config)
    assert recording.skipped == {}
    triggers = {e.trigger for e in recording.evaluations}
    assert {"tick", "override"} <= triggers and any(t.startswith("input:") for t in triggers)
    end = recording.end
    recorded = runs_from_decisions(config, recording.recorded, end)
    samples = recording.log.samples()
    replayed = runs_from_decisions(
        config, replay_evaluations(config, samples, recording.evaluations), end
    )
    assert replayed == recorded
    plans = plan_from_evaluations(config, recording.evaluations)
    fast = [run for result in replay_fast(config, recording.log, plans, end) for run in result.runs]
    assert fast == recorded


def test_the_command_replays_a_ledger(
    tmp_path: Path, config: SiteConfig, capsys: pytest.CaptureFixture[str]
) -> None:
    path = tmp_path / "ledger.db"
    session(config, path, 4)
    site = tmp_path / "site.yaml"
    site.write_text(site_yaml(), encoding="utf-8")
    parser = argparse.ArgumentParser()
    add_replay_arguments(parser)
    code = cli_replay(parser.parse_args([str(site), "--data", str(path), "--no-report"]))
    out = capsys.readouterr().out
    assert code == 0
    assert "evaluations: as recorded" in out
    recording = read_recording(path, config)
    n = len(recording.evaluations)
    assert f"recording: the replay gives the recorded outcome at {n} of {n} evaluations" in out


def test_a_missing_ledger(tmp_path: Path, config: SiteConfig) -> None:
    with pytest.raises(LogError, match="no such ledger"):
        read_recording(tmp_path / "absent.db", config)
