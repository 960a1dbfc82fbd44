"""The sustainable weekly volume for ``broodline check``: the standard week's max-volume
programme (:func:`planner.answers.capacity.max_volume_model`) solved as a linear
programme, cages and trays fractional.

The LP relaxation bounds the integer answer of ``broodline capacity`` from above, so
orders above it cannot be filled by any plan that repeats a standard week; it solves in
milliseconds, which keeps ``check`` fast. The standard week has the weekly calendar
(kitchen days, crew hours by weekday, shipping days) but no holidays: those are the
check's own per-week estimate.
"""

from __future__ import annotations

import time

from planner.answers.capacity import max_volume_model
from planner.optimise.solve import SolveSettings, solve
from planner.scenario.schema import Scenario

__all__ = ["sustainable_volume"]


def sustainable_volume(scn: Scenario, settings: SolveSettings | None = None) -> dict:
    """Largest constant weekly volume of the standard week's LP relaxation.

    Parameters
    ----------
    scn : Scenario
    settings : SolveSettings, optional
        Solver and time limit [s]; default: the scenario's plan settings. Solved as an
        LP (:meth:`SolveSettings.for_lp`), without duals.

    Returns
    -------
    dict
        ``volume`` [million/week] (None without a solution), ``status``, ``solver``,
        ``seconds`` [s] (building and solving), ``method``.
    """
    from planner.optimise import settings_for
    t0 = time.perf_counter()
    s = (settings or settings_for(scn)).for_lp()
    built = max_volume_model(scn, relax=True)
    sol = solve(built.model, s)
    volume = (float(built.blocks["volume"].values(sol.x)[0]) if sol.info.has_plan else None)
    return {"volume": volume, "status": sol.info.status, "solver": s.solver,
            "seconds": time.perf_counter() - t0,
            "method": "standard week, LP relaxation of the max-volume programme"}
