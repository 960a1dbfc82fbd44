"""The wheel carries the colony models, demo scenarios and templates, and an installed
`broodline demo` finds them away from a clone."""

import os
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


@pytest.fixture(scope="module")
def wheel(tmp_path_factory):
    out = tmp_path_factory.mktemp("wheel")
    proc = subprocess.run([sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w", str(out),
                           str(ROOT)], capture_output=True, text=True, timeout=600)
    if proc.returncode != 0:
        pytest.fail(f"building the wheel failed:\n{proc.stderr[-2000:]}")
    return next(out.glob("broodline-*.whl"))


def test_wheel_ships_models_and_templates(wheel):
    names = set(zipfile.ZipFile(wheel).namelist())
    for needed in ("planner/_bundled/models/fernhollow-fly.toml",
                   "planner/_bundled/models/fernhollow-fly-lifetable.csv",
                   "planner/_bundled/models/scenarios/fernhollow-fly-unit.toml",
                   "planner/_bundled/models/scenarios/fernhollow-moth-wing.toml"):
        assert needed in names, needed
    assert any(n.startswith("planner/_bundled/templates/") for n in names)


def test_installed_demo_runs_outside_the_clone(wheel, tmp_path):
    site = tmp_path / "site"
    zipfile.ZipFile(wheel).extractall(site)
    env = dict(os.environ, PYTHONPATH=str(site))
    proc = subprocess.run([sys.executable, "-c",
                           "import planner, sys; from planner.cli.main import main; "
                           "print(planner.__file__, file=sys.stderr); "
                           "sys.exit(main(['demo', '--json', '--quiet']))"],
                          cwd=tmp_path, env=env, capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    assert proc.stderr.strip().startswith(str(site))  # the package imported is the wheel's
    assert (tmp_path / "broodline-demo-plan.xlsx").exists()  # the demo was found and planned
