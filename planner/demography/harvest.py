"""Harvest demography: what a colony at replacement can yield.

Single-stage harvest
--------------------
Harvest a fraction ``H`` of the insects alive at the harvest age ``theta`` (late
pupae, say); discard every insect at the end of the discard age ``delta`` (the last
day of laying). Survival becomes ``l*_x = lx`` for ``x <= theta``, ``(1 - H) lx`` for
``theta < x <= delta`` and 0 beyond. Zero growth needs

    R0(theta) + (1 - H) (R0(delta) - R0(theta)) = 1,

i.e. ``H = 1 - 1 / R0(delta)`` for a pre-reproductive harvest age (R0(theta) = 0).
The stationary age structure is ``c_x = l*_x / sum_y l*_y`` and the daily harvest per
adult female (females from the emergence age ``epsilon``) is

    P = H l_theta / sum_{x=epsilon}^{delta} l*_x
      = (R0(delta) - 1) l_theta / sum_{x=epsilon}^{delta} lx      (theta < epsilon).

With both sexes harvested the pupae per female are ``P / phi`` (``2P`` at 1:1).

All-stage harvest
-----------------
Removing the same fraction ``h`` of every age or stage each unit of time keeps the
stable distribution and holds zero growth when ``lambda (1 - h) = 1``:
``h = 1 - 1 / lambda`` per unit, ``1 - lambda**(-tau)`` every ``tau`` units.

References
----------
.. [1] Beddington, J. R. & Taylor, D. B. (1973). Optimum age specific harvesting of a
   population. Biometrics 29, 801–809. (Harvesting at one age class is optimal;
   harvest fraction from the life table.)
.. [2] Doubleday, W. G. (1975). Harvesting in matrix population models. Biometrics 31,
   189–200.
.. [3] Caswell, H. (2001). Matrix Population Models, 2nd ed. Sinauer, sec. 18.4
   (uniform harvest h = 1 - 1/lambda).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:  # pandas is loaded where a table is made: `check` does without it
    import pandas as pd

from planner.demography.lifetable import LifeTable
from planner.demography.matrix import StageMatrix
from planner.errors import DemographyError, InputError

__all__ = [
    "SingleStageHarvest",
    "single_stage_harvest",
    "harvest_grid",
    "all_stage_harvest_fraction",
    "all_stage_harvest",
]


@dataclass(frozen=True, eq=False)
class SingleStageHarvest:
    """The stationary colony under a single-stage harvest.

    Attributes
    ----------
    harvest_age, discard_age, emergence_age : float
        theta, delta, epsilon [unit of age].
    net_reproductive_rate : float
        R0(delta) without harvest [-].
    harvest_fraction : float
        H [-], the share of insects alive at theta that is harvested.
    output_per_female : float
        P [insects harvested per adult female per unit of age].
    output_per_female_closed_form : float or None
        The same from ``(R0 - 1) l_theta / sum lx`` when theta is before both emergence
        and first laying; None otherwise.
    modified_survival : ndarray
        l*_x over the table's ages (0 beyond delta) [-].
    stationary_structure : pandas.Series
        c_x over ages up to delta, summing to 1 [-].
    """

    harvest_age: float
    discard_age: float
    emergence_age: float
    net_reproductive_rate: float
    harvest_fraction: float
    output_per_female: float
    output_per_female_closed_form: float | None
    modified_survival: np.ndarray
    structure_age: np.ndarray
    structure_share: np.ndarray
    age_unit: str = "day"
    female_fraction: float | None = None

    @property
    def stationary_structure(self):
        """The stationary age structure (share of the colony by age [-], sums to 1) as a
        pandas Series indexed by age [unit]."""
        import pandas as pd

        out = pd.Series(self.structure_share, index=self.structure_age,
                        name="stationary_structure")
        out.index.name = "age"
        return out

    @property
    def insects_per_female(self) -> float | None:
        """Harvest of both sexes per adult female, P / phi [per unit]; None if phi unknown."""
        if not self.female_fraction:
            return None
        return self.output_per_female / self.female_fraction

    def summary(self) -> dict:
        return {
            "harvest_age": self.harvest_age,
            "discard_age": self.discard_age,
            "emergence_age": self.emergence_age,
            "net_reproductive_rate": self.net_reproductive_rate,
            "harvest_fraction": self.harvest_fraction,
            "output_per_female": self.output_per_female,
            "output_per_female_closed_form": self.output_per_female_closed_form,
            "stationary_structure": {f"{a:g}": float(c) for a, c in
                                     zip(self.structure_age, self.structure_share)},
            "age_unit": self.age_unit,
        }


def _kept_from_r0(r0_theta, r0_delta):
    """1 - H = (1 - R0(theta)) / (R0(delta) - R0(theta)), elementwise: the share kept at
    the harvest age. Computed as such, not as 1 - H, so that a very fertile colony
    (R0 of 1e17 and more, where H rounds to 1) keeps a positive share."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return (1.0 - r0_theta) / (r0_delta - r0_theta)


