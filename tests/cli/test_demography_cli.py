"""The demographic commands: JSON keys, human tables, and bad input without tracebacks."""

import json

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from planner.cli.main import main


def run(argv, capsys):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_lifetable_json_keys(birch_csv, capsys):
    code, out, err = run(["lifetable", birch_csv, "--age-unit", "week", "--json"], capsys)
    assert code == 0, err
    data = json.loads(out)
    for key in ("net_reproductive_rate", "intrinsic_rate", "finite_rate", "generation_time",
                "doubling_time"):
        assert key in data
    assert data["intrinsic_rate"] == pytest.approx(0.762, abs=0.002)


def test_lifetable_human_table_has_units(birch_csv, capsys):
    code, out, _ = run(["lifetable", birch_csv, "--age-unit", "week"], capsys)
    assert code == 0
    assert "per week" in out and "lx [-]" in out


def test_female_fraction_option(fly_csv, capsys):
    _, a, _ = run(["lifetable", fly_csv, "--json"], capsys)
    _, b, _ = run(["lifetable", fly_csv, "--female-fraction", "0.5", "--json"], capsys)
    assert json.loads(b)["net_reproductive_rate"] == pytest.approx(
        0.5 * json.loads(a)["net_reproductive_rate"])


def test_matrix_json_keys(crouse_csv, capsys):
    code, out, err = run(["matrix", crouse_csv, "--json"], capsys)
    assert code == 0, err
    data = json.loads(out)
    for key in ("finite_rate", "stable_distribution", "reproductive_values",
                "net_reproductive_rate", "generation_time", "damping_ratio"):
        assert key in data
    assert data["finite_rate"] == pytest.approx(0.9450, abs=5e-5)
    assert data["all_stage_harvest"] is None  # a shrinking population: nothing to harvest


def test_harvest_json_keys(fly_csv, capsys):
    code, out, err = run(["harvest", fly_csv, "--female-fraction", "0.5", "--harvest-age", 25,
                          "--discard-age", 57, "--emergence-age", 28, "--json"], capsys)
    assert code == 0, err
    data = json.loads(out)
    for key in ("harvest_fraction", "output_per_female", "net_reproductive_rate",
                "stationary_structure"):
        assert key in data
    assert (1 - data["harvest_fraction"]) * data["net_reproductive_rate"] == pytest.approx(1)
    assert sum(data["stationary_structure"].values()) == pytest.approx(1)


def test_harvest_grid_without_ages(moth_csv, capsys):
    code, out, _ = run(["harvest", moth_csv, "--female-fraction", "0.5"], capsys)
    assert code == 0
    assert "harvest fraction H" in out and "first laying age" in out


def test_cohort_json_has_intervals(tmp_path, capsys):
    from tests.demography.test_cohort import simulate_records
    f = tmp_path / "c.csv"
    simulate_records(n_cages=10, seed=1).to_csv(f, index=False)
    code, out, err = run(["cohort", f, "--bootstrap", 200, "--seed", 3, "--json"], capsys)
    assert code == 0, err
    data = json.loads(out)
    assert "net_reproductive_rate" in data and "intrinsic_rate" in data
    assert data["intervals"]["bootstrap"]["resamples"] == 200
    assert "jackknife" in data["intervals"]


BAD_TABLES = {
    "missing column": "age,lx\n0,1\n",
    "extra column": "age,lx,mx,notes\n0,1,0,a\n",
    "text number": "age,lx,mx\n0,1,zero\n",
    "empty": "",
    "header only": "age,lx,mx\n",
    "not ascending": "age,lx,mx\n0,1,0\n2,.9,1\n1,.8,1\n",
    "repeated": "age,lx,mx\n0,1,0\n1,.9,1\n1,.8,1\n",
    "lx above 1": "age,lx,mx\n0,1,0\n1,1.5,1\n",
    "lx increasing": "age,lx,mx\n0,1,0\n1,.5,1\n2,.7,1\n",
    "negative mx": "age,lx,mx\n0,1,0\n1,.9,-1\n",
    "short row": "age,lx,mx\n0,1,0\n1,.9\n",
}


@pytest.mark.parametrize("name", sorted(BAD_TABLES))
def test_bad_life_tables_give_one_line_and_exit_2(tmp_path, capsys, name):
    f = tmp_path / "bad.csv"
    f.write_text(BAD_TABLES[name])
    code, out, err = run(["lifetable", f], capsys)
    assert code == 2
    assert "Traceback" not in err
    assert err.strip().count("\n") == 0, err
    assert "bad.csv" in err


def test_missing_file(capsys):
    code, _, err = run(["lifetable", "/nonexistent/table.csv"], capsys)
    assert code == 2 and "file not found" in err


def test_bad_option_value_is_one_line(birch_csv, capsys):
    code, _, err = run(["lifetable", birch_csv, "--female-fraction", "1.5"], capsys)
    assert code == 2 and err.strip().count("\n") == 0


