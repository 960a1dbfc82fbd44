"""The standard week against the stationary single-stage formulas of the demographic
layer: with all weekdays alike and one harvest and discard age, the LP's cycle averages
must give H, P and the stationary age structure."""

import numpy as np
import pytest

from planner.demography import single_stage_harvest
from planner.optimise import plan_standard_week, settings_for

THETA, DELTA = 25, 57


@pytest.fixture(scope="module")
def one_pair(fly):
    scn = fly.model_copy(deep=True)
    scn.colony.rearing.harvest_ages = [THETA]
    scn.colony.rearing.discard_ages = [DELTA]
    big = 10 ** 6
    for r in scn.facility.adult_rooms + scn.facility.larval_rooms:
        if hasattr(r, "cage_slots"):
            r.cage_slots = big
        else:
            r.rack_slots = big
    scn.facility.pupal_holding = None
    scn.kitchen.diet_kg = type(scn.kitchen.diet_kg).every_day(1e9)
    for c in scn.crews:
        c.hours = type(c.hours).every_day(1e6)
    return scn


@pytest.fixture(scope="module")
def lp(one_pair):
    res = plan_standard_week(one_pair, 10.0, settings_for(one_pair), relax=True,
                             all_days_alike=True)
    assert res.info.status == "optimal"
    assert res.summary()["shortfall_million"] == pytest.approx(0.0, abs=1e-9)
    return res


def _cohort_flows(res):
    data = res.data
    lx = data.lx
    h = res.harvests
    released_eq = (h[h["kind"] == "release"]["pupae"] / lx[THETA]).sum()
    colony_eq = (h[h["kind"] == "colony"]["pupae"] / lx[data.theta_c]).sum()
    return released_eq, colony_eq


def test_harvest_fraction(lp, one_pair):
    ref = single_stage_harvest(one_pair.colony.to_life_table(), THETA, DELTA,
                               one_pair.colony.stages.emergence_age)
    released_eq, colony_eq = _cohort_flows(lp)
    h_model = released_eq / (released_eq + colony_eq)
    assert h_model == pytest.approx(ref.harvest_fraction, rel=1e-6)


def test_output_per_female(lp, one_pair):
    ref = single_stage_harvest(one_pair.colony.to_life_table(), THETA, DELTA,
                               one_pair.colony.stages.emergence_age)
    d = lp.daily
    per_female = d["pupae_released"].mean() / d["adult_females"].mean()
    assert per_female == pytest.approx(ref.output_per_female / one_pair.colony.female_fraction,
                                       rel=1e-6)


def test_stationary_age_structure(lp, one_pair):
    """Insects alive at each age 0..delta, summed over the cycle, from the plan's trays,
    harvests and cage loads (pupae of a cohort count until taken; colony pupae then live
    in the cages), against c_x of the single-stage formula."""
    data = lp.data
    lx = data.lx
    ref = single_stage_harvest(one_pair.colony.to_life_table(), THETA, DELTA,
                               one_pair.colony.stages.emergence_age)
    eggs_seeded = data.rho * lp.daily["trays_seeded"].sum()   # egg equivalents per cycle
    _, colony_eq = _cohort_flows(lp)
    ages = np.arange(DELTA + 1)
    alive = np.where(ages <= THETA, eggs_seeded * lx[ages], colony_eq * lx[ages])
    model_c = alive / alive.sum()
    np.testing.assert_allclose(model_c, ref.stationary_structure.to_numpy(), rtol=1e-6)


def test_eggs_balance_replacement(lp):
    # at replacement the cages lay what the trays use (nothing discarded at least cost)
    d = lp.daily
    assert d["eggs_collected"].sum() == pytest.approx(d["eggs_seeded"].sum(), rel=1e-6)
