"""Speed of the manager's questions (printed, not asserted).

Run: python bench/quote.py [--points N] [--quick]

1. An expansion sweep of the 26-week demo (targets from week 10, ``--points`` volumes
   from 12 to 16.5 million/week) on 1 local worker and on 2, in the same run: seconds of
   each, their ratio, and the seconds of the slowest point. Target: under 2 minutes on 2
   workers and at least 1.6 times faster than on 1 (this machine has 2 cores; the ratio
   is bounded by the slowest point and by how evenly the points split).
2. Quotes on the 26-week demo, one that can be taken and one that cannot (which runs the
   searches for the largest volume and the earliest full start): solves and seconds.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _timing import report  # noqa: E402

from planner.optimise import settings_for  # noqa: E402
from planner.answers.expansion import sweep  # noqa: E402
from planner.answers.quote import quote  # noqa: E402
from planner.scenario import demo_scenario_path, load_scenario  # noqa: E402


def timed_sweep(scn, volumes, workers: int):
    t0 = time.perf_counter()
    df = sweep(scn, volumes, from_week=10, settings=settings_for(scn, time_limit=60),
               workers=workers)
    return time.perf_counter() - t0, df


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--points", type=int, default=10, help="sweep volumes [-]")
    ap.add_argument("--quick", action="store_true", help="4 points, quotes on 13 weeks")
    ap.add_argument("--quotes-only", action="store_true", help="skip the sweep")
    args = ap.parse_args(argv)
    scn = load_scenario(demo_scenario_path("fly"))
    points = 4 if args.quick else args.points
    volumes = list(np.round(np.linspace(12.0, 16.5, points), 3))
    if not args.quotes_only:
        sweep_figures(scn, volumes, points)
    quote_figures(scn, args.quick)
    return 0


def sweep_figures(scn, volumes, points) -> None:
    print(f"expansion sweep, 26-week demo, targets {volumes[0]}..{volumes[-1]} "
          f"million/week from week 10, {points} points")
    t2, df2 = timed_sweep(scn, volumes, 2)
    t1, df1 = timed_sweep(scn, volumes, 1)
    print(report("sweep on 2 workers", t2, target=120.0))
    print(report("sweep on 1 worker", t1))
    ratio = t1 / t2
    print(f"{'speed-up 1 worker / 2 workers':<58} {ratio:9.2f} x   target >= 1.6   "
          f"{'met' if ratio >= 1.6 else 'MISSED'}")
    print(f"{'slowest point (1 worker)':<58} {df1['seconds'].max():9.2f} s")
    print(f"{'sum of point seconds (1 worker)':<58} {df1['seconds'].sum():9.2f} s")
    bought = [c for c in df1.columns if c.startswith("bought: ")]
    same = df1[bought].equals(df2[bought])
    print(f"bought sets the same on 1 and 2 workers: {same}")
    cols = ["target", "status", "cost_per_million", "shortfall_million", "seconds"] + \
        [c for c in df1.columns if c.startswith("bought: ")]
    print(df1[cols].to_string(index=False, float_format=lambda v: f"{v:.3f}"))


def quote_figures(scn, quick: bool) -> None:
    q_scn = scn.model_copy(deep=True)
    if quick:
        q_scn.plan.horizon_weeks = 13
    print(f"\nquotes, {q_scn.plan.horizon_weeks}-week demo")
    for volume, weeks in ((0.3, 8), (1.0, 8)):
        r = quote(q_scn, volume, weeks, settings=settings_for(q_scn))
        s = r.summary()
        print(f"  {volume:g} million/week for {weeks} weeks: feasible={s['feasible']}, "
              f"max volume={s['max_weekly_volume']}, earliest full start="
              f"{s['earliest_full_start']}, {s['solves']} solves, {s['seconds']:.1f} s")


if __name__ == "__main__":
    sys.exit(main())
