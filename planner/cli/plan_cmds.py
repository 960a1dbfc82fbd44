"""``broodline plan`` and ``broodline demo``: solve a scenario and write the plan."""

from __future__ import annotations

import argparse
import contextlib
import math
import sys
import tempfile
from pathlib import Path

from planner.cli.format import (SCENARIO_HELP, checked, demo_scenario_path, dumps,
                                kv_table, load_scenario, num, table)
from planner.cli.progress import Progress
from planner.cautions import CAUTIONS
from planner.errors import InputError
from planner.risk import MAX_MARGIN

# The optimiser, the risk replay and the report writers are imported where they are used:
# building the parser (every command, `check` too) must not load them.

__all__ = ["register", "solver_options", "risk_options", "run_plan", "run_margin",
           "margin_lines", "fill_lines", "fill_json", "risk_rows", "EXIT_NO_PLAN",
           "REPLICATES", "RISK_CAUTION"]

#: Exit code when the solver returned no plan (time limit without a plan, infeasible).
EXIT_NO_PLAN = 3
#: Replays of a plan unless told otherwise [-] (the same for `plan` and `risk`: about
#: 0.1 s for the 26-week demo).
REPLICATES = 2000
#: Printed under every fill probability.
RISK_CAUTION = ("Fill probabilities are only as good as the colony model's [variation] "
                "spreads (invented in the demo): measure them on your own batches.")


_positive = checked(float, lambda v: 0 < v < math.inf, "a positive number")
_count = checked(int, lambda v: v >= 1, "a whole number, at least 1")
_probability = checked(float, lambda v: 0 < v < 1,
                       "a probability between 0 and 1 (exclusive), e.g. 0.95")
_margin = checked(float, lambda v: 0 <= v <= 4, "a share from 0 to 4, e.g. 0.3 for 30 %")


def _gap(text: str) -> float:
    v = _positive(text) if text not in ("0", "0.0") else 0.0
    if v >= 1:
        raise argparse.ArgumentTypeError(f"{text!r}: the relative gap is a fraction below 1 "
                                         "(0.005 = 0.5 %)")
    return v


def solver_options(p) -> None:
    """The solver options shared by every command that solves."""
    p.add_argument("--solver", choices=["auto", "highs", "cbc"],
                   help="MILP solver (default: the scenario's plan.solver; auto = HiGHS when "
                        "installed, else CBC)")
    p.add_argument("--time-limit", type=_positive, metavar="S",
                   help="time limit [s] of the whole answer, every solve in it (default: the "
                        "scenario's)")
    p.add_argument("--gap", type=_gap, metavar="G",
                   help="relative optimality gap, e.g. 0.005 (default: the scenario's)")
    p.add_argument("--quiet", action="store_true", help="no progress line while solving")


def risk_options(p, target_help: str) -> None:
    """The replay and safety-margin options shared by `plan`, `demo` and `risk`."""
    p.add_argument("--replicates", type=_count, default=REPLICATES, metavar="N",
                   help=f"replays of the plan with random biology (default {REPLICATES})")
    p.add_argument("--seed", type=int, default=0, metavar="S",
                   help="seed of the random numbers (default 0; same seed, same numbers)")
    p.add_argument("--target-fill", type=_probability, metavar="P", help=target_help)
    p.add_argument("--max-margin", type=_margin, default=MAX_MARGIN, metavar="M",
                   help="largest safety margin the --target-fill search tries, as a share "
                        f"of the orders (default {MAX_MARGIN:g})")


_PLAN_TARGET_HELP = ("plan with the smallest safety margin over the orders at which every "
                     "week is filled with probability at least P (the search of 'broodline "
                     "risk --target-fill'; several solves)")


