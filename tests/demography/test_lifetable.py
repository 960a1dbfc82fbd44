"""Life-table quantities against a published insect life table and against numpy."""

import math

import numpy as np
import pytest

from planner.demography import LifeTable, read_life_table
from planner.demography.lifetable import dominant_eigenvalue
from planner.errors import DemographyError, InputError


# -- Birch (1948), Table 1 and section 3: the rice weevil at 29 C -----------------------
# Published: R0 = 113.6 female eggs per female, r_m = 0.76 per week (Birch computes
# 0.762), T = 6.2 weeks. The table is typed from memory (see the CSV's header); the
# tolerances below are what lx rounded to 0.01 and mx to 0.5 egg allow.

def test_birch_1948_net_reproductive_rate(birch_csv):
    lt = read_life_table(birch_csv, age_unit="week")
    assert lt.net_reproductive_rate() == pytest.approx(113.6, rel=0.005)


def test_birch_1948_intrinsic_rate(birch_csv):
    lt = read_life_table(birch_csv, age_unit="week")
    assert lt.intrinsic_rate == pytest.approx(0.762, abs=0.002)
    assert lt.finite_rate == pytest.approx(math.exp(0.762), rel=0.003)


def test_birch_1948_generation_time(birch_csv):
    lt = read_life_table(birch_csv, age_unit="week")
    assert lt.generation_time == pytest.approx(6.2, abs=0.05)


def test_euler_lotka_is_solved_to_1e12(birch_csv):
    lt = read_life_table(birch_csv)
    r = lt.intrinsic_rate
    residual = np.sum(np.exp(-r * lt.age) * lt.lx * lt.mx) - 1.0
    assert abs(residual) < 1e-10


# -- numpy's eigenvalue of the Leslie matrix (general-purpose reference library) -------

@pytest.mark.parametrize("table", ["fly_csv", "moth_csv"])
def test_intrinsic_rate_equals_log_of_leslie_eigenvalue(table, request):
    lt = read_life_table(request.getfixturevalue(table), female_fraction=0.5)
    lam = max(np.linalg.eigvals(lt.leslie_matrix()).real)
    assert lt.intrinsic_rate == pytest.approx(math.log(lam), abs=1e-9)


def test_stable_age_distribution_is_leslie_right_eigenvector(fly_csv):
    lt = read_life_table(fly_csv, female_fraction=0.5)
    vals, vecs = np.linalg.eig(lt.leslie_matrix())
    w = np.real(vecs[:, np.argmax(vals.real)])
    w = w / w.sum()
    c = lt.stable_age_distribution()
    assert c.sum() == pytest.approx(1.0, abs=1e-12)
    np.testing.assert_allclose(c, w, rtol=1e-6, atol=1e-12)


def test_reproductive_values_match_leslie_left_eigenvector(moth_csv):
    # The Leslie census counts births from the next step on, so its left eigenvector
    # (scaled to 1 at age 0) equals v_x - m_x.
    lt = read_life_table(moth_csv, female_fraction=0.5)
    vals, left = np.linalg.eig(lt.leslie_matrix().T)
    u = np.real(left[:, np.argmax(vals.real)])
    u = u / u[0]
    v = lt.reproductive_values()
    alive = lt.lx > 0
    assert v[0] == pytest.approx(1.0, abs=1e-10)
    np.testing.assert_allclose((v - lt.mx)[alive], u[alive], rtol=1e-6, atol=1e-9)


def test_random_tables_agree_with_numpy():
    rng = np.random.default_rng(7)
    for _ in range(50):
        n = int(rng.integers(5, 60))
        lx = np.concatenate([[1.0], np.cumprod(rng.uniform(0.6, 1.0, n - 1))])
        mx = np.where(np.arange(n) >= rng.integers(1, n), rng.uniform(0, 5, n), 0.0)
        lt = LifeTable(np.arange(n), lx, mx)
        if lt.net_reproductive_rate() == 0:
            continue
        lam = dominant_eigenvalue(lt.leslie_matrix())
        assert lt.intrinsic_rate == pytest.approx(math.log(lam), abs=1e-8)
        assert np.sign(lt.intrinsic_rate) == np.sign(lt.net_reproductive_rate() - 1)


# -- definitions -------------------------------------------------------------------

