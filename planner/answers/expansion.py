"""Growing the plant: the least-cost set of expansion options that meets a target volume,
and the cost curve over a range of targets.

The scenario's expansion options are integer decisions of the same programme (each adds
cage slots, rack slots, diet kg per day or crew hours per day from its ready date, at a
weekly cost). A target is a total weekly volume from a date: the book's orders are
topped up to it by a 'growth target' order whose unmet millions cost far more than any
option, so options are bought whenever they let the target be met; what cannot be met
even with every option is reported as shortfall.

A sweep solves one target per volume, in parallel on local processes or on a Dask
cluster; each task receives parameters, builds and solves inside, and returns a plain
dict, so the table is the same either way.
"""

from __future__ import annotations

import dataclasses
import math
import os
import sys
import time
from collections.abc import Callable
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import dataclass

import pandas as pd

from planner.errors import InputError
from planner.optimise.build import build_model
from planner.optimise.data import compile_horizon
from planner.optimise.results import FILL_TOLERANCE, PlanResult, read_back
from planner.optimise.solve import SolveSettings, solve
from planner.optimise.standard_week import start_batches
from planner.scenario.schema import Order, Scenario

__all__ = ["ExpansionResult", "expand", "sweep", "TARGET_CUSTOMER", "target_price", "ramp_weeks"]

TARGET_CUSTOMER = "growth target"
#: The target's price is set so that leaving the fill tolerance of the target unmet in
#: every week an option unit is ready costs this many times that unit's cost [-] (two
#: options that only help together are both bought).
TARGET_PRICE_MARGIN = 2.0
#: The target is held in full from the first week of this many weeks in a row that the
#: LP relaxation (every option and integer relaxed) can fill [weeks]; the weeks before
#: it are the ramp (lead time, options not yet ready): no plan fills them all, so their
#: unmet target is priced at the scenario's own shortfall price, not the target's.
RAMP_SETTLED_WEEKS = 2


def target_price(scn: Scenario, data, extra: list[Order], target: float) -> float:
    """Price of an unmet million of the growth target [currency/million].

    High enough that a unit of an option is bought whenever, in the weeks of the target
    after its ready date, it lets the plan deliver ``FILL_TOLERANCE`` of the target
    [million/week] more: that much unmet in each of those weeks costs
    ``TARGET_PRICE_MARGIN`` times the unit's cost over every week it is paid for. Never
    below the scenario's own shortfall price. Not higher: the solver's relative gap is
    taken on the whole objective, and a price far above the operating cost makes the
    gap say nothing about the cost (and the programme badly scaled). The booked orders,
    a priority class above, are priced above it in turn.
    """
    target_days = sorted({7 * (o.first_week - 1) + d for o in extra
                          for d in range(7 * (o.last_week - o.first_week + 1))})
    need = 0.0
    for opt, ready in zip(data.options, data.option_ready):
        paid = max(0, data.n_days - max(ready, 0)) / 7.0  # [weeks]
        served = sum(1 for d in target_days if d >= ready) / 7.0  # [weeks]
        if paid <= 0.0 or served <= 0.0:
            continue  # ready only after the horizon or the target's last week
        per_week = TARGET_PRICE_MARGIN * opt.weekly_cost * paid / served
        need = max(need, per_week / (FILL_TOLERANCE * max(target, 1e-9)))
    return max(scn.costs.shortfall_per_million, need)


