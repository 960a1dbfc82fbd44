"""The plan's tables as the reports show them: names with units, in a fixed order.

The plan workbook's sheets and the CSV files are written from these frames, so that the
two always agree (the tests reload both and compare them with the plan object).
"""

from __future__ import annotations

import pandas as pd

__all__ = ["DAILY_COLUMNS", "daily_table", "weekly_table", "weekly_costs", "utilisation_summary"]

#: daily.csv / 'Daily plan' columns: (column in PlanResult.daily, header, unit)
DAILY_COLUMNS = [
    ("date", "date", ""),
    ("weekday", "weekday", ""),
    ("week", "week", ""),
    ("cages_loaded", "cages_loaded", "cages"),
    ("cages_occupied", "cages_occupied", "cages"),
    ("cage_slots", "cage_slots", "slots"),
    ("cages_laying", "cages_laying", "cages"),
    ("cages_discarded", "cages_discarded", "cages"),
    ("adult_females", "adult_females", "females"),
    ("trays_seeded", "trays_seeded", "trays"),
    ("trays_occupied", "trays_occupied", "trays"),
    ("rack_slots", "rack_slots", "slots"),
    ("trays_collected", "trays_collected", "trays"),
    ("diet_kg", "diet_kg", "kg"),
    ("diet_limit_kg", "diet_limit_kg", "kg"),
    ("crew_hours", "crew_hours", "h"),
    ("crew_hours_available", "crew_hours_available", "h"),
    ("overtime_hours", "overtime_hours", "h"),
    ("eggs_collected", "eggs_collected", "eggs"),
    ("eggs_seeded", "eggs_seeded", "eggs"),
    ("eggs_discarded", "eggs_discarded", "eggs"),
    ("pupae_released", "pupae_released", "pupae"),
    ("pupae_to_colony", "pupae_to_colony", "pupae"),
    ("pupae_held_million", "pupae_held", "million pupae"),
    ("shipping_day", "shipping_day", ""),
    ("holiday", "holiday", ""),
]


def daily_table(res) -> pd.DataFrame:
    """The reported days, one row a day; per-crew columns at the end."""
    d = res.horizon_daily
    out = pd.DataFrame({name: d[col].to_numpy() for col, name, _ in DAILY_COLUMNS})
    for crew in res.data.crews:
        for prefix in ("hours", "available", "overtime"):
            out[f"{prefix}: {crew}"] = d[f"{prefix}: {crew}"].to_numpy()
    return out


def daily_units(res) -> dict[str, str]:
    units = {name: unit for _, name, unit in DAILY_COLUMNS}
    for crew in res.data.crews:
        for prefix in ("hours", "available", "overtime"):
            units[f"{prefix}: {crew}"] = "h"
    return units


def weekly_table(res) -> pd.DataFrame:
    """Week, customer, ordered, released, shortfall [million]."""
    w = res.weekly
    return pd.DataFrame({"week": w["week"], "week_start": w["week_start"],
                         "customer": w["customer"], "ordered": w["ordered"],
                         "released": w["released"], "shortfall": w["shortfall"]})


def weekly_costs(res) -> pd.DataFrame:
    """Cost by category and reported week [currency]."""
    data = res.data
    c = data.scenario.costs
    d = res.horizon_daily
    wk = d["week"].to_numpy()
    per_day = {
        "diet": c.diet_per_kg * d["diet_kg"],
        "trays": c.per_tray_seeded * d["trays_seeded"],
        "cages loaded": c.per_cage_loaded * d["cages_loaded"],
        "cage days": c.per_cage_day * d["cages_occupied"],
        "overtime": c.overtime_per_hour * d["overtime_hours"],
    }
    frame = pd.DataFrame({k: pd.Series(v.to_numpy()).groupby(wk).sum() for k, v in
                          per_day.items()})
    frame.index.name = "week"
    price = {}
    for ci, cust in enumerate(data.customers):
        for w in range(data.report_weeks):
            price[(cust, w + 1)] = data.shortfall_price[ci, w]
    frame["shortfall"] = [sum(r.shortfall * price[(r.customer, r.week)]
                              for r in res.weekly.itertuples() if r.week == w)
                          for w in frame.index]
    exp = res.costs[(res.costs["term"].str.startswith("expansion")) &
                    (res.costs["period"] == "horizon")]
    total_exp = float(exp["cost"].sum())
    if total_exp:
        # spread over the weeks from each option's ready day
        frame["expansion"] = 0.0
        for e, opt in enumerate(data.options):
            buy = res.built.blocks["buy"].values(res.solution.x)[e]
            if buy <= 0:
                continue
            ready = max(data.option_ready[e], 0)
            for w in frame.index:
                days = max(0, min(7 * w, data.report_days) - max(7 * (w - 1), ready))
                frame.loc[w, "expansion"] += opt.weekly_cost * buy * days / 7.0
    frame["regular crew"] = c.regular_crew_per_week
    frame["total"] = frame.sum(axis=1)
    return frame.reset_index()


def utilisation_summary(res) -> pd.DataFrame:
    """Per resource over the reported days: mean and peak use and the days it was full
    (a crew's day is full when it works overtime, as the bottleneck list says)."""
    from planner.optimise.results import SATURATED
    u = res.utilisation[res.utilisation["day"] < res.data.report_days]
    daily = res.horizon_daily.set_index("day")
    rows = []
    for resource, g in u.groupby("resource", sort=False):
        full = g["utilisation"].to_numpy() >= SATURATED
        if resource.startswith("crew hours: "):
            crew = resource[len("crew hours: "):]
            ot = daily[f"overtime: {crew}"].reindex(g["day"]).fillna(0.0).to_numpy()
            full = full | (ot > 1e-3)
        rows.append({"resource": resource, "unit": g["unit"].iloc[0],
                     "mean_use": float(g["used"].mean()), "peak_use": float(g["used"].max()),
                     "mean_utilisation": float(g["utilisation"].mean()),
                     "peak_utilisation": float(g["utilisation"].max()),
                     "days_full": int(full.sum()),
                     "days": int(len(g))})
    return pd.DataFrame(rows)
