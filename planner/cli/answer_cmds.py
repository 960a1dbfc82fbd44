"""The manager's questions: ``quote``, ``capacity`` and ``expand``."""

from __future__ import annotations

import argparse
import datetime as dt
import math
import sys
from pathlib import Path

from planner.cli.format import JSON_HELP, SCENARIO_HELP, checked, dumps, load_scenario, num, table
from planner.cli.plan_cmds import solver_options
from planner.errors import InputError, NoPlanError
from planner.cautions import CAUTIONS

# The answers and the report writers are imported in the handlers: building the parser
# (every command, `check` too) must not load the optimiser.

__all__ = ["register", "parse_sweep"]


_volume = checked(float, lambda v: 0 < v < math.inf, "a positive volume [million/week]")
_weeks = checked(int, lambda v: v >= 1, "a whole number of weeks (at least one week)")


def _date(text: str) -> dt.date:
    try:
        return dt.date.fromisoformat(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a date (YYYY-MM-DD)") from None


def parse_sweep(text: str) -> list[float]:
    """'LOW:HIGH:STEP' [million/week] -> the volumes, HIGH included."""
    parts = text.split(":")
    try:
        low, high, step = (float(p) for p in parts)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r}: write LOW:HIGH:STEP, e.g. 12:20:1 "
                                         "(million/week)") from None
    if not (0 < low <= high and step > 0):
        raise argparse.ArgumentTypeError(f"{text!r}: need 0 < LOW <= HIGH and STEP > 0")
    n = int(math.floor((high - low) / step + 1e-9)) + 1
    if n > 200:
        raise argparse.ArgumentTypeError(f"{text!r} gives {n} volumes; at most 200")
    return [round(low + i * step, 10) for i in range(n)]


def register(sub) -> None:
    p = sub.add_parser("quote", help="can we take a weekly order, at what cost, from when?",
                       description="Add a constant weekly order to the book and answer: can "
                                   "it be taken in full, the extra cost, when the ramp-up "
                                   "must begin, and otherwise the largest volume and the "
                                   "earliest full start.")
    p.add_argument("scenario", metavar="SCENARIO", help=SCENARIO_HELP)
    p.add_argument("--weekly", type=_volume, required=True, metavar="V",
                   help="product per week [million/week]")
    p.add_argument("--weeks", type=_weeks, required=True, metavar="N",
                   help="how many weeks the order runs")
    p.add_argument("--start", type=_date, metavar="DATE",
                   help="first day of the order (default: the first week the egg-to-harvest "
                        "lead time allows)")
    p.add_argument("--customer", default="Quote", help="customer name")
    p.add_argument("--json", action="store_true", help=JSON_HELP)
    p.add_argument("-o", "--output", metavar="QUOTE.xlsx",
                   help="write the plan with the order (or with what can be promised)")
    solver_options(p)
    p.set_defaults(handler=_cmd_quote)

    p = sub.add_parser("capacity", help="the largest weekly volume the facility can sustain",
                       description="The largest constant weekly volume of the standard week, "
                                   "and for each resource the volume at which it becomes "
                                   "binding and its shadow price.")
    p.add_argument("scenario", metavar="SCENARIO", help=SCENARIO_HELP)
    p.add_argument("--json", action="store_true", help=JSON_HELP)
    solver_options(p)
    p.set_defaults(handler=_cmd_capacity)

    p = sub.add_parser("expand", help="the least-cost expansion options for a target volume",
                       description="Choose among the scenario's expansion options the "
                                   "least-cost set that meets a target weekly volume, with "
                                   "its plan; or sweep a range of targets.")
    p.add_argument("scenario", metavar="SCENARIO", help=SCENARIO_HELP)
    p.add_argument("--target", type=_volume, metavar="V",
                   help="total product per week to deliver [million/week]")
    p.add_argument("--from", dest="from_date", type=_date, metavar="DATE",
                   help="date from which the target holds (default: the first week the "
                        "lead time allows)")
    p.add_argument("--sweep", type=parse_sweep, metavar="LOW:HIGH:STEP",
                   help="solve every target from LOW to HIGH [million/week]")
    p.add_argument("--workers", type=_weeks, metavar="N",
                   help="local worker processes for the sweep (default: the CPUs)")
    p.add_argument("--scheduler", metavar="ADDRESS",
                   help="run the sweep on a Dask cluster (needs the cluster extra)")
    p.add_argument("--json", action="store_true", help=JSON_HELP)
    p.add_argument("-o", "--output", metavar="EXPANSION.xlsx", help="write the workbook")
    solver_options(p)
    p.set_defaults(handler=_cmd_expand)


