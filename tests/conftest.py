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


# -- solved plans shared across test packages (solved once per session) ---------------

@pytest.fixture(scope="session")
def fly():
    from planner.scenario import demo_scenario_path, load_scenario
    return load_scenario(demo_scenario_path("fly"))


@pytest.fixture(scope="session")
def moth():
    from planner.scenario import demo_scenario_path, load_scenario
    return load_scenario(demo_scenario_path("moth"))


@pytest.fixture(scope="session")
def fly_plan(fly):
    """The demo's full 26-week plan with CBC."""
    from planner.optimise import plan_horizon, settings_for
    return plan_horizon(fly, settings_for(fly, time_limit=120))


@pytest.fixture(scope="session")
def moth_plan(moth):
    """The second scenario, 8 weeks, with its real shortfalls (a hard instance: CBC may
    stop at the time limit with a feasible plan)."""
    from planner.optimise import plan_horizon, settings_for
    return plan_horizon(moth, settings_for(moth, time_limit=10), horizon_weeks=8)


@pytest.fixture(scope="session")
def fly_schedule(fly_plan):
    from planner.schedule import build_schedule
    return build_schedule(fly_plan)


# -- tiers: the fast tests (no plan solved) run first, the solving ones after ----------

#: Test paths (under tests/) whose tests solve plans: the slow tier, run after the rest
#: (``python -m pytest -m "not slow"`` runs the fast tier alone, in about a minute).
SLOW_TIER = ("answers/", "risk/", "optimise/", "reports/", "schedule/",
             "cli/test_risk_cli.py", "cli/test_answer_cli.py", "cli/test_plan_cli.py",
             "cli/test_kill.py", "test_packaging.py")


def pytest_configure(config):
    config.addinivalue_line("markers", "slow: solves plans (the second tier of the suite)")


def pytest_collection_modifyitems(config, items):
    root = Path(__file__).parent

    def slow(item) -> bool:
        try:
            rel = Path(str(item.fspath)).resolve().relative_to(root).as_posix()
        except ValueError:
            return False
        return rel.startswith(SLOW_TIER)
    for item in items:
        if slow(item):
            item.add_marker(pytest.mark.slow)
    items.sort(key=slow)  # stable: the fast tier first, each in its collected order
