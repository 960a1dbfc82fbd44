"""Life tables from cohort records: Kaplan–Meier against lifelines, resampling checks."""

import numpy as np
import pandas as pd
import pytest

from planner.demography import analyse_cohort, read_cohort_records
from planner.demography.cohort import euler_lotka_many
from planner.demography.lifetable import intrinsic_rate
from planner.errors import InputError


def simulate_records(n_cages=12, females=20, days=(30, 60), seed=3, remove_p=0.02,
                     late_entry=False):
    """Invented daily cage records with deaths, removals (censoring) and eggs."""
    rng = np.random.default_rng(seed)
    rows = []
    for c in range(n_cages):
        start = days[0] + (int(rng.integers(0, 4)) if late_entry else 0)
        alive = females
        for d in range(start, days[1] + 1):
            removed = died = 0
            if d > start:
                removed = int(rng.binomial(alive, remove_p))
                died = int(rng.binomial(alive - removed, 0.01 + 0.002 * (d - days[0])))
                alive -= removed + died
            eggs = int(rng.poisson(8 * alive)) if d >= days[0] + 3 else 0
            rows.append({"cage": f"C{c:02d}", "day": d, "females": alive, "removed": removed,
                         "eggs": eggs, "males": alive, "removed_males": 0})
            if alive == 0:
                break
    return pd.DataFrame(rows)


def to_individuals(df):
    """One row per female: entry day, exit day, died? (for lifelines)."""
    out = []
    for _, g in df.sort_values("day").groupby("cage"):
        g = g.reset_index(drop=True)
        entry = g.loc[0, "day"]
        out += [(entry, entry, 0)] * int(g.loc[0, "removed"])
        for k in range(1, len(g)):
            died = g.loc[k - 1, "females"] - g.loc[k, "females"] - g.loc[k, "removed"]
            out += [(entry, g.loc[k, "day"], 1)] * int(died)
            out += [(entry, g.loc[k, "day"], 0)] * int(g.loc[k, "removed"])
        out += [(entry, g["day"].iloc[-1], 0)] * int(g["females"].iloc[-1])
    return pd.DataFrame(out, columns=["entry", "duration", "event"])


@pytest.mark.parametrize("late_entry", [False, True])
def test_kaplan_meier_matches_lifelines(tmp_path, late_entry):
    lifelines = pytest.importorskip("lifelines")
    df = simulate_records(late_entry=late_entry)
    f = tmp_path / "cohort.csv"
    df.to_csv(f, index=False)
    res = analyse_cohort(read_cohort_records(f), jackknife=False)
    ind = to_individuals(df)
    kmf = lifelines.KaplanMeierFitter()
    kmf.fit(ind["duration"], ind["event"], entry=ind["entry"])
    ref = kmf.survival_function_at_times(res.life_table.age).to_numpy()
    np.testing.assert_allclose(res.life_table.lx, ref, atol=1e-12)


def test_fecundity_is_eggs_per_female_day(tmp_path):
    f = tmp_path / "c.csv"
    # two cages, no deaths: mx is eggs divided by females alive
    f.write_text("cage,day,females,eggs\nA,10,10,0\nA,11,10,50\nA,12,10,70\n"
                 "B,10,5,0\nB,11,5,25\nB,12,5,35\n")
    res = analyse_cohort(read_cohort_records(f))
    np.testing.assert_allclose(res.life_table.mx, [0, 5, 7])
    np.testing.assert_allclose(res.life_table.lx, [1, 1, 1])


def test_intervals_bracket_the_estimate_and_are_seeded(tmp_path):
    df = simulate_records(n_cages=30, females=1, seed=11, remove_p=0.0)
    f = tmp_path / "c.csv"
    df.to_csv(f, index=False)
    rec = read_cohort_records(f)
    a = analyse_cohort(rec, bootstrap=300, seed=5, female_fraction=0.5)
    b = analyse_cohort(rec, bootstrap=300, seed=5, female_fraction=0.5)
    assert a.intervals == b.intervals
    r = a.life_table.intrinsic_rate
    for method in ("bootstrap", "jackknife"):
        block = a.intervals[method]["intrinsic_rate"]
        assert block["low"] < r < block["high"]


