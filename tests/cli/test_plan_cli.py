"""`broodline plan` and `broodline demo`, and the README's two Quick-start lines."""

import json
import re
import shlex
import subprocess
import sys
from pathlib import Path

import openpyxl
import pytest

import planner.optimise
from planner.cli import plan_cmds
from planner.cli.main import main
from planner.cli.progress import parse_progress
from planner.scenario import demo_scenario_path

ROOT = Path(__file__).resolve().parents[2]


def quick_start_lines():
    text = (ROOT / "README.md").read_text()
    block = re.search(r"^## Quick start\n.*?^```\n(.*?)^```", text, re.S | re.M).group(1)
    return [ln for ln in block.splitlines() if ln.strip()]


@pytest.fixture
def solved(monkeypatch, fly_plan):
    """Reuse the session's solved demo plan instead of solving again."""
    monkeypatch.setattr(planner.optimise, "plan_horizon", lambda scn, settings: fly_plan)
    return fly_plan


def test_quick_start_has_two_lines_and_the_first_runs_the_demo(tmp_path, monkeypatch, solved,
                                                                capsys):
    lines = quick_start_lines()
    assert len(lines) == 2
    first = lines[0].split("&&")[-1].strip()
    assert first.startswith("broodline demo")
    monkeypatch.chdir(tmp_path)
    code = main(shlex.split(first)[1:])
    out, err = capsys.readouterr()
    assert code == 0, err
    wb = openpyxl.load_workbook(tmp_path / "broodline-demo-plan.xlsx")
    assert "Tasks" in wb.sheetnames and "wrote" in out


def test_quick_start_second_line_installs_the_extras_and_runs_pytest():
    line = quick_start_lines()[1]
    assert "pip install" in line and "[test" in line and "pytest" in line
    extras = re.search(r"\[(.*?)\]", line).group(1).split(",")
    pyproject = (ROOT / "pyproject.toml").read_text()
    for extra in extras:
        assert re.search(rf"^{extra} = \[", pyproject, re.M), extra
    test_cmd = line.split("&&")[-1].strip()
    argv = shlex.split(test_cmd)
    if argv[0] == "python":  # the interpreter running these tests, whatever PATH says
        argv[0] = sys.executable
    proc = subprocess.run(argv + ["--collect-only", "-q", "tests/demography"],
                          cwd=ROOT, capture_output=True, text=True,
                          timeout=300) if test_cmd.startswith("python") else None
    assert proc is None or proc.returncode == 0, proc.stdout[-2000:]


def test_ci_runs_the_readme_lines():
    ci = (ROOT / ".ci" / "run").read_text()
    assert "Quick start" in ci and "README.md" in ci


def test_plan_json_and_csv(tmp_path, solved, capsys):
    out = tmp_path / "p.xlsx"
    code = main(["plan", str(demo_scenario_path("fly")), "-o", str(out), "--csv",
                 str(tmp_path / "csv"), "--json"])
    text, err = capsys.readouterr()
    assert code == 0, err
    data = json.loads(text)
    for key in ("status", "objective", "best_bound", "gap", "total_cost", "cost_per_million",
                "weeks", "bottlenecks", "outputs"):
        assert key in data
    assert data["weeks"][0]["week"] == 1 and {"ordered", "released", "shortfall"} <= set(
        data["weeks"][0])
    assert Path(data["outputs"]["workbook"]).exists()
    assert (tmp_path / "csv" / "daily.csv").exists() and (tmp_path / "csv" / "weekly.csv").exists()


def test_plan_default_output_is_beside_the_scenario(tmp_path, solved, capsys):
    scn = tmp_path / "unit.toml"
    src = demo_scenario_path("fly")
    scn.write_text(src.read_text().replace('"../fernhollow-fly.toml"',
                                           repr(str(src.parent.parent / "fernhollow-fly.toml"))
                                           .replace("'", '"')))
    code = main(["plan", str(scn), "--quiet"])
    capsys.readouterr()
    assert code == 0
    assert (tmp_path / "unit-plan.xlsx").exists()


def test_no_plan_is_exit_3_and_writes_nothing(tmp_path, monkeypatch, fly_plan, capsys):
    import copy
    broken = copy.copy(fly_plan)
    broken.solution = copy.copy(fly_plan.solution)
    info = copy.copy(fly_plan.info)
    info.status, info.message = "no solution", "the solver stopped before finding any plan"
    broken.solution.info = info
    monkeypatch.setattr(planner.optimise, "plan_horizon", lambda scn, settings: broken)
    out = tmp_path / "p.xlsx"
    code = main(["plan", str(demo_scenario_path("fly")), "-o", str(out)])
    _, err = capsys.readouterr()
    assert code == plan_cmds.EXIT_NO_PLAN and "no plan" in err and not out.exists()


def test_bad_options_are_one_line(capsys):
    code = main(["plan", str(demo_scenario_path("fly")), "--gap", "5"])
    _, err = capsys.readouterr()
    assert code == 2 and err.count("\n") == 1 and "gap" in err


def test_progress_lines_are_parsed():
    # lines as CBC 2.10 and HiGHS 1.16 write them to their logs
    cbc = ("Cbc0010I After 0 nodes, 1 on tree, 13633.728 best solution, best possible "
           "13317.769 (0.05 seconds)")
    assert parse_progress(cbc) == (13633.728, 13317.769)
    highs = ("L       0       0         0   0.00%   89049.806119    89199.734727       0.17%"
             "      102     24      0       557     0.8s")
    assert parse_progress(highs) == (89199.734727, 89049.806119)
    start = ("J       0       0         0   0.00%   -inf            2209730.384411     Large"
             "        0      0      0         0     0.0s")
    assert parse_progress(start) == (2209730.384411, None)
    assert parse_progress("nothing yet") == (None, None)


