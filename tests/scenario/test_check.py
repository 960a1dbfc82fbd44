"""`broodline check`: its figures against the demographic layer's own formulas."""

import json

import numpy as np
import pytest

from planner.cli.main import main
from planner.demography import single_stage_harvest
from planner.scenario import demo_scenario_path, load_scenario
from planner.scenario.check import check_report
from planner.scenario.sizing import stationary_needs


@pytest.fixture(scope="module")
def fly():
    return load_scenario(demo_scenario_path("fly"))


def test_pairs_match_single_stage_harvest(fly):
    rep = check_report(fly)
    lt = fly.colony.to_life_table()
    rearing = fly.colony.rearing
    assert len(rep["harvest_pairs"]) == len(rearing.harvest_ages) * len(rearing.discard_ages)
    for p in rep["harvest_pairs"]:
        ref = single_stage_harvest(lt, p["harvest_age"], p["discard_age"], 28)
        assert p["harvest_fraction"] == pytest.approx(ref.harvest_fraction)
        assert p["output_per_female"] == pytest.approx(ref.output_per_female)


def test_stationary_needs_hold_zero_growth_and_the_output_per_female(fly):
    # Eggs laid by the cages equal the eggs seeded (replacement), and released pupae per
    # adult female equal P / phi from the single-stage formula.
    col = fly.colony
    lx, mf = col.lx(), col.female_mx()
    k, tc, eps = col.rearing.pupae_per_cage, col.rearing.cage_loading_age, col.stages.emergence_age
    for theta, delta in [(24, 57), (26, 71)]:
        n = stationary_needs(fly, 12.0, theta, delta)
        laid = n.cages_loaded * k * np.sum(lx[tc:delta + 1] / lx[tc] * mf[tc:delta + 1])
        assert laid == pytest.approx(n.eggs, rel=1e-12)
        females = n.cages_loaded * k * col.female_fraction * np.sum(lx[eps:delta + 1] / lx[tc])
        p = single_stage_harvest(col.to_life_table(), theta, delta, eps).output_per_female
        assert n.released / females == pytest.approx(p / col.female_fraction, rel=1e-12)
        assert n.released * 7 * col.rearing.product_yield == pytest.approx(12e6)


def test_largest_week_and_shortage_flags(fly):
    rep = check_report(fly)
    assert rep["orders"]["largest_volume"] == pytest.approx(14.0)
    assert rep["orders"]["total_by_week"][0] == pytest.approx(10.0)
    needs = {n["resource"]: n for n in rep["estimate"]["needs"]}
    assert needs["cage slots"]["available"] == sum(r.cage_slots for r in fly.facility.adult_rooms)
    assert rep["ok"] == (not any(n["short"] for n in needs.values()))


def test_a_short_resource_is_flagged(tmp_path):
    scn = load_scenario(demo_scenario_path("fly"))
    small = scn.model_copy(deep=True)
    small.facility.adult_rooms[0].cage_slots = 4
    small.facility.adult_rooms[1].cage_slots = 4
    rep = check_report(small)
    assert "cage slots" in rep["short"] and not rep["ok"]


def test_check_cli_json(capsys):
    code = main(["check", str(demo_scenario_path("moth")), "--json"])
    out, err = capsys.readouterr()
    assert code == 0, err
    data = json.loads(out)
    for key in ("colony", "harvest_pairs", "capacities", "orders", "estimate", "short"):
        assert key in data


def test_check_cli_human(capsys):
    code = main(["check", str(demo_scenario_path("fly"))])
    out, _ = capsys.readouterr()
    assert code == 0
    assert "First estimate for the largest week" in out and "[million]" in out


def test_check_cli_bad_file_is_one_line_per_problem(tmp_path, capsys):
    f = tmp_path / "s.toml"
    f.write_text('name = "x"\ncolony = "missing.toml"\n')
    code = main(["check", str(f)])
    _, err = capsys.readouterr()
    assert code == 2 and "Traceback" not in err
    assert err.startswith("error: s.toml: colony")
