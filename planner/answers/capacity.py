"""How much the facility can sustain: the largest constant weekly volume of the standard
week, and for each resource the volume at which it becomes binding.

The standard week's order rows become ``ship + shortfall >= V`` with the volume ``V`` a
variable and no shortfall allowed; the programme maximises ``V`` (costs only break ties).
The volume at which a resource binds is the largest ``V`` with every other capacity
lifted. The shadow price of a resource at the largest volume is ``dV / d(capacity)``
from the LP relaxation: the extra million a week that one more unit of it (on every day
of the cycle) would allow.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:  # pandas is loaded where a table is made: `check` does without it
    import pandas as pd

from planner.optimise.build import build_model
from planner.optimise.data import compile_cycle
from planner.optimise.solve import SolveSettings, solve
from planner.scenario.schema import Scenario

__all__ = ["CapacityResult", "capacity", "max_volume_model"]

#: Objective weight of one million a week of volume, against costs in currency.
VOLUME_WEIGHT = 1e7
_LIFT = 1e12  # a capacity "without limit"

RESOURCE_FAMILIES = {"cage slots": "cage_slots", "rack slots": "racks",
                     "diet kitchen": "diet", "pupal holding": "pupal_holding"}


@dataclass
class CapacityResult:
    """Largest sustainable volume and the resources that limit it."""

    max_weekly_volume: float           # [million/week]
    status: str
    table: pd.DataFrame                # resource, binding_volume, shadow_price, unit
    limiting_resource: str | None

    def summary(self) -> dict:
        return {"max_weekly_volume": self.max_weekly_volume, "status": self.status,
                "limiting_resource": self.limiting_resource,
                "resources": self.table.to_dict(orient="records")}


def max_volume_model(scn: Scenario, relax: bool = False, lift: list[str] | None = None,
                     cycle_days: int | None = None):
    """The standard week that maximises its constant weekly volume.

    Parameters
    ----------
    lift : list of str, optional
        Resources (keys of :data:`RESOURCE_FAMILIES`, or 'crew hours: <crew>') whose
        capacity is lifted.
    """
    data = compile_cycle(scn, 1.0, cycle_days)
    built = build_model(data, relax=relax)
    m = built.model
    vol = m.add_block("volume", [()], 0, np.inf, False, "million/week")
    orders = m.families["orders"]
    m.add_to_family("orders", np.arange(orders.size), np.full(orders.size, vol.offset),
                    -np.ones(orders.size))
    orders.b[:] = 0.0
    m.blocks["shortfall"].ub[:] = 0.0
    m.add_cost("volume", [vol.offset], [-VOLUME_WEIGHT])
    # the builder's tight bounds on cages and trays, one unit looser: the capacity rows,
    # not the bounds, bind, so that the rows' duals are the resources' shadow prices
    for block in ("cages", "trays"):
        b = m.blocks[block]
        b.ub[:] = b.ub + 1.0
    for name in lift or []:
        _lift(built, name)
    return built


def _lift(built, resource: str) -> None:
    m = built.model
    if resource in RESOURCE_FAMILIES:
        fam = m.families.get(RESOURCE_FAMILIES[resource])
        if fam is not None:
            fam.b[:] = _LIFT
        # the builder also bounds each day's cages and trays by the capacities
        block = {"cage slots": "cages", "rack slots": "trays", "diet kitchen": "trays"}.get(resource)
        if block:
            m.blocks[block].ub[:] = np.inf
        return
    if resource.startswith("crew hours: "):
        crew = resource[len("crew hours: "):]
        fam = m.families["labour"]
        rows = [i for i, lab in enumerate(fam.labels) if lab[0] == crew]
        fam.b[rows] = _LIFT
        ot = m.blocks["overtime"]
        for i, lab in enumerate(ot.labels):
            if lab[0] == crew:
                ot.ub[i] = np.inf


def _resources(scn: Scenario) -> list[str]:
    out = ["cage slots", "rack slots", "diet kitchen"]
    if scn.facility.pupal_holding is not None:
        out.append("pupal holding")
    return out + [f"crew hours: {c.name}" for c in scn.crews]


def _volume(built, settings: SolveSettings) -> tuple[float, object]:
    sol = solve(built.model, settings)
    v = float(built.blocks["volume"].values(sol.x)[0]) if sol.info.has_plan else float("nan")
    return v, sol


def capacity(scn: Scenario, settings: SolveSettings | None = None,
             cycle_days: int | None = None) -> CapacityResult:
    """Largest sustainable weekly volume, the volume at which each resource binds, and
    its shadow price [million/week per extra unit on every day]."""
    import pandas as pd

    from planner.optimise import settings_for
    from planner.optimise.results import FILL_TOLERANCE

    base = settings or settings_for(scn)
    # 0.1 % (the fill tolerance): 1e-4 took 2.9 s on the demo for a volume 0.007 % apart
    s = dataclasses.replace(base.for_lp(), relative_gap=min(base.relative_gap, FILL_TOLERANCE))
    resources = _resources(scn)
    v_max, sol = _volume(max_volume_model(scn, cycle_days=cycle_days), s)
    lp = max_volume_model(scn, relax=True, cycle_days=cycle_days)
    lp_sol = solve(lp.model, s.for_lp(duals=True))
    rows = []
    for r in resources:
        others = [x for x in resources if x != r]
        v_r, _ = _volume(max_volume_model(scn, lift=others, cycle_days=cycle_days), s)
        price, unit = _shadow(lp, lp_sol, r)
        rows.append({"resource": r, "binding_volume": v_r, "shadow_price": price,
                     "shadow_unit": f"million/week per {unit}"})
    table = pd.DataFrame(rows).sort_values("binding_volume").reset_index(drop=True)
    limiting = table["resource"].iloc[0] if len(table) else None
    return CapacityResult(max_weekly_volume=v_max, status=sol.info.status, table=table,
                          limiting_resource=limiting)


def _shadow(built, sol, resource: str) -> tuple[float, str]:
    """dV/d(capacity) from the LP relaxation, summed over the cycle's days."""
    if not sol.info.has_plan:
        return float("nan"), "unit"
    units = {"cage slots": "cage slot", "rack slots": "tray slot", "diet kitchen": "kg/day",
             "pupal holding": "million pupae"}
    if resource in RESOURCE_FAMILIES:
        duals = sol.duals.get(RESOURCE_FAMILIES[resource])
        unit = units[resource]
        total = 0.0 if duals is None else float(duals.sum())
    else:
        crew = resource[len("crew hours: "):]
        fam = built.families["labour"]
        rows = [i for i, lab in enumerate(fam.labels) if lab[0] == crew]
        total = float(sol.duals["labour"][rows].sum())
        unit = "h/day"
    return total / VOLUME_WEIGHT, unit
