"""Sub-commands of the demographic layer: lifetable, matrix, harvest, cohort."""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

from planner.cli.format import JSON_HELP, checked, dumps, kv_table, num, table
from planner.errors import DemographyError

if TYPE_CHECKING:
    from planner.demography import LifeTable

__all__ = ["register", "lifetable_report", "harvest_report"]


def _demography():
    """The demographic layer, loaded when a command runs (not for ``--help``)."""
    import planner.demography
    return planner.demography


_fraction = checked(float, lambda v: 0 < v <= 1, "a fraction in (0, 1]")
_positive = checked(float, lambda v: 0 < v < math.inf, "a positive number")
_count = checked(int, lambda v: v >= 0, "a whole number >= 0")
_age = checked(float, lambda v: 0 <= v < math.inf, "an age (a number >= 0)")


def register(sub) -> None:
    p = sub.add_parser("lifetable", help="R0, r, generation time ... of a life table CSV",
                       description="Analyse a life table CSV with the columns age,lx,mx.")
    p.add_argument("file", help="CSV with columns age,lx,mx (ages ascending, any unit)")
    p.add_argument("--female-fraction", type=_fraction, metavar="F",
                   help="mx counts all eggs and F of them are female (default: mx counts "
                        "female eggs)")
    p.add_argument("--age-unit", default="day", help="unit of the age column (default: day)")
    p.add_argument("--harvest-interval", type=_positive, default=1.0, metavar="TAU",
                   help="interval of the all-stage harvest [age units] (default 1)")
    p.add_argument("--json", action="store_true", help=JSON_HELP)
    p.set_defaults(handler=_cmd_lifetable)

    p = sub.add_parser("matrix", help="eigen-analysis of a stage-classified matrix CSV",
                       description="Analyse a stage matrix CSV: header 'stage,<name>,...', "
                                   "rows '<name>,<a_i1>,...' (column = from, row = to).")
    p.add_argument("file", help="CSV of a stage-classified (Lefkovitch) projection matrix")
    p.add_argument("--interval-unit", default="day",
                   help="length of one projection interval (default: day)")
    p.add_argument("--harvest-interval", type=_positive, default=1.0, metavar="TAU",
                   help="interval of the all-stage harvest [projection intervals] (default 1)")
    p.add_argument("--fecundity", metavar="ENTRIES",
                   help="which entries are new offspring: stage names (whole rows) or "
                        "'to<-from' pairs, comma-separated (default: the file's "
                        "'# fecundity:' line, else the first row)")
    p.add_argument("--json", action="store_true", help=JSON_HELP)
    p.set_defaults(handler=_cmd_matrix)

    p = sub.add_parser("harvest", help="harvest fraction and daily output per female",
                       description="Single-stage harvest of a life table: with the three "
                                   "ages, the stationary colony; without them, the grid of "
                                   "H and P over harvest age < discard age.")
    p.add_argument("file", help="life table CSV with columns age,lx,mx")
    p.add_argument("--harvest-age", type=_age, metavar="A", help="age at harvest [age unit]")
    p.add_argument("--discard-age", type=_age, metavar="A",
                   help="age at which cages are emptied [age unit]")
    p.add_argument("--emergence-age", type=_age, metavar="A",
                   help="first adult age [age unit] (default: the first laying age)")
    p.add_argument("--female-fraction", type=_fraction, metavar="F",
                   help="mx counts all eggs and F of them are female")
    p.add_argument("--age-unit", default="day", help="unit of the age column (default: day)")
    p.add_argument("--all", action="store_true",
                   help=f"print every pair of the grid (default: the {GRID_SHOWN} best)")
    p.add_argument("--json", action="store_true", help=JSON_HELP)
    p.set_defaults(handler=_cmd_harvest)

    p = sub.add_parser("cohort", help="life table from daily cohort records, with intervals",
                       description="Estimate lx (Kaplan–Meier, censoring removed or escaped "
                                   "females) and mx (eggs per female-day) from cage records "
                                   "with the columns cage,day,females,eggs[,males,removed,"
                                   "removed_males].")
    p.add_argument("file", help="CSV of daily cage records (cohort life table)")
    p.add_argument("--bootstrap", type=_count, default=0, metavar="N",
                   help="bootstrap resamples of cages (default 0: jackknife only)")
    p.add_argument("--seed", type=int, default=None, metavar="S", help="bootstrap seed")
    p.add_argument("--female-fraction", type=_fraction, default=1.0, metavar="F",
                   help="share of the eggs that are female (default 1: eggs counted are female)")
    p.add_argument("--entry-survival", type=_fraction, default=1.0, metavar="S",
                   help="probability that an egg reaches the first observed age (default 1)")
    p.add_argument("--json", action="store_true", help=JSON_HELP)
    p.set_defaults(handler=_cmd_cohort)


