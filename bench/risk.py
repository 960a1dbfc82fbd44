"""Speed of the risk replay (printed, not asserted).

Run: python bench/risk.py [--replicates N] [--repeat K]

The 26-week demo plan is solved once (CBC), then replayed ``--replicates`` times with the
colony model's variation (binomial survival, beta batch hatch and larval survival, gamma
cage fecundity, tray loss): the median seconds of ``--repeat`` replays, against the
target of 5 s for 10,000 replicates on this machine. Also printed: seconds per thousand
replicates at 1,000 and at the full count (how the cost scales), and the worst week's
fill probability as a sanity figure.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _timing import median_seconds, report  # noqa: E402

from planner.optimise import plan_horizon, settings_for  # noqa: E402
from planner.risk import replay  # noqa: E402
from planner.scenario import demo_scenario_path, load_scenario  # noqa: E402


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--replicates", type=int, default=10_000)
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args(argv)
    scn = load_scenario(demo_scenario_path("fly"))
    plan = plan_horizon(scn, settings_for(scn))
    print(f"plan: {scn.plan.horizon_weeks} weeks, {plan.data.n_days} days modelled, "
          f"{plan.info.status}")
    seed = iter(range(10_000))
    full = median_seconds(lambda: replay(plan, replicates=args.replicates, seed=next(seed)),
                          repeat=args.repeat)
    small = median_seconds(lambda: replay(plan, replicates=1000, seed=next(seed)),
                           repeat=args.repeat)
    print(report(f"replay, {args.replicates} replicates (median of {args.repeat})", full,
                 target=5.0 if args.replicates == 10_000 else None))
    print(report("replay, 1000 replicates", small))
    print(f"{'seconds per 1000 replicates: at 1000 / at full count':<58} "
          f"{small:9.3f} / {full / args.replicates * 1000:.3f}")
    r = replay(plan, replicates=args.replicates, seed=1)
    print(f"{'worst week fill probability (sanity)':<58} {r.worst_fill():9.3f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