def test_truncated_net_reproductive_rate():
    lt = LifeTable([0, 1, 2, 3], [1, 0.9, 0.8, 0.5], [0, 0, 2, 2])
    assert lt.net_reproductive_rate() == pytest.approx(0.8 * 2 + 0.5 * 2)
    assert lt.net_reproductive_rate(upto=2) == pytest.approx(1.6)


def test_generation_time_at_replacement_is_cohort_time():
    lt = LifeTable([0, 1, 2, 3], [1, 1, 1, 0.5], [0, 0, 0.5, 1.0])
    assert lt.net_reproductive_rate() == pytest.approx(1.0)
    assert lt.generation_time == pytest.approx(lt.cohort_generation_time)
    assert lt.doubling_time == math.inf


def test_female_fraction_scales_mx():
    a = LifeTable([0, 1, 2], [1, 0.9, 0.8], [0, 0, 10], female_fraction=0.5)
    b = LifeTable([0, 1, 2], [1, 0.9, 0.8], [0, 0, 5])
    assert a.net_reproductive_rate() == pytest.approx(b.net_reproductive_rate())
    assert any("female" in n for n in a.notes)


def test_l0_is_normalised_and_said():
    lt = LifeTable([0, 1, 2], [0.5, 0.4, 0.3], [0, 0, 10])
    assert lt.lx[0] == 1.0 and lt.lx[2] == pytest.approx(0.6)
    assert any("normalised" in n for n in lt.notes)


def test_no_births_is_a_clear_error():
    lt = LifeTable([0, 1, 2], [1, 0.5, 0.2], [0, 0, 0])
    with pytest.raises(DemographyError, match="no births"):
        _ = lt.intrinsic_rate


@pytest.mark.parametrize("age,lx,mx,match", [
    ([0, 2, 1], [1, .9, .8], [0, 0, 1], "ascending"),
    ([0, 1, 1], [1, .9, .8], [0, 0, 1], "repeats"),
    ([0, 1, 2], [1, .9, 1.2], [0, 0, 1], r"\[0, 1\]"),
    ([0, 1, 2], [1, .8, .9], [0, 0, 1], "cannot increase"),
    ([0, 1, 2], [1, .9, .8], [0, -1, 1], "negative"),
    ([-1, 1, 2], [1, .9, .8], [0, 0, 1], "negative"),
])
def test_malformed_tables_name_the_row(age, lx, mx, match):
    with pytest.raises(InputError, match=match) as info:
        LifeTable(age, lx, mx, source="t.csv")
    assert "t.csv: row" in str(info.value)


def test_leslie_needs_unit_steps(birch_csv):
    with pytest.raises(InputError, match="Leslie"):
        read_life_table(birch_csv).leslie_matrix()


def test_log_sum_exp_agrees_with_scipy():
    """The life-table module's own log-sum-exp against ``scipy.special.logsumexp``
    (reference library), over values that overflow a plain exp and with -inf terms."""
    from scipy.special import logsumexp

    from planner.demography.lifetable import _logsumexp

    rng = np.random.default_rng(7)
    for a in (rng.normal(0, 1, 50), rng.normal(800, 30, 40), np.array([-np.inf, 2.0, 3.0]),
              np.array([-np.inf, -np.inf]), np.array([1e-300])):
        assert _logsumexp(a) == pytest.approx(float(logsumexp(a)), rel=1e-13, abs=1e-300)


def test_intrinsic_rate_agrees_with_scipy_brentq_on_random_tables():
    """Euler–Lotka's root against ``scipy.optimize.brentq`` on the same equation
    (reference library), for growing, shrinking and near-replacement tables."""
    from scipy.optimize import brentq
    from scipy.special import logsumexp

    from planner.demography.lifetable import intrinsic_rate

    rng = np.random.default_rng(11)
    for scale in (0.02, 0.2, 1.0, 5.0, 80.0):
        for _ in range(5):
            n = int(rng.integers(5, 60))
            age = np.arange(n, dtype=float) + 0.5
            lx = np.cumprod(rng.uniform(0.7, 1.0, n))
            mx = np.where(rng.uniform(size=n) < 0.5, rng.uniform(0, scale, n), 0.0)
            mx[-1] = scale
            r = intrinsic_rate(age, lx, mx)
            pos = lx * mx > 0
            lw, xa = np.log((lx * mx)[pos]), age[pos]
            ref = brentq(lambda q: float(logsumexp(lw - q * xa)), -50, 50, xtol=1e-14)
            assert r == pytest.approx(ref, abs=1e-11)
