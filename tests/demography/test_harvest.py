"""Single-stage and all-stage harvest against their defining equations and numpy."""

import numpy as np
import pytest

from planner.demography import (LifeTable, StageMatrix, all_stage_harvest,
                                all_stage_harvest_fraction, harvest_grid, read_life_table,
                                read_stage_matrix, single_stage_harvest)
from planner.errors import DemographyError, InputError


@pytest.fixture
def fly(fly_csv):
    return read_life_table(fly_csv, female_fraction=0.5)


def test_zero_growth_condition(fly):
    res = single_stage_harvest(fly, 25, 57, 28)
    assert (1 - res.harvest_fraction) * res.net_reproductive_rate == pytest.approx(1.0, abs=1e-12)
    assert res.net_reproductive_rate == pytest.approx(fly.net_reproductive_rate(57))


def test_both_forms_of_output_per_female_agree(fly):
    for theta, delta in [(24, 50), (25, 57), (26, 71)]:
        res = single_stage_harvest(fly, theta, delta, 28)
        assert res.output_per_female_closed_form is not None
        assert res.output_per_female == pytest.approx(res.output_per_female_closed_form,
                                                      rel=1e-12)


def test_harvested_leslie_matrix_has_eigenvalue_one_and_the_stationary_structure(fly):
    # numpy as the reference: the Leslie matrix of the harvested colony (survival past
    # theta times 1 - H, nobody past delta) must be stationary (lambda = 1) with the
    # stationary age structure as its eigenvector.
    theta, delta = 25, 64
    res = single_stage_harvest(fly, theta, delta, 28)
    n = delta + 1
    lt = LifeTable(fly.age[:n], res.modified_survival[:n], fly.mx[:n])
    vals, vecs = np.linalg.eig(lt.leslie_matrix())
    k = np.argmax(vals.real)
    assert vals[k].real == pytest.approx(1.0, abs=1e-9)
    w = np.real(vecs[:, k])
    np.testing.assert_allclose(w / w.sum(), res.stationary_structure.to_numpy(), atol=1e-10)
    assert res.stationary_structure.sum() == pytest.approx(1.0)


SLOW = LifeTable(range(8), [1, .9, .8, .8, .7, .6, .5, .4], [0, 0, 0, .3, .4, .5, .5, .5])


def test_harvest_after_laying_begins_uses_general_condition():
    # A harvest at a laying age: R0(theta) + (1-H)(R0(delta) - R0(theta)) = 1.
    fly = SLOW
    res = single_stage_harvest(fly, 4, 7, 3)
    r0t, r0d = fly.net_reproductive_rate(4), fly.net_reproductive_rate(7)
    assert r0t + (1 - res.harvest_fraction) * (r0d - r0t) == pytest.approx(1.0)
    assert res.output_per_female_closed_form is None


def test_grid_matches_single_computations(fly):
    grid = harvest_grid(fly, emergence_age=28)
    assert (grid["harvest_age"] < grid["discard_age"]).all()
    sample = grid.sample(40, random_state=1)
    for row in sample.itertuples():
        res = single_stage_harvest(fly, row.harvest_age, row.discard_age, 28)
        assert row.harvest_fraction == pytest.approx(res.harvest_fraction, rel=1e-12)
        assert row.output_per_female == pytest.approx(res.output_per_female, rel=1e-10)


def test_grid_restricted_to_given_ages(fly):
    grid = harvest_grid(fly, 28, harvest_ages=[24, 25], discard_ages=[50, 57])
    assert len(grid) == 4


def test_no_harvest_when_colony_does_not_replace_itself():
    with pytest.raises(DemographyError, match="cannot sustain any harvest"):
        single_stage_harvest(SLOW, 2, 5, 3)


def test_no_harvest_at_an_age_after_replacement():
    with pytest.raises(DemographyError, match="already replaces itself"):
        single_stage_harvest(SLOW, 7, 7, 3)


def test_harvest_age_after_discard_age(fly):
    with pytest.raises(InputError, match="after the discard age"):
        single_stage_harvest(fly, 60, 50, 28)


def test_age_outside_table(fly):
    with pytest.raises(InputError, match="no age 120"):
        single_stage_harvest(fly, 25, 120, 28)


def test_both_sexes_per_female(fly):
    res = single_stage_harvest(fly, 25, 57, 28)
    assert res.insects_per_female == pytest.approx(2 * res.output_per_female)


# -- all-stage harvest -------------------------------------------------------------

def test_spider_mite_culture_all_stage_harvest():
    # Fact of the trade (common practice, no source): a spider-mite culture growing at a
    # finite rate of 1.24 per day can lose about 19.4 % of all stages a day, or about
    # 95 % every 14 days, and hold its numbers.
    assert all_stage_harvest_fraction(1.24) == pytest.approx(0.194, abs=5e-4)
    assert all_stage_harvest_fraction(1.24, interval=14) == pytest.approx(0.95, abs=0.005)


def test_all_stage_harvest_keeps_a_matrix_stationary(crouse_csv, tmp_path):
    f = tmp_path / "grow.csv"
    f.write_text("stage,egg,adult\negg,0,12\nadult,0.3,0.5\n")
    m = read_stage_matrix(f)
    h = all_stage_harvest(m)
    assert max(np.linalg.eigvals(m.a * (1 - h)).real) == pytest.approx(1.0, abs=1e-12)


def test_all_stage_harvest_from_life_table(fly):
    h = all_stage_harvest(fly, interval=7)
    assert (1 - h) * fly.finite_rate ** 7 == pytest.approx(1.0)


def test_all_stage_harvest_needs_growth():
    with pytest.raises(DemographyError, match="does not"):
        all_stage_harvest_fraction(0.98)
    m = StageMatrix(["a", "b"], [[0, 1], [0.5, 0]])
    with pytest.raises(DemographyError):
        all_stage_harvest(m)
