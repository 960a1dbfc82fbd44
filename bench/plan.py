"""Speed and value of the planning optimiser (printed, not asserted).

Run: python bench/plan.py [--repeat N] [--quick]

1. Build and solve the demo for 13, 26 and 52 weeks with CBC and with HiGHS: build
   seconds (data, matrices and the PuLP problem; median of repeated builds), solve seconds (median of repeated solves), gap,
   variables and constraints, and the CBC/HiGHS time ratio (from the same run).
2. The hand method a planner would use without Broodline: from the stationary formulas
   at the largest weekly order, constant cages per day and trays per kitchen day (the
   daily averages times 7 / kitchen days, rounded up), the same every day, at the cheapest allowed (harvest, discard) pair whose rounded
   plan fits the cage slots; trays only as far as the eggs allow, cages only when the
   cohort has the pupae; as much overtime as the routine needs (days above the crews'
   limits are counted as rule breaches). It is run through the same model (its cages and
   trays fixed) and the same checks, and its cost and order fill are printed beside the
   optimiser's.
"""

from __future__ import annotations

import argparse
import math
import statistics
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _timing import median_seconds  # noqa: E402

from planner.errors import DemographyError  # noqa: E402
from planner.optimise import (available_solvers, build_model, compile_horizon,  # noqa: E402
                              read_back, settings_for, solve, verify_plan)
from planner.optimise.solve import to_pulp  # noqa: E402
from planner.optimise.standard_week import start_batches  # noqa: E402
from planner.scenario import demo_scenario_path, load_scenario  # noqa: E402
from planner.scenario.sizing import stationary_needs  # noqa: E402


def timed_solves(scn, start, weeks: int, solver: str, repeat: int):
    data = compile_horizon(scn, start, horizon_weeks=weeks)
    # build = data compiled, matrices assembled, PuLP problem made (what solve() gets)
    build_s = median_seconds(lambda: to_pulp(build_model(
        compile_horizon(scn, start, horizon_weeks=weeks)).model), repeat=max(repeat, 3))
    built = build_model(data)
    settings = settings_for(scn, solver=solver, time_limit=300, duals=False)
    lp = median_seconds(lambda: solve(build_model(data, relax=True).model, settings.for_lp()),
                        repeat=max(repeat, 3), warmup=0)
    times, last = [], None
    for _ in range(repeat):
        t0 = time.perf_counter()
        last = solve(built.model, settings)
        times.append(time.perf_counter() - t0)
    return build_s, statistics.median(times), last, built.model.size_summary(), lp