@dataclass
class ExpansionResult:
    """The options bought for a target and the plan that uses them."""

    target: float
    from_week: int
    plan: PlanResult
    bought: dict[str, int]
    expansion_cost: float
    total_cost: float
    delivered: float
    shortfall: float
    seconds: float
    solves: int = 1  #: solver runs: the plan, the LP probe, and the start routine
    ramp_weeks: list[int] = dataclasses.field(default_factory=list)
    #: False when even the LP relaxation with every option fills no
    #: ``RAMP_SETTLED_WEEKS`` weeks in a row: the target is beyond the options
    reachable: bool = True

    def _target_rows(self):
        w = self.plan.weekly
        return w[w["customer"] == TARGET_CUSTOMER]

    @property
    def full_from_week(self) -> int | None:
        """First week from which the plan fills the target in every reported week."""
        rows = self._target_rows()
        short = rows.loc[rows["shortfall"] > FILL_TOLERANCE * rows["ordered"], "week"]
        last = int(short.max()) if len(short) else self.from_week - 1
        weeks = self.plan.data.report_weeks
        return last + 1 if last < weeks else None

    @property
    def ramp(self) -> list[dict]:
        """The ramp weeks: the growth order above the book (target, planned, short) and
        what the week delivers to every customer together [million/week] each."""
        rows = self._target_rows()
        rows = rows[rows["week"].isin(self.ramp_weeks)]
        w = self.plan.weekly
        week_total = w.groupby("week")["released"].sum()
        return [{"week": int(r.week), "target_million": float(r.ordered),
                 "planned_million": float(r.released), "short_million": float(r.shortfall),
                 "delivered_million": float(week_total[r.week])}
                for r in rows.itertuples()]

    def _target_short(self, in_ramp: bool) -> float:
        rows = self._target_rows()
        return float(rows.loc[rows["week"].isin(self.ramp_weeks) == in_ramp,
                              "shortfall"].sum())

    @property
    def shortfall_after_ramp(self) -> float:
        """The growth target's unmet volume outside the ramp-up weeks [million]."""
        return self._target_short(False)

    @property
    def shortfall_in_ramp(self) -> float:
        """The growth target's unmet volume in the ramp-up weeks [million]."""
        return self._target_short(True)

    @property
    def cost_per_million(self) -> float | None:
        return self.total_cost / self.delivered if self.delivered > 1e-9 else None

    def summary(self) -> dict:
        return {"target": self.target, "from_week": self.from_week,
                "from_date": self.plan.data.date(7 * (self.from_week - 1)),
                "bought": self.bought, "expansion_cost": self.expansion_cost,
                "total_cost": self.total_cost, "cost_per_million": self.cost_per_million,
                "delivered_million": self.delivered, "shortfall_million": self.shortfall,
                "meets_target": self.shortfall_after_ramp <= 1e-3,
                "reachable": self.reachable,
                "full_from_week": self.full_from_week, "ramp": self.ramp,
                "shortfall_after_ramp_million": self.shortfall_after_ramp,
                "shortfall_in_ramp_million": self.shortfall_in_ramp,
                "status": self.plan.info.status,
                "time_limited": self.plan.info.time_limited,
                "booked_shortfall_million": self.plan.booked_shortfall(),
                "customers": self.plan.customer_table(),
                "currency": self.plan.scenario.costs.currency, "seconds": self.seconds,
                "solves": self.solves}


def _top_up(scn: Scenario, target: float, from_week: int, weeks: int) -> list[Order]:
    """Orders that bring the book up to ``target`` [million/week] from ``from_week``."""
    book = scn.weekly_orders(weeks)
    per_week = [sum(v[w] for v in book.values()) for w in range(weeks)]
    out = []
    # the target is served after every booked order: it never takes a booked pupa
    lowest = max([o.priority for o in scn.orders], default=1) + 1
    for w in range(from_week, weeks + 1):
        extra = target - per_week[w - 1]
        if extra > 1e-9:
            out.append(Order(customer=TARGET_CUSTOMER, weekly_volume=extra, first_week=w,
                             last_week=w, priority=lowest))
    return out