def single_stage_harvest(table: LifeTable, harvest_age: float, discard_age: float,
                         emergence_age: float | None = None) -> SingleStageHarvest:
    """Harvest fraction, stationary structure and daily output of a single-stage harvest.

    Parameters
    ----------
    table : LifeTable
        The colony's life table (female lx and female-egg mx).
    harvest_age : float
        theta [unit of age]: insects are counted at theta, then the share H is removed.
    discard_age : float
        delta [unit of age]: every insect is discarded at the end of this age.
    emergence_age : float, optional
        epsilon [unit of age]: the first adult age, for the output per adult female.
        Default: the first laying age.

    Raises
    ------
    InputError
        Ages outside the table, or a harvest age after the discard age.
    DemographyError
        R0(delta) <= 1 (the colony cannot sustain any harvest), or a harvest age so
        late that the colony already replaces itself before it.
    """
    age, lx = table.age, table.lx
    unit = table.age_unit
    if harvest_age > discard_age:
        raise InputError(f"the harvest age ({harvest_age:g} {unit}) is after the discard age "
                         f"({discard_age:g} {unit}): insects must be harvested before cages "
                         "are emptied", source=table.source, place="harvest age",
                         value=harvest_age)
    it = table.index_of(harvest_age, "harvest age")
    idl = table.index_of(discard_age, "discard age")
    eps = table.first_laying_age if emergence_age is None else emergence_age
    ie = table.index_of(eps, "emergence age")
    if ie > idl:
        raise InputError(f"the emergence age ({eps:g} {unit}) is after the discard age "
                         f"({discard_age:g} {unit})", source=table.source, place="emergence age",
                         value=eps)
    w = table.lx * table.mx
    r0_delta = float(w[: idl + 1].sum())
    r0_theta = float(w[: it + 1].sum())
    if r0_delta <= 1.0:
        raise DemographyError(
            f"the net reproductive rate up to the discard age {discard_age:g} {unit} is "
            f"R0 = {r0_delta:.4g} <= 1: the colony cannot sustain any harvest (it does not "
            "even replace itself); keep cages to a later discard age or improve survival "
            "or fecundity")
    if r0_theta >= 1.0:
        raise DemographyError(
            f"the colony already replaces itself (R0 = {r0_theta:.4g}) before the harvest age "
            f"{harvest_age:g} {unit}: a harvest at that age cannot hold zero growth; harvest "
            "at an earlier, pre-reproductive age")
    kept = float(_kept_from_r0(r0_theta, r0_delta))
    h = 1.0 - kept
    lstar = np.where(np.arange(age.size) <= it, lx, kept * lx)
    lstar[idl + 1:] = 0.0
    adults = float(lstar[ie: idl + 1].sum())
    if not adults > 0.0:
        raise DemographyError(
            f"no adult female is alive between the emergence age {eps:g} {unit} and the "
            f"discard age {discard_age:g} {unit} (lx is 0 there): the output per female is "
            "not defined; give an emergence age at or before the first laying age")
    p = h * float(lx[it]) / adults
    closed = None
    if it < ie and r0_theta == 0.0:
        closed = (r0_delta - 1.0) * float(lx[it]) / float(lx[ie: idl + 1].sum())
    return SingleStageHarvest(
        harvest_age=float(age[it]), discard_age=float(age[idl]), emergence_age=float(age[ie]),
        net_reproductive_rate=r0_delta, harvest_fraction=h, output_per_female=p,
        output_per_female_closed_form=closed, modified_survival=lstar,
        structure_age=age[: idl + 1].copy(),
        structure_share=lstar[: idl + 1] / lstar[: idl + 1].sum(), age_unit=unit,
        female_fraction=table.female_fraction)


