"""Putting the plan's batches into rooms: the cage register and the tray register.

The optimiser counts cage slots and rack slots per facility; each batch is then placed
in rooms, in loading order, into the rooms with the most free slots on its loading day
(splitting a batch over rooms when one room cannot take it all). Because a batch loaded
earlier that is still present on a later day was present on the loading day too, the
free slots of a room only grow over a new batch's life, so this always succeeds when the
plan keeps the facility's total slots. Slots bought as expansion options are rooms of
their own from their ready day.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

__all__ = ["cage_register", "tray_register", "rooms_of"]


def rooms_of(res, kind: str) -> list[tuple[str, np.ndarray]]:
    """(room name, slots per day) of the adult rooms ('cage') or larval rooms ('tray'),
    with the expansion options the plan bought as rooms from their ready day."""
    data = res.data
    scn = data.scenario
    n = data.n_days
    if kind == "cage":
        rooms = [(r.name, np.full(n, float(r.cage_slots))) for r in scn.facility.adult_rooms]
        attr = "cage_slots"
    else:
        rooms = [(r.name, np.full(n, float(r.rack_slots))) for r in scn.facility.larval_rooms]
        attr = "rack_slots"
    buy = res.built.blocks["buy"]
    units = dict(zip([lab[0] for lab in buy.labels], buy.values(res.solution.x)))
    adds = data.option_adds(attr)
    for e, opt in enumerate(data.options):
        count = int(round(units.get(opt.name, 0)))
        if count and adds[e].any():
            rooms.append((f"{opt.name} (added)", adds[e] * count))
    return rooms


def _place(batches, rooms, n, span_of, fixed_room=None):
    """Greedy placement of batches ordered by start day; returns list of parts."""
    free = {name: slots.copy() for name, slots in rooms}
    parts = []
    for b in batches:
        start, count = b["start"], b["count"]
        days = np.arange(max(start, 0), min(start + span_of(b), n))
        left = count
        order = []
        wanted = fixed_room(b) if fixed_room else None
        if wanted in free:
            order.append(wanted)
        order += sorted((r for r in free if r != wanted),
                        key=lambda r: -(free[r][days].min() if days.size else 0))
        for room in order:
            if left <= 0:
                break
            room_free = int(np.floor(free[room][days].min() + 1e-9)) if days.size else left
            take = min(left, max(room_free, 0))
            if take <= 0:
                continue
            if days.size:
                free[room][days] -= take
            parts.append(dict(b, room=room, count=take, share=take / count))
            left -= take
        if left > 0:  # more than the rooms hold (a plan that breaks the slots)
            parts.append(dict(b, room="(no free slot)", count=left, share=left / count))
    return parts


def cage_register(res) -> pd.DataFrame:
    """Each batch of cages with its room: id, room, load date, cages, pupae, pupae per
    cage, discard age and date, source (start state or plan)."""
    data = res.data
    cb = res.cage_batches
    batches = [{"batch": r.batch, "start": int(r.load_day), "count": int(r.count),
                "discard_age": int(r.discard_age), "pupae": float(r.pupae),
                "source": r.source, "room_hint": None}
               for r in cb.itertuples()]
    given = {}
    if data.start.source == "scenario":  # a start batch may name its room
        s0 = data.scenario.calendar.start
        given = {((c.load_date - s0).days, c.count, c.discard_age): c.room
                 for c in data.scenario.start.cages}
    hints = {b["batch"]: given.get((b["start"], b["count"], b["discard_age"]))
             for b in batches if b["source"] == "start"}
    parts = _place(batches, rooms_of(res, "cage"), data.n_days,
                   lambda b: data.span(b["discard_age"]), lambda b: hints.get(b["batch"]))
    rows = []
    for p in parts:
        last = p["start"] + data.span(p["discard_age"]) - 1
        rows.append({"batch": p["batch"], "room": p["room"], "source": p["source"],
                     "load_day": p["start"], "load_date": data.date(p["start"]),
                     "cages": p["count"], "pupae": p["pupae"] * p["share"],
                     "pupae_per_cage": p["pupae"] / max(p["count"] / p["share"], 1e-12),
                     "discard_age": p["discard_age"], "discard_day": last,
                     "discard_date": data.date(last),
                     "laying_date": data.date(p["start"] - data.theta_c)})
    return pd.DataFrame(rows, columns=["batch", "room", "source", "load_day", "load_date",
                                       "cages", "pupae", "pupae_per_cage", "discard_age",
                                       "discard_day", "discard_date", "laying_date"])


def tray_register(res) -> pd.DataFrame:
    """Each batch of trays (one seeding day) with its larval room."""
    data = res.data
    tb = res.tray_batches
    batches = [{"batch": f"T{i + 1:03d}", "start": int(r.seed_day), "count": int(r.count),
                "source": r.source} for i, r in enumerate(tb.itertuples())]
    parts = _place(batches, rooms_of(res, "tray"), data.n_days, lambda b: data.rack_days)
    rows = []
    for p in parts:
        rows.append({"batch": p["batch"], "room": p["room"], "source": p["source"],
                     "seed_day": p["start"], "seed_date": data.date(p["start"]),
                     "trays": p["count"], "laying_date": data.date(p["start"] - data.seed_lag),
                     "collection_day": p["start"] + data.rack_days,
                     "collection_date": data.date(p["start"] + data.rack_days)})
    return pd.DataFrame(rows, columns=["batch", "room", "source", "seed_day", "seed_date",
                                       "trays", "laying_date", "collection_day",
                                       "collection_date"])