def hand_plan(scn, start, weeks: int):
    """The hand method's cages and trays, fixed in the model, then solved for the rest."""
    data = compile_horizon(scn, start, horizon_weeks=weeks)
    peak = float(data.ordered[:, :data.report_weeks].sum(axis=0).max())
    open_days = int((np.array(scn.kitchen.diet_kg.as_list()) > 0).sum())
    slots = scn.facility.cage_slots
    lx, mf, k = scn.colony.lx(), scn.colony.female_mx(), scn.colony.rearing.pupae_per_cage
    tc = scn.colony.rearing.cage_loading_age
    rho = scn.colony.rearing.eggs_per_tray
    best = None
    for theta in scn.colony.rearing.harvest_ages:
        for delta in scn.colony.rearing.discard_ages:
            try:
                n = stationary_needs(scn, peak, theta, delta)
            except DemographyError:
                continue
            trays = math.ceil(n.trays * 7 / open_days - 1e-9)
            # eggs are needed on the kitchen days only, and cohorts exist only for those
            # days: enough cages per loading day that the eggs cover a kitchen day's trays
            per_cage = k * float(np.sum(lx[tc:delta + 1] / lx[tc] * mf[tc:delta + 1]))
            cages = math.ceil(n.cages_loaded - 1e-9)
            while cages * per_cage * open_days / 7 < trays * rho and cages < slots:
                cages += 1
            occupancy = cages * (delta - tc + 1) * open_days / 7
            if occupancy > slots:
                continue
            cost = n.cost_per_week * cages / max(n.cages_loaded, 1e-9)
            if best is None or cost < best[2]:
                best = (n, cages, cost)
    needs, cages_per_day, _ = best
    trays_per_day = math.ceil(needs.trays * 7 / open_days - 1e-9)
    # replay the routine day by day: seed the target trays when the kitchen is open and
    # the eggs collected seed_lag days before suffice; load the cages when the cohort at
    # the loading age has the pupae to fill them (to the minimum fill at least)
    lx, mf, k, rho, tc, lag = data.lx, data.mf, data.k, data.rho, data.theta_c, data.seed_lag
    span = data.span(needs.discard_age)
    n = data.n_days
    eggs = np.zeros(n + 64)
    offset = 64  # eggs[offset + t] = eggs laid on day t (t >= -64)

    def lay(load_day, pupae, delta):
        a = tc + np.arange(data.span(delta))
        days = load_day + np.arange(a.size) + offset
        ok = (days >= 0) & (days < eggs.size)
        eggs[days[ok]] += pupae * lx[a][ok] / lx[tc] * mf[a][ok]

    for s, c, d in data.start.cages:
        lay(s, c * k, d)
    trays = {s: c for s, c in data.start.trays}
    cages = {}
    for t in range(n):
        limit = math.floor(data.kitchen[t] / data.diet_per_tray + 1e-9)
        have = math.floor(eggs[offset + t - lag] / rho + 1e-9)
        trays[t] = max(0, min(trays_per_day, limit, have))
        supply = rho * trays.get(t - tc + lag, 0) * lx[tc]
        count = cages_per_day
        while count and supply < data.min_cage_fill * count * k:
            count -= 1
        cages[t] = count
        if count:
            lay(t, min(supply, count * k), needs.discard_age)
    built = build_model(data)
    m = built.model
    tb = m.blocks["trays"]
    for i, (t,) in enumerate(tb.labels):
        tb.lb[i] = tb.ub[i] = trays[t]
    cb = m.blocks["cages"]
    for i, (t, delta) in enumerate(cb.labels):
        cb.lb[i] = cb.ub[i] = cages[t] if delta == needs.discard_age else 0
    assert span > 0
    # a constant routine needs whatever overtime it needs: lift the daily limit (the
    # checks below count the days above it as rule breaches)
    m.blocks["overtime"].ub[:] = np.inf
    sol = solve(m, settings_for(scn, time_limit=300))
    return needs, cages_per_day, trays_per_day, sol, built


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3, help="solves per configuration (median)")
    ap.add_argument("--quick", action="store_true", help="26 weeks only, one repeat")
    args = ap.parse_args()
    scn = load_scenario(demo_scenario_path("fly"))
    start = start_batches(scn, settings_for(scn))
    solvers = [s for s in ("cbc", "highs") if s in available_solvers()]
    horizons = [26] if args.quick else [13, 26, 52, 104]
    repeat = 1 if args.quick else args.repeat
    print(f"Broodline planning benchmark: demo scenario, medians of {repeat} solve(s); "
          f"relative gap {scn.plan.relative_gap:g}")
    print(f"{'weeks':>5} {'solver':>6} {'build s':>8} {'solve s':>8} {'LP s':>6} {'gap':>7} "
          f"{'status':>9} {'variables':>9} {'integers':>8} {'rows':>6} {'target s':>8}")
    targets = {26: 2.0, 52: 5.0, 104: 30.0}
    ratios = {}
    for weeks in horizons:
        row = {}
        for solver in solvers:
            b, s, sol, size, lp = timed_solves(scn, start, weeks, solver, repeat)
            row[solver] = s
            gap = "-" if sol.info.gap is None else f"{sol.info.gap:.2%}"
            tgt = targets.get(weeks)
            if tgt is not None and solver == "cbc":
                tgt *= 2  # the fallback may take twice the default's time
            print(f"{weeks:>5} {solver:>6} {b:>8.3f} {s:>8.2f} {lp:>6.2f} {gap:>7} "
                  f"{sol.info.status:>9} {size['variables']:>9} {size['integer_variables']:>8} "
                  f"{size['constraints']:>6} {'-' if tgt is None else f'{tgt:g}':>8}")
        if len(row) == 2:
            ratios[weeks] = row["cbc"] / row["highs"]
    for weeks, r in ratios.items():
        print(f"CBC/HiGHS solve-time ratio at {weeks} weeks: {r:.2f}")
    print("targets (issue 11): to 0.5% gap with the default solver 26 weeks <= 2 s, 52 <= 5 s, "
          "104 <= 30 s; CBC at most twice that")

    weeks = 26
    data = compile_horizon(scn, start, horizon_weeks=weeks)
    built = build_model(data)
    opt = read_back(built, solve(built.model, settings_for(scn)))
    needs, cpd, tpd, hsol, hbuilt = hand_plan(scn, start, weeks)
    print(f"\nHand method at the peak order ({needs.volume:g} million/week): {cpd} cage(s) per "
          f"day with discard age {needs.discard_age} day, {tpd} trays per kitchen day, "
          f"harvest age {needs.harvest_age} day")
    cur = scn.costs.currency
    rows = [("optimiser", opt)]
    if hsol.info.has_plan:
        rows.append(("hand method", read_back(hbuilt, hsol)))
    else:
        print(f"hand method: no feasible plan ({hsol.info.message})")
    print(f"{'plan':<12} {'variable cost':>14} {'total cost':>12} {'per million':>12} "
          f"{'filled':>8} {'short [M]':>10} {'rule breaches':>13}")
    variable, total = {}, {}
    for name, res in rows:
        s = res.summary()
        variable[name], total[name] = s["variable_cost"], s["total_cost"]
        fill = 1 - s["shortfall_million"] / s["ordered_million"]
        breaches = verify_plan(res)
        print(f"{name:<12} {s['variable_cost']:>14,.0f} {s['total_cost']:>12,.0f} "
              f"{s['cost_per_million']:>12,.1f} {fill:>8.2%} {s['shortfall_million']:>10.3f} "
              f"{len(breaches):>13}")
        if breaches:
            fams = {}
            for b in breaches:
                fams[b.family] = fams.get(b.family, 0) + 1
            print(f"{'':<12} breaches by family: " + ", ".join(f"{k} {v}" for k, v in fams.items()))
    if "hand method" in variable:
        print(f"optimiser / hand method, variable cost (what the plan controls): "
              f"{variable['optimiser'] / variable['hand method']:.3f} (target <= 0.95 with every "
              f"order filled); with the fixed crew cost: "
              f"{total['optimiser'] / total['hand method']:.3f}; currency {cur}")


if __name__ == "__main__":
    main()
