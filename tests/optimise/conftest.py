"""Solved plans shared by the optimiser tests (solved once per session)."""

import pytest

from planner.optimise import plan_horizon, settings_for
from planner.scenario import demo_scenario_path, load_scenario


@pytest.fixture(scope="session")
def fly():
    return load_scenario(demo_scenario_path("fly"))


@pytest.fixture(scope="session")
def moth():
    return load_scenario(demo_scenario_path("moth"))


@pytest.fixture(scope="session")
def fly_plan(fly):
    """The demo's full 26-week plan with CBC."""
    return plan_horizon(fly, settings_for(fly, time_limit=120))


@pytest.fixture(scope="session")
def moth_plan(moth):
    """The second scenario, 8 weeks, with its real shortfalls (a hard instance: CBC may
    stop at the time limit with a feasible plan)."""
    return plan_horizon(moth, settings_for(moth, time_limit=25), horizon_weeks=8)