def register(sub) -> None:
    p = sub.add_parser("plan", help="solve a scenario and write the plan workbook",
                       description="Plan a scenario (TOML or input workbook): solve the "
                                   "programme and write the plan workbook, with optional CSV "
                                   "files and a JSON summary.")
    p.add_argument("scenario", metavar="SCENARIO", help=SCENARIO_HELP)
    p.add_argument("-o", "--output", metavar="PLAN.xlsx",
                   help="plan workbook (default: <scenario>-plan.xlsx beside the scenario)")
    p.add_argument("--csv", metavar="DIR", help="also write DIR/daily.csv and DIR/weekly.csv")
    p.add_argument("--json", action="store_true", help="print a JSON summary")
    solver_options(p)
    risk_options(p, _PLAN_TARGET_HELP)
    p.set_defaults(handler=_cmd_plan)

    p = sub.add_parser("demo", help="plan the embedded, invented demo and write its workbook",
                       description="Plan the embedded demo scenario (the invented Fernhollow "
                                   "sterile fly unit) and write its plan workbook.")
    p.add_argument("-o", "--output", metavar="PLAN.xlsx", default="broodline-demo-plan.xlsx",
                   help="plan workbook (default: broodline-demo-plan.xlsx here)")
    p.add_argument("--csv", metavar="DIR", help="also write DIR/daily.csv and DIR/weekly.csv")
    p.add_argument("--json", action="store_true", help="print a JSON summary")
    solver_options(p)
    risk_options(p, _PLAN_TARGET_HELP)
    p.set_defaults(handler=_cmd_demo)


@contextlib.contextmanager
def _solving(scn, args, label: str):
    """The command line's solve settings, with the progress line while inside."""
    from planner.optimise import settings_for

    show = not args.quiet and sys.stdout.isatty() and sys.stderr.isatty()
    with tempfile.TemporaryDirectory(prefix="broodline-log-") as tmp:
        log = str(Path(tmp) / "solver.log")
        settings = settings_for(scn, solver=args.solver, time_limit=args.time_limit,
                                relative_gap=args.gap, log_path=log)
        with Progress(log, label, show, unit=scn.costs.currency):
            yield settings


def run_plan(scn, args, label: str):
    """Solve with the command line's solver options and the progress line."""
    from planner.optimise import plan_horizon

    with _solving(scn, args, label) as settings:
        return plan_horizon(scn, settings)


def run_margin(scn, args, label: str):
    """The safety-margin search (:func:`planner.risk.margin.safety_margin`) with the
    command line's target, replicates, seed, largest margin and solver options."""
    from planner.risk.margin import safety_margin

    with _solving(scn, args, f"{label}: searching the safety margin") as settings:
        return safety_margin(scn, args.target_fill, replicates=args.replicates,
                             seed=args.seed, settings=settings, max_margin=args.max_margin)


def _pct(p: float) -> str:
    """A probability or share [-] as a percentage with one decimal."""
    return f"{100 * p:.1f} %"


def fill_lines(risk, from_week: int, suggest: bool) -> list[str]:
    """The replay's headline: the chance of filling every week and the worst week, and,
    when the plan's first weeks ship pupae already in the trays (``from_week`` [week
    number] > 1), the same from ``from_week`` on; ``suggest`` adds the --target-fill hint."""
    a = risk.fill_summary(1)
    if not (risk.ordered > 0).any():
        return ["No week has an order, so there is no fill to replay."]
    line = (f"Chance of filling every week: {_pct(a['all_weeks'])} (worst week "
            f"{a['worst_week']}: {_pct(a['worst_week_probability'])}), from "
            f"{risk.replicates} replays of the colony model's spreads")
    out = [line + ("; plan with --target-fill P to add a safety margin." if suggest else ".")]
    early = risk.weeks[(risk.weeks < from_week) & (risk.ordered > 0)]
    if from_week > 1 and early.size and risk.worst_week(from_week) is not None:
        b = risk.fill_summary(from_week)
        out.append(f"Weeks {early.min()}-{early.max()} ship pupae already in the trays at the "
                   f"start, which no margin changes; from week {from_week} on every week is "
                   f"filled in {_pct(b['all_weeks'])} of replays (worst week "
                   f"{b['worst_week']}: {_pct(b['worst_week_probability'])}).")
    return out


def fill_json(risk, from_week: int) -> dict:
    """The replay's headline for --json: over every week, and from ``from_week`` [week
    number] on (the weeks a safety margin can change)."""
    b = risk.fill_summary(from_week)
    return risk.fill_summary(1) | {
        "margin_from_week": int(from_week),
        "from_margin_week": {k: b[k] for k in ("all_weeks", "worst_week",
                                               "worst_week_probability")}}


