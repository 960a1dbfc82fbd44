"""Replaying a solved plan with random biology: how likely each order is to be filled.

The plan's decisions are kept (cages loaded, trays seeded, pupae harvested), and the
biology is drawn at random, vectorised over replicates (one numpy ``Generator``; the only
Python loop runs over days, in order, because each day's eggs come from pupae resolved
on earlier days):

- **Cages.** The eggs a cage batch lays are the plan's expectation (life table from the
  loading age, ``l_a / l_theta_c * m_a`` per pupa) times the pupae actually loaded times
  a fecundity factor: each cage's factor is gamma with mean 1 and coefficient of
  variation ``c_f``, so the batch of ``n`` cages has the gamma factor of shape
  ``n / c_f**2`` and scale ``c_f**2 / n`` (the mean of ``n`` independent factors).
- **Trays.** On seeding day ``t`` the plan's trays are seeded as far as the eggs laid on
  day ``t - L`` allow (trays that cannot be filled are not seeded); each seeded tray is
  then lost whole with probability ``p_loss`` (binomial over trays).
- **Larvae.** A seeding batch's hatch ``p_h`` and larval survival ``p_l`` are beta
  with the life table's means ``h = l_hatch`` and ``s = l_coll / l_hatch`` and the
  coefficients of variation ``c_h`` and ``c_l`` (``alpha + beta = mu (1 - mu) / var - 1``);
  the pupae alive at the first age pupae are taken, ``a_0``, are binomial:
  ``S ~ Binomial(N_eggs, p_h p_l l_a0 / l_coll)``. Later pupal ages keep the life
  table's ratios, as the plan does.
- **The facility's rule** when a cohort has fewer pupae than the plan assumed: the
  colony is served first (the cages it feeds get their planned pupae as far as the
  cohort allows), then release. A cohort's pupae beyond its plan are spare: they are
  harvested only as far as the week they would ship in is short of its orders (and the
  colony never gets more than planned).
- **Orders.** A week's released product (``yield`` times pupae harvested on its shipping
  days) is shared among that week's customers in proportion to their orders (pro rata):
  every customer of the week is filled exactly when the week's product covers the week's
  orders.

With every variation zero (:data:`NO_VARIATION`) and ``binomial=False`` the replay
reproduces the plan's own flows (the eggs and pupae rows of the plan, read from its matrices).

References
----------
Johnson, N. L., Kemp, A. W. & Kotz, S. (2005). *Univariate Discrete Distributions*, 3rd
ed., Wiley: the beta-binomial mixture (section 6.7.2), its mean ``n mu`` and variance
``n mu (1 - mu) (1 + (n - 1) rho)`` with ``rho = 1 / (alpha + beta + 1)``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
import scipy.sparse as sp

from planner.errors import InputError
from planner.optimise.build import PUPAE_UNIT, _constant
from planner.optimise.results import PlanResult
from planner.scenario.schema import Variation

__all__ = ["NO_VARIATION", "RiskResult", "replay", "beta_parameters", "batch_survivors",
           "has_spreads"]

#: A week counts as filled when its product is within this share of its orders [-].
FILL_TOLERANCE = 1e-6


#: No variation at all (with ``binomial=False`` the replay is the plan).
NO_VARIATION = Variation(hatch_cv=0.0, larval_cv=0.0, fecundity_cv=0.0, tray_loss=0.0)


def has_spreads(colony) -> bool:
    """Whether the colony model (:class:`planner.scenario.schema.ColonyModel`) gives its
    own ``[variation]`` section with at least one spread above zero (the defaults of a
    model without the section are not measurements, so nothing is claimed from them)."""
    var = colony.variation
    return "variation" in colony.model_fields_set and any(
        float(v) > 0 for v in var.model_dump().values())


def beta_parameters(mean: float, cv: float, what: str = "survival") -> tuple[float, float]:
    """``(alpha, beta)`` of the beta distribution with this mean [-] and coefficient of
    variation [-]; (inf, inf) for cv = 0."""
    if cv == 0:
        return np.inf, np.inf
    var = (cv * mean) ** 2
    top = mean * (1 - mean)
    if not 0 < mean < 1 or var >= top:
        limit = np.sqrt((1 - mean) / mean) if 0 < mean < 1 else 0.0
        raise InputError(f"a coefficient of variation of {cv:g} around a mean {what} of "
                         f"{mean:.3f} is impossible for a share; use less than {limit:.3f}",
                         place=f"colony.variation ({what})")
    s = top / var - 1.0
    return mean * s, (1 - mean) * s


def _beta(rng, mean, cv, size, what):
    if cv == 0:
        return np.full(size, mean)
    a, b = beta_parameters(mean, cv, what)
    return rng.beta(a, b, size)


@dataclass
class RiskResult:
    """The replay's outcome; volumes in million, over ``replicates`` columns."""

    plan: PlanResult
    variation: Variation
    binomial: bool                     # individual survival drawn (else its expectation)
    replicates: int
    seed: int | None
    weeks: np.ndarray                  # plan week numbers reported (1-based)
    ordered: np.ndarray                # (weeks,) the week's orders [million]
    released: np.ndarray               # (weeks, R) product released [million]
    planned_release: np.ndarray        # (weeks,) the plan's product [million]
    customers: list[str]
    customer_ordered: np.ndarray       # (customers, weeks) [million]
    trays_seeded: np.ndarray           # (days, R) trays seeded and not lost
    eggs: np.ndarray                   # (days, R) eggs for each seeding day [thousand]
    colony_end: np.ndarray             # (R,) eggs laid on the horizon's last egg day [million]
    planned_colony_end: float          # the plan's [million]

    def filled(self) -> np.ndarray:
        """(weeks, R): whether each replay filled each week's orders."""
        return self.released >= self.ordered[:, None] * (1 - FILL_TOLERANCE) - 1e-12

    def fill_probability(self) -> np.ndarray:
        """Per reported week: chance that its orders are filled [-] (1 if none)."""
        return self.filled().mean(axis=1)

    def weekly_table(self) -> pd.DataFrame:
        """Per week and customer: order, fill probability, expected shortfall, P5 and P50
        of the product delivered; and the week's totals as customer 'all'."""
        share = np.where(self.ordered[:, None] > 0,
                         np.minimum(1.0, self.released / np.where(self.ordered > 0,
                                                                  self.ordered, 1.0)[:, None]),
                         1.0)
        fill = self.fill_probability()
        rows = []
        for i, w in enumerate(self.weeks):
            rows.append({"week": int(w), "customer": "all", "ordered": self.ordered[i],
                         "planned": self.planned_release[i], "fill_probability": fill[i],
                         "expected_shortfall": float(np.mean(np.maximum(
                             self.ordered[i] - self.released[i], 0.0))),
                         "p5": float(np.percentile(self.released[i], 5)),
                         "p50": float(np.percentile(self.released[i], 50)),
                         "p95": float(np.percentile(self.released[i], 95)),
                         "mean": float(self.released[i].mean())})
            for c, name in enumerate(self.customers):
                o = self.customer_ordered[c, i]
                if o <= 0:
                    continue
                got = o * share[i]
                rows.append({"week": int(w), "customer": name, "ordered": o,
                             "planned": np.nan, "fill_probability": fill[i],
                             "expected_shortfall": float(np.mean(o - got)),
                             "p5": float(np.percentile(got, 5)),
                             "p50": float(np.percentile(got, 50)),
                             "p95": float(np.percentile(got, 95)), "mean": float(got.mean())})
        return pd.DataFrame(rows)

    def _judged(self, from_week: int) -> np.ndarray:
        """(weeks,) bool: the weeks with orders from plan week ``from_week`` [week
        number, 1-based] on."""
        return (self.ordered > 0) & (self.weeks >= from_week)

    def worst_fill(self, from_week: int = 1) -> float:
        """The smallest fill probability over the weeks with orders from ``from_week``
        [week number, 1-based] on [-] (1 if no such week)."""
        judged = self._judged(from_week)
        return float(self.fill_probability()[judged].min()) if judged.any() else 1.0

    def worst_week(self, from_week: int = 1) -> int | None:
        """The week with orders from ``from_week`` [week number, 1-based] on that is least
        likely to be filled [week number] (the first of equals; None if no such week)."""
        judged = self._judged(from_week)
        if not judged.any():
            return None
        return int(self.weeks[judged][np.argmin(self.fill_probability()[judged])])

    def all_filled(self, from_week: int = 1) -> float:
        """Chance that one replay fills every week with orders from ``from_week`` [week
        number, 1-based] on [-] (1 if no such week)."""
        judged = self._judged(from_week)
        if not judged.any():
            return 1.0
        return float(np.mean(np.all(self.filled()[judged], axis=0)))

    def fill_summary(self, from_week: int = 1) -> dict:
        """The headline of the replay: chance that every week with orders from
        ``from_week`` [week number, 1-based] is filled [-], the worst week [week number]
        and its fill probability [-], and the replicates and seed."""
        return {"all_weeks": self.all_filled(from_week), "worst_week": self.worst_week(from_week),
                "worst_week_probability": self.worst_fill(from_week),
                "replicates": self.replicates, "seed": self.seed, "from_week": int(from_week)}

    def summary(self) -> dict:
        table = self.weekly_table()
        return {
            "replicates": self.replicates, "seed": self.seed,
            "variation": self.variation.model_dump() | {"binomial": self.binomial},
            "worst_week_fill_probability": self.worst_fill(),
            "worst_week": self.worst_week(),
            "all_weeks_filled_probability": self.all_filled(),
            "expected_shortfall_million": float(table.loc[table["customer"] == "all",
                                                          "expected_shortfall"].sum()),
            "colony_end_p5": float(np.percentile(self.colony_end, 5)),
            "colony_end_p50": float(np.percentile(self.colony_end, 50)),
            "colony_end_planned": self.planned_colony_end,
            "colony_end_unit": "million eggs/day",
            "weeks": table.to_dict(orient="records"),
        }


