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
