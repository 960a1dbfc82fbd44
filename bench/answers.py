"""Speed of the manager's answers on the 26-week demo (printed, not asserted).

Run: python bench/answers.py [--repeat N]

Each answer runs as the command would (its whole time: start state, every solve), with
the median of ``--repeat`` runs, its solve count and the issue's target beside it; the
LP relaxation of the 26-week plan is timed in the same run, the floor the answers chase.
Measure on an idle machine: other solves on the same two cores skew every figure.
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _timing import report  # noqa: E402

from planner.optimise import build_model, compile_horizon, settings_for, solve  # noqa: E402
from planner.answers.capacity import capacity  # noqa: E402
from planner.answers.expansion import expand  # noqa: E402
from planner.answers.quote import quote  # noqa: E402
from planner.optimise.standard_week import start_batches  # noqa: E402
from planner.scenario import demo_scenario_path, load_scenario  # noqa: E402


def timed(fn, repeat):
    times, last = [], None
    for _ in range(repeat):
        t0 = time.perf_counter()
        last = fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times), last


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    scn = load_scenario(demo_scenario_path("fly"))
    st = settings_for(scn)
    print(f"solver {st.solver}; medians of {args.repeat} runs")
    start = start_batches(scn, st)
    data = compile_horizon(scn, start)
    lp_s, _ = timed(lambda: solve(build_model(data, relax=True).model, st.for_lp()),
                    args.repeat)
    print(report("LP relaxation of the 26-week plan (the floor)", lp_s))
    for label, v, w, target in (("quote 0.5 million/week x 4 weeks", 0.5, 4, 10.0),
                                ("quote 1 million/week x 8 weeks", 1.0, 8, 10.0),
                                ("quote 8 million/week x 10 weeks (beyond capacity)", 8.0,
                                 10, 30.0)):
        s, q = timed(lambda: quote(scn, v, w, settings=st), args.repeat)
        print(report(label, s, target) + f"   {q.solves} solves, feasible {q.feasible}, "
              f"time-limited {q.time_limited}")
    s, e = timed(lambda: expand(scn, 16.0, settings=st), args.repeat)
    print(report("expand --target 16", s, 15.0) + f"   time-limited {e.plan.info.time_limited}")
    s, _ = timed(lambda: capacity(scn, st), args.repeat)
    print(report("capacity", s, 3.0))
    path = str(demo_scenario_path("fly"))
    s, _ = timed(lambda: subprocess.run([sys.executable, "-m", "planner.cli.main", "check",
                                         path], capture_output=True, check=False), args.repeat)
    print(report("broodline check (a new process, imports included)", s, 1.0))


if __name__ == "__main__":
    main()