def _settings(scn, args):
    from planner.optimise import settings_for

    return settings_for(scn, solver=args.solver, time_limit=args.time_limit,
                        relative_gap=args.gap)


def _week(scn, date: dt.date | None, what: str) -> int | None:
    if date is None:
        return None
    w = scn.week_of(date)
    if w < 1:
        raise InputError(f"{what} is before the plan starts ({scn.calendar.start})",
                         place=what, value=date.isoformat())
    return w


def _stage_line(args):
    """A line on stderr at every stage of an answer (also when redirected); none with
    --quiet."""
    if args.quiet:
        return None

    def say(text: str) -> None:
        print(text, file=sys.stderr, flush=True)
    return say


def _note(args, text: str) -> None:
    if not args.quiet and sys.stderr.isatty():
        print(text, file=sys.stderr)


# -- quote ---------------------------------------------------------------------------

def quote_text(q, cur: str) -> str:
    s = q.summary()
    start = f"week {s['start_week']} ({s['start_date']})"
    lines = []
    if s["feasible"]:
        lines.append(f"Yes: {num(q.weekly_volume)} million/week for {q.weeks} weeks from {start} "
                     "can be taken in full.")
    elif s["lead_time_limited"] and s["full_from_week"] is not None:
        lines.append(f"Yes in full from week {s['full_from_week']} ({s['full_from_date']}): "
                     f"{num(q.weekly_volume)} million/week for {q.weeks} weeks from {start}.")
        for p in s["partial_weeks"]:
            lines.append(f"  Week {p['week']} can have {p['fill']:.1%}, because of the "
                         "egg-to-harvest lead time (its pupae are already laid or seeded).")
    else:
        if s["time_limited"]:
            lines.append(f"Not shown to fit: no plan found in the time given takes "
                         f"{num(q.weekly_volume)} million/week for {q.weeks} weeks from {start} "
                         "in full (a longer --time-limit may).")
        else:
            lines.append(f"No: {num(q.weekly_volume)} million/week for {q.weeks} weeks from "
                         f"{start} cannot be taken in full.")
        for p in s["partial_weeks"]:
            fill = "fill not known" if p["fill"] is None else f"{p['fill']:.1%}"
            lines.append(f"  Week {p['week']}: {fill} ({p['cause']}).")
        if s["max_weekly_volume"] is not None:
            bound = s.get("max_weekly_volume_bound")
            lines.append("  The largest constant volume that can be promised in the weeks "
                         f"lead time leaves free: {num(s['max_weekly_volume'])} million/week "
                         "(a whole plan fills it"
                         + (f"; no more than {num(bound)} even with fractional cages and "
                            "trays)." if bound is not None else ")."))
        if s["earliest_full_start"] is not None:
            lines.append(f"  The full volume can be delivered from week {s['earliest_full_start']}"
                         f" ({s['earliest_full_start_date']}).")
        elif s["max_weekly_volume"] is not None:
            lines.append("  No later start within the plan's "
                         f"{q.baseline.scenario.plan.horizon_weeks} weeks delivers the full "
                         "volume (or none was found in the time given).")
        if s["limiting_resources"]:
            lines.append("  What stops it: " + ", ".join(s["limiting_resources"]) + ".")
    if s["booked_shortfall_million"] > s["base_booked_shortfall_million"] + 1e-6:
        lines.append("  Warning: booked orders are shorter with the quote than without it.")
    vol = s["plan_volume"]
    if vol:
        per_week = "-" if s["extra_cost_per_week"] is None else f"{s['extra_cost_per_week']:,.0f}"
        per_m = "-" if s["cost_per_million"] is None else f"{s['cost_per_million']:,.0f}"
        lines.append(f"Extra cost at {num(vol)} million/week: {per_week} {cur} per week, "
                     f"{per_m} {cur} per million (the solver gaps allow +/- "
                     f"{s['cost_uncertainty']:,.0f} {cur} over the plan).")
        if s["ramp_up_start"]:
            lines.append(f"The ramp-up must begin on {s['ramp_up_start']}: "
                         + ("; ".join(s["first_changes"]) or "the plan changes from then") + ".")
    if s["time_limited"] or s["budget_exhausted"]:
        lines.append("Note: the best answer found in the time given: a solve behind it "
                     "stopped at its time limit (feasible, not proven best); the bounds "
                     "above say how far it may be off.")
    lines.append(f"({s['solves']} solves, {s['seconds']:.0f} s)")
    return "\n".join(lines)


