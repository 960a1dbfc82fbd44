"""``broodline plan`` and ``broodline demo``: solve a scenario and write the plan."""

from __future__ import annotations

import argparse
import math
import sys
import tempfile
from pathlib import Path

from planner.cli.format import checked, dumps, kv_table, num, table
from planner.cli.progress import Progress
from planner.optimise import plan_horizon, settings_for
from planner.reports import CAUTIONS, write_csvs, write_plan_workbook
from planner.scenario import demo_scenario_path, load_scenario

__all__ = ["register", "solver_options", "run_plan", "EXIT_NO_PLAN"]

#: Exit code when the solver returned no plan (time limit without a plan, infeasible).
EXIT_NO_PLAN = 3


_positive = checked(float, lambda v: 0 < v < math.inf, "a positive number")


def _gap(text: str) -> float:
    v = _positive(text) if text not in ("0", "0.0") else 0.0
    if v >= 1:
        raise argparse.ArgumentTypeError(f"{text!r}: the relative gap is a fraction below 1 "
                                         "(0.005 = 0.5 %)")
    return v


def solver_options(p) -> None:
    """The solver options shared by every command that solves."""
    p.add_argument("--solver", choices=["cbc", "highs"], help="MILP solver (default: the "
                                                               "scenario's plan.solver)")
    p.add_argument("--time-limit", type=_positive, metavar="S",
                   help="solver time limit [s] (default: the scenario's)")
    p.add_argument("--gap", type=_gap, metavar="G",
                   help="relative optimality gap, e.g. 0.005 (default: the scenario's)")
    p.add_argument("--quiet", action="store_true", help="no progress line while solving")


def register(sub) -> None:
    p = sub.add_parser("plan", help="solve a scenario and write the plan workbook",
                       description="Plan a scenario (TOML or input workbook): solve the "
                                   "programme and write the plan workbook, with optional CSV "
                                   "files and a JSON summary.")
    p.add_argument("scenario")
    p.add_argument("-o", "--output", metavar="PLAN.xlsx",
                   help="plan workbook (default: <scenario>-plan.xlsx beside the scenario)")
    p.add_argument("--csv", metavar="DIR", help="also write DIR/daily.csv and DIR/weekly.csv")
    p.add_argument("--json", action="store_true", help="print a JSON summary")
    solver_options(p)
    p.set_defaults(handler=_cmd_plan)

    p = sub.add_parser("demo", help="plan the embedded, invented demo and write its workbook",
                       description="Plan the embedded demo scenario (the invented Fernhollow "
                                   "sterile fly unit) and write its plan workbook.")
    p.add_argument("-o", "--output", metavar="PLAN.xlsx", default="broodline-demo-plan.xlsx",
                   help="plan workbook (default: broodline-demo-plan.xlsx here)")
    p.add_argument("--csv", metavar="DIR", help="also write DIR/daily.csv and DIR/weekly.csv")
    p.add_argument("--json", action="store_true", help="print a JSON summary")
    solver_options(p)
    p.set_defaults(handler=_cmd_demo)


def run_plan(scn, args, label: str):
    """Solve with the command line's solver options and the progress line."""
    show = not args.quiet and sys.stdout.isatty() and sys.stderr.isatty()
    with tempfile.TemporaryDirectory(prefix="broodline-log-") as tmp:
        log = str(Path(tmp) / "solver.log")
        settings = settings_for(scn, solver=args.solver, time_limit=args.time_limit,
                                relative_gap=args.gap, log_path=log)
        with Progress(log, label, show, unit=scn.costs.currency):
            return plan_horizon(scn, settings)


def _summary_text(res, outputs: dict) -> str:
    s = res.summary()
    cur = s["currency"]
    head = f"Plan: {res.scenario.name}"
    if res.info.time_limited:
        head += "  [TIME-LIMITED: feasible, not proven cheapest]"
    out = [head, ""]
    out.append(kv_table([
        ("status", s["status"], ""),
        ("solver", f"{s['solver']} ({s['message']})", ""),
        ("relative gap", "-" if s["gap"] is None else f"{s['gap']:.2%}", ""),
        ("solve time", s["solve_seconds"], "s"),
        ("total cost (reported weeks)", s["total_cost"], cur),
        ("variable cost", s["variable_cost"], cur),
        ("cost per million delivered", s["cost_per_million"], f"{cur}/million"),
        ("delivered / ordered", f"{num(s['released_million'])} / {num(s['ordered_million'])}",
         "million"),
        ("discard ages used", ", ".join(map(str, s["discard_ages_used"])) or "-", "day"),
        ("harvest ages used", ", ".join(map(str, s["harvest_ages_used"])) or "-", "day"),
    ]))
    weeks = [(w["week"], w["ordered"], w["released"], w["shortfall"]) for w in s["weeks"]]
    out.append("")
    out.append(table(weeks, ["week", "ordered [million]", "released [million]",
                             "shortfall [million]"], title="Orders by week"))
    out.append("")
    out.append("Bottlenecks:" if s["bottlenecks"] else "Bottlenecks: none")
    out += [f"  - {b}" for b in s["bottlenecks"]]
    if s["shortfalls"]:
        out.append("Orders that cannot be filled:")
        out += [f"  - {x['text']}" for x in s["shortfalls"]]
    for note in res.data.start.notes:
        out.append(f"note: {note}")
    out.append("")
    out += [f"wrote {p}" for p in outputs.values()]
    out.append("")
    out += CAUTIONS
    return "\n".join(out)


def _finish(res, args, workbook: Path, scenario_file: str | None) -> int:
    if not res.info.has_plan:
        print(f"no plan: {res.info.message}", file=sys.stderr)
        if args.json:
            print(dumps({"status": res.info.status, "message": res.info.message,
                         "objective": None, "best_bound": res.info.best_bound, "gap": None,
                         "outputs": {}}))
        return EXIT_NO_PLAN
    outputs = {"workbook": write_plan_workbook(res, workbook, scenario_file=scenario_file)}
    if args.csv:
        csvs = write_csvs(res, args.csv)
        outputs["daily_csv"], outputs["weekly_csv"] = csvs["daily"], csvs["weekly"]
    if args.json:
        s = res.summary()
        keys = ["status", "time_limited", "message", "solver", "objective", "best_bound", "gap",
                "solve_seconds", "total_cost", "variable_cost", "cost_per_million", "currency",
                "released_million", "ordered_million", "shortfall_million", "weeks",
                "bottlenecks", "shortfalls", "discard_ages_used", "harvest_ages_used"]
        print(dumps({k: s[k] for k in keys} | {"outputs": outputs}))
    else:
        print(_summary_text(res, outputs))
    return 0


def _cmd_plan(args) -> int:
    path = Path(args.scenario)
    scn = load_scenario(path)
    out = Path(args.output) if args.output else path.with_name(f"{path.stem}-plan.xlsx")
    res = run_plan(scn, args, f"planning {path.name} ({args.solver or scn.plan.solver})")
    return _finish(res, args, out, path.name)


def _cmd_demo(args) -> int:
    scn = load_scenario(demo_scenario_path("fly"))
    res = run_plan(scn, args, "planning the demo")
    return _finish(res, args, Path(args.output), "embedded demo (invented data)")

