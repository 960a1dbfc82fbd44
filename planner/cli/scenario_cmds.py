"""Sub-commands of the scenario layer: check, template."""

from __future__ import annotations

from pathlib import Path

from planner.cli.format import dumps, kv_table, num, table
from planner.scenario import load_scenario
from planner.scenario.check import check_report

__all__ = ["register", "check_text"]


def register(sub) -> None:
    p = sub.add_parser("check", help="validate a scenario and size its largest week",
                       description="Validate a scenario (TOML or input workbook) and print its "
                                   "demography, capacities, order book and a first estimate of "
                                   "what the largest week needs, flagging short resources.")
    p.add_argument("scenario", help="scenario file (.toml or .xlsx)")
    p.add_argument("--json", action="store_true")
    p.set_defaults(handler=_cmd_check)

    p = sub.add_parser("template", help="write the input workbook (filled with the demo)",
                       description="Write the input workbook: one sheet per section of a "
                                   "scenario, units in the headers, the invented demo as "
                                   "example rows.")
    p.add_argument("out", help="workbook to write (.xlsx)")
    p.set_defaults(handler=_cmd_template)


def check_text(rep: dict) -> str:
    """The check report as aligned tables with units."""
    col = rep["colony"]
    out = [f"Scenario: {rep['scenario']}", ""]
    out.append(kv_table([
        ("net reproductive rate R0", col["net_reproductive_rate"], "female eggs per female egg"),
        ("intrinsic rate r", col["intrinsic_rate"], "per day"),
        ("finite rate lambda", col["finite_rate"], "per day"),
        ("generation time T", col["generation_time"], "day"),
    ], title=f"Colony {col['name']}"))
    out.append("")
    out.append(table([(p["harvest_age"], p["discard_age"], p["net_reproductive_rate"],
                       p["harvest_fraction"], p["output_per_female"], p["pupae_per_female"])
                      for p in rep["harvest_pairs"]],
                     ["harvest age [day]", "discard age [day]", "R0(delta) [-]", "H [-]",
                      "P [female/female/day]", "pupae per female [/day]"],
                     title="Harvest at the allowed ages"))
    caps = rep["capacities"]
    out.append("")
    rows = [("cage slots", caps["cage_slots"], "cages"), ("rack slots", caps["rack_slots"], "trays"),
            ("diet kitchen (weekly mean)", caps["kitchen_per_day"], "kg/day")]
    if caps["pupal_holding"] is not None:
        rows.append(("pupal holding", caps["pupal_holding"], "million pupae"))
    for name, c in caps["crews"].items():
        rows.append((f"{name} (weekly mean)", c["regular_per_day"], "h/day"))
        rows.append((f"{name} overtime limit", c["overtime_limit"], "h/day"))
    out.append(kv_table(rows, title="Capacities"))
    book = rep["orders"]
    out.append("")
    weeks = len(book["total_by_week"])
    customers = list(book["by_customer"])
    out.append(table([[w + 1] + [book["by_customer"][c][w] for c in customers]
                      + [book["total_by_week"][w]] for w in range(weeks)],
                     ["week"] + [f"{c} [million]" for c in customers] + ["total [million]"],
                     title="Order book"))
    est = rep["estimate"]
    if est:
        out.append("")
        out.append(f"First estimate for the largest week ({num(est['volume'])} million/week), "
                   f"stationary formulas at harvest age {est['harvest_age']} and discard age "
                   f"{est['discard_age']} day (the cheapest allowed pair):")
        out.append(table([(n["resource"], n["needed"], n["available"], n["unit"],
                           n["utilisation"], "SHORT" if n["short"] else "ok")
                          for n in est["needs"]],
                         ["resource", "needed", "available", "unit", "utilisation [-]", "status"]))
        out.append(kv_table([
            ("eggs collected and seeded", est["eggs_per_day"], "eggs/day"),
            ("trays seeded", est["trays_per_day"], "trays/day"),
            ("cages loaded", est["cages_loaded_per_day"], "cages/day"),
            ("pupae released", est["pupae_released_per_day"], "pupae/day"),
            ("variable cost", est["cost_per_week"], f"{est['currency']}/week"),
        ]))
        if rep["short"]:
            out.append("\nShort: " + ", ".join(rep["short"]) + ". The optimiser may still fill "
                       "the orders with overtime, other ages or uneven days; these are averages.")
        else:
            out.append("\nNo resource is short on average at this volume.")
    for note in rep.get("notes", []):
        out.append(f"note: {note}")
    return "\n".join(out)


def _cmd_check(args) -> int:
    scn = load_scenario(args.scenario)
    rep = check_report(scn)
    print(dumps(rep) if args.json else check_text(rep))
    return 0


def _cmd_template(args) -> int:
    from planner.scenario.workbook import write_template
    path = write_template(Path(args.out))
    print(f"wrote {path}")
    return 0
