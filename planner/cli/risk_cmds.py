"""``broodline risk``: how likely the plan is to fill each order, and the safety margin."""

from __future__ import annotations

import sys
from pathlib import Path

from planner.cli.format import checked, dumps, num, table
from planner.cli.plan_cmds import solver_options
from planner.errors import NoPlanError
from planner.optimise import plan_horizon, settings_for
from planner.reports import CAUTIONS, write_plan_workbook
from planner.risk import replay, safety_margin
from planner.scenario import load_scenario

__all__ = ["register"]


_count = checked(int, lambda v: v >= 1, "a whole number, at least 1")
_probability = checked(float, lambda v: 0 < v < 1,
                       "a probability between 0 and 1 (exclusive), e.g. 0.95")


def register(sub) -> None:
    p = sub.add_parser("risk", help="the chance of filling each order, and the safety margin",
                       description="Replay the optimal plan many times with random biology "
                                   "(batch hatch and larval survival, binomial survival, "
                                   "cage fecundity, tray loss): the chance of filling each "
                                   "week's orders; with --target-fill, the smallest planned "
                                   "margin over the orders that fills every week with that "
                                   "probability.")
    p.add_argument("scenario")
    p.add_argument("--replicates", type=_count, default=2000, metavar="N",
                   help="replays of the plan (default 2000)")
    p.add_argument("--seed", type=int, default=0, metavar="S",
                   help="seed of the random numbers (default 0; same seed, same numbers)")
    p.add_argument("--target-fill", type=_probability, metavar="P",
                   help="find the smallest margin at which every week is filled with "
                        "probability at least P")
    p.add_argument("--json", action="store_true")
    p.add_argument("-o", "--output", metavar="RISK.xlsx",
                   help="write the plan workbook with its Risk sheet")
    solver_options(p)
    p.set_defaults(handler=_cmd_risk)


def _cmd_risk(args) -> int:
    scn = load_scenario(args.scenario)
    settings = settings_for(scn, solver=args.solver, time_limit=args.time_limit,
                            relative_gap=args.gap)
    cur = scn.costs.currency
    margin = None
    if args.target_fill is not None:
        if not args.quiet and sys.stderr.isatty():
            print("searching the margin: several solves, this can take a few minutes ...",
                  file=sys.stderr)
        margin = safety_margin(scn, args.target_fill, replicates=args.replicates,
                               seed=args.seed, settings=settings)
        plan, risk = margin.plan, margin.risk
    else:
        plan = plan_horizon(scn, settings)
        if not plan.info.has_plan:
            raise NoPlanError(f"no plan to replay: {plan.info.message}")
        risk = replay(plan, replicates=args.replicates, seed=args.seed)
    s = risk.summary()
    out = {"risk": s}
    rows = [("replicates", risk.replicates, ""), ("seed", risk.seed, ""),
            ("worst week's fill probability", s["worst_week_fill_probability"], "-"),
            ("chance that every week is filled", s["all_weeks_filled_probability"], "-"),
            ("expected shortfall", s["expected_shortfall_million"], "million"),
            ("colony egg output at the end, P5", s["colony_end_p5"], "million eggs/day"),
            ("colony egg output at the end, P50", s["colony_end_p50"], "million eggs/day"),
            ("colony egg output at the end, planned", s["colony_end_planned"],
             "million eggs/day")]
    if margin is not None:
        m = margin.summary()
        out["margin"] = m
        rows = [("target fill probability", m["target_fill"], "-"),
                ("safety margin", m["margin"], "-"),
                ("margin applies from week", m["from_week"], ""),
                ("extra cost", m["extra_cost_per_week"], f"{cur}/week")] + rows
    outputs = {}
    if args.output:
        outputs["workbook"] = write_plan_workbook(plan, args.output,
                                                  scenario_file=Path(args.scenario).name,
                                                  risk=risk, risk_rows=rows)
    if args.json:
        print(dumps(out | {"outputs": outputs}))
        return 0
    if margin is not None:
        m = out["margin"]
        if m["met"]:
            print(f"A safety margin of {m['margin']:.1%} over the orders from week "
                  f"{m['from_week']} ({m['from_date']}) fills every week with probability at "
                  f"least {m['target_fill']:.0%}; it costs {num(m['extra_cost_per_week'])} {cur}"
                  f"/week more ({m['solves']} solves, {m['seconds']:.0f} s).")
        else:
            print(f"No margin up to {m['max_margin']:.0%} fills every week from week "
                  f"{m['from_week']} with "
                  f"probability {m['target_fill']:.0%}: the facility cannot plan enough "
                  "above the orders; the replay below is of the plan without a margin.")
    w = s["weeks"]
    rows_t = [(r["week"], r["ordered"], r["fill_probability"], r["expected_shortfall"],
               r["p5"], r["p50"]) for r in w if r["customer"] == "all"]
    print(table(rows_t, ["week", "ordered [million]", "fill probability [-]",
                         "expected short [million]", "P5 released [million]",
                         "P50 released [million]"],
                title=f"{risk.replicates} replays (seed {risk.seed})"))
    print(f"\nWorst week: {s['worst_week']} (fill probability "
          f"{s['worst_week_fill_probability']:.1%}); every week filled in "
          f"{s['all_weeks_filled_probability']:.1%} of replays.")
    print(f"Colony egg output on the last day: P5 {num(s['colony_end_p5'])}, P50 "
          f"{num(s['colony_end_p50'])}, planned {num(s['colony_end_planned'])} million eggs/day.")
    for p in outputs.values():
        print(f"wrote {p}")
    print("\nFill probabilities are only as good as the colony model's [variation] spreads "
          "(invented in the demo): measure them on your own batches.")
    print("\n".join(CAUTIONS))
    return 0
