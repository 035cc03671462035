"""Shared data of the report tests: the bundled demo day replayed once, and a month of it.

The demo day (``ventsup/data/demo-day.csv``, an invented June day of the demo
building) is replayed through the decision core once per test session. The
month is that day's decisions repeated over June 2027 (and the eight days
before, for the running mean), with temperatures shifted day by day, one
classroom sensor dropout and a five-hour controller outage.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from ventsup.config.load import load_config
from ventsup.config.model import SiteConfig
from ventsup.core.figures import decisions_to_frame
from ventsup.core.state import Decision
from ventsup.drivers.replay import replay
from ventsup.drivers.reporting import Period, month_period
from ventsup.edges.logs import read_wide_csv

DATA = Path(__file__).resolve().parents[2] / "ventsup" / "data"
#: Day of June (0 = June 1) when the classroom's sensor drops out after 08:20, and
#: when the controller is offline 10:00-15:00.
DROPOUT_DAY = 12
OUTAGE_DAY = 20


@pytest.fixture(scope="session")
def demo_config() -> SiteConfig:
    return load_config(DATA / "demo-site.yaml")


@pytest.fixture(scope="session")
def demo_ip_config() -> SiteConfig:
    return load_config(DATA / "demo-site-ip.yaml")


@pytest.fixture(scope="session")
def demo_decisions(demo_config: SiteConfig) -> list[Decision]:
    samples = read_wide_csv(DATA / "demo-day.csv", demo_config)
    return list(replay(demo_config, samples, samples[0].t, samples[-1].t + 300.0, 60.0))


@pytest.fixture(scope="session")
def demo_frame(demo_config: SiteConfig, demo_decisions: list[Decision]) -> pd.DataFrame:
    return decisions_to_frame(demo_decisions, demo_config)


@pytest.fixture(scope="session")
def june(demo_config: SiteConfig) -> Period:
    return month_period(demo_config.site.time_zone, "2027-06")


@pytest.fixture(scope="session")
def month_frame(demo_frame: pd.DataFrame, june: Period) -> pd.DataFrame:
    first = float(demo_frame["t"].min())
    parts = []
    for day in range(-8, 30):
        part = demo_frame.copy()
        part["t"] = part["t"] - first + june.start + day * 86400.0
        shift = 3.0 * np.sin(day / 5.0)
        for column in ("fact:temp_indoor", "fact:temp_outdoor"):
            part[column] = part[column] + shift
        if day == DROPOUT_DAY:
            lost = (part["zone"] == "classroom_east") & (part["t"] >= part["t"].min() + 30000.0)
            part.loc[lost, "fact:temp_indoor"] = np.nan
        if day == OUTAGE_DAY:
            begin = part["t"].min()
            part = part[(part["t"] < begin + 36000.0) | (part["t"] >= begin + 54000.0)]
        parts.append(part)
    return pd.concat(parts, ignore_index=True)
