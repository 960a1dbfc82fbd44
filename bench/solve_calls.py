"""Where a plan's solve time goes: every solver call of one solve, printed (not asserted).

Run: python bench/solve_calls.py [--weeks N] [--solver highs|cbc] [--time-limit S]

Plans the demo for ``--weeks`` weeks and prints one line per solver call of the default
route (LP relaxation, then the neighbourhood searches, then the whole problem when the
gap is still open): its time [s], the limit it was given [s], whether it hit that limit
and the bound it reported [currency], then the whole solve with its gap. One run, not a
median: use it to see which step dominates, and bench/plan.py for the figures. Measure
on an idle machine.
"""

from __future__ import annotations

import argparse
import importlib
import time

from planner.optimise import build_model, compile_horizon, settings_for, solve
from planner.optimise.standard_week import start_batches
from planner.scenario import demo_scenario_path, load_scenario

# the module, not the function of the same name that planner.optimise exports
solve_module = importlib.import_module("planner.optimise.solve")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--weeks", type=int, default=26)
    ap.add_argument("--solver", default=None, help="highs or cbc (default: the scenario's)")
    ap.add_argument("--time-limit", type=float, default=None, help="[s]")
    args = ap.parse_args()
    scn = load_scenario(demo_scenario_path("fly"))
    st = settings_for(scn, solver=args.solver, time_limit=args.time_limit)
    start = start_batches(scn, st)
    built = build_model(compile_horizon(scn, start, horizon_weeks=args.weeks))
    print(f"demo, {args.weeks} weeks, solver {st.solver}, time limit {st.time_limit:g} s, "
          f"gap {st.relative_gap:g}")
    cur = scn.costs.currency
    print(f"{'call':>4} {'time [s]':>8} {'limit [s]':>9} {'hit':>5} {'bound [' + cur + ']':>16}")
    runner_call = solve_module._Runner.call
    count = [0]

    def timed_call(self, time_limit, *a, **k):
        t0 = time.perf_counter()
        c = runner_call(self, time_limit, *a, **k)
        count[0] += 1
        bound = "-" if c.bound is None else f"{c.bound:,.1f}"
        print(f"{count[0]:>4} {time.perf_counter() - t0:8.2f} {time_limit:9.1f} "
              f"{str(c.hit):>5} {bound:>16}", flush=True)
        return c

    solve_module._Runner.call = timed_call
    try:
        t0 = time.perf_counter()
        sol = solve(built.model, st)
        wall = time.perf_counter() - t0
    finally:
        solve_module._Runner.call = runner_call
    info = sol.info
    gap = "-" if info.gap is None else f"{100 * info.gap:.2f}%"
    print(f"whole solve {wall:.2f} s, {count[0]} calls (the solve counts {info.calls}), "
          f"status {info.status}, gap {gap}: {info.message}")


if __name__ == "__main__":
    main()
