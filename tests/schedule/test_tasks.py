"""Task sheets and registers against the plan they come from."""

import numpy as np
import pytest

from planner.schedule import check_totals


def test_task_hours_add_up_to_the_planned_crew_hours(fly_schedule):
    totals = check_totals(fly_schedule)
    assert np.abs(totals["difference"]).max() < 1e-9


def test_task_hours_keep_the_crew_hours(fly_plan, fly_schedule):
    by = fly_schedule.hours_by_crew()
    d = fly_plan.daily.set_index("day")
    lim = fly_plan.data.overtime_limit
    for r in by.itertuples():
        ci = fly_plan.data.crews.index(r.crew)
        assert r.hours <= d.at[r.day, f"available: {r.crew}"] + lim[ci, r.day] + 1e-6


def test_cage_register_matches_loads_and_discards(fly_plan, fly_schedule):
    reg = fly_schedule.cages
    d = fly_plan.horizon_daily.set_index("day")
    loaded = reg[reg["source"] == "plan"].groupby("load_day")["cages"].sum()
    for t, row in d.iterrows():
        assert loaded.get(t, 0) == pytest.approx(row["cages_loaded"])
    emptied = reg.groupby("discard_day")["cages"].sum()
    for t, row in d.iterrows():
        assert emptied.get(t, 0) == pytest.approx(row["cages_discarded"])
    # every batch of the plan is in the register, in full, with its pupae
    batches = fly_plan.cage_batches.set_index("batch")
    per = reg.groupby("batch")[["cages", "pupae"]].sum()
    for b, row in batches.iterrows():
        assert per.at[b, "cages"] == row["count"]
        assert per.at[b, "pupae"] == pytest.approx(row["pupae"])


def test_rooms_never_hold_more_cages_than_their_slots(fly_plan, fly_schedule):
    reg = fly_schedule.cages
    data = fly_plan.data
    assert not (reg["room"] == "(no free slot)").any()
    for room in data.scenario.facility.adult_rooms:
        occ = np.zeros(data.n_days)
        for p in reg[reg["room"] == room.name].itertuples():
            lo, hi = max(p.load_day, 0), min(p.load_day + data.span(p.discard_age), data.n_days)
            occ[lo:hi] += p.cages
        assert occ.max() <= room.cage_slots


def test_every_day_has_its_tasks_in_working_order(fly_schedule, fly_plan):
    lines = fly_schedule.lines
    assert set(lines["day"]) == set(range(fly_plan.data.report_days))
    for (_, _), g in lines.groupby(["day", "crew"]):
        assert list(g["order"]) == sorted(g["order"])
    first = lines[lines["day"] == 0]
    assert {"Collect eggs", "Cage care (food, water, checks)"} <= set(first["title"])


def test_egg_counts_on_the_sheets_match_the_daily_plan(fly_plan, fly_schedule):
    eggs = fly_schedule.lines[fly_schedule.lines["task"] == "egg_collection"]
    per_day = eggs.groupby("day")["eggs"].sum()
    d = fly_plan.horizon_daily
    np.testing.assert_allclose(per_day.reindex(d["day"], fill_value=0).to_numpy(),
                               d["eggs_collected"].to_numpy(), rtol=1e-9)
