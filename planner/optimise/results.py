"""Reading a solved plan back into tables: daily flows, weekly deliveries, batches,
labour, utilisation, costs, shadow prices, bottlenecks and the shortfall diagnosis.

Everything here is computed from the plan's decisions (cages loaded, trays seeded,
pupae released and returned to the colony, overtime) and the data, with numpy
convolutions over the days (start batches are loads on negative days).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from planner.optimise.build import PUPAE_UNIT, BuiltModel
from planner.optimise.data import PlanData
from planner.optimise.solve import Solution, SolveInfo
from planner.scenario.schema import WEEKDAYS

__all__ = ["PlanResult", "read_back", "operating_cost", "TASK_ORDER"]

#: Order in which a crew works through its tasks in a day.
TASK_ORDER = ["diet_mixing", "egg_collection", "seeding", "larval_collection",
              "harvest_packing", "cage_loading", "cage_discard", "cage_care"]

SATURATED = 0.995  #: utilisation at or above which a resource counts as full [-]
#: A shortfall below this share of the ordered volume is no shortfall [-]: pupae counts
#: are estimates far coarser than this.
FILL_TOLERANCE = 1e-3


@dataclass
class PlanResult:
    """A solved plan as tables. Money is in the scenario's currency."""

    data: PlanData
    built: BuiltModel
    solution: Solution
    daily: pd.DataFrame
    weekly: pd.DataFrame
    cage_batches: pd.DataFrame
    tray_batches: pd.DataFrame
    harvests: pd.DataFrame
    labour: pd.DataFrame
    utilisation: pd.DataFrame
    shadow_prices: pd.DataFrame
    costs: pd.DataFrame
    weekly_lookahead: pd.DataFrame = field(default_factory=pd.DataFrame)
    shortfalls: list[dict] = field(default_factory=list)
    bottlenecks: list[str] = field(default_factory=list)

    @property
    def info(self) -> SolveInfo:
        return self.solution.info

    @property
    def scenario(self):
        return self.data.scenario

    @property
    def horizon_daily(self) -> pd.DataFrame:
        return self.daily[self.daily["in_horizon"]]

    def total_cost(self) -> float:
        """Variable cost plus the fixed regular crew over the reported weeks, without the
        shortfall price (a price, not a cost) [currency]."""
        c = self.costs
        return float(c.loc[(c["period"] == "horizon") & (c["term"] != "shortfall"),
                           "cost"].sum())

    def variable_cost(self) -> float:
        """What the plan controls over the reported weeks: diet, trays, cages, cage days,
        overtime, bought options; without the fixed crew and the shortfall price
        [currency]."""
        c = self.costs
        keep = (c["period"] == "horizon") & ~c["term"].isin(["shortfall", "regular crew"])
        return float(c.loc[keep, "cost"].sum())

    def shortfall_cost(self) -> float:
        """The shortfall price of the reported weeks' unmet orders [currency]."""
        c = self.costs
        return float(c.loc[(c["period"] == "horizon") & (c["term"] == "shortfall"),
                           "cost"].sum())

    def released_million(self) -> float:
        """Product delivered over the reported weeks [million]."""
        return float(self.weekly["released"].sum())

    def customer_table(self) -> list[dict]:
        """Per customer over the reported weeks: priority class, ordered, released and
        shortfall [million]."""
        data, w = self.data, self.weekly
        out = []
        for i, c in enumerate(data.customers):
            sel = w["customer"] == c
            out.append({"customer": c, "priority": int(data.priority[i]),
                        "booked": bool(data.booked[i]),
                        "ordered": float(w.loc[sel, "ordered"].sum()),
                        "released": float(w.loc[sel, "released"].sum()),
                        "shortfall": float(w.loc[sel, "shortfall"].sum())})
        return out

    def booked_shortfall(self) -> float:
        """Shortfall of the book's own orders over the reported weeks, never of a quote
        or a growth target [million]."""
        booked = {c for c, b in zip(self.data.customers, self.data.booked) if b}
        w = self.weekly
        return float(w.loc[w["customer"].isin(booked), "shortfall"].sum())

    def summary(self) -> dict:
        """Headline figures (the `--json` summary of `broodline plan`)."""
        info = self.info
        released = self.released_million()
        total = self.total_cost()
        weeks = (self.weekly.groupby("week", as_index=False)[["ordered", "released", "shortfall"]]
                 .sum().to_dict(orient="records"))
        return {
            "status": info.status, "time_limited": info.time_limited,
            "message": info.message, "solver": info.solver,
            "objective": info.objective, "best_bound": info.best_bound, "gap": info.gap,
            "solve_seconds": info.seconds,
            "total_cost": total, "variable_cost": self.variable_cost(),
            "shortfall_cost": self.shortfall_cost(),
            "cost_per_million": total / released if released > 0 else None,
            "currency": self.scenario.costs.currency,
            "released_million": released, "ordered_million": float(self.weekly["ordered"].sum()),
            "shortfall_million": float(self.weekly["shortfall"].sum()),
            "weeks": weeks, "bottlenecks": self.bottlenecks, "shortfalls": self.shortfalls,
            "booked_shortfall_million": self.booked_shortfall(),
            "customers": self.customer_table(),
            "discard_ages_used": sorted(int(a) for a in self.cage_batches.loc[
                self.cage_batches["source"] == "plan", "discard_age"].unique()),
            "harvest_ages_used": sorted(int(a) for a in self.harvests.loc[
                self.harvests["kind"] == "release", "age"].unique()),
        }