def expand(scn: Scenario, target: float, from_week: int | None = None,
           settings: SolveSettings | None = None, start=None) -> ExpansionResult:
    """Least-cost options and plan that deliver ``target`` [million/week] in every week
    from ``from_week`` (default: the first week the lead time allows) to the horizon's
    end and through the look-ahead."""
    from planner.optimise import settings_for
    from planner.answers.quote import default_start_week
    if not scn.expansion:
        raise InputError("the scenario lists no expansion options; add [[expansion]] entries",
                         place="expansion")
    t0 = time.perf_counter()
    settings = settings or settings_for(scn)
    solves = 1 if start is not None else 2
    start = start or start_batches(scn, dataclasses.replace(settings, log_path=None))
    week = from_week or default_start_week(scn)
    probe = compile_horizon(scn, start)
    extra = _top_up(scn, target, week, probe.n_weeks)
    data = compile_horizon(scn, start, extra_orders=extra, use_expansion=True)
    ramp, reachable = [], True
    if TARGET_CUSTOMER in data.customers:
        ci = data.customers.index(TARGET_CUSTOMER)
        data.shortfall_price[ci] = target_price(scn, data, extra, target)
        found = ramp_weeks(data, week, settings)
        solves += 1
        reachable, ramp = found is not None, found or []
        for k in ramp:
            data.shortfall_price[ci, k - 1] = scn.costs.shortfall_per_million
    built = build_model(data)
    spent = settings.spent + time.perf_counter() - t0
    # (a target not reachable is a hard MILP, the plant at its limit everywhere: capping
    # its time at 20 s was tried and found no plan for the demo at 20 million/week)
    res = read_back(built, solve(built.model, dataclasses.replace(settings, spent=spent)))
    if not res.info.has_plan:
        return ExpansionResult(target, week, res, {}, math.nan, math.nan, 0.0, math.nan,
                               time.perf_counter() - t0, solves, ramp, reachable)
    units = res.built.blocks["buy"].values(res.solution.x)
    bought = {opt.name: int(round(u)) for opt, u in zip(data.options, units)}
    c = res.costs
    horizon = c["period"] == "horizon"
    exp_cost = float(c.loc[horizon & c["term"].str.startswith("expansion"), "cost"].sum())
    total = float(c.loc[horizon & (c["term"] != "shortfall"), "cost"].sum())
    w = res.weekly
    return ExpansionResult(target=target, from_week=week, plan=res, bought=bought,
                           expansion_cost=exp_cost, total_cost=total,
                           delivered=float(w["released"].sum()),
                           shortfall=float(w["shortfall"].sum()),
                           seconds=time.perf_counter() - t0, solves=solves,
                           ramp_weeks=ramp, reachable=reachable)


def ramp_weeks(data, from_week: int, settings: SolveSettings) -> list[int] | None:
    """Weeks from ``from_week`` before the target can be held [week numbers, 1 = first].

    The LP relaxation of the expansion plan (every option, cage and tray relaxed: an
    upper bound on what any plan delivers) is solved once; the target is settled from the
    first week that starts :data:`RAMP_SETTLED_WEEKS` weeks in a row it fills to within
    the fill tolerance, and the weeks before it are the ramp (an empty list when the LP
    fills every week). None when it never settles: a target beyond what every option
    allows, whose shortfall keeps the target's price in every week, so every option that
    narrows it is bought. (An LP that ends without an optimum gives an empty list.)
    """
    lp = build_model(data, relax=True)
    sol = solve(lp.model, settings.for_lp())
    if sol.info.status != "optimal":
        return []
    ci = data.customers.index(TARGET_CUSTOMER)
    blk = lp.blocks["shortfall"]
    short = dict(zip(blk.labels, blk.values(sol.x)))
    weeks = range(from_week, data.report_weeks + 1)
    filled = [short.get((TARGET_CUSTOMER, w), 0.0) <= FILL_TOLERANCE * data.ordered[ci, w - 1]
              for w in weeks]
    run = min(RAMP_SETTLED_WEEKS, len(filled))  # a short window: its end settles it
    if run == 0:
        return []
    for i in range(len(filled) - run + 1):
        if all(filled[i:i + run]):
            return list(weeks[:i])
    return None