def _quote_units(cur: str) -> dict[str, str]:
    """The unit of each quantity of a quote's summary, for the workbook."""
    million = "million/week"
    return {"weekly_volume": million, "max_weekly_volume": million,
            "max_weekly_volume_bound": million, "plan_volume": million,
            "weeks": "weeks", "start_week": "plan week", "earliest_full_start": "plan week",
            "extra_cost_total": cur, "extra_cost_per_week": f"{cur}/week",
            "cost_per_million": f"{cur}/million", "cost_uncertainty": cur,
            "delivered_million": "million", "shortfall_million": "million",
            "seconds": "s"}


def _cmd_quote(args) -> int:
    from planner.answers.quote import quote
    from planner.reports import write_plan_workbook

    scn = load_scenario(args.scenario)
    first = _week(scn, args.start, "--start")
    q = quote(scn, args.weekly, args.weeks, start_week=first, customer=args.customer,
              settings=_settings(scn, args), progress=_stage_line(args))
    cur = scn.costs.currency
    outputs = {}
    if args.output:
        s = q.summary()
        units = _quote_units(cur)
        rows = [(k.replace("_", " "), v, units.get(k, "")) for k, v in s.items()
                if k not in ("first_changes", "limiting_resources", "partial_weeks",
                             "customers", "lead_time_weeks")]
        rows += [("first changes", s["first_changes"], ""),
                 ("limiting resources", s["limiting_resources"], "")]
        outputs["workbook"] = write_plan_workbook(
            q.with_order, args.output, scenario_file=Path(args.scenario).name,
            front=("Quote", f"Quote: {q.customer}", rows))
    if args.json:
        print(dumps(q.summary() | {"outputs": outputs}))
    else:
        print(quote_text(q, cur))
        for p in outputs.values():
            print(f"wrote {p}")
    return 0


# -- capacity -----------------------------------------------------------------------------

def _cmd_capacity(args) -> int:
    from planner.answers.capacity import capacity

    scn = load_scenario(args.scenario)
    res = capacity(scn, _settings(scn, args))
    if args.json:
        print(dumps(res.summary()))
        return 0
    print(f"The facility can sustain {num(res.max_weekly_volume)} million/week in the standard "
          f"week ({res.status}); the first resource to bind is {res.limiting_resource}.\n")
    rows = [(r.resource, r.binding_volume, r.shadow_price, r.shadow_unit)
            for r in res.table.itertuples()]
    print(table(rows, ["resource", "binds at [million/week]", "shadow price",
                       "unit of the shadow price"]))
    print("\nThe shadow price is the extra volume one more unit of the resource (on every day)"
          " allows at the largest volume, from the LP relaxation.")
    return 0


# -- expand -------------------------------------------------------------------------------

