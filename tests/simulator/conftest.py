"""Shared fixtures: the demo site and building, and pvlib's TMY3 sample year."""

from __future__ import annotations

from pathlib import Path

import pytest

from simulator.building import Building, load_building
from ventsup.config import load_config
from ventsup.config.model import SiteConfig

ROOT = Path(__file__).resolve().parents[2]
DEMO_SITE = ROOT / "config" / "demo-site.yaml"
DEMO_BUILDING = ROOT / "config" / "demo-building.yaml"


@pytest.fixture(scope="session")
def site() -> SiteConfig:
    """The invented demo site, Quarry Lane Commons."""
    return load_config(DEMO_SITE)


@pytest.fixture(scope="session")
def building(site: SiteConfig) -> Building:
    """The demo building's thermal description."""
    return load_building(DEMO_BUILDING, site)