# -- day arithmetic on an extended axis --------------------------------------------------

class _Axis:
    """Days ``t0 .. n-1`` (negative days hold the start batches), or the cycle."""

    def __init__(self, data: PlanData, t0: int):
        self.data = data
        self.cycle = data.mode == "cycle"
        self.t0 = 0 if self.cycle else min(t0, 0)
        self.n = data.n_days
        self.size = self.n - self.t0

    def array(self) -> np.ndarray:
        return np.zeros(self.size)

    def put(self, arr, day, value):
        day = np.asarray(day)
        np.add.at(arr, day % self.n if self.cycle else day - self.t0, value)

    def conv(self, loads: np.ndarray, coef: np.ndarray, shift: int = 0) -> np.ndarray:
        """``out[t] = sum_j coef[j] loads[t - j - shift]``, on the modelled days."""
        coef = np.concatenate([np.zeros(shift), np.asarray(coef, float)]) if shift else \
            np.asarray(coef, float)
        full = np.convolve(loads, coef)
        if self.cycle:
            out = np.zeros(self.n)
            np.add.at(out, np.arange(full.size) % self.n, full)
            return out
        return full[-self.t0: -self.t0 + self.n]


def read_back(built: BuiltModel, sol: Solution) -> PlanResult:
    """Turn a solution into a :class:`PlanResult`."""
    data = built.data
    scn = data.scenario
    x = sol.x
    b = built.blocks
    n = data.n_days
    deltas = data.discard_ages
    lab = scn.labour
    cages = b["cages"].values(x).reshape(n, len(deltas))
    trays = b["trays"].values(x)
    buy = b["buy"].values(x)
    start_days = [s for s, _, _ in data.start.cages] + [s for s, _ in data.start.trays]
    axis = _Axis(data, min(start_days + [int(built.constants["cohorts"].min())]))
    all_deltas = sorted(set(deltas) | {d for _, _, d in data.start.cages})
    ld = b["load"]
    load_x = ld.values(x).reshape(-1, len(deltas)) * PUPAE_UNIT  # pupae [cohort, delta]
    col_d = np.array(sorted({d for d, _ in ld.labels}), np.int64)
    loads = {d: axis.array() for d in all_deltas}     # cages loaded by day
    pupae_in = {d: axis.array() for d in all_deltas}  # pupae loaded by day
    for j, d in enumerate(deltas):
        loads[d][-axis.t0: -axis.t0 + n] += cages[:, j]
        axis.put(pupae_in[d], col_d + data.theta_c, load_x[:, j])
    for s, c, d in data.start.cages:
        axis.put(loads[d], s, c)
        axis.put(pupae_in[d], s, c * data.k)
    tray_ext = axis.array()
    tray_ext[-axis.t0: -axis.t0 + n] += trays
    for s, c in data.start.trays:
        axis.put(tray_ext, s, c)

    occupied = sum(axis.conv(loads[d], np.ones(data.span(d))) for d in all_deltas)
    laying = sum(axis.conv(loads[d], data.laying(d)) for d in all_deltas)
    eggs_laid = sum(axis.conv(pupae_in[d], data.egg_coef(d) / data.k) for d in all_deltas)
    females = sum(axis.conv(pupae_in[d], data.females_coef(d) / data.k) for d in all_deltas)
    discarded = sum(axis.conv(loads[d], [1.0], data.span(d) - 1) for d in all_deltas)
    in_racks = axis.conv(tray_ext, np.ones(data.rack_days))
    collected = axis.conv(tray_ext, [1.0], data.rack_days)
    loaded = cages.sum(axis=1)

    rel = b["release"]
    rel_x = rel.values(x) * PUPAE_UNIT  # [pupae]
    rel_d = np.array([d for d, _ in rel.labels], np.int64)
    rel_a = np.array([a for _, a in rel.labels], np.int64)
    hday, hok = data.rows(rel_d + rel_a)
    released = np.zeros(n)
    np.add.at(released, hday[hok], rel_x[hok])
    col_x = load_x.sum(axis=1)  # pupae to the colony by laying day
    to_colony = np.zeros(n)
    lrows, lok = data.rows(col_d + data.theta_c)
    np.add.at(to_colony, lrows[lok], col_x[lok])

    # pupae in holding [million]: each cohort's pupae from larval collection until taken
    a_lc, tmax = data.larval_collection_age, max(data.take_ages)
    coef = np.zeros(tmax - data.seed_lag)
    ages = np.arange(a_lc, tmax)
    coef[ages - data.seed_lag] = data.rho * data.lx[ages]
    held = axis.conv(tray_ext, coef / 1e6)
    for taken, ages_from in [(theta, theta) for theta in data.harvest_ages] + [(None, data.theta_c)]:
        ext = axis.array()
        if taken is None:
            axis.put(ext, col_d, col_x)
        else:
            sel = rel_a == taken
            axis.put(ext, rel_d[sel], rel_x[sel])
        coef = np.zeros(tmax)
        later = np.arange(ages_from, tmax)
        coef[later] = data.lx[later] / data.lx[ages_from]
        held -= axis.conv(ext, coef / 1e6)

    # capacities including what the plan bought
    def cap(attr, base):
        adds = data.option_adds(attr)
        return base + (adds.T @ buy if adds.size else 0.0)

    cage_cap = cap("cage_slots", data.cage_slots)
    rack_cap = cap("rack_slots", data.rack_slots)
    diet_cap = cap("diet_kg", data.kitchen)
    crew_cap = data.crew_hours.copy()
    adds = data.option_adds("crew_hours")
    for e, opt in enumerate(data.options):
        if opt.crew_hours is not None:
            crew_cap[data.crews.index(opt.crew) if opt.crew else 0] += adds[e] * buy[e]
    overtime = b["overtime"].values(x).reshape(len(data.crews), n)

    task_hours = {
        "diet_mixing": lab.diet_mixing * data.diet_per_tray * trays,
        "egg_collection": lab.egg_collection * laying,
        "seeding": lab.seeding * trays,
        "larval_collection": lab.larval_collection * collected,
        "harvest_packing": (lab.harvest_packing * released
                            + lab.colony_harvest_rate * to_colony) / 1e6,
        "cage_loading": lab.cage_loading * loaded,
        "cage_care": lab.cage_care * occupied,
        "cage_discard": lab.cage_discard * discarded,
    }
    eggs_seeded = data.rho * trays
    eggs_used = np.zeros(n)  # eggs of laying day t that were seeded (day t + L)
    seed_rows, seed_ok = data.rows(np.arange(n) + data.seed_lag)
    eggs_used[seed_ok] = eggs_seeded[seed_rows[seed_ok]]

    days = np.arange(n)
    date_col = [data.date(t) if data.mode == "horizon" else None for t in days]
    daily = pd.DataFrame({
        "day": days, "date": date_col, "label": [data.day_label(t) for t in days],
        "weekday": [("Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun")[w] for w in data.weekday],
        "week": days // 7 + 1, "in_horizon": days < data.report_days,
        "holiday": data.holiday, "shipping_day": data.can_ship,
        "cages_loaded": loaded, "cages_occupied": occupied, "cage_slots": cage_cap,
        "cages_laying": laying, "cages_discarded": discarded, "adult_females": females,
        "trays_seeded": trays, "trays_occupied": in_racks, "rack_slots": rack_cap,
        "trays_collected": collected,
        "diet_kg": data.diet_per_tray * trays, "diet_limit_kg": diet_cap,
        "eggs_collected": eggs_laid, "eggs_seeded": eggs_seeded,
        "eggs_discarded": np.maximum(eggs_laid - eggs_used, 0.0),
        "pupae_released": released, "pupae_to_colony": to_colony,
        "pupae_held_million": held,
        "crew_hours": sum(task_hours.values()),
        "crew_hours_available": crew_cap.sum(axis=0),
        "overtime_hours": overtime.sum(axis=0),
    })
    for ci, crew in enumerate(data.crews):
        tasks = [t for t, c in data.task_crew.items() if c == ci]
        daily[f"hours: {crew}"] = sum(task_hours[t] for t in tasks) if tasks else 0.0
        daily[f"available: {crew}"] = crew_cap[ci]
        daily[f"overtime: {crew}"] = overtime[ci]
    labour = pd.DataFrame([
        {"day": int(t), "label": data.day_label(t), "crew": data.crews[data.task_crew[task]],
         "task": task, "hours": float(task_hours[task][t])}
        for task in TASK_ORDER for t in days if task_hours[task][t] > 1e-9])

    weekly, weekly_lookahead = _weekly(data, built, x)
    cage_batches = _cage_batches(data, cages, load_x, col_d)
    tray_batches = _tray_batches(data, trays)
    harvests = _harvests(data, rel, rel_x, col_d, col_x)
    util = _utilisation(data, daily, overtime)
    shadow = _shadow_prices(data, built, sol)
    costs = _costs(data, daily, built, x, buy)
    result = PlanResult(data=data, built=built, solution=sol, daily=daily, weekly=weekly,
                        weekly_lookahead=weekly_lookahead,
                        cage_batches=cage_batches, tray_batches=tray_batches,
                        harvests=harvests, labour=labour, utilisation=util,
                        shadow_prices=shadow, costs=costs)
    result.shortfalls = diagnose_shortfalls(result)
    result.bottlenecks = describe_bottlenecks(result)
    return result