def harvest_grid(table: LifeTable, emergence_age: float | None = None,
                 harvest_ages=None, discard_ages=None) -> pd.DataFrame:
    """H and P for every pair ``theta < delta`` of the table's ages, vectorised.

    Parameters
    ----------
    table : LifeTable
    emergence_age : float, optional
        epsilon [unit of age] for P; default the first laying age.
    harvest_ages, discard_ages : sequence of float, optional
        Restrict theta / delta to these ages (default: every age of the table).

    Returns
    -------
    DataFrame
        One row per pair where a harvest holds zero growth (R0(theta) < 1 < R0(delta),
        and epsilon <= delta): ``harvest_age``, ``discard_age``,
        ``net_reproductive_rate`` (R0(delta)), ``harvest_fraction`` (H) and
        ``output_per_female`` (P) [per unit of age].
    """
    import pandas as pd

    age, lx = table.age, table.lx
    eps = table.first_laying_age if emergence_age is None else emergence_age
    ie = table.index_of(eps, "emergence age")
    ti = np.arange(age.size) if harvest_ages is None else \
        np.array([table.index_of(a, "harvest age") for a in harvest_ages], dtype=int)
    di = np.arange(age.size) if discard_ages is None else \
        np.array([table.index_of(a, "discard age") for a in discard_ages], dtype=int)
    r0c = np.cumsum(lx * table.mx)
    lc = np.concatenate([[0.0], np.cumsum(lx)])  # lc[k] = sum of lx[:k]
    T, D = np.meshgrid(ti, di, indexing="ij")
    kept = _kept_from_r0(r0c[T], r0c[D])
    h = 1.0 - kept
    # sum_{x=eps}^{delta} l*_x = sum_{eps..min(theta,delta)} lx + (1-H) sum_{max(eps,theta+1)..delta} lx
    lo_end = np.minimum(T, D) + 1
    before = np.where(lo_end > ie, lc[np.maximum(lo_end, ie)] - lc[ie], 0.0)
    start = np.maximum(ie, T + 1)
    after = np.where(D + 1 > start, lc[D + 1] - lc[np.minimum(start, D + 1)], 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        p = h * lx[T] / (before + kept * after)
    ok = (T < D) & (r0c[T] < 1.0) & (r0c[D] > 1.0) & (D >= ie)
    frame = pd.DataFrame({
        "harvest_age": age[T[ok]],
        "discard_age": age[D[ok]],
        "net_reproductive_rate": r0c[D[ok]],
        "harvest_fraction": h[ok],
        "output_per_female": p[ok],
    })
    return frame.reset_index(drop=True)


def all_stage_harvest_fraction(finite_rate: float, interval: float = 1.0) -> float:
    """Share of every age or stage that can be removed every ``interval`` units [-].

    ``h = 1 - finite_rate ** (-interval)``: removing it keeps the stable distribution
    and zero growth (Caswell 2001, sec. 18.4). For culture units harvested whole
    (flats, bins), the same share of the units.

    Parameters
    ----------
    finite_rate : float
        lambda [per unit of time].
    interval : float
        tau, time between harvests [units of time].

    Raises
    ------
    DemographyError
        If the colony does not grow (lambda <= 1): nothing can be harvested.
    """
    if not (interval > 0):
        raise InputError("the harvest interval must be positive", place="interval", value=interval)
    if not (finite_rate > 1.0):
        raise DemographyError(f"the finite rate is {finite_rate:.4g} <= 1: the colony does not "
                              "grow, so no share of it can be harvested without shrinking it")
    return float(-math.expm1(-interval * math.log(finite_rate)))


def all_stage_harvest(source: LifeTable | StageMatrix | float, interval: float = 1.0) -> float:
    """All-stage harvest fraction from a finite rate, a life table or a stage matrix."""
    if isinstance(source, (LifeTable, StageMatrix)):
        lam = source.finite_rate
    else:
        lam = float(source)
    return all_stage_harvest_fraction(lam, interval)
