"""`broodline risk --target-fill` and `broodline plan --target-fill`: a search that meets
no margin prints the base plan's replay and the margins tried and exits 0; a search that
meets one plans with it; a plan of a colony model without spreads claims no fill."""

import json
import re

import numpy as np
import openpyxl
import pytest

import planner.risk.margin
from planner.cli import plan_cmds
from planner.cli.main import main
from planner.optimise import available_solvers
from planner.risk import replay
from planner.scenario import dump_toml
from planner.scenario.toml_out import to_toml_text

FAST = "highs" if "highs" in available_solvers() else "cbc"


@pytest.fixture(scope="module")
def six_weeks(fly, tmp_path_factory):
    """The demo over six weeks, as a scenario file (weeks 5-6 are those a margin can
    change)."""
    scn = fly.model_copy(deep=True)
    scn.plan.horizon_weeks = 6
    path = tmp_path_factory.mktemp("six") / "six-weeks.toml"
    path.write_text(dump_toml(scn))
    return path


def _run(argv, capsys):
    code = main(argv)
    out, err = capsys.readouterr()
    return code, out, err


FAILING = ["--target-fill", "0.999", "--max-margin", "0.02", "--replicates", "400",
           "--solver", FAST, "--quiet"]


def test_a_target_not_met_prints_the_replay_and_the_margins_tried(six_weeks, tmp_path,
                                                                  capsys, monkeypatch):
    # the text and the JSON runs make the same plans: the second reuses the first's
    real, made = planner.risk.margin.plan_with_margin, {}

    def once(scn, margin, *a, **k):
        # the margin, the horizon and the first week (start batches are rebuilt per run)
        key = (round(margin, 12),) + tuple(x for x in a[2:] if isinstance(x, int)) + \
            tuple(sorted((n, v) for n, v in k.items() if isinstance(v, int)))
        if key not in made:
            made[key] = real(scn, margin, *a, **k)
        return made[key]
    monkeypatch.setattr(planner.risk.margin, "plan_with_margin", once)
    code, out, err = _run(["risk", str(six_weeks), *FAILING], capsys)
    assert code == 0, err
    assert "No safety margin up to 2.0 % fills every week from week 5" in out
    assert "Margins tried" in out and "replays of the plan without a margin" in out
    # the replay table: one row per plan week
    rows = [ln for ln in out.splitlines() if re.match(r"^\s+[1-6]\s+10\s", ln)]
    assert len(rows) == 6
    assert "colony model's [variation] spreads" in out and "licensed staff" in out

    code, text, err = _run(["risk", str(six_weeks), *FAILING, "--json"], capsys)
    assert code == 0, err
    d = json.loads(text)
    m = d["margin"]
    assert m["met"] is False and m["margin"] is None and m["largest_margin_tried"] == 0.02
    assert [t["margin"] for t in m["tried"]] == [0.0, 0.02]
    for t in m["tried"]:
        assert {"margin", "worst_week_fill_probability", "all_weeks_filled_probability"} <= set(t)
        assert 0 <= t["all_weeks_filled_probability"] <= t["worst_week_fill_probability"] < 0.999
    base = m["tried"][0]
    assert base["worst_week_fill_probability"] == m["worst_week_fill_without_margin"]
    # the replay printed is that of the plan without a margin: its worst week's fill is the
    # first margin's
    by_week = {w["week"]: w for w in d["risk"]["weeks"] if w["customer"] == "all"}
    assert by_week[base["worst_week"]]["fill_probability"] == base["worst_week_fill_probability"]

    # plan --target-fill runs the same search, and writes the plan without a margin
    out_xlsx = tmp_path / "p.xlsx"
    code, text, err = _run(["plan", str(six_weeks), *FAILING, "--json", "-o", str(out_xlsx)],
                           capsys)
    assert code == 0, err
    p = json.loads(text)
    assert p["margin"]["tried"] == m["tried"]
    assert [w["ordered"] for w in p["weeks"]] == pytest.approx(
        [by_week[w]["ordered"] for w in sorted(by_week)])
    assert p["fill_probability"]["from_margin_week"]["worst_week_probability"] == \
        base["worst_week_fill_probability"]
    assert "Risk" in openpyxl.load_workbook(out_xlsx).sheetnames

    code, out, err = _run(["plan", str(six_weeks), *FAILING, "-o", str(out_xlsx)], capsys)
    assert code == 0, err
    assert "No safety margin up to 2.0 %" in out and "without a margin" in out
    assert "Margins tried" in out and "Chance of filling every week" in out


