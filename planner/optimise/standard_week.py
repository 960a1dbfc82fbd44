"""The standard week: a cyclic plan for a constant weekly volume, and the start state it
implies ("start as if the standard week had been running").

Days are taken modulo the cycle (7 or 14 days; cycle day 0 is a Monday), so a cage
loaded on Friday that lives 32 days occupies its slot on the Fridays to Sundays of the
following weeks as well: the cycle's flows repeat for ever, with no start state.
"""

from __future__ import annotations

import numpy as np

from planner.errors import InputError
from planner.optimise.build import build_model
from planner.optimise.data import StartBatches, compile_cycle
from planner.optimise.solve import SolveSettings, solve
from planner.scenario.schema import Scenario

__all__ = ["solve_standard_week", "start_batches", "unroll"]


def solve_standard_week(scn: Scenario, weekly_volume: float,
                        settings: SolveSettings | None = None, *, relax: bool = False,
                        all_days_alike: bool = False, cycle_days: int | None = None):
    """Build and solve the standard week; returns ``(built, solution)``.

    Parameters
    ----------
    weekly_volume : float
        Product every week [million/week].
    relax : bool
        Solve the LP relaxation (cages and trays need not be whole).
    all_days_alike : bool
        Every weekday gets the week's mean capacity and may ship.
    """
    settings = settings or _settings(scn)
    data = compile_cycle(scn, weekly_volume, cycle_days, all_days_alike)
    built = build_model(data, relax=relax)
    return built, solve(built.model, settings)


def _settings(scn: Scenario) -> SolveSettings:
    p = scn.plan
    return SolveSettings(solver=p.solver, time_limit=p.time_limit, relative_gap=p.relative_gap)


def unroll(built, x: np.ndarray, start_weekday: int, lookback: int) -> StartBatches:
    """Batches of a solved standard week on the days before a plan start.

    Parameters
    ----------
    start_weekday : int
        Weekday of the plan's day 0 (0 = Monday).
    lookback : int
        How many days before day 0 to unroll [day].
    """
    data = built.data
    p = data.n_days
    cages = built.blocks["cages"].values(x).reshape(p, len(data.discard_ages))
    trays = built.blocks["trays"].values(x)
    batch_cages, batch_trays = [], []
    for s in range(-lookback, 0):
        c = (start_weekday + s) % p
        for j, delta in enumerate(data.discard_ages):
            count = int(round(cages[c, j]))
            if count and s + data.span(delta) - 1 >= -data.seed_lag:
                batch_cages.append((s, count, delta))
        count = int(round(trays[c]))
        if count and s - data.seed_lag + max(data.take_ages) >= 0:
            batch_trays.append((s, count))
    return StartBatches(cages=batch_cages, trays=batch_trays, source="standard week")


def start_batches(scn: Scenario, settings: SolveSettings | None = None) -> StartBatches:
    """The start state of a scenario that starts from the standard week at a volume.

    Raises
    ------
    InputError
        When the facility cannot sustain that volume in the standard week.
    """
    from planner.optimise.data import batches_from_scenario
    volume = scn.start.standard_week_volume
    if volume is None:
        return batches_from_scenario(scn)
    built, sol = solve_standard_week(scn, volume, settings, cycle_days=7)
    if not sol.info.has_plan:
        raise InputError(f"the standard week at {volume:g} million/week could not be solved "
                         f"({sol.info.message})", place="start.standard_week_volume",
                         value=volume)
    short = built.blocks["shortfall"].values(sol.x).sum()
    if short > 0.01 * volume:
        raise InputError(f"the facility cannot sustain {volume:g} million/week in the standard "
                         f"week (short by {short:.3g} million/week); lower the start volume or "
                         "list the batches in the facility", place="start.standard_week_volume",
                         value=volume)
    data = built.data
    lookback = max(data.span(d) for d in data.discard_ages) + max(data.take_ages) + 7
    batches = unroll(built, sol.x, scn.calendar.start.weekday(), lookback)
    if short > 1e-6:
        batches.notes.append(f"the standard week at {volume:g} million/week falls short by "
                             f"{short:.3g} million/week with whole cages and trays; the start "
                             "state is that routine")
    return batches
