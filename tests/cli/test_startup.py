"""`broodline check` answers in about a second: it loads neither pandas, nor the
optimiser's read-back, nor the report writers. Guarded here by what a fresh process
imports (timings belong to bench/answers.py)."""

import json
import subprocess
import sys

from planner.scenario import demo_scenario_path

_PROBE = """
import contextlib, io, json, sys
from planner.cli.main import main
with contextlib.redirect_stdout(io.StringIO()):
    code = main(["check", sys.argv[1]])
heavy = ["pandas", "openpyxl", "scipy.optimize", "planner.optimise.results",
         "planner.reports", "planner.risk.simulate"]
print(json.dumps({"code": code, "loaded": [m for m in heavy if m in sys.modules]}))
"""


def test_check_loads_no_tables_solver_read_back_or_reports():
    out = subprocess.run([sys.executable, "-c", _PROBE, str(demo_scenario_path("fly"))],
                         capture_output=True, text=True, check=True, timeout=60)
    got = json.loads(out.stdout.strip().splitlines()[-1])
    assert got["code"] == 0
    assert got["loaded"] == []


def test_every_argument_says_what_it_is():
    """Issue 13: `--json` and the SCENARIO argument had no help text."""
    import argparse
    from planner.cli.main import build_parser
    p = build_parser()
    sub = next(a for a in p._actions if isinstance(a, argparse._SubParsersAction))
    missing = [f"{name} {a.dest}" for name, sp in sub.choices.items() for a in sp._actions
               if not a.help and not isinstance(a, argparse._HelpAction)]
    assert missing == []


_LOADED = """
import contextlib, io, json, sys
from planner.cli.main import main
with contextlib.redirect_stdout(io.StringIO()):
    code = main(sys.argv[1:])
heavy = ["numpy", "pydantic", "pandas", "scipy", "pulp", "planner.scenario"]
print(json.dumps({"code": code, "loaded": [m for m in heavy if m in sys.modules]}))
"""


def _loaded(*argv):
    out = subprocess.run([sys.executable, "-c", _LOADED, *argv], capture_output=True,
                         text=True, check=True, timeout=60)
    return json.loads(out.stdout.strip().splitlines()[-1])


def test_help_loads_no_science_or_scenario_layer():
    """Issue 13: every command took 3.3-4.8 s to start, --help included (target < 0.5 s):
    building the parser loads neither numpy nor pydantic nor the scenario layer."""
    got = _loaded("--help")
    assert got == {"code": 0, "loaded": []}


def test_lifetable_loads_no_tables_or_solver(fly_csv):
    """`broodline lifetable` (target < 1 s) needs numpy only: no pandas, scipy or PuLP."""
    got = _loaded("lifetable", str(fly_csv))
    assert got["code"] == 0 and got["loaded"] == ["numpy"]