def test_jackknife_equals_a_loop_over_left_out_cages(tmp_path):
    df = simulate_records(n_cages=6, seed=2)
    f = tmp_path / "c.csv"
    df.to_csv(f, index=False)
    full = analyse_cohort(read_cohort_records(f))
    n = 6
    loo = []
    for cage in sorted(df["cage"].unique()):
        g = tmp_path / f"loo_{cage}.csv"
        df[df["cage"] != cage].to_csv(g, index=False)
        loo.append(analyse_cohort(read_cohort_records(g), jackknife=False)
                   .life_table.net_reproductive_rate())
    r0 = full.life_table.net_reproductive_rate()
    pseudo = n * r0 - (n - 1) * np.array(loo)
    assert full.intervals["jackknife"]["net_reproductive_rate"]["estimate"] == \
        pytest.approx(pseudo.mean())


def test_vectorised_euler_lotka_matches_brent():
    rng = np.random.default_rng(0)
    age = np.arange(1, 80, dtype=float)
    w = rng.uniform(0, 1, (200, age.size)) * (age > 20) * rng.uniform(0, 0.3, (200, 1))
    r = euler_lotka_many(age, w)
    for i in range(0, 200, 17):
        assert r[i] == pytest.approx(intrinsic_rate(age, np.ones_like(age), w[i]), abs=1e-11)


@pytest.mark.parametrize("text,match", [
    ("cage,day,females,eggs\nA,1,10,0\nA,2,12,5\n", "more females"),
    ("cage,day,females,eggs\nA,1,10,0\nA,1,9,5\n", "same day"),
    ("cage,day,females\nA,1,10\n", "missing column 'eggs'"),
    ("cage,day,females,eggs,colour\nA,1,10,0\n", "unknown column"),
    ("cage,day,females,eggs\nA,1,ten,0\n", "text where a number"),
    ("cage,day,females,eggs\nA,1,-3,0\n", "negative"),
    ("cage,day,females,eggs\nA,1.5,3,0\n", "whole number"),
])
def test_malformed_records(tmp_path, text, match):
    f = tmp_path / "c.csv"
    f.write_text(text)
    with pytest.raises(InputError, match=match):
        read_cohort_records(f)


def test_one_cage_cannot_be_resampled(tmp_path):
    f = tmp_path / "c.csv"
    f.write_text("cage,day,females,eggs\nA,1,10,0\nA,2,9,50\n")
    with pytest.raises(InputError, match="at least 2 cages"):
        analyse_cohort(read_cohort_records(f), bootstrap=10)


def test_the_shipped_cohort_records_recover_the_table_they_were_drawn_from():
    """Issue 13: `broodline cohort` had no example. models/fernhollow-fly-cohort-records.csv
    (invented; drawn by models/invent_life_tables.py from the fly demo's life table) is
    read and analysed; the 95 % jackknife and bootstrap intervals of R0 contain the R0 of
    the table the records were drawn from (entry survival = lx at emergence)."""
    from pathlib import Path
    from planner.demography import read_life_table
    models = Path(__file__).resolve().parents[2] / "models"
    truth = read_life_table(models / "fernhollow-fly-lifetable.csv")
    rec = read_cohort_records(models / "fernhollow-fly-cohort-records.csv")
    res = analyse_cohort(rec, entry_survival=float(truth.lx[28]), bootstrap=500, seed=1)
    iv = res.summary()["intervals"]
    r0 = truth.net_reproductive_rate()
    for method in ("jackknife", "bootstrap"):
        ci = iv[method]["net_reproductive_rate"]
        assert ci["low"] <= r0 <= ci["high"], (method, ci, r0)
