"""``broodline risk``: how likely the plan is to fill each order, and the safety margin."""

from __future__ import annotations

from pathlib import Path

from planner.cli.format import JSON_HELP, SCENARIO_HELP, dumps, load_scenario, num, table
from planner.cli.plan_cmds import (RISK_CAUTION, margin_lines, replay_fits, risk_options, risk_rows,
                                   run_margin, solver_options)
from planner.errors import NoPlanError
from planner.cautions import CAUTIONS

__all__ = ["register"]


def register(sub) -> None:
    p = sub.add_parser("risk", help="the chance of filling each order, and the safety margin",
                       description="Replay the optimal plan many times with random biology "
                                   "(batch hatch and larval survival, binomial survival, "
                                   "cage fecundity, tray loss): the chance of filling each "
                                   "week's orders; with --target-fill, the smallest planned "
                                   "margin over the orders that fills every week with that "
                                   "probability.")
    p.add_argument("scenario", metavar="SCENARIO", help=SCENARIO_HELP)
    p.add_argument("--json", action="store_true", help=JSON_HELP)
    p.add_argument("-o", "--output", metavar="RISK.xlsx",
                   help="write the plan workbook with its Risk sheet")
    solver_options(p)
    risk_options(p, "find the smallest margin at which every week is filled with "
                    "probability at least P")
    p.set_defaults(handler=_cmd_risk)


def _cmd_risk(args) -> int:
    from planner.optimise import plan_horizon, settings_for
    from planner.reports import write_plan_workbook
    from planner.risk import replay

    scn = load_scenario(args.scenario)
    cur = scn.costs.currency
    replay_fits(scn, args)
    margin = None
    if args.target_fill is not None:
        margin = run_margin(scn, args, f"risk of {Path(args.scenario).name}")
        plan, risk = margin.plan, margin.risk
    else:
        plan = plan_horizon(scn, settings_for(scn, solver=args.solver,
                                              time_limit=args.time_limit,
                                              relative_gap=args.gap))
        if not plan.info.has_plan:
            raise NoPlanError(f"no plan to replay: {plan.info.message}")
        risk = replay(plan, replicates=args.replicates, seed=args.seed)
    s = risk.summary()
    out = {"risk": s}
    rows = risk_rows(risk, margin)
    if margin is not None:
        out["margin"] = margin.summary()
    outputs = {}
    if args.output:
        outputs["workbook"] = write_plan_workbook(plan, args.output,
                                                  scenario_file=Path(args.scenario).name,
                                                  risk=risk, risk_rows=rows)
    if args.json:
        print(dumps(out | {"outputs": outputs}))
        return 0
    if margin is not None:
        print("\n".join(margin_lines(margin, cur)))
        print()
    w = s["weeks"]
    rows_t = [(r["week"], r["ordered"], r["fill_probability"], r["expected_shortfall"],
               r["p5"], r["p50"]) for r in w if r["customer"] == "all"]
    what = ("the plan without a margin" if margin is not None and not margin.met else
            "the plan with the margin" if margin is not None else "the plan")
    print(table(rows_t, ["week", "ordered [million]", "fill probability [-]",
                         "expected short [million]", "P5 released [million]",
                         "P50 released [million]"],
                title=f"{risk.replicates} replays of {what} (seed {risk.seed})"))
    print(f"\nWorst week: {s['worst_week']} (fill probability "
          f"{s['worst_week_fill_probability']:.1%}); every week filled in "
          f"{s['all_weeks_filled_probability']:.1%} of replays.")
    print(f"Colony egg output on the last day: P5 {num(s['colony_end_p5'])}, P50 "
          f"{num(s['colony_end_p50'])}, planned {num(s['colony_end_planned'])} million eggs/day.")
    for p in outputs.values():
        print(f"wrote {p}")
    print("\n" + RISK_CAUTION)
    print("\n".join(CAUTIONS))
    return 0
