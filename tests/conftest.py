"""Shared path fixtures: the demo site and series, copied so a test may change its copy."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

DEMO_DIR = Path(__file__).resolve().parents[1] / "plant_configs"


@pytest.fixture
def demo_site(tmp_path: Path) -> Path:
    """A private copy of plant_configs/saltmarsh_refinery.toml, as ``tmp_path/site.toml``."""
    return Path(shutil.copy(DEMO_DIR / "saltmarsh_refinery.toml", tmp_path / "site.toml"))


@pytest.fixture
def demo_series(tmp_path: Path) -> Path:
    """A private copy of plant_configs/saltmarsh_week.csv, as ``tmp_path/series.csv``."""
    return Path(shutil.copy(DEMO_DIR / "saltmarsh_week.csv", tmp_path / "series.csv"))
