"""Life tables from cohort records, with resampling intervals for R0 and r.

Records
-------
A CSV with one row per cage and observation day:

========== ====================================================================
column      meaning
========== ====================================================================
cage        cage (or vial) identifier; the unit of resampling
day         age of the insects at the observation [day from egg laying]
females     living females at the observation [count]
eggs        eggs laid since the previous observation of the cage [count]
males       living males at the observation [count] (optional)
removed     females removed (sampled) or escaped since the previous observation
            [count] (optional): censored, not dead
removed_males  the same for males [count] (optional)
========== ====================================================================

Survival is the Kaplan–Meier product-limit estimate: a female not seen again is dead
at the observation where she is missed; removed or escaped females are censored at
that observation (at risk there, as in the usual convention); cages that start later
enter the risk set at their first observation (left truncation). ``lx`` is relative to
the first observed age (times ``entry_survival``, the probability that an egg reaches
that age, if known). Fecundity is eggs per female-day, pooled over cages: the exposure
of an interval is its length times the mean of the females alive at its start and at
its end (deaths spread evenly; removed females count as alive until removed).

Intervals for R0 and r resample whole cages (with single-female cages, individual
females): the bootstrap (Efron & Tibshirani 1993) draws cages with replacement, all
replicates at once; the jackknife (Meyer et al. 1986) leaves one cage out at a time.

References
----------
.. [1] Kaplan, E. L. & Meier, P. (1958). Nonparametric estimation from incomplete
   observations. J. Am. Stat. Assoc. 53, 457–481.
.. [2] Meyer, J. S., Ingersoll, C. G., McDonald, L. L. & Boyce, M. S. (1986).
   Estimating uncertainty in population growth rates: jackknife vs. bootstrap
   techniques. Ecology 67, 1156–1166.
.. [3] Efron, B. & Tibshirani, R. J. (1993). An Introduction to the Bootstrap.
   Chapman & Hall.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:  # pandas is loaded where a table is made: `check` does without it
    import pandas as pd

from planner.csvtable import read_csv_table
from planner.demography.lifetable import LifeTable
from planner.errors import DemographyError, InputError

__all__ = ["CohortRecords", "CohortAnalysis", "read_cohort_records", "analyse_cohort",
           "kaplan_meier", "euler_lotka_many"]


@dataclass(frozen=True, eq=False)
class CohortRecords:
    """Cohort records as per-cage, per-day arrays (cages x days).

    ``days`` are the ages [day] from the first to the last observation. For each cage and
    day: ``entered`` females entering observation, ``deaths``, ``censored`` (removed or
    escaped), ``eggs`` and ``exposure`` [female-days]; the same for males where given.
    """

    cages: tuple[str, ...]
    days: np.ndarray
    entered: np.ndarray
    deaths: np.ndarray
    censored: np.ndarray
    eggs: np.ndarray
    exposure: np.ndarray
    male_entered: np.ndarray | None = None
    male_deaths: np.ndarray | None = None
    male_censored: np.ndarray | None = None
    source: str | None = None

    @property
    def n_cages(self) -> int:
        return len(self.cages)

    @property
    def n_females(self) -> int:
        return int(self.entered.sum())


def kaplan_meier(entered, deaths, censored) -> np.ndarray:
    """Product-limit survival on a daily grid, for one or many weightings at once.

    Parameters
    ----------
    entered, deaths, censored : array_like, shape (..., days)
        Insects entering observation on each day, dying on it and censored on it.

    Returns
    -------
    ndarray, shape (..., days)
        S(t) [-]: probability of surviving through day t, given alive at the first day.
        At risk on day t: entered before t minus deaths and censorings before t.
    """
    entered = np.asarray(entered, float)
    deaths = np.asarray(deaths, float)
    censored = np.asarray(censored, float)
    cum_in = np.cumsum(entered, axis=-1)
    cum_out = np.cumsum(deaths + censored, axis=-1)
    zeros = np.zeros(entered.shape[:-1] + (1,))
    at_risk = np.concatenate([zeros, cum_in[..., :-1] - cum_out[..., :-1]], axis=-1)
    with np.errstate(divide="ignore", invalid="ignore"):
        q = np.where(at_risk > 0, deaths / np.where(at_risk > 0, at_risk, 1.0), 0.0)
    return np.cumprod(1.0 - q, axis=-1)


def euler_lotka_many(age, w, tol: float = 1e-13, maxiter: int = 100) -> np.ndarray:
    """Euler–Lotka roots ``r`` [per unit] for many rows of ``w = lx mx`` at once.

    Newton's method on ``g(r) = ln sum_x w_x exp(-r x)``, which is convex and
    decreasing, started from the lower bracket ``ln R0 / x_max`` (where g >= 0): the
    iterates increase monotonically to the root. Rows without births give NaN.
    Ages must be positive where w > 0.
    """
    age = np.asarray(age, float)
    w = np.atleast_2d(np.asarray(w, float))
    r0 = w.sum(axis=1)
    pos = w > 0
    has = pos.any(axis=1)
    xmax = np.where(pos, age[None, :], -np.inf).max(axis=1)
    xmin = np.where(pos, age[None, :], np.inf).min(axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        lnr0 = np.log(np.where(has, r0, 1.0))
        r = np.minimum(lnr0 / xmax, lnr0 / xmin)
        logw = np.log(np.where(pos, w, 1.0))
    r = np.where(has, r, 0.0)
    for _ in range(maxiter):
        z = np.where(pos, logw - r[:, None] * age[None, :], -np.inf)
        zmax = z.max(axis=1, keepdims=True)
        e = np.exp(z - zmax)
        s = e.sum(axis=1)
        g = np.log(s) + zmax[:, 0]
        dg = -(e * age[None, :]).sum(axis=1) / s
        step = -g / dg
        r = r + step
        if np.all(np.abs(step[has]) < tol * np.maximum(1.0, np.abs(r[has]))):
            break
    return np.where(has, r, np.nan)


def _count(value: float, source: str, place: str) -> int:
    if value < 0:
        raise InputError("counts cannot be negative", source=source, place=place, value=value)
    return int(value)


def read_cohort_records(path: str | Path) -> CohortRecords:
    """Read cohort records (see the module docstring for the columns)."""
    table = read_csv_table(path, required=["cage", "day", "females", "eggs"],
                           optional=["males", "removed", "removed_males"])
    src = table.source
    h = table.header
    days = table.column("day", integer=True)
    fem = table.column("females", integer=True)
    eggs = table.column("eggs")
    rem = table.column("removed", integer=True) if "removed" in h else [0.0] * len(days)
    has_males = "males" in h
    mal = table.column("males", integer=True) if has_males else None
    rem_m = table.column("removed_males", integer=True) if "removed_males" in h else \
        [0.0] * len(days)
    if "removed_males" in h and not has_males:
        raise InputError("the column 'removed_males' needs a 'males' column too", source=src)
    j = h.index("cage")
    by_cage: dict[str, list[int]] = {}
    for k, cells in enumerate(table.rows):
        if cells[j] == "":
            raise InputError("the cage identifier is empty", source=src,
                             place=f"row {table.lines[k]}, column 'cage'")
        by_cage.setdefault(cells[j], []).append(k)
    for k, line in enumerate(table.lines):
        for name, col in (("females", fem), ("removed", rem), ("eggs", eggs)):
            _count(col[k], src, f"row {line}, column '{name}'")
        if has_males:
            _count(mal[k], src, f"row {line}, column 'males'")
            _count(rem_m[k], src, f"row {line}, column 'removed_males'")
        if days[k] < 0:
            raise InputError("ages are counted from egg laying and cannot be negative",
                             source=src, place=f"row {line}, column 'day'", value=days[k])
    d0, d1 = int(min(days)), int(max(days))
    grid = np.arange(d0, d1 + 1)
    nc, nd = len(by_cage), grid.size
    arr = {name: np.zeros((nc, nd)) for name in
           ("entered", "deaths", "censored", "eggs", "exposure", "m_in", "m_dead", "m_cens")}

    def series(c: int, rows: list[int], alive, removed, kind: str, prefix: str = ""):
        ent, dead, cens = (("entered", "deaths", "censored") if not prefix else
                           ("m_in", "m_dead", "m_cens"))
        first = rows[0]
        t0 = int(days[first]) - d0
        arr[ent][c, t0] += alive[first] + removed[first]
        arr[cens][c, t0] += removed[first]
        for prev, cur in zip(rows, rows[1:]):
            died = alive[prev] - alive[cur] - removed[cur]
            if died < 0:
                raise InputError(
                    f"more {kind} ({alive[cur]:g} alive + {removed[cur]:g} removed) than were "
                    f"alive at the previous observation of cage '{table.rows[cur][j]}' "
                    f"({alive[prev]:g}): insects cannot be added to a cage during a cohort",
                    source=src, place=f"row {table.lines[cur]}, column '{kind}'",
                    value=alive[cur])
            t = int(days[cur]) - d0
            arr[dead][c, t] += died
            arr[cens][c, t] += removed[cur]

    cages = []
    for c, (cage, rows) in enumerate(by_cage.items()):
        cages.append(cage)
        rows.sort(key=lambda k: days[k])
        for a, b in zip(rows, rows[1:]):
            if days[a] == days[b]:
                raise InputError(f"cage '{cage}' has two observations on the same day",
                                 source=src, place=f"row {table.lines[b]}, column 'day'",
                                 value=days[b])
        series(c, rows, fem, rem, "females")
        if has_males:
            series(c, rows, mal, rem_m, "males", prefix="m")
        first = rows[0]
        t0 = int(days[first]) - d0
        arr["eggs"][c, t0] += eggs[first]
        arr["exposure"][c, t0] += fem[first] + rem[first]
        for prev, cur in zip(rows, rows[1:]):
            a, b = int(days[prev]) - d0, int(days[cur]) - d0
            span = b - a
            per_day = (fem[prev] + fem[cur] + rem[cur]) / 2.0
            arr["eggs"][c, a + 1: b + 1] += eggs[cur] / span
            arr["exposure"][c, a + 1: b + 1] += per_day
    if arr["entered"].sum() <= 0:
        raise InputError("no females at the first observation of any cage", source=src)
    return CohortRecords(
        cages=tuple(cages), days=grid.astype(float), entered=arr["entered"],
        deaths=arr["deaths"], censored=arr["censored"], eggs=arr["eggs"],
        exposure=arr["exposure"],
        male_entered=arr["m_in"] if has_males else None,
        male_deaths=arr["m_dead"] if has_males else None,
        male_censored=arr["m_cens"] if has_males else None, source=src)


def _lx_mx(rec: CohortRecords, weights: np.ndarray, female_fraction: float,
           entry_survival: float):
    """lx and female mx for each row of ``weights`` (replicates x cages)."""
    lx = entry_survival * kaplan_meier(weights @ rec.entered, weights @ rec.deaths,
                                       weights @ rec.censored)
    expo = weights @ rec.exposure
    with np.errstate(divide="ignore", invalid="ignore"):
        mx = np.where(expo > 0, (weights @ rec.eggs) / np.where(expo > 0, expo, 1.0), 0.0)
    return lx, mx * female_fraction


@dataclass(frozen=True, eq=False)
class CohortAnalysis:
    """A life table estimated from cohort records, with intervals for R0 and r."""

    life_table: LifeTable
    records: CohortRecords
    male_lx: np.ndarray | None
    intervals: dict = field(default_factory=dict)

    def summary(self) -> dict:
        out = self.life_table.summary()
        out["cages"] = self.records.n_cages
        out["females"] = self.records.n_females
        out["intervals"] = self.intervals
        return out

    def to_frame(self) -> pd.DataFrame:
        import pandas as pd

        lt = self.life_table
        df = pd.DataFrame({"age": lt.age, "lx": lt.lx, "mx": lt.mx})
        if self.male_lx is not None:
            df["male_lx"] = self.male_lx
        return df


def _stat_pair(age, lx, mx):
    w = lx * mx
    return w.sum(axis=1), euler_lotka_many(age, w)


def analyse_cohort(records: CohortRecords, female_fraction: float = 1.0,
                   entry_survival: float = 1.0, bootstrap: int = 0, seed: int | None = None,
                   confidence: float = 0.95, jackknife: bool = True) -> CohortAnalysis:
    """Life table, R0 and r from cohort records, with resampling intervals.

    Parameters
    ----------
    records : CohortRecords
    female_fraction : float
        Share of the eggs that are female [-]; 1 if the egg counts are already female.
    entry_survival : float
        Probability that an egg reaches the first observed age [-] (1 if the records
        start at egg laying or if lx is wanted relative to the first observation).
    bootstrap : int
        Number of bootstrap resamples of cages (0: none).
    seed : int, optional
        Seed of the bootstrap's random generator (numpy ``default_rng``).
    confidence : float
        Level of the intervals [-].
    jackknife : bool
        Also compute the jackknife (leave one cage out) intervals.
    """
    if not (0 < female_fraction <= 1):
        raise InputError("the female fraction must lie in (0, 1]", place="female fraction",
                         value=female_fraction)
    if not (0 < entry_survival <= 1):
        raise InputError("the survival to the first observed age must lie in (0, 1]",
                         place="entry survival", value=entry_survival)
    if bootstrap < 0:
        raise InputError("the number of bootstrap resamples cannot be negative",
                         place="bootstrap", value=bootstrap)
    n = records.n_cages
    age = records.days
    lx, mx = _lx_mx(records, np.ones((1, n)), female_fraction, entry_survival)
    table = LifeTable(age, lx[0], mx[0], age_unit="day", source=records.source)
    r0_hat = table.net_reproductive_rate()
    if r0_hat <= 0:
        raise DemographyError(f"{records.source or 'cohort'}: no eggs were recorded, so R0 = 0 "
                              "and the intrinsic rate is undefined")
    r_hat = table.intrinsic_rate
    male_lx = None
    if records.male_entered is not None and records.male_entered.sum() > 0:
        male_lx = entry_survival * kaplan_meier(records.male_entered, records.male_deaths,
                                                records.male_censored)
    intervals: dict = {}
    alpha = 1.0 - confidence
    if (bootstrap or jackknife) and n < 2:
        raise InputError("intervals resample whole cages and need at least 2 cages; this file "
                         "has 1 (record single females in cages of their own, or pass "
                         "--bootstrap 0)", source=records.source)
    if jackknife and n >= 2:
        weights = 1.0 - np.eye(n)
        l_j, m_j = _lx_mx(records, weights, female_fraction, entry_survival)
        r0_j, r_j = _stat_pair(age, l_j, m_j)
        from scipy import stats  # imported here: scipy.stats costs 0.3 s at start-up
        tcrit = float(stats.t.ppf(1 - alpha / 2, n - 1))
        jk = {}
        for name, full, loo in (("net_reproductive_rate", r0_hat, r0_j),
                                ("intrinsic_rate", r_hat, r_j)):
            pseudo = n * full - (n - 1) * loo
            mean = float(np.nanmean(pseudo))
            se = float(np.nanstd(pseudo, ddof=1) / math.sqrt(n))
            jk[name] = {"estimate": mean, "standard_error": se,
                        "low": mean - tcrit * se, "high": mean + tcrit * se}
        intervals["jackknife"] = {"level": confidence, "cages": n, **jk}
    if bootstrap:
        rng = np.random.default_rng(seed)
        weights = rng.multinomial(n, np.full(n, 1.0 / n), size=bootstrap).astype(float)
        l_b, m_b = _lx_mx(records, weights, female_fraction, entry_survival)
        r0_b, r_b = _stat_pair(age, l_b, m_b)
        bs = {}
        for name, vals in (("net_reproductive_rate", r0_b), ("intrinsic_rate", r_b)):
            ok = vals[np.isfinite(vals)]
            lo, hi = np.quantile(ok, [alpha / 2, 1 - alpha / 2])
            bs[name] = {"median": float(np.median(ok)), "standard_error": float(ok.std(ddof=1)),
                        "low": float(lo), "high": float(hi), "valid": int(ok.size)}
        intervals["bootstrap"] = {"level": confidence, "resamples": bootstrap, "seed": seed,
                                  "method": "percentile", **bs}
    return CohortAnalysis(life_table=table, records=records, male_lx=male_lx,
                          intervals=intervals)
