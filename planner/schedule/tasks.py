"""What each crew does each day: the lines of the daily task sheets.

Each line is one piece of work with its quantity, unit, room, batch and the labour hours
that the scenario's labour standards give it; a crew's lines of a day add up to the
hours the optimiser planned for that crew that day (the tests hold them equal).

Order of the work in a day: diet to mix, eggs to collect (one line per adult room, its
cage batches listed; surplus eggs that no tray takes on a line of their own), trays to
seed, larvae to collect, pupae to harvest (to release, to the colony; with the larval
room and tray batches they come from), cages to load, cages to empty, cage care. Counts
are whole: cages and trays as they are, pupae and eggs to the nearest thousand (the
unit says so).
"""

from __future__ import annotations

from collections import defaultdict

import pandas as pd

from planner.schedule.rooms import cage_register, tray_register

__all__ = ["task_lines", "Schedule", "build_schedule", "check_totals", "TASK_TITLES"]

TASK_TITLES = {
    "diet_mixing": "Mix larval diet",
    "egg_collection": "Collect eggs",
    "seeding": "Seed larval trays",
    "larval_collection": "Collect larvae",
    "harvest_packing": "Harvest pupae",
    "cage_loading": "Load oviposition cages",
    "cage_discard": "Empty and clean cages",
    "cage_care": "Cage care (food, water, checks)",
}
_ORDER = list(TASK_TITLES)

COLUMNS = ["day", "date", "weekday", "crew", "order", "task", "title", "what", "quantity",
           "unit", "eggs", "volume_ml", "room", "batch", "hours"]


class Schedule:
    """The plan as registers and task lines."""

    def __init__(self, res):
        self.result = res
        self.cages = cage_register(res)
        self.trays = tray_register(res)
        self.lines = task_lines(res, self.cages, self.trays)

    def day(self, t: int) -> pd.DataFrame:
        return self.lines[self.lines["day"] == t]

    def hours_by_crew(self) -> pd.DataFrame:
        """Task-sheet hours per day and crew [h]."""
        return self.lines.groupby(["day", "crew"], as_index=False)["hours"].sum()


def build_schedule(res) -> Schedule:
    return Schedule(res)