def _plan_arrays(plan: PlanResult):
    """What the replay needs from the plan's own matrices (eggs and pupae rows)."""
    built, x = plan.built, plan.solution.x
    data = built.data
    if data.mode != "horizon":
        raise InputError("the risk replay needs a dated plan (horizon), not a standard week",
                         place="plan")
    m = built.model
    blk = m.blocks
    trays, load, release = blk["trays"], blk["load"], blk["release"]
    eggs_fam, pup_fam, ship_fam = (m.families[k] for k in ("eggs", "pupae", "shipping"))
    load_cols = load.offset + np.arange(load.size)
    rel_cols = release.offset + np.arange(release.size)
    # eggs row t: rho/U trays[t] - sum_j a_tj load_j <= e0_t  ->  eggs from loads: a_tj
    a_load = (-eggs_fam.A[:, load_cols]).tocsc()
    # pupae row i (cohort): sum release/l + sum load/l_tc - rho/U trays <= supply
    p_rel = pup_fam.A[:, rel_cols].tocsr()
    p_load = pup_fam.A[:, load_cols].tocsr()
    p_tray = pup_fam.A[:, trays.offset + np.arange(trays.size)].tocoo()
    ship_rel = (-ship_fam.A[:, rel_cols]).tocsr()  # million per thousand pupae
    return dict(data=data, x=x, trays=trays.values(x), load=load.values(x),
                release=release.values(x), load_labels=load.labels,
                a_load=a_load, e0=eggs_fam.b, p_rel=p_rel, p_load=p_load, p_tray=p_tray,
                supply=pup_fam.b, ship_rel=ship_rel,
                ship_weeks=[lab[0] for lab in ship_fam.labels], cages=blk["cages"])


