"""``broodline check``: validate a scenario and size its largest week.

The report holds the colony's demography (R0, r, lambda, T; H and P at each allowed
harvest and discard age), the capacities, the calendar (shipping days, kitchen days,
holidays within the horizon, weeks with no shipping day), the order book by week, and a
first estimate from the stationary formulas (:mod:`planner.scenario.sizing`) of what the
largest week needs against what the facility has, with every short resource flagged.
The estimate counts the calendar: the eggs of a day are seeded only when the kitchen is
open, pupae ship only on shipping days, and each week with a holiday is estimated with
its own calendar. A week with orders and no shipping day is short whatever the
capacities.

:func:`add_sustainable` adds the optimiser's answer, computed by the caller (this layer
does not use the optimiser): the largest weekly volume the standard week can sustain;
orders above it flag the scenario short.
"""

from __future__ import annotations

import math

from planner.demography import single_stage_harvest
from planner.errors import DemographyError
from planner.scenario.schema import WEEKDAYS, Scenario
from planner.scenario.sizing import (CalendarDays, best_pair, capacities, crew_task_hours,
                                     horizon_weeks, stationary_needs, weekday_calendar)

__all__ = ["check_report", "add_sustainable", "SUSTAIN_TOLERANCE"]

#: Orders may exceed the sustainable volume by this share before they count as short
#: [-] (the optimiser's fill tolerance).
SUSTAIN_TOLERANCE = 1e-3
#: A need above the capacity by more than this share is short [-] (rounding only).
_NEED_TOLERANCE = 1e-9


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
    pattern = weekday_calendar(scn)
    report = {
        "scenario": scn.name,
        "colony": {"name": col.name, **demo},
        "harvest_pairs": pairs,
        "capacities": caps,
        "calendar": None,
        "orders": {"by_customer": book, "total_by_week": totals,
                   "largest_week": (max(range(weeks), key=lambda w: totals[w]) + 1)
                   if weeks else None,
                   "largest_volume": max(totals) if totals else 0.0},
        "estimate": None,
        "short": [],
        "reasons": [],
        "ok": True,
    }
    volume = report["orders"]["largest_volume"]
    n = None
    if volume > 0:
        try:
            n = best_pair(scn, volume, pattern)
        except DemographyError as exc:
            report["short"].append("calendar" if "calendar" in str(exc) else "colony")
            report["reasons"].append(str(exc))
    theta = n.harvest_age if n else max(col.rearing.harvest_ages)
    report["calendar"] = _calendar(scn, pattern, horizon_weeks(scn, weeks, theta), totals)
    if volume <= 0:
        report["notes"] = ["the order book is empty: nothing to size"]
        return report
    for w in report["calendar"]["weeks_without_shipping"]:
        item = report["calendar"]["weeks"][w - 1]
        report["short"].append(f"week {w}: no shipping day")
        hol = f" (holidays {', '.join(item['holidays'])})" if item["holidays"] else ""
        report["reasons"].append(f"no shipping day in week {w}{hol}: its "
                                 f"{totals[w - 1]:.4g} million ordered cannot be received")
    if n is None:
        report["ok"] = False
        return report
    needs = _needs(scn, n, caps, caps["kitchen_per_open_day"],
                   {c: v["regular_per_day"] for c, v in caps["crews"].items()})
    for item in needs:
        if item["short"]:
            report["short"].append(item["resource"])
            report["reasons"].append(
                f"{item['resource']}: {item['needed']:.4g} {item['unit']} needed against "
                f"{item['available']:.4g} at {volume:.4g} million/week (stationary estimate)")
    _week_shortages(scn, n, caps, report, totals, {i["resource"] for i in needs if i["short"]})
    crew_need = crew_task_hours(scn, n.task_hours)
    report["estimate"] = {
        "volume": volume, "harvest_age": n.harvest_age, "discard_age": n.discard_age,
        "harvest_fraction": n.harvest_fraction, "eggs_per_day": n.eggs,
        "eggs_laid_per_day": n.eggs_laid, "seeding_days_per_week": n.seeding_days,
        "release_days_per_week": n.release_days,
        "trays_per_day": n.trays, "trays_per_open_day": n.trays_per_open_day,
        "diet_per_day": n.diet, "diet_per_open_day": n.diet_per_open_day,
        "cages_loaded_per_day": n.cages_loaded,
        "cages_occupied": n.cage_occupancy, "laying_cages": n.laying_cages,
        "pupae_released_per_day": n.released, "pupae_to_colony_per_day": n.to_colony,
        "crew_hours_per_day": crew_need, "cost_per_week": n.cost_per_week,
        "currency": scn.costs.currency, "needs": needs,
    }
    report["ok"] = not report["short"]
    return report


