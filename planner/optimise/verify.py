"""Re-checking a plan from its own numbers.

Every constraint family is recomputed here from the plan's tables (cage batches, tray
batches, harvests, overtime, shipments) and the scenario itself — occupancy from loads
and discard ages, eggs from the cohorts' lx and mx, crew hours from the task standards —
in plain loops, independently of the model's matrices and of the solver's slacks. An
empty list means the plan keeps every rule.
"""

from __future__ import annotations

import datetime as dt
from collections import defaultdict
from dataclasses import dataclass

from planner.scenario.schema import TASKS, WEEKDAYS

__all__ = ["Violation", "verify_plan"]


@dataclass(frozen=True)
class Violation:
    family: str
    label: str
    amount: float
    detail: str

    def __str__(self) -> str:
        return f"{self.family}[{self.label}]: {self.detail} (by {self.amount:.6g})"


def _tol(scale: float, rel: float = 1e-6, abs_: float = 1e-6) -> float:
    return abs_ + rel * abs(scale)


def verify_plan(res, rel_tol: float = 1e-6) -> list[Violation]:
    """All rule breaches of a solved plan (see the module docstring)."""
    data = res.data
    scn = data.scenario
    col = scn.colony
    lx = col.lx()
    mf = col.female_mx()
    re_ = col.rearing
    k, rho, tc, lag = re_.pupae_per_cage, re_.eggs_per_tray, re_.cage_loading_age, re_.seed_lag
    a_lc = col.stages.larval_collection_age
    rack_days = a_lc - lag
    n = data.n_days
    cycle = data.mode == "cycle"
    out: list[Violation] = []

    def day(t: int) -> int | None:
        if cycle:
            return t % n
        return t if 0 <= t < n else None

    def weekday(t: int) -> int:
        return int(t % 7) if cycle else (scn.calendar.start + dt.timedelta(days=t)).weekday()

    def is_holiday(t: int) -> bool:
        return (not cycle) and (scn.calendar.start + dt.timedelta(days=t)) in scn.calendar.holidays

    def flag(family, t, amount, detail):
        out.append(Violation(family, data.day_label(t) if isinstance(t, int) else str(t),
                             float(amount), detail))

    bought = {}
    buy_block = res.built.blocks["buy"]
    for (name,), v in zip(buy_block.labels, buy_block.values(res.solution.x)):
        bought[name] = int(round(v))

    def added(attr: str, t: int, crew: str | None = None) -> float:
        total = 0.0
        for opt in data.options:
            units = bought.get(opt.name, 0)
            if not units or cycle or t < (opt.ready - scn.calendar.start).days:
                continue
            value = getattr(opt, attr)
            if value is None:
                continue
            if attr == "crew_hours" and (opt.crew or scn.crews[0].name) != crew:
                continue
            per = value.as_list()[weekday(t)] if hasattr(value, "as_list") else float(value)
            total += units * per
        return total

    # -- integrality ---------------------------------------------------------------------
    for b in res.cage_batches.itertuples():
        if b.count != int(b.count) or b.count < 0:
            flag("cages", b.load_day, b.count, "cage counts must be whole")
    for b in res.tray_batches.itertuples():
        if b.count != int(b.count) or b.count < 0:
            flag("trays", b.seed_day, b.count, "tray counts must be whole")

    # -- start state: the batches before day 0 are the given ones --------------------------
    if not cycle:
        given = sorted(data.start.cages)
        shown = sorted((int(b.load_day), int(b.count), int(b.discard_age))
                       for b in res.cage_batches.itertuples() if b.source == "start")
        if given != shown:
            flag("start", 0, abs(len(given) - len(shown)), "start cage batches changed")
        for b in res.cage_batches.itertuples():
            if b.source == "plan" and b.load_day < 0:
                flag("start", b.load_day, b.count, "the plan loads cages before day 0")

    # -- daily counts from the batches ----------------------------------------------------
    eggs = defaultdict(float)       # eggs laid on day t
    occupied = defaultdict(float)
    laying = defaultdict(float)
    discards = defaultdict(float)
    loads = defaultdict(float)
    loaded_pupae = defaultdict(float)
    for b in res.cage_batches.itertuples():
        span = b.discard_age - tc + 1
        if b.source == "plan":
            loads[day(b.load_day)] += b.count
            loaded_pupae[day(b.load_day)] += b.pupae
        for j in range(span):
            t = day(b.load_day + j)
            a = tc + j
            if t is None and b.load_day + j >= -lag and not cycle:
                eggs[b.load_day + j] += b.pupae * lx[a] / lx[tc] * mf[a]
                continue
            if t is None:
                continue
            eggs[t] += b.pupae * lx[a] / lx[tc] * mf[a]
            occupied[t] += b.count
            laying[t] += b.count * (mf[a] > 0)
        t = day(b.load_day + span - 1)
        if t is not None:
            discards[t] += b.count
    trays = defaultdict(float)
    for b in res.tray_batches.itertuples():
        trays[b.seed_day if not cycle else b.seed_day % n] += b.count
    in_racks = defaultdict(float)
    collected = defaultdict(float)
    for s, c in list(trays.items()):
        for j in range(rack_days):
            t = day(s + j)
            if t is not None:
                in_racks[t] += c
        t = day(s + rack_days)
        if t is not None:
            collected[t] += c

    rel = defaultdict(float)          # (cohort, age) -> pupae released
    to_col = defaultdict(float)       # cohort -> pupae to cages
    released_on = defaultdict(float)  # harvest day -> pupae released
    colony_on = defaultdict(float)    # harvest day -> pupae harvested for the cages
    for h in res.harvests.itertuples():
        if h.kind == "release":
            rel[(h.laying_day, h.age)] += h.pupae
            hd = day(h.laying_day + h.age)
            released_on[hd] += h.pupae
            if hd is None:
                flag("release", h.laying_day, h.pupae, "pupae released outside the plan")
        else:
            to_col[h.laying_day if not cycle else h.laying_day % n] += h.pupae
            colony_on[day(h.laying_day + h.age)] += h.pupae

    ship_days = {WEEKDAYS.index(d) for d in scn.calendar.shipping_days}
    for hd, v in released_on.items():
        if hd is None or v <= 1e-9:
            continue
        ok = weekday(hd) in ship_days and (scn.calendar.ship_on_holidays or not is_holiday(hd))
        if cycle and getattr(data, "can_ship", None) is not None:
            ok = bool(data.can_ship[hd])
        if not ok:
            flag("shipping", hd, v, "pupae released on a day that is not a shipping day")

    # -- eggs: trays seeded use no more eggs than were collected seed_lag days before ---------
    for t in range(n):
        need = rho * trays.get(t, 0.0)
        src = (t - lag) % n if cycle else t - lag
        have = eggs.get(src, 0.0)
        if need > have + _tol(have, rel_tol, 1e-3):
            flag("eggs", t, need - have, f"{need:.0f} eggs seeded but {have:.0f} collected")

    # -- pupae: takes of each cohort within its supply (egg equivalents) -------------------
    cohorts = {d for d, _ in rel} | set(to_col)
    for d in cohorts:
        s = d + lag
        supply = rho * trays.get(s % n if cycle else s, 0.0)
        takes = sum(v / lx[a] for (dd, a), v in rel.items() if dd == d)
        takes += to_col.get(d, 0.0) / lx[tc]
        if takes > supply + _tol(supply, rel_tol, 1e-3):
            flag("pupae", d, takes - supply, "more pupae taken than the cohort's trays give")

    # -- colony: the pupae of each cohort fill its cages between the minimum fill and full --
    fill = re_.min_cage_fill
    for b in res.cage_batches.itertuples():
        if b.source != "plan":
            continue
        if b.pupae > b.count * k + _tol(b.count * k, rel_tol, 1e-3):
            flag("colony", b.load_day, b.pupae - b.count * k,
                 f"{b.pupae:.0f} pupae in {b.count} cages of {k}")
        if b.pupae < fill * b.count * k - _tol(b.count * k, rel_tol, 1e-3):
            flag("colony_fill", b.load_day, fill * b.count * k - b.pupae,
                 f"{b.count} cages loaded with only {b.pupae:.0f} pupae")
    for t in range(n):
        d = (t - tc) % n if cycle else t - tc
        want = loaded_pupae.get(t, 0.0)
        got = to_col.get(d, 0.0)
        if abs(want - got) > _tol(want, rel_tol, 1e-3):
            flag("colony", t, abs(want - got), f"{got:.0f} pupae of the cohort went to the colony "
                                               f"but the cages hold {want:.0f}")

    # -- diet, racks, cage slots ----------------------------------------------------------
    kitchen = scn.kitchen
    f = scn.facility
    for t in range(n):
        if is_holiday(t):
            limit = kitchen.holiday_kg if kitchen.holiday_kg is not None else kitchen.diet_kg.sun
        else:
            limit = kitchen.diet_kg.as_list()[weekday(t)]
        if cycle and res.data.kitchen is not None:
            limit = float(res.data.kitchen[t])  # all-days-alike variants change capacities
        limit += added("diet_kg", t)
        used = re_.diet_per_tray * trays.get(t, 0.0)
        if used > limit + _tol(limit, rel_tol):
            flag("diet", t, used - limit, f"{used:.1f} kg of diet but the kitchen mixes {limit:g}")
        racks = f.rack_slots + added("rack_slots", t)
        if in_racks.get(t, 0.0) > racks + 1e-6:
            flag("racks", t, in_racks[t] - racks, f"{in_racks[t]:.0f} trays in {racks} slots")
        slots = f.cage_slots + added("cage_slots", t)
        if occupied.get(t, 0.0) > slots + 1e-6:
            flag("cage_slots", t, occupied[t] - slots, f"{occupied[t]:.0f} cages in {slots} slots")

    # -- pupal holding --------------------------------------------------------------------
    if f.pupal_holding is not None:
        tmax = max(set(re_.harvest_ages) | {tc})
        held = defaultdict(float)
        for s, c in trays.items():
            d = s - lag
            for a in range(a_lc, tmax):
                t = day(d + a)
                if t is None:
                    continue
                left = rho * c - sum(v / lx[aa] for (dd, aa), v in rel.items()
                                     if (dd % n if cycle else dd) == (d % n if cycle else d)
                                     and aa <= a)
                if tc <= a:
                    left -= to_col.get(d % n if cycle else d, 0.0) / lx[tc]
                held[t] += max(left, 0.0) * lx[a] / 1e6
        for t, v in held.items():
            if v > f.pupal_holding + _tol(f.pupal_holding, rel_tol):
                flag("pupal_holding", t, v - f.pupal_holding,
                     f"{v:.3f} million pupae held, room for {f.pupal_holding:g}")

    # -- labour ---------------------------------------------------------------------------
    lab = scn.labour
    overtime = {}
    ot_block = res.built.blocks["overtime"]
    for (crew, t), v in zip(ot_block.labels, ot_block.values(res.solution.x)):
        overtime[(crew, t)] = v
    for crew in scn.crews:
        tasks = list(TASKS) if crew.tasks == "all" else crew.tasks
        for t in range(n):
            hours = 0.0
            for task in tasks:
                hours += {
                    "diet_mixing": lab.diet_mixing * re_.diet_per_tray * trays.get(t, 0.0),
                    "egg_collection": lab.egg_collection * laying.get(t, 0.0),
                    "seeding": lab.seeding * trays.get(t, 0.0),
                    "larval_collection": lab.larval_collection * collected.get(t, 0.0),
                    "harvest_packing": (lab.harvest_packing * released_on.get(t, 0.0)
                                        + lab.colony_harvest_rate * colony_on.get(t, 0.0)) / 1e6,
                    "cage_loading": lab.cage_loading * loads.get(t, 0.0),
                    "cage_care": lab.cage_care * occupied.get(t, 0.0),
                    "cage_discard": lab.cage_discard * discards.get(t, 0.0),
                }[task]
            if is_holiday(t):
                regular = crew.holiday_hours if crew.holiday_hours is not None else crew.hours.sun
            else:
                regular = crew.hours.as_list()[weekday(t)]
            if cycle:
                regular = float(res.data.crew_hours[res.data.crews.index(crew.name), t])
            regular += added("crew_hours", t, crew.name)
            ot = overtime.get((crew.name, t), 0.0)
            if ot > crew.overtime_limit + 1e-6:
                flag("labour", t, ot - crew.overtime_limit, f"{crew.name}: overtime above limit")
            if hours > regular + ot + _tol(regular, rel_tol, 1e-4):
                flag("labour", t, hours - regular - ot,
                     f"{crew.name}: {hours:.2f} h of work, {regular:g} h regular + {ot:.2f} h "
                     "overtime")

    # -- orders, look-ahead and shipping ----------------------------------------------------
    yield_ = re_.product_yield
    per_week = defaultdict(float)
    for hd, v in released_on.items():
        if hd is not None:
            per_week[hd // 7] += v * yield_ / 1e6
    ship_block = res.built.blocks["ship"]
    short_block = res.built.blocks["shortfall"]
    shipped = defaultdict(float)
    asked = res.built.asked(res.solution.x)
    for (cust, w), s_, sf, ordered in zip(ship_block.labels, ship_block.values(res.solution.x),
                                          short_block.values(res.solution.x), asked):
        shipped[w - 1] += s_
        ordered = float(ordered)
        if s_ + sf < ordered - _tol(ordered, rel_tol):
            fam = "orders" if w <= data.report_weeks else "end"
            flag(fam, f"{cust}, week {w}", ordered - s_ - sf, "order neither shipped nor "
                                                              "reported short")
    for w, s_ in shipped.items():
        if s_ > per_week.get(w, 0.0) + _tol(s_, rel_tol):
            flag("shipping", f"week {w + 1}", s_ - per_week.get(w, 0.0),
                 "more product shipped than the pupae released that week give")

    # -- a short week shared pro rata within a priority class ----------------------------
    if "share" in res.built.blocks:
        sh = res.built.blocks["share"]
        z = dict(zip(sh.labels, sh.values(res.solution.x)))
        for (cust, w), sf, ordered in zip(short_block.labels,
                                          short_block.values(res.solution.x), asked):
            key = (int(data.priority[data.customers.index(cust)]), w)
            if key in z and sf > z[key] * ordered + _tol(ordered, rel_tol):
                flag("share", f"{cust}, week {w}", sf - z[key] * ordered,
                     "shortfall above the class's shared share")
    if "start_week" in res.built.blocks:
        y = res.built.blocks["start_week"].values(res.solution.x)
        if abs(float(y.sum()) - 1.0) > 1e-6:
            flag("one_start", "-", float(y.sum()), "not exactly one first week chosen")

    # -- policy switches -----------------------------------------------------------------
    plan_b = res.cage_batches[res.cage_batches["source"] == "plan"]
    if scn.plan.single_discard_age and plan_b["discard_age"].nunique() > 1:
        flag("one_discard_age", "-", plan_b["discard_age"].nunique(), "several discard ages used")
    rel_ages = {a for (_, a), v in rel.items() if v > 1e-6}
    if scn.plan.single_harvest_age and len(rel_ages) > 1:
        flag("one_harvest_age", "-", len(rel_ages), "several harvest ages used")
    return out
