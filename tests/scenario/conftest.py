"""Fixtures of the scenario tests."""

import shutil
from pathlib import Path

import pytest

from planner.scenario import demo_scenario_path

MODELS = Path(__file__).resolve().parents[2] / "models"


@pytest.fixture
def demo_dir(tmp_path):
    """A copy of the demo scenario with its colony model beside it."""
    for name in ("fernhollow-fly.toml", "fernhollow-fly-lifetable.csv"):
        shutil.copy(MODELS / name, tmp_path / name)
    text = demo_scenario_path("fly").read_text().replace("../fernhollow-fly.toml",
                                                        "fernhollow-fly.toml")
    (tmp_path / "scenario.toml").write_text(text)
    return tmp_path