def _weekly(data, built, x) -> pd.DataFrame:
    ship = built.blocks["ship"]
    short = built.blocks["shortfall"]
    cells = built.constants["order_cells"]
    asked = built.asked(x)
    rows = []
    for i, (c, w) in enumerate(cells):
        rows.append({"week": w + 1, "customer": data.customers[c],
                     "week_start": data.date(7 * w) if data.mode == "horizon" else None,
                     "ordered": float(asked[i]),
                     "released": float(ship.values(x)[i]),
                     "shortfall": float(short.values(x)[i]),
                     "lookahead": w >= data.report_weeks})
    df = pd.DataFrame(rows, columns=["week", "customer", "week_start", "ordered", "released",
                                     "shortfall", "lookahead"])
    # a customer gets no more than ordered; report the shortfall as ordered - shipped
    df["released"] = np.minimum(df["released"], df["ordered"])
    df["shortfall"] = np.maximum(df["ordered"] - df["released"], 0.0)
    df.loc[df["shortfall"] < 1e-9, "shortfall"] = 0.0
    df = df[df["ordered"] > 1e-12]  # weeks a chosen start leaves out
    # bool, not object: an empty book gives an empty object column, which pandas would
    # read as a list of column names
    look = df["lookahead"].astype(bool).to_numpy()
    df = df.drop(columns="lookahead")
    return df[~look].reset_index(drop=True), df[look].reset_index(drop=True)