def risk_rows(risk, margin=None) -> list[tuple]:
    """(quantity, value, unit) rows heading the Risk sheet and summing up the replay."""
    s = risk.summary()
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
        rows = [("target fill probability", m["target_fill"], "-"),
                ("safety margin", m["margin"] if m["met"] else
                 f"none up to {m['largest_margin_tried']:g}", "-"),
                ("margin applies from week", m["from_week"], ""),
                ("extra cost", m["extra_cost_per_week"],
                 f"{risk.plan.scenario.costs.currency}/week")] + rows
    return rows


def margin_lines(margin, currency: str) -> list[str]:
    """What the margin search found, and the table of the margins it tried."""
    m = margin.summary()
    if m["met"]:
        head = (f"A safety margin of {_pct(m['margin'])} over the orders from week "
                f"{m['from_week']} ({m['from_date']}) fills every week from then on with "
                f"probability at least {_pct(m['target_fill'])} (worst week "
                f"{margin.risk.worst_week(m['from_week'])}: "
                f"{_pct(m['worst_week_fill_with_margin'])}); it costs "
                f"{num(m['extra_cost_per_week'])} {currency}/week more ({m['solves']} solves, "
                f"{m['seconds']:.0f} s).")
    else:
        head = (f"No safety margin up to {_pct(m['largest_margin_tried'])} fills every week "
                f"from week {m['from_week']} ({m['from_date']}) with probability "
                f"{_pct(m['target_fill'])}: {m['stopped']}. The plan and replay shown are "
                f"without a margin ({m['solves']} solves, {m['seconds']:.0f} s).")
    rows = [(round(100 * r["margin"], 2), r["worst_week"], r["worst_week_fill_probability"],
             r["all_weeks_filled_probability"],
             None if r["operating_cost"] is None
             else (r["operating_cost"] - margin.tried[0]["operating_cost"]) / m["weeks"],
             r["plan_shortfall_million"],
             ("yes" if r["met"] else "no" if r["has_plan"] else f"no plan ({r['status']})")
             + (" (time-limited plan)" if r["time_limited"] else ""))
            for r in margin.tried]
    tab = table(rows, ["margin [%]", "worst week", "worst week's fill probability [-]",
                       "every week filled [-]", f"extra cost [{currency}/week]",
                       "plan short of raised orders [million]", "meets target"],
                title=f"Margins tried (weeks from {m['from_week']}, target "
                      f"{_pct(m['target_fill'])}, {margin.risk.replicates} replays each, "
                      f"seed {margin.risk.seed})")
    return [head, "", tab]