def task_lines(res, cages: pd.DataFrame | None = None,
               trays: pd.DataFrame | None = None) -> pd.DataFrame:
    """Every task line of the reported days (see the module docstring)."""
    data = res.data
    scn = data.scenario
    lab = scn.labour
    col = scn.colony
    re_ = col.rearing
    lx, mf = data.lx, data.mf
    cages = cage_register(res) if cages is None else cages
    trays = tray_register(res) if trays is None else trays
    n_report = data.report_days
    eggs_per_ml = re_.eggs_per_ml
    crew_of = {t: data.crews[c] for t, c in data.task_crew.items()}
    kitchen_room = "Diet kitchen"
    out: list[dict] = []

    def add(t, task, what, quantity, unit, hours, room="", batch="", eggs=None, title=None):
        if quantity is None or (isinstance(quantity, float) and quantity <= 1e-9 and
                                hours <= 1e-12):
            return
        out.append({"day": int(t), "date": data.date(t), "weekday": int(data.weekday[t]),
                    "crew": crew_of[task], "order": _ORDER.index(task), "task": task,
                    "title": title or TASK_TITLES[task], "what": what,
                    "quantity": _shown(quantity, unit), "unit": _UNIT_SHOWN.get(unit, unit),
                    "eggs": _shown(eggs, "eggs"),
                    "volume_ml": _shown(eggs / eggs_per_ml, "ml")
                    if (eggs is not None and eggs_per_ml) else None,
                    "room": room, "batch": batch, "hours": hours})

    daily = res.daily
    # diet and seeding
    for t in range(n_report):
        n_trays = float(daily.at[t, "trays_seeded"])
        if n_trays > 0:
            kg = n_trays * data.diet_per_tray
            add(t, "diet_mixing", f"diet for {n_trays:.0f} trays of {data.diet_per_tray:g} kg",
                kg, "kg", lab.diet_mixing * kg, room=kitchen_room)
    for p in trays.itertuples():
        t = p.seed_day
        if 0 <= t < n_report and p.source == "plan":
            eggs = p.trays * data.rho
            add(t, "seeding", f"{p.trays} trays, {data.rho:,.0f} eggs each, eggs collected on "
                f"{p.laying_date}", float(p.trays), "trays", lab.seeding * p.trays, room=p.room,
                batch=p.batch, eggs=eggs)
        tc = p.collection_day
        if 0 <= tc < n_report:
            larvae = p.trays * data.rho * lx[data.larval_collection_age]
            add(tc, "larval_collection", f"trays seeded on {p.seed_date} (about {larvae:,.0f} "
                "larvae)", float(p.trays), "trays", lab.larval_collection * p.trays, room=p.room,
                batch=p.batch)
    # egg collection (one line per room and day, its batches listed), cage loading,
    # discarding and care, per register part
    care = defaultdict(float)
    laying = defaultdict(list)  # (day, room): [(batch, age, cages, eggs)]
    for p in cages.itertuples():
        span = data.span(p.discard_age)
        per_pupa = lx / lx[data.theta_c] * mf
        for j in range(span):
            t = p.load_day + j
            if not (0 <= t < n_report):
                continue
            a = data.theta_c + j
            care[(t, p.room)] += p.cages
            if mf[a] > 0:
                laying[(t, p.room)].append((p.batch, a, p.cages, p.pupae * per_pupa[a]))
        if p.source == "plan" and 0 <= p.load_day < n_report:
            add(p.load_day, "cage_loading",
                f"{p.cages} cages of {p.pupae_per_cage:,.0f} pupae (laid {p.laying_date}), "
                f"empty on {p.discard_date} (age {p.discard_age} day)", float(p.cages), "cages",
                lab.cage_loading * p.cages, room=p.room, batch=p.batch)
        if 0 <= p.discard_day < n_report:
            add(p.discard_day, "cage_discard", f"cages {p.batch} loaded on {p.load_date}",
                float(p.cages), "cages", lab.cage_discard * p.cages, room=p.room, batch=p.batch)
    for (t, room), parts in sorted(laying.items()):
        n_cages = sum(c for _, _, c, _ in parts)
        ages = sorted({a for _, a, _, _ in parts})
        what = f"{len(parts)} cage batch" + ("es" if len(parts) > 1 else "")
        what += (f", ages {ages[0]}-{ages[-1]} day" if len(ages) > 1 else f", age {ages[0]} day")
        add(t, "egg_collection", what,
            float(n_cages), "cages", lab.egg_collection * n_cages, room=room,
            batch=", ".join(b for b, _, _, _ in parts), eggs=sum(e for _, _, _, e in parts))
    # eggs collected that no tray takes: a line (no labour standard: 0 h)
    rooms_laying = defaultdict(list)  # day: the rooms whose cages lay that day
    for t, room in sorted(laying):
        rooms_laying[t].append(room)
    for t in range(n_report):
        surplus = float(daily.at[t, "eggs_discarded"])
        if surplus < max(0.5e3, 1e-6 * float(daily.at[t, "eggs_collected"])):
            continue
        seed_day = t + data.seed_lag
        used = float(daily.at[t, "eggs_collected"]) - surplus
        if seed_day in daily.index and float(daily.at[seed_day, "trays_seeded"]) <= 0:
            shut = seed_day < data.n_days and float(data.kitchen[seed_day]) <= 0
            why = f"no trays are seeded on {data.date(seed_day)}" + (
                " (kitchen closed)" if shut else "")
        else:
            why = (f"the trays seeded on {data.date(seed_day)} take {_shown(used, 'eggs'):,} "
                   "of them")
        rooms = rooms_laying.get(t, [])
        add(t, "egg_collection", f"eggs collected today that no tray takes: {why}; discard "
            "them", surplus, "eggs", 0.0, room=", ".join(rooms),
            batch=", ".join(b for room in rooms for b, _, _, _ in laying[(t, room)]),
            eggs=surplus, title="Discard surplus eggs")
    for (t, room), count in sorted(care.items()):
        add(t, "cage_care", "occupied cages", float(count), "cages", lab.cage_care * count,
            room=room)
    # harvests: where the pupae are (the tray batches seeded with that day's eggs)
    where = defaultdict(list)
    for p in trays.itertuples():
        where[p.laying_date].append((p.room, p.batch))
    for h in res.harvests.itertuples():
        t = h.harvest_day
        if not (0 <= t < n_report):
            continue
        found = where.get(h.laying_date, [])
        room = ", ".join(sorted({r for r, _ in found}))
        batch = ", ".join(b for _, b in found)
        if h.kind == "release":
            add(t, "harvest_packing", f"pupae laid on {h.laying_date} (age {h.age} day) for "
                f"release: {h.pupae * data.product_yield / 1e6:.3f} million of product",
                float(h.pupae), "pupae", lab.harvest_packing * h.pupae / 1e6, room=room,
                batch=batch)
        else:
            add(t, "harvest_packing", f"pupae laid on {h.laying_date} (age {h.age} day) for the "
                "colony's cages", float(h.pupae), "pupae",
                lab.colony_harvest_rate * h.pupae / 1e6, room=room, batch=batch)
    df = pd.DataFrame(out, columns=COLUMNS)
    if df.empty:
        return df
    df = df.sort_values(["day", "crew", "order", "room", "batch"], kind="stable")
    return df.reset_index(drop=True)


#: Counts on a task sheet: whole things whole, pupae and eggs to the nearest thousand
#: (the plan's counts are estimates far coarser than one pupa), kg to 0.1, ml to 1.
_ROUND = {"cages": 1, "trays": 1, "pupae": 1000, "eggs": 1000, "ml": 1}
_UNIT_SHOWN = {"pupae": "pupae (to 1,000)", "eggs": "eggs (to 1,000)"}


def _shown(value, unit: str):
    """A count as a crew reads it (see :data:`_ROUND`); other quantities to 0.1."""
    if value is None:
        return None
    step = _ROUND.get(unit)
    if step is None:
        return round(float(value), 1)
    return int(round(float(value) / step)) * step


def check_totals(schedule: Schedule) -> pd.DataFrame:
    """Task-sheet hours per crew and day beside the plan's (for tests and the workbook)."""
    res = schedule.result
    daily = res.horizon_daily
    rows = []
    by = schedule.hours_by_crew().set_index(["day", "crew"])["hours"]
    for crew in res.data.crews:
        for t in daily["day"]:
            rows.append({"day": t, "crew": crew, "task_sheet": float(by.get((t, crew), 0.0)),
                         "plan": float(daily.at[t, f"hours: {crew}"])})
    df = pd.DataFrame(rows)
    df["difference"] = df["task_sheet"] - df["plan"]
    return df