#: Memory of a replay per plan day and replicate [bytes]: measured 10.1-11.1 kB per
#: replicate on the 224-day demo plan with tracemalloc (45-50 bytes a day), rounded up.
REPLAY_BYTES_PER_DAY = 64
#: Largest memory a replay may take [bytes]; a larger count is refused before any work.
MAX_REPLAY_BYTES = 2_000_000_000


def check_replay_size(n_days: int, replicates: int) -> None:
    """Refuse a replay whose memory would pass :data:`MAX_REPLAY_BYTES` (called before
    the plan is solved by the command line, and again by :func:`replay`).

    Parameters
    ----------
    n_days : int
        Days of the plan, look-ahead included [day].
    replicates : int
        Replays asked for [-].
    """
    R = int(replicates)
    need = REPLAY_BYTES_PER_DAY * n_days * R
    if need > MAX_REPLAY_BYTES:
        most = MAX_REPLAY_BYTES // (REPLAY_BYTES_PER_DAY * n_days)
        raise InputError(
            f"{R:,} replays of a {n_days}-day plan need about {need / 1e9:.1f} GB, over "
            f"the {MAX_REPLAY_BYTES / 1e9:g} GB limit of a replay; use at most {most:,} "
            f"(2,000 already give each fill probability to about +-1 %)",
            place="--replicates", value=R)