def _needs(scn: Scenario, n, caps: dict, kitchen_per_open_day: float,
           crew_hours: dict[str, float]) -> list[dict]:
    """Needs of the stationary estimate ``n`` against the capacities: the diet on each
    open kitchen day against ``kitchen_per_open_day`` [kg/day], the crews' mean hours
    against ``crew_hours`` [h/day]."""
    crew_need = crew_task_hours(scn, n.task_hours)
    rows = [
        ("cage slots", n.cage_occupancy, caps["cage_slots"], "cages"),
        ("rack slots", n.rack_occupancy, caps["rack_slots"], "trays"),
        ("diet kitchen", n.diet_per_open_day, kitchen_per_open_day, "kg per open day"),
    ]
    if caps["pupal_holding"] is not None:
        rows.append(("pupal holding", n.pupal_holding, caps["pupal_holding"], "million pupae"))
    for name, need in crew_need.items():
        rows.append((f"crew hours: {name}", need, crew_hours[name], "h/day"))
    out = []
    for name, need, have, unit in rows:
        short = need > have * (1 + _NEED_TOLERANCE)
        item = {"resource": name, "needed": need, "available": have, "unit": unit,
                "utilisation": need / have if have > 0 else math.inf, "short": short}
        if name.startswith("crew hours: "):
            crew = caps["crews"][name[len("crew hours: "):]]
            with_ot = have + crew["overtime_limit"]
            item["available_with_overtime"] = with_ot
            item["short_even_with_overtime"] = need > with_ot * (1 + _NEED_TOLERANCE)
        out.append(item)
    return out


def _week_shortages(scn: Scenario, n, caps: dict, report: dict, totals: list[float],
                    known: set[str]) -> None:
    """Each week with orders estimated with its own calendar (holidays included) at the
    largest week's harvest and discard ages; resources short in a week that the
    largest-week estimate does not already flag are added as ``week W: resource``."""
    cache: dict = {}
    for item in report["calendar"]["weeks"]:
        w, v = item["week"], totals[item["week"] - 1]
        item["short"] = []
        if v <= 0 or not item["shipping_days"]:
            continue
        cal = CalendarDays(item["seeding_days"], min(item["release_days"], 7))
        key = (cal, v)
        if key not in cache:
            try:
                cache[key] = stationary_needs(scn, v, n.harvest_age, n.discard_age, cal)
            except DemographyError as exc:
                cache[key] = str(exc)
        need = cache[key]
        if isinstance(need, str):
            item["short"].append("calendar")
            report["short"].append(f"week {w}: calendar")
            report["reasons"].append(f"week {w}: {need}")
            continue
        for row in _needs(scn, need, caps, item["kitchen_per_open_day"], item["crew_hours"]):
            if row["short"] and row["resource"] not in known:
                item["short"].append(row["resource"])
                report["short"].append(f"week {w}: {row['resource']}")
                hol = (f" (holidays {', '.join(item['holidays'])})" if item["holidays"]
                       else "")
                report["reasons"].append(
                    f"week {w}{hol}: {row['resource']} {row['needed']:.4g} {row['unit']} "
                    f"needed against {row['available']:.4g} with this week's calendar")


def _calendar(scn: Scenario, pattern: CalendarDays, weeks: list[dict],
              totals: list[float]) -> dict:
    """The calendar section: shipping days, kitchen days, holidays within the horizon,
    weeks with no shipping day, and each week's calendar."""
    cal = scn.calendar
    kitchen = dict(zip(WEEKDAYS, scn.kitchen.diet_kg.as_list()))
    n_days = 7 * len(weeks)
    inside, outside = [], 0
    for d in sorted(set(cal.holidays)):
        t = (d - cal.start).days
        if not 0 <= t < n_days:
            outside += 1
            continue
        wd = WEEKDAYS[d.weekday()]
        kg = scn.kitchen.holiday_kg if scn.kitchen.holiday_kg is not None else kitchen["sun"]
        inside.append({"date": d.isoformat(), "weekday": wd, "week": t // 7 + 1,
                       "kitchen_kg": kg, "kitchen_shut": kg <= 0 < kitchen[wd],
                       "shipping_day_lost": wd in cal.shipping_days and not cal.ship_on_holidays})
    for item, v in zip(weeks, totals):
        item["ordered"] = v
    return {
        "shipping_days": list(cal.shipping_days),
        "ship_on_holidays": cal.ship_on_holidays,
        "kitchen_days": [d for d in WEEKDAYS if kitchen[d] > 0],
        "kitchen_shut": [d for d in WEEKDAYS if kitchen[d] <= 0],
        "holidays": inside,
        "holidays_outside_horizon": outside,
        "weeks_without_shipping": [i["week"] for i, v in zip(weeks, totals)
                                   if v > 0 and not i["shipping_days"]],
        "seeding_days_per_week": pattern.seeding_days,
        "release_days_per_week": pattern.release_days,
        "weeks": weeks,
    }


def add_sustainable(report: dict, volume: float | None, status: str,
                    **info) -> dict:
    """Add the optimiser's sustainable volume to a check report and flag the scenario
    short when the largest week's order exceeds it by more than
    :data:`SUSTAIN_TOLERANCE`.

    Parameters
    ----------
    report : dict
        From :func:`check_report` (changed in place and returned).
    volume : float or None
        The largest constant weekly volume of the standard week [million/week] (None
        when the solver found none).
    status : str
        The solver's status.
    **info
        Kept in the report as they are (e.g. ``solver``, ``seconds`` [s], ``method``).
    """
    largest = report["orders"]["largest_volume"]
    week = report["orders"]["largest_week"]
    entry = {"volume": volume, "status": status, **info, "largest_volume": largest,
             "largest_week": week, "short": False}
    if volume is None or status != "optimal":
        report.setdefault("notes", []).append(
            f"the sustainable volume could not be computed (solver status: {status})")
    elif largest > volume * (1 + SUSTAIN_TOLERANCE):
        entry["short"] = True
        report["short"].append("sustainable volume")
        report["reasons"].insert(0, (
            f"orders exceed what the facility can sustain: {largest:.4g} million/week "
            f"ordered in week {week} against {volume:.4g} million/week"))
        report["ok"] = False
    report["sustainable"] = entry
    return report
