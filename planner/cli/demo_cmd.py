"""``broodline demo``: the embedded demo colony's demography."""

from __future__ import annotations

import tomllib

from planner.cli.demography_cmds import lifetable_report
from planner.cli.format import dumps, table
from planner.demography import read_life_table, single_stage_harvest
from planner.resources import bundled_path

__all__ = ["register"]


def register(sub) -> None:
    p = sub.add_parser("demo", help="run Broodline on the embedded, invented demo",
                       description="Show the demography of the embedded demo colony "
                                   "(invented data).")
    p.add_argument("--json", action="store_true")
    p.set_defaults(handler=_cmd_demo)


def _cmd_demo(args) -> int:
    path = bundled_path("models", "fernhollow-fly.toml")
    model = tomllib.loads(path.read_text(encoding="utf-8"))
    lt = read_life_table(path.parent / model["life_table"],
                         female_fraction=model["female_fraction"], age_unit=model["age_unit"])
    eps = model["stages"]["emergence_age"]
    summary, text = lifetable_report(lt)
    rows, pairs = [], []
    for theta in model["rearing"]["harvest_ages"]:
        for delta in model["rearing"]["discard_ages"]:
            res = single_stage_harvest(lt, theta, delta, eps)
            pairs.append(res.summary() | {"insects_per_female": res.insects_per_female})
            rows.append((theta, delta, res.net_reproductive_rate, res.harvest_fraction,
                         res.output_per_female, res.insects_per_female))
    if args.json:
        print(dumps({"colony": model["name"], "invented": True, "life_table": summary,
                     "harvest": pairs}))
        return 0
    print(f"Broodline demo: colony {model['name']} ({model['species']}); invented data.\n")
    print(text)
    print()
    print(table(rows, ["harvest age [day]", "discard age [day]", "R0(delta) [-]",
                       "harvest fraction H [-]", "P [female/female/day]",
                       "pupae per female [/day]"],
                title=f"Harvest at the allowed ages (emergence at day {eps})"))
    print("\nPlans are estimates from the life table; biosafety, irradiation and release "
          "rules are local matters for licensed staff.")
    return 0