def test_plan_with_target_fill_plans_with_the_margin_found(six_weeks, tmp_path, monkeypatch,
                                                           capsys):
    target = 0.6
    found = {}
    real = planner.risk.margin.safety_margin

    def spy(*a, **k):
        found["res"] = real(*a, **k)
        return found["res"]

    monkeypatch.setattr(planner.risk.margin, "safety_margin", spy)
    code, text, err = _run(["plan", str(six_weeks), "--target-fill", str(target),
                            "--replicates", "1000", "--solver", FAST, "--quiet", "--json",
                            "-o", str(tmp_path / "p.xlsx")], capsys)
    assert code == 0, err
    d = json.loads(text)
    res = found["res"]
    m = d["margin"]
    assert m["met"] and 0 < m["margin"] <= 0.64 and m["margin"] == res.margin
    # the plan written is the margin's: its orders from the margin's week are raised
    booked = res.base_plan.weekly.groupby("week")["ordered"].sum()
    for w in d["weeks"]:
        factor = 1 + m["margin"] if w["week"] >= res.from_week else 1.0
        assert w["ordered"] == pytest.approx(booked[w["week"]] * factor, rel=1e-9)
    assert d["fill_probability"]["from_margin_week"]["worst_week_probability"] >= target
    # and it holds on a fresh seed, judged against the book: Monte-Carlo error of both
    # estimates (binomial), three standard errors, plus the selection of the worse week
    fresh = replay(res.plan, replicates=4000, seed=999, ordered=res.base_plan.data.ordered)
    se = np.sqrt(target * (1 - target) * (1 / 1000 + 1 / 4000))
    assert fresh.worst_fill(res.from_week) >= target - 3 * se - 0.02
    # without the margin the same weeks are filled less often (a margin that helps)
    assert res.base_risk.worst_fill(res.from_week) < target


def test_a_colony_model_without_spreads_claims_no_fill(fly, tmp_path, capsys):
    scn = fly.model_copy(deep=True)
    scn.plan.horizon_weeks = 4
    raw = scn.model_dump(mode="python", exclude_none=True)
    del raw["colony"]["variation"]
    path = tmp_path / "no-spreads.toml"
    path.write_text(to_toml_text(raw))
    argv = ["plan", str(path), "--solver", FAST, "--quiet", "-o", str(tmp_path / "p.xlsx")]
    code, out, err = _run(argv, capsys)
    assert code == 0, err
    assert "Chance of filling" not in out and "[variation] spreads" not in out
    assert "licensed staff" in out  # the usual cautions stay
    code, text, err = _run(argv + ["--json"], capsys)
    assert code == 0 and "fill_probability" not in json.loads(text)


@pytest.mark.parametrize("argv, needle", [
    (["risk", "x.toml", "--target-fill", "0.9", "--max-margin", "-0.1"], "from 0 to 4"),
    (["plan", "x.toml", "--target-fill", "1"], "between 0 and 1"),
    (["plan", "x.toml", "--replicates", "0"], "at least 1"),
])
def test_bad_risk_options_are_one_line_exit_2(argv, needle, capsys):
    code, _, err = _run(argv, capsys)
    lines = err.strip().splitlines()
    assert code == 2 and len(lines) == 1 and needle in lines[0]


@pytest.mark.parametrize("command", ["risk", "plan"])
def test_too_many_replicates_are_refused_before_the_solve(six_weeks, command, capsys,
                                                          monkeypatch):
    """Issue 12 item 11: `risk --replicates 10000000` grew 40 MB/s to 8 GB before printing
    anything. The count is refused from the plan's length before any model is built."""
    import planner.optimise

    def no_solve(*a, **k):
        raise AssertionError("solved before the replicate count was checked")
    monkeypatch.setattr(planner.optimise, "plan_horizon", no_solve)
    code, _, err = _run([command, str(six_weeks), "--replicates", "10000000", "--quiet"],
                        capsys)
    lines = err.strip().splitlines()
    assert code == 2 and len(lines) == 1, lines
    assert "GB" in lines[0] and "--replicates" in lines[0] and "use at most" in lines[0]