# -- lifetable ---------------------------------------------------------------------

def _all_stage(lam: float, tau: float) -> float | None:
    try:
        return _demography().all_stage_harvest_fraction(lam, tau)
    except DemographyError:
        return None


def lifetable_report(lt: LifeTable, tau: float = 1.0) -> tuple[dict, str]:
    """The life table's summary as a JSON-ready dict and as text."""
    s = lt.summary()
    s["all_stage_harvest"] = _all_stage(s["finite_rate"], tau)
    s["harvest_interval"] = tau
    s["notes"] = list(lt.notes)
    u = lt.age_unit
    text = kv_table([
        ("net reproductive rate R0", s["net_reproductive_rate"], "female eggs per female egg"),
        ("intrinsic rate of increase r", s["intrinsic_rate"], f"per {u}"),
        ("finite rate of increase lambda", s["finite_rate"], f"per {u}"),
        ("mean generation time T = ln R0 / r", s["generation_time"], u),
        ("cohort generation time Tc", s["cohort_generation_time"], u),
        ("doubling time", s["doubling_time"], u),
        ("first laying age", s["first_laying_age"], u),
        (f"all-stage harvest every {num(tau)} {u}",
         s["all_stage_harvest"] if s["all_stage_harvest"] is not None else
         "none (no growth)", "share of every age"),
    ], title=f"Life table {lt.source or ''} ({lt.age.size} ages, {num(lt.age[0])} to "
             f"{num(lt.age[-1])} {u})".replace("  ", " "))
    # the columns of LifeTable.to_frame, without loading pandas for a printed table
    d = _demography()
    r = lt.intrinsic_rate
    keep = lt.lx > 0
    rows = zip(lt.age[keep], lt.lx[keep], lt.mx[keep], (lt.lx * lt.mx)[keep],
               d.stable_age_distribution(lt.age, lt.lx, r)[keep],
               d.reproductive_values(lt.age, lt.lx, lt.mx, r)[keep])
    text += "\n\n" + table(rows, [f"age [{u}]", "lx [-]", f"mx [/female/{u}]", "lx*mx [-]",
                                  "stable age c_x [-]", "reprod. value v_x [-]"], digits=5)
    if lt.notes:
        text += "\n\n" + "\n".join(f"note: {n}" for n in lt.notes)
    return s, text


def _cmd_lifetable(args) -> int:
    lt = _demography().read_life_table(args.file, female_fraction=args.female_fraction,
                                       age_unit=args.age_unit)
    s, text = lifetable_report(lt, args.harvest_interval)
    print(dumps(s) if args.json else text)
    return 0


# -- matrix ------------------------------------------------------------------------

def _cmd_matrix(args) -> int:
    m = _demography().read_stage_matrix(args.file, interval=args.interval_unit,
                                        fecundity=args.fecundity)
    s = m.summary()
    s["all_stage_harvest"] = _all_stage(s["finite_rate"], args.harvest_interval)
    s["harvest_interval"] = args.harvest_interval
    if args.json:
        print(dumps(s))
        return 0
    u = m.interval
    text = kv_table([
        ("dominant eigenvalue lambda", s["finite_rate"], f"per {u}"),
        ("intrinsic rate r = ln lambda", s["intrinsic_rate"], f"per {u}"),
        ("net reproductive rate R0", _or_unmarked(s["net_reproductive_rate"]),
         "offspring per individual"),
        ("generation time ln R0 / ln lambda", _or_unmarked(s["generation_time"]), u),
        ("damping ratio", s["damping_ratio"], "-"),
        (f"all-stage harvest every {num(args.harvest_interval)} {u}",
         s["all_stage_harvest"] if s["all_stage_harvest"] is not None else "none (no growth)",
         "share of every stage"),
    ], title=f"Stage matrix {m.source} ({len(m.stages)} stages; fecundity entries: "
             f"{m.fecundity_rule})")
    rows = [(name, s["stable_distribution"][name], s["reproductive_values"][name])
            for name in m.stages]
    text += "\n\n" + table(rows, ["stage", "stable distribution [-]", "reproductive value [-]"])
    if s["note"]:
        text += "\n\nnote: " + s["note"]
    print(text)
    return 0


def _or_unmarked(value):
    return "- (see note)" if value is None else value


# -- harvest -----------------------------------------------------------------------

