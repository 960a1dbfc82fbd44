"""Issue 12 item 9: a killed `broodline plan` leaves no CBC child running, no temporary
solve folder behind and the previous plan workbook intact."""

import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from planner.scenario import demo_scenario_path

pytestmark = pytest.mark.skipif(not sys.platform.startswith("linux") or
                                shutil.which("broodline") is None,
                                reason="needs Linux /proc and the installed console script")


def _cbc_children_of(pid: int) -> list[int]:
    """CBC processes started under the marker ``pid`` (their environment carries it; the
    executable's name, not the command line, says CBC: `broodline ... --solver cbc`
    itself must not count)."""
    out = []
    for d in Path("/proc").iterdir():
        if not d.name.isdigit():
            continue
        try:
            cmd = (d / "cmdline").read_bytes()
            env = (d / "environ").read_bytes()
        except OSError:
            continue
        exe = os.path.basename(cmd.split(b"\0", 1)[0]).lower()
        if b"cbc" in exe and f"BROODLINE_KILL_TEST={pid}".encode() in env:
            out.append(int(d.name))
    return out


def _wait_for_long_cbc(marker: int, timeout: float, running: float = 1.0) -> bool:
    """Wait until one CBC call has been running for ``running`` seconds (a long call,
    which an unguarded child would go on with after its parent died)."""
    seen: dict[int, float] = {}
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        now = time.monotonic()
        for pid in _cbc_children_of(marker):
            if now - seen.setdefault(pid, now) >= running:
                return True
        time.sleep(0.05)
    return False


@pytest.mark.parametrize("sig", [signal.SIGTERM, signal.SIGKILL])
def test_killing_plan_mid_solve_leaves_nothing_running(tmp_path, sig):
    out = tmp_path / "plan.xlsx"
    out.write_bytes(b"previous plan")  # stands for last week's workbook
    tmp = tmp_path / "tmp"
    tmp.mkdir()
    marker = os.getpid() * 10 + int(sig)
    env = dict(os.environ, TMPDIR=str(tmp), BROODLINE_KILL_TEST=str(marker))
    # a 52-week plan: each CBC call runs for seconds, so a child that survived its
    # parent would still be found right after the kill
    models = Path(__file__).resolve().parents[2] / "models"
    for name in ("fernhollow-fly.toml", "fernhollow-fly-lifetable.csv"):
        shutil.copy(models / name, tmp_path / name)
    text = demo_scenario_path("fly").read_text().replace("../fernhollow-fly.toml",
                                                        "fernhollow-fly.toml")
    assert "horizon_weeks = 26" in text
    scenario = tmp_path / "long.toml"
    scenario.write_text(text.replace("horizon_weeks = 26", "horizon_weeks = 52"))
    proc = subprocess.Popen(["broodline", "plan", str(scenario), "--solver",
                             "cbc", "--time-limit", "120", "-o", str(out)], env=env,
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    try:
        assert _wait_for_long_cbc(marker, 90), "no CBC call ran for a second"
        proc.send_signal(sig)
        proc.wait(timeout=30)
    finally:
        if proc.poll() is None:
            proc.kill()
    deadline = time.monotonic() + 0.5
    while _cbc_children_of(marker) and time.monotonic() < deadline:
        time.sleep(0.1)
    assert _cbc_children_of(marker) == [], "a CBC child outlived its parent"
    assert out.read_bytes() == b"previous plan"
    if sig == signal.SIGTERM:
        assert proc.returncode == 143
        assert not list(tmp.glob("broodline-solve-*")), "the solve folder was left behind"
    else:
        # SIGKILL: no handler runs; the next solve removes the dead process's folder
        from planner.optimise.children import _sweep
        _sweep(tmp)
        assert not list(tmp.glob("broodline-solve-*"))
    assert not list(tmp_path.glob(".plan.xlsx.*")), "a half-written workbook was left"
