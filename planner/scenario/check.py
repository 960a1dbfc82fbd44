"""``broodline check``: validate a scenario and size its largest week.

The report holds the colony's demography (R0, r, lambda, T; H and P at each allowed
harvest and discard age), the capacities, the order book by week, and a first estimate
from the stationary formulas (:mod:`planner.scenario.sizing`) of what the largest week
needs against what the facility has, with every short resource flagged.
"""

from __future__ import annotations

import math

from planner.demography import single_stage_harvest
from planner.errors import DemographyError
from planner.scenario.schema import Scenario
from planner.scenario.sizing import best_pair, capacities, crew_task_hours

__all__ = ["check_report"]


def check_report(scn: Scenario) -> dict:
    """The check summary as a JSON-ready dict (units in the key names' docs, README)."""
    col = scn.colony
    lt = col.to_life_table()
    demo = lt.summary()
    pairs = []
    for theta in col.rearing.harvest_ages:
        for delta in col.rearing.discard_ages:
            try:
                r = single_stage_harvest(lt, theta, delta, col.stages.emergence_age)
                pairs.append({"harvest_age": theta, "discard_age": delta,
                              "net_reproductive_rate": r.net_reproductive_rate,
                              "harvest_fraction": r.harvest_fraction,
                              "output_per_female": r.output_per_female,
                              "pupae_per_female": r.insects_per_female or
                              r.output_per_female / col.female_fraction})
            except DemographyError as exc:
                pairs.append({"harvest_age": theta, "discard_age": delta,
                              "net_reproductive_rate": lt.net_reproductive_rate(delta),
                              "harvest_fraction": None, "output_per_female": None,
                              "pupae_per_female": None, "problem": str(exc)})
    weeks = scn.plan.horizon_weeks
    book = scn.weekly_orders(weeks)
    totals = [sum(v[w] for v in book.values()) for w in range(weeks)]
    caps = capacities(scn)
    report = {
        "scenario": scn.name,
        "colony": {"name": col.name, **demo},
        "harvest_pairs": pairs,
        "capacities": caps,
        "orders": {"by_customer": book, "total_by_week": totals,
                   "largest_week": (max(range(weeks), key=lambda w: totals[w]) + 1)
                   if weeks else None,
                   "largest_volume": max(totals) if totals else 0.0},
        "estimate": None,
        "short": [],
        "ok": True,
    }
    volume = report["orders"]["largest_volume"]
    if volume <= 0:
        report["notes"] = ["the order book is empty: nothing to size"]
        return report
    n = best_pair(scn, volume)
    crew_need = crew_task_hours(scn, n.task_hours)
    rows = [
        ("cage slots", n.cage_occupancy, caps["cage_slots"], "cages"),
        ("rack slots", n.rack_occupancy, caps["rack_slots"], "trays"),
        ("diet kitchen", n.diet, caps["kitchen_per_day"], "kg/day"),
    ]
    if caps["pupal_holding"] is not None:
        rows.append(("pupal holding", n.pupal_holding, caps["pupal_holding"], "million pupae"))
    for name, need in crew_need.items():
        rows.append((f"crew hours: {name}", need, caps["crews"][name]["regular_per_day"],
                     "h/day"))
    needs = []
    for name, need, have, unit in rows:
        short = need > have * (1 + 1e-9)
        item = {"resource": name, "needed": need, "available": have, "unit": unit,
                "utilisation": need / have if have > 0 else math.inf, "short": short}
        if name.startswith("crew hours: "):
            crew = caps["crews"][name[len("crew hours: "):]]
            item["available_with_overtime"] = crew["with_overtime_per_day"]
            item["short_even_with_overtime"] = need > crew["with_overtime_per_day"] * (1 + 1e-9)
        needs.append(item)
        if short:
            report["short"].append(name)
    report["estimate"] = {
        "volume": volume, "harvest_age": n.harvest_age, "discard_age": n.discard_age,
        "harvest_fraction": n.harvest_fraction, "eggs_per_day": n.eggs,
        "trays_per_day": n.trays, "diet_per_day": n.diet, "cages_loaded_per_day": n.cages_loaded,
        "cages_occupied": n.cage_occupancy, "laying_cages": n.laying_cages,
        "pupae_released_per_day": n.released, "pupae_to_colony_per_day": n.to_colony,
        "crew_hours_per_day": crew_need, "cost_per_week": n.cost_per_week,
        "currency": scn.costs.currency, "needs": needs,
    }
    report["ok"] = not report["short"]
    return report
