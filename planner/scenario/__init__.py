"""Scenario input: colony models and facility scenarios, from TOML or the input workbook,
validated into one pydantic model (:class:`Scenario`)."""

from planner.scenario.load import load_colony, load_scenario
from planner.scenario.schema import ColonyModel, Scenario
from planner.scenario.toml_out import dump_toml

__all__ = ["Scenario", "ColonyModel", "load_scenario", "load_colony", "dump_toml",
           "demo_scenario_path"]


def demo_scenario_path(which: str = "fly"):
    """Path of a shipped demo scenario: 'fly' (the Fernhollow fly unit) or 'moth'."""
    from planner.resources import bundled_path
    names = {"fly": "fernhollow-fly-unit.toml", "moth": "fernhollow-moth-wing.toml"}
    return bundled_path("models", "scenarios", names[which])