def replay(plan: PlanResult, variation: Variation | None = None, replicates: int = 1000,
           seed: int | None = 0, ordered: np.ndarray | None = None,
           binomial: bool = True) -> RiskResult:
    """Replay the plan ``replicates`` times with random biology.

    Parameters
    ----------
    plan : PlanResult
        A solved dated plan.
    variation : planner.scenario.schema.Variation, optional
        The spreads (default: the colony model's ``variation``).
    replicates : int
        Number of replays [-].
    seed : int, optional
        Seed of the random generator (same seed, same numbers).
    ordered : array (customers, weeks), optional
        The orders to judge the fill against [million/week] (default: the plan's own
        orders; a plan made with a safety margin is judged against the real book).
    binomial : bool
        Draw individual survival binomially (False: its expectation).
    """
    if replicates < 1:
        raise InputError(f"replicates = {replicates}: use at least 1", place="--replicates")
    var = variation or plan.scenario.colony.variation
    rng = np.random.default_rng(seed)
    R = int(replicates)
    A = _plan_arrays(plan)
    data = A["data"]
    check_replay_size(data.n_days, R)
    U = PUPAE_UNIT
    n = data.n_days
    lx = data.lx
    col = plan.scenario.colony
    hatch, coll = col.stages.hatch_age, col.stages.larval_collection_age
    a0 = min(data.take_ages)
    h_mean = lx[hatch] / lx[0]
    s_mean = lx[coll] / lx[hatch]
    rest = lx[a0] / lx[coll]
    beta_parameters(h_mean, var.hatch_cv, "egg hatch")
    beta_parameters(s_mean, var.larval_cv, "larval survival")

    cohorts = data.cohorts
    C = len(cohorts)
    # planned use of each cohort in egg equivalents [thousand]: colony, release
    u_col = np.asarray(A["p_load"] @ A["load"]).ravel()
    u_rel = np.asarray(A["p_rel"] @ A["release"]).ravel()
    # the cohort's seeding day (tray column) if in the plan
    tray_of = np.full(C, -1)
    tray_of[A["p_tray"].row] = A["p_tray"].col
    rho_u = data.rho / U

    # eggs for each seeding day, per replicate [thousand]: start cages first, each start
    # batch with its own fecundity factor
    eggs = np.zeros((n, R))
    for s0, count, delta in data.start.cages:
        contrib = _constant(data, [s0], [count], np.arange(data.span(delta)),
                            data.egg_coef(delta), data.seed_lag) / U
        eggs += contrib[:, None] * _gamma_factor(rng, var.fecundity_cv, count, R)[None, :]
    # the loads of each cohort: their columns, cages and egg rows
    load_labels = A["load_labels"]
    cohort_index = {int(d): i for i, d in enumerate(cohorts)}
    load_by_cohort: dict[int, list[int]] = {}
    for j, (d, _) in enumerate(load_labels):
        load_by_cohort.setdefault(cohort_index[int(d)], []).append(j)
    cages_blk = A["cages"]
    cage_vals = dict(zip(cages_blk.labels, cages_blk.values(A["x"])))
    a_load = A["a_load"]

    r_col = np.ones((C, R))
    r_rel = np.ones((C, R))
    r_spare = np.zeros((C, R))
    trays_ok = np.zeros((n, R))

    def resolve(i: int, ee: np.ndarray) -> None:
        """Colony first, then release, for cohort i with ``ee`` egg equivalents; the rest
        is spare (harvested only to cover a short week)."""
        ee = ee * (1 + 1e-9)  # the plan's own rows hold to the solver's tolerance
        col_eq = np.minimum(u_col[i], ee)
        if u_col[i] > 0:
            r_col[i] = col_eq / u_col[i]
        if u_rel[i] > 0:
            left = np.maximum(ee - col_eq, 0.0)
            r_rel[i] = np.minimum(u_rel[i], left) / u_rel[i]
            r_spare[i] = np.maximum(left - u_rel[i], 0.0) / u_rel[i]
        for j in load_by_cohort.get(i, []):
            if A["load"][j] <= 0:
                continue
            d, delta = load_labels[j]
            n_cages = int(round(cage_vals.get((int(d) + data.theta_c, delta), 0)))
            lo, hi = a_load.indptr[j], a_load.indptr[j + 1]
            if hi == lo:
                continue
            rows, vals = a_load.indices[lo:hi], a_load.data[lo:hi]
            factor = r_col[i] * _gamma_factor(rng, var.fecundity_cv, max(n_cages, 1), R)
            eggs[rows] += (vals * A["load"][j])[:, None] * factor[None, :]

    def survivors(n_eggs_thousand: np.ndarray) -> np.ndarray:
        """Egg equivalents [thousand] of a batch's pupae at age a0."""
        alive = batch_survivors(rng, n_eggs_thousand * U, h_mean, var.hatch_cv, s_mean,
                                var.larval_cv, rest, binomial)
        return alive / lx[a0] / U

    def seed_trays(n_trays) -> np.ndarray:
        """Trays not lost, of ``n_trays`` seeded."""
        if var.tray_loss > 0:
            return rng.binomial(np.asarray(n_trays).astype(np.int64), 1 - var.tray_loss,
                                R).astype(float)
        return np.broadcast_to(np.asarray(n_trays, float), (R,)).copy()

    # cohorts supplied by trays seeded before day 0 (start trays)
    for i in np.flatnonzero((tray_of < 0) & (A["supply"] > 0)):
        supply = seed_trays(int(round(A["supply"][i] / rho_u))) * rho_u
        resolve(i, survivors(supply))
    cohort_of_tray = {int(t): i for i, t in enumerate(tray_of) if t >= 0}
    plan_trays = A["trays"]
    for t in range(n):
        want = plan_trays[t]
        if want <= 0:
            continue
        can = np.floor(eggs[t] / rho_u + 1e-7)
        seeded = seed_trays(np.minimum(want, can))
        trays_ok[t] = seeded
        i = cohort_of_tray.get(t)
        if i is None:
            continue
        supply = seeded * rho_u
        resolve(i, survivors(supply))

    # weekly product: shipping rows, each release scaled by its cohort's ratio
    rel_labels = plan.built.blocks["release"].labels
    rel_cohort = np.array([cohort_index[int(d)] for d, _ in rel_labels], np.int64)
    to_cohort = sp.csr_matrix((A["release"], (np.arange(len(rel_labels)), rel_cohort)),
                              shape=(len(rel_labels), C))
    per_cohort = (A["ship_rel"] @ to_cohort).toarray()     # (shipping weeks, cohorts)
    weekly = per_cohort @ r_rel
    spare = per_cohort @ r_spare
    planned = np.asarray(A["ship_rel"] @ A["release"]).ravel()
    # spare pupae of the week's cohorts are harvested as far as the week is short
    book = np.asarray(ordered if ordered is not None else data.ordered, float)
    week_orders = book[:, np.asarray(A["ship_weeks"], np.int64) - 1].sum(axis=0)
    weekly = weekly + np.minimum(spare, np.maximum(week_orders[:, None] - weekly, 0.0))
    report = data.report_weeks
    week_row = {int(w): k for k, w in enumerate(A["ship_weeks"])}
    weeks = np.arange(1, report + 1)
    released = np.zeros((report, R))
    plan_rel = np.zeros(report)
    for w in weeks:
        k = week_row.get(int(w))
        if k is not None:
            released[w - 1] = weekly[k]
            plan_rel[w - 1] = planned[k]
    cust_ordered = book[:, :report]
    last_egg_day = min(n - 1, data.report_days - 1 + data.seed_lag)
    planned_end = float(_plan_eggs(A, data)[last_egg_day]) / 1e3
    return RiskResult(plan=plan, variation=var, binomial=binomial, replicates=R, seed=seed,
                      weeks=weeks,
                      ordered=cust_ordered.sum(axis=0), released=released,
                      planned_release=plan_rel, customers=list(data.customers),
                      customer_ordered=cust_ordered, trays_seeded=trays_ok, eggs=eggs,
                      colony_end=eggs[last_egg_day] / 1e3, planned_colony_end=planned_end)