def test_plan_says_its_chance_of_filling_every_week(tmp_path, solved, capsys):
    """The demo's colony model has spreads: the plan is replayed, and the numbers are those
    of planner.risk.replay run directly with the same seed."""
    import numpy as np

    from planner.risk import replay
    argv = ["plan", str(demo_scenario_path("fly")), "-o", str(tmp_path / "p.xlsx"),
            "--replicates", "500", "--seed", "3"]
    assert main(argv + ["--json"]) == 0
    f = json.loads(capsys.readouterr().out)["fill_probability"]
    r = replay(solved, replicates=500, seed=3)
    judged = r.ordered > 0
    fill = r.fill_probability()
    assert f["replicates"] == 500 and f["seed"] == 3
    assert f["all_weeks"] == pytest.approx(np.all(r.filled()[judged], axis=0).mean())
    assert f["worst_week_probability"] == pytest.approx(fill[judged].min())
    assert f["worst_week"] == int(r.weeks[judged][np.argmin(fill[judged])])
    late = judged & (r.weeks >= f["margin_from_week"])
    assert f["from_margin_week"]["worst_week_probability"] == pytest.approx(fill[late].min())

    assert main(argv) == 0
    out = capsys.readouterr().out
    line = re.search(r"Chance of filling every week: ([\d.]+) % \(worst week (\d+): ([\d.]+) "
                     r"%\), from 500 replays of the colony model's spreads; plan with "
                     r"--target-fill P to add a safety margin\.", out)
    assert line, out
    assert float(line.group(1)) == pytest.approx(100 * f["all_weeks"], abs=0.05)
    assert int(line.group(2)) == f["worst_week"]
    assert float(line.group(3)) == pytest.approx(100 * f["worst_week_probability"], abs=0.05)
    assert "[variation] spreads" in out and "licensed staff" in out


@pytest.mark.parametrize("where", ["missing-folder/plan.xlsx", "a-folder", "/proc/plan.xlsx"])
def test_an_output_that_cannot_be_written_fails_before_the_solve(tmp_path, monkeypatch,
                                                                 capsys, where):
    """Issue 12 item 10: a plan workbook that cannot be written used to fail with
    'internal error: PermissionError' after the whole solve; now exit 2 at once, one
    line, and the solver is never called. (/proc refuses new files even to root, so the
    case does not depend on who runs the tests.)"""
    def no_solve(*a, **k):
        raise AssertionError("the solve ran before the output was checked")

    monkeypatch.setattr(planner.optimise, "plan_horizon", no_solve)
    (tmp_path / "a-folder").mkdir()
    target = where if where.startswith("/") else str(tmp_path / where)
    rc = main(["plan", str(demo_scenario_path("fly")), "-o", target])
    err = capsys.readouterr().err.strip().splitlines()
    assert rc == 2
    assert len(err) == 1 and err[0].startswith("error:") and "internal" not in err[0], err


def test_an_empty_order_book_is_planned_not_a_crash(tmp_path, capsys):
    """Issue 12 item 7: a scenario without orders passed `check` and crashed `plan` after
    the solve (KeyError 'lookahead': pandas read an empty object column as column names).
    An empty book is a valid question: what does keeping the colony cost?"""
    import re as _re
    import shutil
    models = ROOT / "models"
    for name in ("fernhollow-fly.toml", "fernhollow-fly-lifetable.csv"):
        shutil.copy(models / name, tmp_path / name)
    text = demo_scenario_path("fly").read_text().replace("../fernhollow-fly.toml",
                                                        "fernhollow-fly.toml")
    text = _re.sub(r"\[\[orders\]\].*?(?=\n\[(?!\[orders))", "", text, flags=_re.S)
    assert "[[orders]]" not in text and "horizon_weeks = 26" in text
    text = text.replace("horizon_weeks = 26", "horizon_weeks = 6")
    f = tmp_path / "empty.toml"
    f.write_text(text)
    rc = main(["plan", str(f), "--time-limit", "20", "--json",
               "-o", str(tmp_path / "plan.xlsx")])
    out = json.loads(capsys.readouterr().out)
    assert rc == 0
    assert out["ordered_million"] == 0 and out["weeks"] == []
    assert (tmp_path / "plan.xlsx").exists()


def test_the_three_cost_totals_are_named_and_add_up(fly_plan):
    """Issue 13: three cost totals without explanation (objective, total, variable). The
    total is the variable cost plus the fixed regular crew; the shortfall price is its
    own figure; the objective (all modelled weeks, shortfall priced, no fixed crew) is
    the horizon's variable cost and shortfall price plus the look-ahead's."""
    s = fly_plan.summary()
    crew = fly_plan.scenario.costs.regular_crew_per_week * fly_plan.data.report_weeks
    assert s["total_cost"] == pytest.approx(s["variable_cost"] + crew, rel=1e-9)
    c = fly_plan.costs
    look = float(c.loc[c["period"] == "lookahead", "cost"].sum())
    assert s["objective"] == pytest.approx(s["variable_cost"] + s["shortfall_cost"] + look,
                                           rel=1e-6)