def test_harvest_age_after_discard_age_cli(fly_csv, capsys):
    code, _, err = run(["harvest", fly_csv, "--harvest-age", 60, "--discard-age", 50,
                        "--emergence-age", 28], capsys)
    assert code == 2 and "after the discard age" in err


def test_harvest_age_outside_table_cli(fly_csv, capsys):
    code, _, err = run(["harvest", fly_csv, "--harvest-age", 25, "--discard-age", 200,
                        "--emergence-age", 28], capsys)
    assert code == 2 and "no age 200" in err


# -- property tests: random and corrupted tables never give a traceback -------------

@st.composite
def life_tables(draw):
    n = draw(st.integers(2, 40))
    surv = draw(st.lists(st.floats(0.5, 1.0), min_size=n - 1, max_size=n - 1))
    lx = np.concatenate([[1.0], np.cumprod(surv)])
    start = draw(st.integers(1, n - 1))
    mx = [0.0] * start + draw(st.lists(st.floats(0, 30), min_size=n - start,
                                       max_size=n - start))
    return np.arange(n), np.round(lx, 6), np.round(mx, 4)


def write_table(path, age, lx, mx):
    path.write_text("age,lx,mx\n" + "".join(f"{a},{l},{m}\n" for a, l, m in zip(age, lx, mx)))


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(table=life_tables())
def test_random_tables_hold_invariants(tmp_path_factory, table):
    age, lx, mx = table
    f = tmp_path_factory.mktemp("t") / "t.csv"
    write_table(f, age, lx, mx)
    code = main(["lifetable", str(f), "--json"])
    assert code in (0, 2)
    from planner.demography import read_life_table
    lt = read_life_table(f)
    r0 = lt.net_reproductive_rate()
    if r0 > 0:
        r = lt.intrinsic_rate
        assert np.sign(r) == np.sign(round(r0 - 1, 12)) or abs(r0 - 1) < 1e-9
        assert lt.stable_age_distribution().sum() == pytest.approx(1.0)
    grid_code = main(["harvest", str(f), "--json"])
    assert grid_code in (0, 2)
    if r0 > 1 and lt.net_reproductive_rate(0) < 1:
        from planner.demography import single_stage_harvest
        res = single_stage_harvest(lt, 0, float(age[-1]))
        assert (1 - res.harvest_fraction) * res.net_reproductive_rate == pytest.approx(1.0)


@settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(table=life_tables(), data=st.data())
def test_corrupted_tables_never_give_a_traceback(tmp_path_factory, capsys, table, data):
    age, lx, mx = table
    f = tmp_path_factory.mktemp("t") / "t.csv"
    write_table(f, age, lx, mx)
    lines = f.read_text().splitlines()
    i = data.draw(st.integers(0, len(lines) - 1))
    junk = data.draw(st.sampled_from(["abc", "", "-1", "1e999", "nan", ",", "2,3,4,5", "1.5",
                                      "\x00", ";;", "\"", "inf"]))
    how = data.draw(st.sampled_from(["replace", "append_cell", "drop", "insert"]))
    if how == "replace":
        cells = lines[i].split(",")
        j = data.draw(st.integers(0, len(cells) - 1))
        cells[j] = junk
        lines[i] = ",".join(cells)
    elif how == "append_cell":
        lines[i] += "," + junk
    elif how == "drop":
        del lines[i]
    else:
        lines.insert(i, junk)
    f.write_text("\n".join(lines) + "\n")
    for cmd in (["lifetable", str(f)], ["harvest", str(f)]):
        code = main(cmd)
        out, err = capsys.readouterr()
        assert code in (0, 2), err
        assert "Traceback" not in err and "internal error" not in err
        if code == 2:
            assert err.strip() and all(line.startswith("error: ") for line in err.strip().splitlines())


def test_the_harvest_grid_prints_the_best_pairs_and_the_range(fly_csv, capsys):
    """Issue 13: the harvest grid printed 1,980 rows. By default the 20 best pairs by
    output per female and the feasible range; every pair with --all, and in --json."""
    import json
    from planner.cli.demography_cmds import GRID_SHOWN
    from planner.cli.main import main
    assert main(["harvest", str(fly_csv), "--json"]) == 0
    grid = json.loads(capsys.readouterr().out)["grid"]
    assert len(grid) > GRID_SHOWN
    assert main(["harvest", str(fly_csv)]) == 0
    out = capsys.readouterr().out
    assert f"the {GRID_SHOWN} best of {len(grid)} pairs" in out and "feasible pairs:" in out
    best = max(g["output_per_female"] for g in grid)
    assert f"{best:.2f}" in out
    assert main(["harvest", str(fly_csv), "--all"]) == 0
    assert len(capsys.readouterr().out.splitlines()) >= len(grid)
