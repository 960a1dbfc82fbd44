"""Every constraint family re-checked from the solved plans' own numbers."""

import copy

import numpy as np
import pytest

from planner.optimise import FAMILIES, verify_plan


@pytest.mark.parametrize("plan", ["fly_plan", "moth_plan"])
def test_solved_plans_keep_every_rule(plan, request):
    res = request.getfixturevalue(plan)
    assert res.info.has_plan, res.info.message
    assert verify_plan(res) == []


def test_every_family_is_built_and_named_predictably(fly_plan):
    fams = fly_plan.built.families
    for name in ("eggs", "pupae", "colony", "colony_fill", "diet", "racks", "cage_slots",
                 "pupal_holding", "labour", "orders", "end", "shipping"):
        assert name in fams and name in FAMILIES
    assert fams["eggs"].labels[0] == ("2027-01-04",)
    assert fams["labour"].labels[0] == ("Colony crew", "2027-01-04")


def _perturb(res, table, column, func, where=None):
    out = copy.copy(res)
    df = getattr(res, table).copy()
    mask = np.ones(len(df), bool) if where is None else where(df)
    df.loc[mask, column] = func(df.loc[mask, column])
    setattr(out, table, df)
    return out


@pytest.mark.parametrize("table,column,func,where,family", [
    ("tray_batches", "count", lambda c: c + 80, lambda d: d["source"] == "plan", "diet"),
    ("tray_batches", "count", lambda c: c + 80, lambda d: d["source"] == "plan", "eggs"),
    ("cage_batches", "count", lambda c: c + 3, None, "cage_slots"),
    ("cage_batches", "pupae", lambda p: p * 1.3, lambda d: d["source"] == "plan", "colony"),
    ("cage_batches", "pupae", lambda p: p * 0.5, lambda d: d["source"] == "plan", "colony_fill"),
    ("harvests", "pupae", lambda p: p * 1.1, lambda d: d["kind"] == "release", "pupae"),
    ("harvests", "age", lambda a: a + 1, lambda d: d["kind"] == "release", "shipping"),
])
def test_the_checker_catches_a_broken_plan(fly_plan, table, column, func, where, family):
    broken = _perturb(fly_plan, table, column, func, where)
    assert family in {v.family for v in verify_plan(broken)}


def test_the_checker_catches_too_many_crew_hours(fly_plan):
    broken = _perturb(fly_plan, "cage_batches", "count", lambda c: c * 2)
    assert "labour" in {v.family for v in verify_plan(broken)}
