"""The planning optimiser: a daily cohort-flow mixed-integer programme.

Layers, each in its own module: :mod:`.data` (the scenario as day-indexed arrays),
:mod:`.build` (variables and constraint families as sparse matrices), :mod:`.solve`
(PuLP with CBC or HiGHS), :mod:`.results` (tables read back from the solution) and
:mod:`.verify` (every rule re-checked from the plan's own numbers).
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING

# eager: `solve` names both the module and its function, and the function must win
from planner.optimise.solve import SolveSettings, available_solvers, solve

if TYPE_CHECKING:
    from planner.optimise.data import StartBatches
    from planner.optimise.results import PlanResult

# The layers are loaded on first use (PEP 562): `check` builds one LP and needs neither
# the read-back (pandas) nor the verifier.
_WHERE = {"FAMILIES": "build", "build_model": "build", "PlanData": "data",
          "StartBatches": "data", "compile_cycle": "data", "compile_horizon": "data",
          "PlanResult": "results", "read_back": "results",
          "verify_plan": "verify"}


def __getattr__(name: str):
    if name in _WHERE:
        return getattr(importlib.import_module(f"planner.optimise.{_WHERE[name]}"), name)
    raise AttributeError(f"module 'planner.optimise' has no attribute {name!r}")

__all__ = ["plan_horizon", "plan_standard_week", "settings_for", "PlanResult", "PlanData",
           "SolveSettings", "StartBatches", "FAMILIES", "verify_plan", "available_solvers",
           "build_model", "compile_horizon", "compile_cycle", "read_back", "solve"]


def settings_for(scn, **overrides) -> SolveSettings:
    """Solver settings from the scenario's plan section, with overrides
    (``solver``, ``time_limit`` [s], ``relative_gap`` [-], ``threads``, ``duals``)."""
    p = scn.plan
    base = {"solver": p.solver, "time_limit": p.time_limit, "relative_gap": p.relative_gap}
    base.update({k: v for k, v in overrides.items() if v is not None})
    return SolveSettings(**base)


def plan_horizon(scn, settings: SolveSettings | None = None, *, start: StartBatches | None = None,
                 extra_orders=None, use_expansion: bool = False,
                 horizon_weeks: int | None = None) -> PlanResult:
    """Plan the scenario's horizon from its start state: build, solve, read back.

    A scenario that starts from the standard week gets its start batches from a solve of
    the standard week at that volume first.
    """
    import dataclasses
    import time

    from planner.optimise.build import build_model
    from planner.optimise.data import compile_horizon
    from planner.optimise.results import read_back
    from planner.optimise.standard_week import start_batches

    t0 = time.perf_counter()
    settings = settings or settings_for(scn)
    if start is None:
        start = start_batches(scn, dataclasses.replace(
            settings, log_path=None, time_limit=max(0.2 * settings.time_limit, 1.0)))
    data = compile_horizon(scn, start, horizon_weeks=horizon_weeks, extra_orders=extra_orders,
                           use_expansion=use_expansion)
    built = build_model(data)
    # the time limit bounds the whole plan: what building took is not the solver's
    spent = settings.spent + time.perf_counter() - t0
    return read_back(built, solve(built.model, dataclasses.replace(settings, spent=spent)))


def plan_standard_week(scn, weekly_volume: float, settings: SolveSettings | None = None, *,
                       relax: bool = False, all_days_alike: bool = False,
                       cycle_days: int | None = None) -> PlanResult:
    """The standard week (a cyclic plan) for a constant weekly volume [million/week]."""
    from planner.optimise.build import build_model
    from planner.optimise.data import compile_cycle
    from planner.optimise.results import read_back

    data = compile_cycle(scn, weekly_volume, cycle_days, all_days_alike)
    built = build_model(data, relax=relax)
    return read_back(built, solve(built.model, settings or settings_for(scn)))
