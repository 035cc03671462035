"""A recording's order: each evaluation holds the samples the daemon had handled before it.

The per-step reference holds the first ``held`` samples with the core's own
:func:`~ventsup.core.inputs.hold`; the fast path picks the held sample of each
point by array arithmetic (``replay_fast._held_at``). These tests check the
second against the first where the order is hardest (times that tie and go
back), and that a ledger without numbers (schema version 1) replays with the
rule of version 1: every message stamped at or before a decision.
"""

from __future__ import annotations

import sqlite3
from pathlib import Path

import numpy as np
import pytest

from ventsup.config import SiteConfig, load_config_text
from ventsup.core.decide import decide, initial_state
from ventsup.core.inputs import Held, Sample, hold, zone_inputs
from ventsup.core.state import Decision
from ventsup.drivers.recording import read_recording
from ventsup.drivers.replay import Evaluation, replay_evaluations
from ventsup.drivers.replay_fast import align, plan_from_evaluations
from ventsup.edges.ledger import Ledger, MessageRecord
from ventsup.edges.logs import PointLog

from .daemon_site import site_text

PREFIX = "order"
POINTS = ("t_out", "rh_out", "t_hall", "wind")


@pytest.fixture
def config() -> SiteConfig:
    return load_config_text(site_text(PREFIX), "site.yaml")


@pytest.mark.parametrize("seed", range(5))
def test_the_fast_path_holds_what_hold_keeps_in_log_order(config: SiteConfig, seed: int) -> None:
    rng = np.random.default_rng(seed)
    # Times on a coarse grid (ties) with jitter backwards (a clock stepped back).
    times = np.cumsum(rng.choice([0.0, 1.0, 2.0], size=300)) - rng.choice([0.0, 5.0], 300)
    samples = [Sample(str(rng.choice(POINTS)), float(rng.uniform(1, 30)), float(t)) for t in times]
    log = PointLog.from_samples(samples, config)  # each sample's order: its place in the list
    held = np.sort(rng.integers(0, len(samples) + 1, size=80))
    aligned = align(config, "hall", log, np.full(held.size, 1e6), held)
    for k, count in enumerate(held.tolist()):
        expected = Held()
        for sample in samples[:count]:
            expected = hold(expected, sample)
        got = {
            name: aligned.series[name].sample(int(at[k]))
            for name, at in aligned.index.items()
            if at[k] >= 0
        }
        want = {name: s for name, s in expected.samples.items() if name in aligned.series}
        assert got == want, f"count {count}"


def test_counts_must_be_given_for_all_evaluations_or_none(config: SiteConfig) -> None:
    with pytest.raises(ValueError, match="give one for every evaluation or for none"):
        plan_from_evaluations(config, [Evaluation(1.0, "hall", held=0), Evaluation(2.0, "hall")])
    with pytest.raises(ValueError, match="holds 1 samples, after 2 were held"):
        list(
            replay_evaluations(
                config,
                [Sample("t_out", 18.0, 0.0), Sample("t_out", 19.0, 0.5)],
                [Evaluation(1.0, "hall", held=2), Evaluation(2.0, "hall", held=1)],
            )
        )


def test_a_ledger_without_numbers_replays_with_the_time_rule(
    tmp_path: Path, config: SiteConfig
) -> None:
    path = tmp_path / "ledger.db"
    topic = f"{PREFIX}/in/t_out"
    with Ledger.open(path) as ledger:
        # Recorded order: a decision at 10 s before the message stamped 9 s was handled.
        ledger.record_messages([MessageRecord(8.0, topic, b"18", "t_out", "accepted", 18.0)])
        ledger.record_decisions([_decision(config, 10.0)])
        ledger.record_messages([MessageRecord(9.0, topic, b"19", "t_out", "accepted", 19.0)])
        ledger.record_decisions([_decision(config, 11.0)])
    assert [e.held for e in read_recording(path, config).evaluations] == [1, 2]
    with sqlite3.connect(path) as raw:  # as a version 1 ledger would hold them
        for table in ("messages", "decisions", "events"):
            raw.execute(f"UPDATE {table} SET seq = NULL")
    raw.close()
    assert [e.held for e in read_recording(path, config).evaluations] == [2, 2]


def _decision(config: SiteConfig, t: float) -> Decision:
    decision, _ = decide(config, "hall", zone_inputs(config, "hall", Held(), t), initial_state(), t)
    return decision


def test_log_order_keeps_a_recording_order_where_time_goes_back(config: SiteConfig) -> None:
    """The per-step reference of a recording holds samples in recording order (replay_cli)."""
    samples = [Sample("t_out", 18.0, 10.0), Sample("t_out", 19.0, 9.0), Sample("wind", 2.0, 9.5)]
    log = PointLog.from_samples(samples, config)
    assert log.samples(log_order=True) == samples
    assert log.samples() == [samples[1], samples[2], samples[0]]