def _cage_batches(data, cages, load_x, col_d) -> pd.DataFrame:
    """One row per batch: cages of one discard age loaded on one day, with the pupae put
    in them."""
    pupae = {(int(d) + data.theta_c if data.mode == "horizon" else
              (int(d) + data.theta_c) % data.n_days, dl): load_x[i, j]
             for i, d in enumerate(col_d) for j, dl in enumerate(data.discard_ages)}
    rows = []
    for s, c, d in data.start.cages:
        rows.append(("start", s, c, d, float(c * data.k)))
    for t in range(data.n_days):
        for j, d in enumerate(data.discard_ages):
            if cages[t, j] > 0.5:
                rows.append(("plan", t, int(round(cages[t, j])), d, float(pupae.get((t, d), 0.0))))
    rows.sort(key=lambda r: (r[1], r[3]))
    out = []
    for i, (src, s, c, d, p) in enumerate(rows):
        last = s + data.span(d) - 1
        out.append({"batch": f"C{i + 1:03d}", "source": src, "load_day": s,
                    "load_date": data.date(s), "count": c, "discard_age": d,
                    "discard_day": last, "discard_date": data.date(last), "pupae": p,
                    "pupae_per_cage": p / c if c else 0.0,
                    "laying_date": data.date(s - data.theta_c),
                    "label": data.day_label(s) if data.mode == "cycle" else None})
    return pd.DataFrame(out, columns=["batch", "source", "load_day", "load_date", "count",
                                      "discard_age", "discard_day", "discard_date", "pupae",
                                      "pupae_per_cage", "laying_date", "label"])