def _task(params: dict) -> dict:
    """One sweep point, self-contained for a worker process: parameters in, plain dict out."""
    scn = params["scenario"]
    settings = SolveSettings(**params["settings"])
    res = expand(scn, params["target"], params["from_week"], settings, start=params["start"])
    s = res.summary()
    row = {"target": params["target"], "status": s["status"],
           "time_limited": s["time_limited"], "total_cost": s["total_cost"],
           "expansion_cost": s["expansion_cost"], "cost_per_million": s["cost_per_million"],
           "delivered_million": s["delivered_million"],
           "shortfall_million": s["shortfall_million"], "meets_target": s["meets_target"],
           "full_from_week": s["full_from_week"],
           "seconds": s["seconds"]}
    row.update({f"bought: {k}": v for k, v in res.bought.items()})
    return row


def sweep(scn: Scenario, volumes: list[float], from_week: int | None = None,
          settings: SolveSettings | None = None, workers: int | None = None,
          scheduler: str | None = None,
          progress: Callable[[int, int], None] | None = None) -> pd.DataFrame:
    """Expansion for each target volume: options bought and cost per million.

    Parameters
    ----------
    workers : int, optional
        Local worker processes (default: the CPUs); 1 runs in this process.
    scheduler : str, optional
        Address of a Dask scheduler (``tcp://host:8786``), or a ``distributed.Client``;
        needs the ``cluster`` extra.
    progress : callable(done, total), optional
        Called as solves finish.
    """
    from planner.optimise import settings_for
    settings = settings or settings_for(scn)
    task_settings = dataclasses.replace(settings, log_path=None, threads=1)
    # the start state is the same for every target: solved once, here
    start = start_batches(scn, task_settings)
    params = [{"scenario": scn, "target": float(v), "from_week": from_week, "start": start,
               "settings": dataclasses.asdict(task_settings)} for v in volumes]
    rows: list[dict] = []
    total = len(params)

    def done(k):
        if progress:
            progress(k, total)

    if scheduler is not None:
        rows = _dask_map(params, scheduler, done)
    elif (workers or os.cpu_count() or 1) <= 1 or total == 1:
        for i, p in enumerate(params, 1):
            rows.append(_task(p))
            done(i)
    else:
        with ProcessPoolExecutor(max_workers=min(workers or os.cpu_count() or 1, total)) as ex:
            futures = [ex.submit(_task, p) for p in params]
            for i, _ in enumerate(as_completed(futures), 1):
                done(i)
            rows = [f.result() for f in futures]
    df = pd.DataFrame(rows).sort_values("target").reset_index(drop=True)
    bought_cols = [c for c in df.columns if c.startswith("bought: ")]
    df[bought_cols] = df[bought_cols].fillna(0).astype(int)
    return df


def _dask_map(params, scheduler, done) -> list[dict]:
    try:
        from distributed import Client, as_completed as dask_completed
    except ImportError:
        raise InputError("a Dask scheduler needs the cluster extra: pip install "
                         "'broodline[cluster]'", place="--scheduler") from None
    own = not hasattr(scheduler, "submit")
    client = Client(scheduler) if own else scheduler
    try:
        futures = client.map(_task, params, pure=False)
        for i, _ in enumerate(dask_completed(futures), 1):
            done(i)
        return client.gather(futures)
    finally:
        if own:
            client.close()


def progress_bar(stream=None) -> Callable[[int, int], None]:
    """A one-line progress bar of solves done, on stderr."""
    stream = stream or sys.stderr

    def show(done: int, total: int) -> None:
        width = 30
        filled = int(width * done / max(total, 1))
        stream.write(f"\rsolves done {done:>3}/{total} [{'#' * filled}{'.' * (width - filled)}]")
        if done == total:
            stream.write("\n")
        stream.flush()
    return show