def harvest_report(lt: LifeTable, theta: float, delta: float, eps: float | None):
    """One single-stage harvest as a JSON-ready dict and as text."""
    res = _demography().single_stage_harvest(lt, theta, delta, eps)
    s = res.summary()
    u = lt.age_unit
    items = [
        ("harvest age theta", res.harvest_age, u),
        ("discard age delta", res.discard_age, u),
        ("emergence age epsilon", res.emergence_age, u),
        ("net reproductive rate R0(delta)", res.net_reproductive_rate, "female eggs per female egg"),
        ("harvest fraction H", res.harvest_fraction, "share of insects alive at theta"),
        ("daily output per adult female P", res.output_per_female,
         f"insects (female units) per female per {u}"),
    ]
    if res.insects_per_female is not None:
        s["insects_per_female"] = res.insects_per_female
        items.append(("both sexes per adult female P/phi", res.insects_per_female,
                      f"insects per female per {u}"))
    text = kv_table(items, title=f"Single-stage harvest of {lt.source or 'the life table'}")
    rows = [(a, c) for a, c in res.stationary_structure.items()]
    text += "\n\n" + table(rows, [f"age [{u}]", "stationary share c_x [-]"])
    return s, text


#: Pairs of the harvest grid printed without --all (the best by output per female).
GRID_SHOWN = 20


def _cmd_harvest(args) -> int:
    lt = _demography().read_life_table(args.file, female_fraction=args.female_fraction,
                                       age_unit=args.age_unit)
    notes = list(lt.notes)
    if args.emergence_age is None:
        notes.append(f"no --emergence-age: output per female counts females from the first "
                     f"laying age ({num(lt.first_laying_age)} {lt.age_unit})")
    if args.harvest_age is not None and args.discard_age is not None:
        s, text = harvest_report(lt, args.harvest_age, args.discard_age, args.emergence_age)
        s["notes"] = notes
        print(dumps(s) if args.json else text + "".join(f"\nnote: {n}" for n in notes))
        return 0
    grid = _demography().harvest_grid(lt, args.emergence_age,
                        harvest_ages=None if args.harvest_age is None else [args.harvest_age],
                        discard_ages=None if args.discard_age is None else [args.discard_age])
    eps = lt.first_laying_age if args.emergence_age is None else args.emergence_age
    if grid.empty:
        raise DemographyError(f"{lt.source}: no pair of harvest age < discard age holds zero "
                              "growth: R0 never exceeds 1 after a pre-reproductive age")
    if args.json:
        print(dumps({"emergence_age": eps, "age_unit": lt.age_unit, "notes": notes,
                     "grid": grid.to_dict(orient="records")}))
        return 0
    u = lt.age_unit
    shown = grid
    if not args.all and len(grid) > GRID_SHOWN:
        # the best pairs by output per female; the feasible range below; --all: every pair
        shown = grid.sort_values("output_per_female", ascending=False).head(GRID_SHOWN)
    print(table(shown.itertuples(index=False),
                [f"harvest age [{u}]", f"discard age [{u}]", "R0(delta) [-]",
                 "harvest fraction H [-]", f"output per female P [/female/{u}]"],
                title=f"Single-stage harvest grid of {lt.source} ("
                      + (f"the {len(shown)} best of {len(grid)} pairs by P"
                         if len(shown) < len(grid) else f"{len(grid)} pairs")
                      + f"; emergence age {num(eps)} {u}; ages from egg laying)"))
    if len(shown) < len(grid):
        print(f"feasible pairs: harvest ages {num(grid['harvest_age'].min())}-"
              f"{num(grid['harvest_age'].max())} {u}, discard ages "
              f"{num(grid['discard_age'].min())}-{num(grid['discard_age'].max())} {u}; every "
              "pair with --all or --json")
    for n in notes:
        print(f"note: {n}")
    return 0


# -- cohort ------------------------------------------------------------------------

def _cmd_cohort(args) -> int:
    rec = _demography().read_cohort_records(args.file)
    res = _demography().analyse_cohort(rec, female_fraction=args.female_fraction,
                         entry_survival=args.entry_survival, bootstrap=args.bootstrap,
                         seed=args.seed, jackknife=rec.n_cages >= 2)
    s = res.summary()
    if args.json:
        print(dumps(s))
        return 0
    _, text = lifetable_report(res.life_table)
    rows = []
    for method, block in res.intervals.items():
        for key, label in (("net_reproductive_rate", "R0"), ("intrinsic_rate", "r [per day]")):
            b = block[key]
            centre = b.get("estimate", b.get("median"))
            rows.append((method, label, centre, b["standard_error"], b["low"], b["high"]))
    head = f"Cohort records {rec.source}: {rec.n_cages} cages, {rec.n_females} females"
    out = head + "\n\n" + text
    if rows:
        out += "\n\n" + table(rows, ["method", "quantity", "centre", "std. error",
                                     "95% low", "95% high"])
    else:
        out += "\n\nnote: one cage only, so no intervals (they resample cages)"
    print(out)
    return 0
