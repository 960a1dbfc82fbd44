"""`broodline quote`, `capacity`, `expand` and `risk` from the command line: JSON keys,
workbooks, and one-line errors with exit code 2."""

import json

import openpyxl
import pytest

import planner.optimise
from planner.cli.answer_cmds import parse_sweep
from planner.cli.main import main
from planner.scenario import demo_scenario_path

FLY = str(demo_scenario_path("fly"))


def test_capacity_json(capsys):
    assert main(["capacity", FLY, "--json", "--quiet"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert d["max_weekly_volume"] > 0
    assert {"resource", "binding_volume", "shadow_price", "shadow_unit"} <= set(d["resources"][0])
    assert d["limiting_resource"] == min(d["resources"], key=lambda r: r["binding_volume"])[
        "resource"]


@pytest.mark.parametrize("argv, needle", [
    (["quote", FLY, "--weekly", "-3", "--weeks", "4"], "positive"),
    (["quote", FLY, "--weekly", "2", "--weeks", "0"], "at least one week"),
    (["quote", FLY, "--weekly", "2", "--weeks", "4", "--start", "2020-01-06"],
     "before the plan starts"),
    (["expand", FLY], "--target"),
    (["expand", FLY, "--sweep", "20:10:1"], "LOW <= HIGH"),
    (["risk", FLY, "--target-fill", "1.5"], "between 0 and 1"),
    (["risk", FLY, "--replicates", "0"], "at least 1"),
])
def test_bad_answers_input_is_one_line_exit_2(argv, needle, capsys):
    assert main(argv) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and needle in err[0] and "Traceback" not in err[0]


def test_parse_sweep_includes_the_high_end():
    assert parse_sweep("12:14:0.5") == [12.0, 12.5, 13.0, 13.5, 14.0]


def test_risk_json_and_workbook(tmp_path, monkeypatch, fly_plan, capsys):
    monkeypatch.setattr(planner.optimise, "plan_horizon", lambda scn, settings: fly_plan)
    out = tmp_path / "risk.xlsx"
    code = main(["risk", FLY, "--replicates", "300", "--seed", "5", "--json", "-o", str(out)])
    text, err = capsys.readouterr()
    assert code == 0, err
    d = json.loads(text)["risk"]
    assert d["replicates"] == 300 and d["seed"] == 5
    assert 0 <= d["worst_week_fill_probability"] <= 1
    weeks = [w for w in d["weeks"] if w["customer"] == "all"]
    assert len(weeks) == fly_plan.data.report_weeks
    assert all(w["p5"] <= w["p50"] <= w["p95"] for w in weeks)
    wb = openpyxl.load_workbook(out)
    assert wb.sheetnames[1] == "Risk"
    assert len(wb["Risk"]._charts) == 2


def test_quote_json_and_workbook(tmp_path, fly, capsys):
    """A small order on a six-week copy of the demo: the issue's JSON keys, the plan
    workbook with the answer first."""
    from planner.scenario import dump_toml
    scn = fly.model_copy(deep=True)
    scn.plan.horizon_weeks = 6
    path = tmp_path / "six-weeks.toml"
    path.write_text(dump_toml(scn))
    out = tmp_path / "quote.xlsx"
    code = main(["quote", str(path), "--weekly", "0.3", "--weeks", "2", "--customer",
                 "Hillside Growers", "--json", "-o", str(out)])
    text, err = capsys.readouterr()
    assert code == 0, err
    d = json.loads(text)
    for key in ("feasible", "extra_cost_per_week", "cost_per_million", "ramp_up_start",
                "max_weekly_volume", "earliest_full_start", "limiting_resources"):
        assert key in d
    assert d["feasible"] is True and d["max_weekly_volume"] is None
    assert d["full_from_week"] == d["start_week"] and d["lead_time_limited"] is False
    assert d["partial_weeks"] == [] and d["booked_shortfall_million"] <= 1e-6
    assert d["solves"] <= 20 and d["seconds"] > 0 and d["time_limited"] is False
    assert any(c["customer"].endswith("(quote)") for c in d["customers"])
    assert d["extra_cost_per_week"] > 0
    wb = openpyxl.load_workbook(out)
    assert wb.sheetnames[0] == "Quote"
    assert "Hillside Growers (quote)" in {c.value for row in wb["Orders"].iter_rows()
                                          for c in row}


def test_no_plan_is_one_line_and_exit_3(monkeypatch, capsys):
    from types import SimpleNamespace
    no_plan = SimpleNamespace(info=SimpleNamespace(has_plan=False,
                                                   message="no plan within the time limit"))
    monkeypatch.setattr(planner.optimise, "plan_horizon", lambda scn, settings: no_plan)
    assert main(["risk", FLY, "--replicates", "10"]) == 3
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "no plan to replay" in err[0]