def batch_survivors(rng: np.random.Generator, n_eggs, hatch: float, hatch_cv: float,
                    larval: float, larval_cv: float, rest: float = 1.0,
                    binomial: bool = True) -> np.ndarray:
    """Survivors of seeding batches, one per entry of ``n_eggs`` [eggs]: hatch and larval
    survival beta-distributed per batch (means ``hatch`` and ``larval`` [-], coefficients
    of variation ``hatch_cv`` and ``larval_cv`` [-]), then a fixed share ``rest`` [-]
    (later stages at the life table's means), individuals binomial (or their expectation
    with ``binomial=False``) [insects]."""
    n_eggs = np.asarray(n_eggs, float)
    size = n_eggs.shape
    p = (_beta(rng, hatch, hatch_cv, size, "egg hatch")
         * _beta(rng, larval, larval_cv, size, "larval survival") * rest)
    if binomial:
        return rng.binomial(np.round(n_eggs).astype(np.int64), p).astype(float)
    return n_eggs * p


def _plan_eggs(A, data) -> np.ndarray:
    """The plan's eggs for each seeding day [thousand]."""
    return np.asarray(A["a_load"] @ A["load"]).ravel() + A["e0"]


def _gamma_factor(rng, cv: float, n_cages: int, size: int) -> np.ndarray:
    """Mean of ``n_cages`` independent gamma factors (mean 1, coefficient of variation
    ``cv``): gamma of shape ``n / cv**2`` and scale ``cv**2 / n``."""
    if cv == 0:
        return np.ones(size)
    shape = n_cages / cv ** 2
    return rng.gamma(shape, 1.0 / shape, size)
