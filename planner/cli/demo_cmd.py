"""``broodline demo``: Broodline on the embedded, invented demo scenario."""

from __future__ import annotations

from planner.cli.format import dumps
from planner.cli.scenario_cmds import check_text
from planner.scenario import demo_scenario_path, load_scenario
from planner.scenario.check import check_report

__all__ = ["register"]

CAUTION = ("Plans are estimates from the life table; biosafety, irradiation and release "
           "rules are local matters for licensed staff.")


def register(sub) -> None:
    p = sub.add_parser("demo", help="run Broodline on the embedded, invented demo",
                       description="Check the embedded demo scenario (the invented Fernhollow "
                                   "sterile fly unit) and show its colony's demography.")
    p.add_argument("--json", action="store_true")
    p.set_defaults(handler=_cmd_demo)


def _cmd_demo(args) -> int:
    path = demo_scenario_path("fly")
    rep = check_report(load_scenario(path))
    if args.json:
        print(dumps(rep | {"invented": True, "scenario_file": path}))
        return 0
    print("Broodline demo: the invented Fernhollow sterile fly unit (demo data).\n")
    print(check_text(rep))
    print("\n" + CAUTION)
    return 0