def _summary_text(res, outputs: dict, risk_text: list[str] | None = None) -> str:
    s = res.summary()
    cur = s["currency"]
    head = f"Plan: {res.scenario.name}"
    if res.info.time_limited:
        head += "  [TIME-LIMITED: feasible, not proven cheapest]"
    out = [head, ""]
    if not s["weeks"]:
        out += ["The order book has no order in the plan's weeks: the plan shows what keeping "
                "the colony costs, with nothing shipped.", ""]
    out.append(kv_table([
        ("status", s["status"], ""),
        ("solver", f"{s['solver']} ({s['message']})", ""),
        ("relative gap", "-" if s["gap"] is None else f"{s['gap']:.2%}", ""),
        ("solve time", s["solve_seconds"], "s"),
        ("objective (all modelled weeks, shortfall priced)", s["objective"], cur),
        ("variable cost (reported weeks; what the plan controls)", s["variable_cost"], cur),
        ("total cost (variable + fixed regular crew)", s["total_cost"], cur),
        ("shortfall price of unmet orders (reported weeks)", s["shortfall_cost"], cur),
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
    if risk_text:
        out += [""] + risk_text
    out.append("")
    out += [f"wrote {p}" for p in outputs.values()]
    out.append("")
    if risk_text:
        out.append(RISK_CAUTION)
    out += CAUTIONS
    return "\n".join(out)


def _finish(res, args, workbook: Path, scenario_file: str | None, margin=None) -> int:
    """Write and print the plan; with ``margin`` (a :class:`planner.risk.MarginResult`)
    the plan is the margin's, else the plan is replayed when the colony model has
    spreads."""
    from planner.reports import write_csvs, write_plan_workbook
    from planner.risk.simulate import has_spreads, replay

    if not res.info.has_plan:
        print(f"no plan: {res.info.message}", file=sys.stderr)
        if args.json:
            print(dumps({"status": res.info.status, "message": res.info.message,
                         "objective": None, "best_bound": res.info.best_bound, "gap": None,
                         "outputs": {}}))
        return EXIT_NO_PLAN
    risk, risk_text, extra = None, [], {}
    if margin is not None:
        risk = margin.risk
        risk_text = margin_lines(margin, res.scenario.costs.currency) + [""] + fill_lines(
            risk, margin.from_week, suggest=False)
        if margin.met and margin.margin > 0:
            risk_text.append(f"The orders by week above include the margin (from week "
                             f"{margin.from_week}): they are what the plan was made for; the "
                             "replay judges it against the orders as booked.")
        extra = {"margin": margin.summary(), "fill_probability": fill_json(risk,
                                                                          margin.from_week)}
    elif has_spreads(res.scenario.colony):
        from planner.answers.quote import default_start_week
        week = default_start_week(res.scenario)
        fill = replay(res, replicates=args.replicates, seed=args.seed)
        risk_text = fill_lines(fill, week, suggest=True)
        extra = {"fill_probability": fill_json(fill, week)}
    sheet = {} if risk is None else {"risk": risk, "risk_rows": risk_rows(risk, margin)}
    outputs = {"workbook": write_plan_workbook(res, workbook, scenario_file=scenario_file,
                                               **sheet)}
    if args.csv:
        csvs = write_csvs(res, args.csv)
        outputs["daily_csv"], outputs["weekly_csv"] = csvs["daily"], csvs["weekly"]
    if args.json:
        s = res.summary()
        keys = ["status", "time_limited", "message", "solver", "objective", "best_bound", "gap",
                "solve_seconds", "total_cost", "variable_cost", "shortfall_cost",
                "cost_per_million", "currency",
                "released_million", "ordered_million", "shortfall_million", "weeks",
                "bottlenecks", "shortfalls", "discard_ages_used", "harvest_ages_used",
                "booked_shortfall_million", "customers"]
        print(dumps({k: s[k] for k in keys} | extra | {"outputs": outputs}))
    else:
        print(_summary_text(res, outputs, risk_text))
    return 0


def _plan_or_margin(scn, args, label: str):
    """(plan, margin search or None): the margin's plan with --target-fill."""
    if args.target_fill is not None:
        margin = run_margin(scn, args, label)
        return margin.plan, margin
    return run_plan(scn, args, label), None


def _outputs_writable(workbook: Path, args) -> None:
    """Refuse, before the solve, outputs that could not be written after it."""
    from planner.fileio import output_file, short_name
    if not workbook.is_dir() and workbook.suffix.lower() != ".xlsx":
        raise InputError("the plan workbook must have a name ending in .xlsx",
                         source=short_name(workbook))
    output_file(workbook, "plan workbook")
    if getattr(args, "csv", None):
        folder = Path(args.csv)
        if folder.exists() and not folder.is_dir():
            raise InputError("--csv names a folder for the CSV tables; this is a file",
                             source=str(folder))
        output_file((folder if folder.is_dir() else folder.parent) / "daily.csv",
                    "CSV tables")


def replay_fits(scn, args) -> None:
    """Refuse, before any solve, a replicate count whose replay would not fit in memory
    (the replay runs after the plan is made)."""
    import math
    from planner.optimise.data import lead_time_days
    from planner.risk.simulate import check_replay_size
    la = scn.plan.lookahead_weeks
    if la is None:
        la = math.ceil(lead_time_days(scn) / 7)
    check_replay_size(7 * (scn.plan.horizon_weeks + la), args.replicates)


def _cmd_plan(args) -> int:
    path = Path(args.scenario)
    scn = load_scenario(path)
    out = Path(args.output) if args.output else path.with_name(f"{path.stem}-plan.xlsx")
    _outputs_writable(out, args)
    replay_fits(scn, args)
    res, margin = _plan_or_margin(scn, args,
                                  f"planning {path.name} ({args.solver or scn.plan.solver})")
    return _finish(res, args, out, path.name, margin)


def _cmd_demo(args) -> int:
    scn = load_scenario(demo_scenario_path("fly"))
    _outputs_writable(Path(args.output), args)
    replay_fits(scn, args)
    res, margin = _plan_or_margin(scn, args, "planning the demo")
    return _finish(res, args, Path(args.output), "embedded demo (invented data)", margin)