def _tray_batches(data, trays) -> pd.DataFrame:
    rows = [("start", s, c) for s, c in data.start.trays]
    rows += [("plan", t, int(round(trays[t]))) for t in range(data.n_days) if trays[t] > 0.5]
    rows.sort(key=lambda r: r[1])
    return pd.DataFrame([{"source": src, "seed_day": s, "seed_date": data.date(s), "count": c,
                          "laying_day": s - data.seed_lag,
                          "laying_date": data.date(s - data.seed_lag),
                          "collection_day": s + data.rack_days,
                          "collection_date": data.date(s + data.rack_days)}
                         for src, s, c in rows],
                        columns=["source", "seed_day", "seed_date", "count", "laying_day",
                                 "laying_date", "collection_day", "collection_date"])


def _harvests(data, rel, rel_x, col_d, col_x) -> pd.DataFrame:
    rows = []
    for (d, a), v in zip(rel.labels, rel_x):
        if v > 1e-6:
            rows.append({"laying_day": d, "laying_date": data.date(d), "age": a,
                         "harvest_day": d + a, "harvest_date": data.date(d + a),
                         "kind": "release", "pupae": float(v)})
    for d, v in zip(col_d, col_x):
        if v > 1e-6:
            rows.append({"laying_day": int(d), "laying_date": data.date(d), "age": data.theta_c,
                         "harvest_day": int(d) + data.theta_c,
                         "harvest_date": data.date(int(d) + data.theta_c), "kind": "colony",
                         "pupae": float(v)})
    return pd.DataFrame(rows, columns=["laying_day", "laying_date", "age", "harvest_day",
                                       "harvest_date", "kind", "pupae"])


def _utilisation(data, daily, overtime) -> pd.DataFrame:
    rows = []

    def add(resource, used, available, unit):
        with np.errstate(divide="ignore", invalid="ignore"):
            u = np.where(available > 0, used / np.where(available > 0, available, 1.0),
                         np.where(used > 0, np.inf, 0.0))
        for t in range(data.n_days):
            rows.append((t, resource, float(used[t]), float(available[t]), float(u[t]), unit))

    add("cage slots", daily["cages_occupied"].to_numpy(), daily["cage_slots"].to_numpy(), "cages")
    add("rack slots", daily["trays_occupied"].to_numpy(), daily["rack_slots"].to_numpy(), "trays")
    add("diet kitchen", daily["diet_kg"].to_numpy(), daily["diet_limit_kg"].to_numpy(), "kg")
    if data.pupal_cap is not None:
        add("pupal holding", daily["pupae_held_million"].to_numpy(),
            np.full(data.n_days, data.pupal_cap), "million pupae")
    for ci, crew in enumerate(data.crews):
        add(f"crew hours: {crew}", daily[f"hours: {crew}"].to_numpy(),
            daily[f"available: {crew}"].to_numpy() + data.overtime_limit[ci], "h")
    return pd.DataFrame(rows, columns=["day", "resource", "used", "available", "utilisation",
                                       "unit"])


_RESOURCE_OF = {"cage_slots": ("cage slots", "cage slot-days"),
                "racks": ("rack slots", "tray slot-days"),
                "diet": ("diet kitchen", "kg"), "pupal_holding": ("pupal holding",
                                                                  "million pupae-days"),
                "eggs": ("eggs", "eggs")}


