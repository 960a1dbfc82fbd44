"""Age-classified life tables: net reproductive rate, intrinsic rate, generation time,
stable age distribution, reproductive values and the Leslie matrix.

Conventions
-----------
- Age ``x`` is counted in whole units (days, unless the table says otherwise) from the
  day the egg is laid (``x = 0``). Pivotal ages (``4.5`` weeks, ...) are accepted by
  the Euler–Lotka solver: every sum runs over the ages given.
- ``lx[x]`` is the probability that an egg survives to age ``x`` [-]; non-increasing,
  in [0, 1]. A table that starts at age 0 with ``l0 != 1`` is normalised (and says so).
- ``mx[x]`` is the number of *female* eggs laid per living female of age ``x`` per unit
  of age [female eggs female^-1 unit^-1]. A table of *all* eggs is turned into female
  eggs with the female fraction ``phi``: female births = ``phi * eggs``.
- Birth flow in discrete time: the eggs laid on day t are age 0 on day t, so the
  Euler–Lotka equation is ``sum_x lambda**(-x) lx mx = 1`` and ``r = ln(lambda)``.

References
----------
.. [1] Lotka, A. J. (1907). Relation between birth rates and death rates. Science 26,
   21–22. (The Euler–Lotka equation.)
.. [2] Birch, L. C. (1948). The intrinsic rate of natural increase of an insect
   population. Journal of Animal Ecology 17, 15–26. (R0, r_m, T = ln R0 / r_m, pivotal
   ages, the stable age distribution of an insect population.)
.. [3] Leslie, P. H. (1945). On the use of matrices in certain population mathematics.
   Biometrika 33, 183–212.
.. [4] Fisher, R. A. (1930). The Genetical Theory of Natural Selection. Oxford.
   (Reproductive value.)
.. [5] Caswell, H. (2001). Matrix Population Models, 2nd ed. Sinauer. Sections 2.2–2.3.
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
from planner.errors import DemographyError, InputError


def _logsumexp(a) -> float:
    """ln(sum(exp(a))) without overflow (the max is taken out first); -inf for an
    empty or all -inf input. Same result as ``scipy.special.logsumexp`` for 1-D input;
    kept here so that loading a life table does not import scipy."""
    a = np.asarray(a, dtype=float)
    if a.size == 0:
        return -math.inf
    m = float(np.max(a))
    if not math.isfinite(m):
        return m
    return m + math.log(float(np.sum(np.exp(a - m))))

__all__ = [
    "LifeTable",
    "read_life_table",
    "validate_life_table",
    "net_reproductive_rate",
    "intrinsic_rate",
    "generation_time",
    "cohort_generation_time",
    "doubling_time",
    "stable_age_distribution",
    "reproductive_values",
    "leslie_matrix",
    "dominant_eigenvalue",
]


def _arrays(age, lx, mx):
    return (np.asarray(age, dtype=float), np.asarray(lx, dtype=float),
            np.asarray(mx, dtype=float))


def net_reproductive_rate(age, lx, mx, upto: float | None = None) -> float:
    """Net reproductive rate ``R0 = sum_{x <= upto} lx mx`` [female eggs per female egg].

    Parameters
    ----------
    age : array_like
        Ages [unit], ascending.
    lx : array_like
        Survival from egg to each age [-].
    mx : array_like
        Female eggs per female per unit of age at each age [unit^-1].
    upto : float, optional
        Last age counted [unit] (a discard age truncates the table); all ages by default.
    """
    age, lx, mx = _arrays(age, lx, mx)
    keep = np.ones(age.shape, bool) if upto is None else age <= upto + 1e-9
    return float(np.sum(lx[keep] * mx[keep]))


def intrinsic_rate(age, lx, mx) -> float:
    """Intrinsic rate of increase ``r`` [unit^-1]: the root of Euler–Lotka.

    Solves ``sum_x exp(-r x) lx mx = 1`` (in the log form
    ``logsumexp(log(lx mx) - r x) = 0``, convex and decreasing in r) with Newton's method
    from the low end of the bracket ``[ln R0 / x_max, ln R0 / x_min]`` over the ages that
    carry births, guarded by the bracket, to a relative step of 1e-14. ``r`` has the sign
    of ``R0 - 1``.

    Raises
    ------
    DemographyError
        If no age has births (R0 = 0), or births at age 0 alone already replace the
        population (no finite root).

    References
    ----------
    Lotka (1907) [1]_; Birch (1948) [2]_, eq. 5.
    """
    age, lx, mx = _arrays(age, lx, mx)
    w = lx * mx
    pos = w > 0
    if not pos.any():
        raise DemographyError("the life table has no births (every lx*mx is 0): the intrinsic "
                              "rate is undefined; check the mx column")
    x, w = age[pos], w[pos]
    at0 = x <= 0
    w0 = float(w[at0].sum())
    x, w = x[~at0], w[~at0]
    if w0 >= 1.0:
        raise DemographyError(f"births at age 0 alone give {w0:.4g} >= 1 female eggs per egg: "
                              "Euler–Lotka has no finite root; age 0 cannot carry fecundity")
    if x.size == 0:
        raise DemographyError("the life table has births only at age 0: the intrinsic rate is "
                              "undefined; check the age column")
    logw = np.log(w)
    target = math.log1p(-w0)  # sum_{x>0} w exp(-r x) = 1 - w0
    r0 = float(_logsumexp(logw)) - target  # ln of (R0 - w0) / (1 - w0)
    lo, hi = sorted((r0 / float(x.max()), r0 / float(x.min())))

    def g(r: float) -> tuple[float, float]:
        """The Euler–Lotka residual and its slope in r (minus the mean birth age)."""
        e = logw - r * x
        s = _logsumexp(e)
        return s - target, -float(np.sum(x * np.exp(e - s)))

    if hi - lo <= 1e-15 * max(1.0, abs(hi)):
        return lo
    # g is convex and decreasing in r, so Newton's method started where g >= 0 (the
    # bracket's low end) climbs to the root from below without overshooting; the
    # bracket still guards every step against rounding.
    r = lo
    for _ in range(200):
        val, slope = g(r)
        if val == 0.0 or slope == 0.0:
            return r
        if val > 0:
            lo = r
        else:
            hi = r
        step = -val / slope
        nxt = r + step
        if not lo <= nxt <= hi:
            nxt = 0.5 * (lo + hi)
        if abs(nxt - r) <= 1e-14 * max(1.0, abs(r)):
            return nxt
        r = nxt
    return r


def cohort_generation_time(age, lx, mx) -> float:
    """Cohort generation time ``Tc = sum x lx mx / R0`` [unit]: mean age of mothers."""
    age, lx, mx = _arrays(age, lx, mx)
    r0 = net_reproductive_rate(age, lx, mx)
    if r0 <= 0:
        raise DemographyError("the life table has no births: the generation time is undefined")
    return float(np.sum(age * lx * mx) / r0)


def generation_time(age, lx, mx, r: float | None = None) -> float:
    """Mean generation time ``T = ln R0 / r`` [unit] (Birch 1948 [2]_).

    At ``R0 = 1`` (r = 0) the ratio is 0/0; its limit, the cohort generation time
    ``sum x lx mx / R0``, is returned instead.
    """
    r0 = net_reproductive_rate(age, lx, mx)
    if r is None:
        r = intrinsic_rate(age, lx, mx)
    if abs(r) < 1e-12:
        return cohort_generation_time(age, lx, mx)
    return math.log(r0) / r


def doubling_time(r: float) -> float:
    """Doubling time ``ln 2 / r`` [unit]; ``inf`` when the population does not grow."""
    return math.log(2.0) / r if r > 0 else math.inf


def stable_age_distribution(age, lx, r: float) -> np.ndarray:
    """Stable age distribution ``c_x = lambda**(-x) lx / sum_y lambda**(-y) ly`` [-].

    Computed in log space (no overflow for long tables); sums to 1 over the ages given.
    """
    age, lx, _ = _arrays(age, lx, lx)
    with np.errstate(divide="ignore"):
        logc = np.log(lx) - r * age
    return np.exp(logc - _logsumexp(logc))


def reproductive_values(age, lx, mx, r: float) -> np.ndarray:
    """Reproductive values ``v_x = (lambda**x / lx) sum_{y >= x} lambda**(-y) ly my`` [-].

    ``v_0 = 1`` when the table starts at age 0 with no births at age 0 (Fisher's
    normalisation follows from Euler–Lotka). Ages with ``lx = 0`` have no reproductive
    value: NaN.
    """
    age, lx, mx = _arrays(age, lx, mx)
    with np.errstate(divide="ignore", invalid="ignore"):
        terms = np.log(lx * mx) - r * age
        tail = np.logaddexp.accumulate(terms[::-1])[::-1]
        v = np.exp(tail + r * age - np.log(lx))
    v[lx <= 0] = np.nan
    return v


def leslie_matrix(age, lx, mx) -> np.ndarray:
    """Leslie matrix of an age table with ages 0, 1, 2, ... [unit].

    First row ``F_x = s_x m_{x+1}``, sub-diagonal ``s_x = l_{x+1} / l_x`` (0 where
    ``l_x = 0``): a census just after the day's eggs are laid (Leslie 1945 [3]_;
    Caswell 2001 [5]_, sec. 2.2). Its dominant eigenvalue solves Euler–Lotka when
    ``m_0 = 0``.
    """
    age, lx, mx = _arrays(age, lx, mx)
    n = age.size
    if n < 2 or not np.allclose(age, np.arange(n)):
        raise InputError("a Leslie matrix needs ages 0, 1, 2, ... in steps of one unit; this "
                         "table has other ages (use the Euler–Lotka results instead)")
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.where(lx[:-1] > 0, lx[1:] / np.where(lx[:-1] > 0, lx[:-1], 1.0), 0.0)
    a = np.zeros((n, n))
    a[0, :-1] = s * mx[1:]
    a[np.arange(1, n), np.arange(n - 1)] = s
    return a


def dominant_eigenvalue(a: np.ndarray) -> float:
    """The dominant (Perron) eigenvalue of a non-negative square matrix [-]."""
    vals = np.linalg.eigvals(np.asarray(a, dtype=float))
    return float(np.max(vals.real))


#: Most eggs per female per day a colony model may give [eggs/female/day]: the most
#: fecund insects known (termite and ant queens) lay some tens of thousands a day (a fact
#: of the trade, typed from memory); a larger mx is a unit or typing mistake.
MAX_COLONY_MX = 1e6


def validate_life_table(age, lx, mx, *, source: str | None = None,
                        rows: list[int] | None = None,
                        max_mx: float | None = None) -> list[str]:
    """Check a life table and return notes on what was adjusted.

    Raises :class:`InputError` naming the row for: ages not ascending or repeated,
    negative ages, lx outside [0, 1] or increasing, negative mx, mx above ``max_mx``
    (when given: a colony model passes :data:`MAX_COLONY_MX`), an empty table or
    columns of unequal length. Returns the list of notes (e.g. normalisation of l0).
    """
    age, lx, mx = _arrays(age, lx, mx)
    src = source or "life table"
    rows = rows if rows is not None else [i + 1 for i in range(age.size)]

    def place(i: int, col: str) -> str:
        return f"row {rows[i]}, column '{col}'"

    if age.ndim != 1 or age.size == 0:
        raise InputError("the life table is empty", source=src)
    if not (age.size == lx.size == mx.size):
        raise InputError("age, lx and mx must have the same length", source=src)
    for name, arr in (("age", age), ("lx", lx), ("mx", mx)):
        bad = np.flatnonzero(~np.isfinite(arr))
        if bad.size:
            raise InputError("the number must be finite", source=src, place=place(bad[0], name),
                             value=float(arr[bad[0]]))
    if age[0] < 0:
        raise InputError("ages are counted from the day the egg is laid and cannot be negative",
                         source=src, place=place(0, "age"), value=float(age[0]))
    step = np.diff(age)
    bad = np.flatnonzero(step <= 0)
    if bad.size:
        i = bad[0] + 1
        why = "the age repeats the row before" if step[bad[0]] == 0 else \
            "ages must be ascending; this one is smaller than the row before"
        raise InputError(why, source=src, place=place(i, "age"), value=float(age[i]))
    bad = np.flatnonzero((lx < 0) | (lx > 1))
    if bad.size:
        raise InputError("lx is a survival probability and must lie in [0, 1] (divide counts "
                         "of survivors by the number of eggs at the start)", source=src,
                         place=place(bad[0], "lx"), value=float(lx[bad[0]]))
    bad = np.flatnonzero(np.diff(lx) > 1e-12)
    if bad.size:
        i = bad[0] + 1
        raise InputError(f"lx cannot increase with age (it was {lx[i - 1]:g} at the row before)",
                         source=src, place=place(i, "lx"), value=float(lx[i]))
    bad = np.flatnonzero(mx < 0)
    if bad.size:
        raise InputError("mx (eggs per female per unit of age) cannot be negative", source=src,
                         place=place(bad[0], "mx"), value=float(mx[bad[0]]))
    if max_mx is not None:
        bad = np.flatnonzero(mx > max_mx)
        if bad.size:
            raise InputError(f"mx = {mx[bad[0]]:g} eggs per female per day is beyond any insect "
                             f"(at most {max_mx:g}; the most fecund queens lay tens of "
                             "thousands a day): check the unit of the mx column",
                             source=src, place=place(bad[0], "mx"), value=float(mx[bad[0]]))
    notes = []
    if age[0] == 0 and lx[0] != 1.0:
        if lx[0] <= 0:
            raise InputError("lx at age 0 must be positive (it is 1 by definition)", source=src,
                             place=place(0, "lx"), value=float(lx[0]))
        notes.append(f"lx normalised so that l0 = 1 (the table gave l0 = {lx[0]:g})")
    return notes


@dataclass(frozen=True, eq=False)
class LifeTable:
    """A validated age-classified life table of the females of a colony.

    Parameters
    ----------
    age : array_like
        Ages [unit], ascending, counted from the day the egg is laid.
    lx : array_like
        Survival from egg to each age [-].
    mx : array_like
        Eggs per living female per unit of age at each age. Female eggs, unless
        ``female_fraction`` is given.
    female_fraction : float, optional
        If given, ``mx`` counts all eggs and this share of them are female [-];
        ``mx`` is then multiplied by it.
    age_unit : str
        Name of the unit of age, e.g. ``"day"`` or ``"week"``.
    source : str, optional
        Where the table came from (for messages).

    Examples
    --------
    >>> lt = LifeTable([0, 1, 2, 3], [1, .9, .8, .5], [0, 0, 2, 2])
    >>> round(lt.net_reproductive_rate(), 3)
    2.6
    """

    age: np.ndarray
    lx: np.ndarray
    mx: np.ndarray
    female_fraction: float | None = None
    age_unit: str = "day"
    source: str | None = None
    notes: tuple[str, ...] = field(default=())

    def __init__(self, age, lx, mx, female_fraction: float | None = None, age_unit: str = "day",
                 source: str | None = None, rows: list[int] | None = None):
        notes = validate_life_table(age, lx, mx, source=source, rows=rows)
        age, lx, mx = _arrays(age, lx, mx)
        if age[0] == 0 and lx[0] != 1.0:
            lx = lx / lx[0]
        if female_fraction is not None:
            if not (0 < female_fraction <= 1):
                raise InputError("the female fraction must lie in (0, 1]", source=source,
                                 place="female fraction", value=female_fraction)
            mx = mx * female_fraction
            notes.append(f"mx counts all eggs; {female_fraction:g} of them taken as female")
        for name, arr in (("age", age), ("lx", lx), ("mx", mx)):
            arr = arr.copy()
            arr.flags.writeable = False
            object.__setattr__(self, name, arr)
        object.__setattr__(self, "female_fraction", female_fraction)
        object.__setattr__(self, "age_unit", age_unit)
        object.__setattr__(self, "source", source)
        object.__setattr__(self, "notes", tuple(notes))

    # -- constructors --------------------------------------------------------------
    @classmethod
    def from_csv(cls, path: str | Path, female_fraction: float | None = None,
                 age_unit: str = "day") -> "LifeTable":
        """Read a CSV with the columns ``age,lx,mx`` (see :func:`read_life_table`)."""
        return read_life_table(path, female_fraction=female_fraction, age_unit=age_unit)

    # -- quantities ----------------------------------------------------------------
    def net_reproductive_rate(self, upto: float | None = None) -> float:
        """R0 [female eggs per female egg], optionally truncated at age ``upto``."""
        return net_reproductive_rate(self.age, self.lx, self.mx, upto)

    @property
    def intrinsic_rate(self) -> float:
        """Intrinsic rate of increase r [per unit of age]."""
        return intrinsic_rate(self.age, self.lx, self.mx)

    @property
    def finite_rate(self) -> float:
        """Finite rate of increase lambda = e^r [per unit of age]."""
        return math.exp(self.intrinsic_rate)

    @property
    def generation_time(self) -> float:
        """Mean generation time T = ln R0 / r [unit]."""
        return generation_time(self.age, self.lx, self.mx, self.intrinsic_rate)

    @property
    def cohort_generation_time(self) -> float:
        """Cohort generation time sum x lx mx / R0 [unit]."""
        return cohort_generation_time(self.age, self.lx, self.mx)

    @property
    def doubling_time(self) -> float:
        """Doubling time ln 2 / r [unit]; inf if the colony does not grow."""
        return doubling_time(self.intrinsic_rate)

    def stable_age_distribution(self) -> np.ndarray:
        """Stable age distribution c_x [-] over the ages of the table (sums to 1)."""
        return stable_age_distribution(self.age, self.lx, self.intrinsic_rate)

    def reproductive_values(self) -> np.ndarray:
        """Reproductive values v_x [-]."""
        return reproductive_values(self.age, self.lx, self.mx, self.intrinsic_rate)

    def leslie_matrix(self) -> np.ndarray:
        """Leslie matrix (ages 0, 1, 2, ... only)."""
        return leslie_matrix(self.age, self.lx, self.mx)

    @property
    def first_laying_age(self) -> float:
        """First age with births (mx > 0 and lx > 0) [unit]."""
        idx = np.flatnonzero(self.lx * self.mx > 0)
        if idx.size == 0:
            raise DemographyError("the life table has no births (every lx*mx is 0)")
        return float(self.age[idx[0]])

    def index_of(self, x: float, what: str = "age") -> int:
        """Row index of age ``x``; a clear error if the table has no such age."""
        hit = np.flatnonzero(np.isclose(self.age, x, rtol=0, atol=1e-9))
        if hit.size == 0:
            raise InputError(f"the life table has no age {x:g}; its ages run from "
                             f"{self.age[0]:g} to {self.age[-1]:g} {self.age_unit}",
                             source=self.source, place=what, value=x)
        return int(hit[0])

    def summary(self) -> dict:
        """The headline figures, keyed as in the command line's JSON output."""
        r = self.intrinsic_rate
        return {
            "net_reproductive_rate": self.net_reproductive_rate(),
            "intrinsic_rate": r,
            "finite_rate": math.exp(r),
            "generation_time": generation_time(self.age, self.lx, self.mx, r),
            "cohort_generation_time": self.cohort_generation_time,
            "doubling_time": doubling_time(r),
            "first_laying_age": self.first_laying_age,
            "age_unit": self.age_unit,
        }

    def to_frame(self) -> pd.DataFrame:
        """The table with its derived columns: age, lx, mx, lx*mx, c_x, v_x."""
        import pandas as pd

        r = self.intrinsic_rate
        return pd.DataFrame({
            "age": self.age, "lx": self.lx, "mx": self.mx, "lxmx": self.lx * self.mx,
            "stable_age": stable_age_distribution(self.age, self.lx, r),
            "reproductive_value": reproductive_values(self.age, self.lx, self.mx, r),
        })


def read_life_table(path: str | Path, female_fraction: float | None = None,
                    age_unit: str = "day") -> LifeTable:
    """Read a life table from a CSV with the columns ``age,lx,mx``.

    Ages ascending, in any unit (fractional pivotal ages allowed); ``#`` lines are
    comments. Every malformed cell is an :class:`InputError` naming file, row and column.
    """
    table = read_csv_table(path, required=["age", "lx", "mx"])
    age = table.column("age")
    lx = table.column("lx")
    mx = table.column("mx")
    return LifeTable(age, lx, mx, female_fraction=female_fraction, age_unit=age_unit,
                     source=table.source, rows=table.lines)
