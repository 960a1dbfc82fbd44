"""Sub-commands of the scenario layer: check, template."""

from __future__ import annotations

from pathlib import Path

from planner.cli.format import JSON_HELP, SCENARIO_HELP, dumps, kv_table, load_scenario, num, table

__all__ = ["register", "check_text"]


def register(sub) -> None:
    p = sub.add_parser("check", help="validate a scenario and size its largest week",
                       description="Validate a scenario (TOML or input workbook) and print its "
                                   "demography, capacities, calendar, order book, a first "
                                   "estimate of what the largest week needs (counting "
                                   "kitchen days, shipping days and holidays) and the volume "
                                   "the facility can sustain (the standard week's linear "
                                   "programme), flagging short resources and weeks.")
    p.add_argument("scenario", metavar="SCENARIO", help=SCENARIO_HELP)
    p.add_argument("--json", action="store_true", help=JSON_HELP)
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
    out.append("")
    out.append(calendar_text(rep["calendar"]))
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
                   f"{est['discard_age']} day (the cheapest allowed pair), with the eggs of "
                   f"{est['seeding_days_per_week']} laying days a week seeded and the pupae "
                   f"of {est['release_days_per_week']} shipped:")
        out.append(table([(n["resource"], n["needed"], n["available"], n["unit"],
                           n["utilisation"], "SHORT" if n["short"] else "ok")
                          for n in est["needs"]],
                         ["resource", "needed", "available", "unit", "utilisation [-]", "status"]))
        out.append(kv_table([
            ("eggs laid", est["eggs_laid_per_day"], "eggs/day"),
            ("eggs seeded (weekly mean)", est["eggs_per_day"], "eggs/day"),
            ("trays seeded per open kitchen day", est["trays_per_open_day"], "trays/day"),
            ("cages loaded", est["cages_loaded_per_day"], "cages/day"),
            ("pupae released", est["pupae_released_per_day"], "pupae/day"),
            ("variable cost", est["cost_per_week"], f"{est['currency']}/week"),
        ]))
    sus = rep.get("sustainable")
    if sus and sus.get("volume") is not None:
        out.append("")
        out.append(f"Sustainable volume (standard week, linear programme): "
                   f"{num(sus['volume'])} million/week against {num(sus['largest_volume'])} "
                   f"ordered in week {sus['largest_week']}"
                   + (": SHORT." if sus["short"] else ": ok."))
    if est or sus:
        if rep["short"]:
            out.append("\nShort: " + ", ".join(rep["short"]) + ".")
            out += [f"- {r}" for r in rep["reasons"]]
            out.append("The stationary estimate uses averages: the optimiser may still fill "
                       "the orders with overtime, other ages or uneven days; orders above the "
                       "sustainable volume it cannot fill week after week.")
        else:
            out.append("\nNo resource is short on average at this volume, and no week is "
                       "short by the calendar.")
    for note in rep.get("notes", []):
        out.append(f"note: {note}")
    return "\n".join(out)


def calendar_text(cal: dict) -> str:
    """The calendar section of the check report: shipping days, kitchen days, holidays
    within the horizon, weeks with no shipping day, and the weeks whose own calendar
    differs from the usual week or is short."""
    def days(names):
        return ", ".join(d.capitalize() for d in names) or "none"

    rows = [("shipping days", days(cal["shipping_days"])
             + ("" if cal["ship_on_holidays"] else " (not on holidays)")),
            ("kitchen open", days(cal["kitchen_days"])),
            ("kitchen shut", days(cal["kitchen_shut"])),
            ("laying days a week seeded", f"{cal['seeding_days_per_week']} of 7"),
            ("laying days a week shipped", f"{cal['release_days_per_week']} of 7"),
            ("weeks with no shipping day",
             ", ".join(str(w) for w in cal["weeks_without_shipping"]) or "none")]
    hol = []
    for h in cal["holidays"]:
        notes = []
        if h["kitchen_shut"]:
            notes.append("kitchen shut")
        if h["shipping_day_lost"]:
            notes.append("no shipping")
        hol.append(f"{h['date']} ({h['weekday'].capitalize()}, week {h['week']}"
                   + (": " + ", ".join(notes) if notes else "") + ")")
    rows.append(("holidays in the horizon", "; ".join(hol) or "none"))
    if cal["holidays_outside_horizon"]:
        rows.append(("holidays outside the horizon", str(cal["holidays_outside_horizon"])))
    width = max(len(k) for k, _ in rows)
    out = ["Calendar"] + [f"{k.ljust(width)}  {v}" for k, v in rows]
    odd = [w for w in cal["weeks"]
           if w["holidays"] or w.get("short") or (w["ordered"] > 0 and not w["shipping_days"])
           or w["seeding_days"] != cal["seeding_days_per_week"]
           or w["release_days"] != cal["release_days_per_week"]]
    if odd:
        out.append("")
        out.append(table([(w["week"], ", ".join(w["holidays"]) or "-",
                           len(w["shipping_days"]), w["kitchen_days"], w["seeding_days"],
                           w["release_days"], w["ordered"],
                           ", ".join(w.get("short", [])) or
                           ("no shipping day" if w["ordered"] > 0 and not w["shipping_days"]
                            else "-"))
                          for w in odd],
                         ["week", "holidays", "shipping days", "kitchen days",
                          "laying days seeded", "laying days shipped", "ordered [million]",
                          "short in this week only"],
                         title="Weeks whose calendar differs from the usual week (the laying "
                               "days counted are those whose pupae ship in the week)"))
    return "\n".join(out)


def _cmd_check(args) -> int:
    from planner.errors import BroodlineError
    from planner.answers.checkcap import sustainable_volume
    from planner.scenario.check import add_sustainable, check_report
    scn = load_scenario(args.scenario)
    rep = check_report(scn)
    if rep["orders"]["largest_volume"] > 0:
        try:
            sus = sustainable_volume(scn)
        except BroodlineError as exc:  # no solver: the estimate still stands
            sus = {"volume": None, "status": f"not solved ({exc})"}
        add_sustainable(rep, **sus)
    print(dumps(rep) if args.json else check_text(rep))
    return 0


def _cmd_template(args) -> int:
    from planner.scenario.workbook import write_template
    path = write_template(Path(args.out))
    print(f"wrote {path}")
    return 0