def _shadow_prices(data, built, sol) -> pd.DataFrame:
    """Value of one more unit of each resource on every day of a week, summed over the
    week [currency per unit]: ``value`` from the LP with the integers fixed at the plan,
    ``relaxed_value`` from the LP relaxation (cages and trays fractional)."""
    frames = []
    for column, duals_by_family in (("value", sol.duals), ("relaxed_value", sol.relaxed_duals)):
        rows = []
        for fam_name, duals in duals_by_family.items():
            fam = built.families[fam_name]
            if fam_name in _RESOURCE_OF:
                resource, unit = _RESOURCE_OF[fam_name]
                rows += [(i // 7 + 1, resource, unit, float(duals[i])) for i in range(fam.size)]
            elif fam_name == "labour":
                n = data.n_days
                rows += [((i % n) // 7 + 1, f"crew hours: {data.crews[i // n]}", "h",
                          float(duals[i])) for i in range(fam.size)]
        df = pd.DataFrame(rows, columns=["week", "resource", "unit", column])
        frames.append(df.groupby(["week", "resource", "unit"], as_index=False)[column].sum())
    df = frames[0].merge(frames[1], on=["week", "resource", "unit"], how="outer")
    for column in ("value", "relaxed_value"):
        df[column] = df[column].fillna(0.0)
        df[column] = df[column].where(df[column].abs() > 1e-9, 0.0)
    return df[df["week"] <= data.report_weeks].reset_index(drop=True)


def _costs(data, daily, built, x, buy) -> pd.DataFrame:
    c = data.scenario.costs
    period = np.where(daily["in_horizon"], "horizon", "lookahead")
    per_day = {
        "diet": c.diet_per_kg * daily["diet_kg"].to_numpy(),
        "trays": c.per_tray_seeded * daily["trays_seeded"].to_numpy(),
        "cages": c.per_cage_loaded * daily["cages_loaded"].to_numpy(),
        "cage days": c.per_cage_day * daily["cages_occupied"].to_numpy(),
        "overtime": c.overtime_per_hour * daily["overtime_hours"].to_numpy(),
    }
    rows = []
    for term, arr in per_day.items():
        for p in ("horizon", "lookahead"):
            rows.append({"term": term, "period": p, "cost": float(arr[period == p].sum())})
    short = built.blocks["shortfall"].values(x)
    cells = built.constants["order_cells"]
    for p, test in (("horizon", lambda w: w < data.report_weeks),
                    ("lookahead", lambda w: w >= data.report_weeks)):
        rows.append({"term": "shortfall", "period": p, "cost": float(sum(
            data.shortfall_price[ci, w] * short[i] for i, (ci, w) in enumerate(cells) if test(w)))})
    for e, opt in enumerate(data.options):
        ready = max(data.option_ready[e], 0)
        for p, lo, hi in (("horizon", 0, data.report_days), ("lookahead", data.report_days,
                                                              data.n_days)):
            days_ready = max(0, hi - max(lo, ready))
            rows.append({"term": f"expansion: {opt.name}", "period": p,
                         "cost": float(opt.weekly_cost * buy[e] * days_ready / 7.0)})
    rows.append({"term": "regular crew", "period": "horizon",
                 "cost": c.regular_crew_per_week * data.report_days / 7.0})
    df = pd.DataFrame(rows)
    df["currency"] = c.currency
    return df


def _date_text(data, t: int) -> str:
    return data.day_label(t)


def _calendar_losses(data, w0: int, lo: int) -> dict:
    """What the calendar takes from the plan week starting on day ``w0`` [day]: its
    shipping days and the holidays among its days, and the kitchen's shut days among the
    seeding days that feed it (from ``lo`` [day], the first day that feeds the week)."""
    n = data.n_days
    week = np.arange(w0, min(w0 + 7, n))
    ship = [int(t) for t in week if data.can_ship[t]]
    holidays = [int(t) for t in week if data.holiday[t]]
    # shipping days that a usual week has and a holiday takes away
    ship_days = {WEEKDAYS.index(d) for d in data.scenario.calendar.shipping_days}
    ship_lost = [t for t in holidays if data.weekday[t] in ship_days and not data.can_ship[t]]
    # the seeding days whose cohorts ship in the week: t - L + theta in the week
    s_lo = max(w0 + data.seed_lag - max(data.harvest_ages), lo, 0)
    s_hi = min(w0 + 6 + data.seed_lag - min(data.harvest_ages), n - 1)
    seeding = np.arange(s_lo, s_hi + 1)
    cap = data.kitchen + (data.option_adds("diet_kg").sum(axis=0) if data.options else 0.0)
    shut = [int(t) for t in seeding if cap[t] <= 0]
    usual = np.array(data.scenario.kitchen.diet_kg.as_list(), float)
    shut_holidays = [t for t in shut if data.holiday[t] and usual[data.weekday[t]] > 0]
    return {"shipping_days": ship, "holidays": holidays, "shipping_days_lost": ship_lost,
            "feeding_days": int(seeding.size), "kitchen_shut": shut,
            "kitchen_shut_holidays": shut_holidays}


def diagnose_shortfalls(res: PlanResult) -> list[dict]:
    """Which weeks and customers are short, by how much, and why.

    A shortfall below :data:`FILL_TOLERANCE` of the ordered volume is no shortfall (pupae
    counts are estimates far coarser) and is not listed. Each listed shortfall has a
    ``cause``:

    - ``"calendar"``: the week has no shipping day; or holidays took shipping days from
      the week or shut the kitchen on days that feed it, and the customer's weeks
      without such holidays are short by less than half as much (relative to the
      order);
    - ``"capacity"``: some resource was full in the days that feed the week (from the
      seeding of the first cohort that could ship that week to the week's end); a day
      whose capacity is 0 (the kitchen shut, a crew off) is never "full": the kitchen's
      shut days are a calendar note;
    - ``"eggs"``: no resource was full, but every egg laid was seeded;
    - ``"lead time"``: nothing was full: the start state or the egg-to-harvest lead time
      limits the week.
    """
    data = res.data
    out = []
    util = res.utilisation
    daily = res.daily
    lead = max(data.harvest_ages) - data.seed_lag
    rows = [row for row in res.weekly.itertuples()
            if row.shortfall > max(FILL_TOLERANCE * row.ordered, 1e-9)]
    losses = {}
    for row in res.weekly.drop_duplicates("week").itertuples():
        w0 = 7 * (row.week - 1)
        losses[row.week] = _calendar_losses(data, w0, max(w0 - lead, 0))

    def lost(week: int) -> bool:
        c = losses[week]
        return (not c["shipping_days"] or bool(c["shipping_days_lost"])
                or bool(c["kitchen_shut_holidays"]))

    window: dict[int, tuple] = {}   # week: facts of the days that feed it (any customer)
    usual: dict[str, float | None] = {}

    for row in rows:
        w0 = 7 * (row.week - 1)
        lo, hi = max(w0 - lead, 0), w0 + 6
        cal = losses[row.week]
        head = (f"Week {row.week}" + (f" (from {row.week_start})" if row.week_start else "")
                + f": {row.customer} is short by {row.shortfall:.3g} million of "
                f"{row.ordered:.3g} ordered.")
        item = {"week": int(row.week), "customer": row.customer,
                "ordered": float(row.ordered), "shortfall": float(row.shortfall),
                "saturated": [], "calendar": _calendar_json(data, cal)}
        if not cal["shipping_days"]:
            hol = ", ".join(_date_text(data, t) for t in cal["holidays"])
            item.update(cause="calendar", text=head + f" There is no shipping day in week "
                        f"{row.week}" + (f" (holidays {hol})" if hol else "")
                        + ": nothing can be received that week.")
            out.append(item)
            continue
        if row.week not in window:
            window[row.week] = _window_facts(util, daily, lo, hi, data.seed_lag)
        saturated, eggs_tight = window[row.week]
        saturated = [dict(x) for x in saturated]
        item["saturated"] = saturated
        notes = []
        if cal["shipping_days_lost"]:
            notes.append("holidays took shipping days "
                         + ", ".join(_date_text(data, t) for t in cal["shipping_days_lost"])
                         + f" (left: {len(cal['shipping_days'])})")
        kitchen_full = any(x["resource"] == "diet kitchen" for x in saturated)
        if cal["kitchen_shut_holidays"] or (cal["kitchen_shut"] and kitchen_full):
            text = (f"kitchen shut on {len(cal['kitchen_shut'])} of the "
                    f"{cal['feeding_days']} days that feed it")
            if cal["kitchen_shut_holidays"]:
                text += " (holidays " + ", ".join(
                    _date_text(data, t) for t in cal["kitchen_shut_holidays"]) + ")"
            notes.append(text)
        feed = f" In the days that feed it ({_date_text(data, lo)} to {_date_text(data, hi)})"
        if saturated:
            cause = "capacity"
            words = feed + ": " + "; ".join(
                f"{s['resource']} full on {s['days_full']} of {s['days']} days"
                for s in saturated[:4]) + "."
        elif eggs_tight:
            cause = "eggs"
            words = feed + f": every egg was used on {eggs_tight} days (the cages limit)."
        else:
            cause = "lead time"
            words = (feed + " no capacity was full: the start state or the lead time "
                     "(eggs laid before the plan) limits this week.")
        if lost(row.week):
            if row.customer not in usual:
                usual[row.customer] = _usual_share(res, row.customer, lost)
            mean = usual[row.customer]
            if mean is None or mean < 0.5 * row.shortfall / row.ordered:
                cause = "calendar"
        if notes:
            words += " Calendar: " + "; ".join(notes) + "."
        item.update(cause=cause, text=head + words)
        out.append(item)
    return out


def _window_facts(util: pd.DataFrame, daily: pd.DataFrame, lo: int, hi: int,
                  seed_lag: int) -> tuple[list[dict], int]:
    """The resources full in days lo..hi (a day of capacity 0 is not counted) and the
    days in lo..hi (shifted back by the seeding lag) on which every egg was seeded."""
    win = util[(util["day"] >= lo) & (util["day"] <= hi) & (util["available"] > 0)]
    saturated = []
    for resource, g in win.groupby("resource", sort=False):
        full = int((g["utilisation"] >= SATURATED).sum())
        if full:
            saturated.append({"resource": resource, "days_full": full, "days": int(len(g))})
    saturated.sort(key=lambda s: -s["days_full"])
    eggs_tight = int(((daily["eggs_discarded"] <= 1e-6 * np.maximum(
        daily["eggs_collected"], 1)) & (daily["day"] >= lo - seed_lag) &
        (daily["day"] <= hi - seed_lag) & (daily["eggs_collected"] > 0)).sum())
    return saturated, eggs_tight


def _usual_share(res: PlanResult, customer: str, lost) -> float | None:
    """The mean short share of the customer's weeks that the holidays leave alone [-]
    (None when every ordered week has lost days)."""
    w = res.weekly
    mine = w[(w["customer"] == customer) & (w["ordered"] > 0)]
    usual = mine[[not lost(int(k)) for k in mine["week"]]]
    if usual.empty:
        return None
    return float((usual["shortfall"] / usual["ordered"]).mean())


def _calendar_json(data, cal: dict) -> dict:
    def label(days):
        return [_date_text(data, t) for t in days]

    return {"shipping_days": label(cal["shipping_days"]), "holidays": label(cal["holidays"]),
            "shipping_days_lost": label(cal["shipping_days_lost"]),
            "feeding_days": cal["feeding_days"], "kitchen_shut": label(cal["kitchen_shut"]),
            "kitchen_shut_holidays": label(cal["kitchen_shut_holidays"])}


#: The unit of one more of a resource, in the singular ("one more cage slot").
_ONE = {"cages": "cage slot", "trays": "tray slot", "h": "crew hour", "kg": "kg of diet"}


def describe_bottlenecks(res: PlanResult, top: int = 5) -> list[str]:
    """The resources that limit the plan most, in plain words. A day whose capacity is 0
    (the kitchen shut, a crew off) is not counted as full, nor among the days."""
    data = res.data
    util = res.utilisation[(res.utilisation["day"] < data.report_days)
                           & (res.utilisation["available"] > 0)]
    prices = res.shadow_prices
    cur = data.scenario.costs.currency
    daily = res.horizon_daily
    items = []
    for resource, g in util.groupby("resource", sort=False):
        if resource.startswith("crew hours: "):
            crew = resource[len("crew hours: "):]
            busy = daily[daily[f"overtime: {crew}"] > 1e-3]["day"]
            what = "overtime worked"
        else:
            busy = g[g["utilisation"] >= SATURATED]["day"]
            what = "full"
        sel = prices["resource"] == resource if not prices.empty else []
        value = float(prices.loc[sel, "value"].sum()) if not prices.empty else 0.0
        relaxed = float(prices.loc[sel, "relaxed_value"].sum()) if not prices.empty else 0.0
        if busy.empty and max(value, relaxed) <= 1e-9:
            continue
        unit = _ONE.get(g["unit"].iloc[0], g["unit"].iloc[0])
        weeks = sorted({int(d) // 7 + 1 for d in busy})
        text = f"{resource}: {what} on {len(busy)} of {len(g)} days"
        if weeks:
            text += f" (weeks {_ranges(weeks)})"
        if value > 1e-9:
            text += (f"; with this plan's cages and trays, one more {unit} on every day would "
                     f"save {value:,.0f} {cur}")
        elif relaxed > 1e-9:
            text += (f"; one more {unit} on every day is worth about {relaxed:,.0f} {cur} "
                     "(continuous relaxation)")
        items.append((len(busy) + max(value, relaxed) / 1e3, text))
    items.sort(key=lambda it: -it[0])
    return [t for _, t in items[:top]]


def _ranges(weeks: list[int]) -> str:
    parts, start, prev = [], None, None
    for w in weeks:
        if start is None:
            start = prev = w
        elif w == prev + 1:
            prev = w
        else:
            parts.append(f"{start}" if start == prev else f"{start}-{prev}")
            start = prev = w
    if start is not None:
        parts.append(f"{start}" if start == prev else f"{start}-{prev}")
    return ", ".join(parts)


def operating_cost(res: PlanResult) -> float:
    """Cost of running the plan over the horizon, without the shortfall price
    [currency]."""
    c = res.costs
    keep = (c["period"] == "horizon") & (c["term"] != "shortfall")
    return float(c.loc[keep, "cost"].sum())
