"""Shared fixtures: reference data (published tables) and the invented demo tables."""

from pathlib import Path

import pytest

DATA = Path(__file__).parent / "data"
ROOT = Path(__file__).parent.parent
MODELS = ROOT / "models"


@pytest.fixture
def data_dir() -> Path:
    return DATA


@pytest.fixture
def birch_csv() -> Path:
    return DATA / "birch1948_rice_weevil.csv"


@pytest.fixture
def crouse_csv() -> Path:
    return DATA / "crouse1987_loggerhead.csv"


@pytest.fixture
def fly_csv() -> Path:
    return MODELS / "fernhollow-fly-lifetable.csv"


@pytest.fixture
def moth_csv() -> Path:
    return MODELS / "fernhollow-moth-lifetable.csv"