def _cmd_expand(args) -> int:
    from planner.answers.expansion import expand, progress_bar, sweep
    from planner.reports import write_plan_workbook, write_sweep_workbook

    scn = load_scenario(args.scenario)
    if args.target is None and args.sweep is None:
        raise InputError("give --target V or --sweep LOW:HIGH:STEP", place="expand")
    week = _week(scn, args.from_date, "--from")
    settings = _settings(scn, args)
    cur = scn.costs.currency
    if args.sweep is not None:
        show = not args.quiet and sys.stderr.isatty()
        df = sweep(scn, args.sweep, from_week=week, settings=settings, workers=args.workers,
                   scheduler=args.scheduler, progress=progress_bar() if show else None)
        outputs = {}
        if args.output:
            outputs["workbook"] = write_sweep_workbook(
                df, args.output, cur, f"Expansion sweep: {scn.name}")
        if args.json:
            print(dumps({"sweep": df.to_dict(orient="records"), "outputs": outputs,
                         "currency": cur}))
            return 0
        cols = ["target", "cost_per_million", "shortfall_million"] + \
            [c for c in df.columns if c.startswith("bought: ")]
        print(table(df[cols].itertuples(index=False),
                    ["target [million/week]", f"cost per million [{cur}]", "short [million]"]
                    + [c.replace("bought: ", "") + " [units]" for c in cols[3:]],
                    title="Expansion sweep"))
        for p in outputs.values():
            print(f"wrote {p}")
        return 0
    res = expand(scn, args.target, week, settings)
    if not res.plan.info.has_plan:
        raise NoPlanError(f"no plan for the target: {res.plan.info.message}")
    s = res.summary()
    outputs = {}
    if args.output:
        rows = [("target", s["target"], "million/week"), ("from", s["from_date"], ""),
                ("bought", s["bought"], "units"), ("expansion cost", s["expansion_cost"], cur),
                ("total cost", s["total_cost"], cur),
                ("cost per million", s["cost_per_million"], f"{cur}/million"),
                ("held in full from week", s["full_from_week"], "week"),
                ("ramp-up weeks", ", ".join(str(r["week"]) for r in s["ramp"]), "week"),
                ("short in the ramp-up", s["shortfall_in_ramp_million"], "million"),
                ("short after the ramp-up", s["shortfall_after_ramp_million"], "million"),
                ("status", s["status"], "")]
        outputs["workbook"] = write_plan_workbook(res.plan, args.output,
                                                  scenario_file=Path(args.scenario).name,
                                                  front=("Expansion", "Expansion", rows))
    if args.json:
        print(dumps(s | {"outputs": outputs}))
        return 0
    bought = [f"{v} x {k}" for k, v in s["bought"].items() if v]
    full = s["full_from_week"]
    held = (f"held in full from week {full} ({res.plan.data.date(7 * (full - 1))})"
            if full is not None else "not held in full in any week to the horizon's end")
    print(f"Target {num(args.target)} million/week from week {s['from_week']} "
          f"({s['from_date']}): {held}" +
          ("" if s["meets_target"] else
           f"; short by {num(s['shortfall_after_ramp_million'])} million" +
           (" after the ramp-up" if s["ramp"] else " in all")))
    from planner.answers.expansion import RAMP_SETTLED_WEEKS
    if not s["reachable"]:
        print(f"Not reachable: even the LP relaxation with every option bought fills no "
              f"{RAMP_SETTLED_WEEKS} weeks in a row; below, the plan that comes closest to it "
              f"({s['status']}" + (f", gap {100 * res.plan.info.gap:.2f} %"
                                   if res.plan.info.gap is not None else "") + ").")
    if s["ramp"]:
        from planner.optimise.results import FILL_TOLERANCE
        print(f"Ramp-up weeks (before the first {RAMP_SETTLED_WEEKS} weeks in a row that even "
              "the LP relaxation with every option fills: lead time, options not yet ready; "
              "their unmet part is priced at the scenario's shortfall price):")
        for r in s["ramp"]:
            short = (f"{num(r['short_million'])} million of the growth order short"
                     if r["short_million"] > FILL_TOLERANCE * r["target_million"]
                     else "filled")
            print(f"  week {r['week']}: {num(r['delivered_million'])} of "
                  f"{num(args.target)} million delivered ({short})")
    print("Buy: " + (", ".join(bought) if bought else "nothing (the facility suffices)"))
    print(f"Expansion cost {s['expansion_cost']:,.0f} {cur}; total cost {s['total_cost']:,.0f} "
          f"{cur}; {s['cost_per_million']:,.0f} {cur} per million delivered ({s['status']}).")
    for p in outputs.values():
        print(f"wrote {p}")
    print("\n" + "\n".join(CAUTIONS))
    return 0
