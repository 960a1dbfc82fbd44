"""First estimates from the stationary single-stage formulas: what a constant weekly
volume needs (eggs, trays, diet, rack and cage slots, crew hours) at one harvest age
and one discard age, as daily averages.

This is the hand calculation a rearing manager does without an optimiser; ``broodline
check`` shows it against the facility's capacities, and the optimiser's benchmark
builds its "hand method" plan from it.

Stationary flows for a product volume V [million/week]
------------------------------------------------------
With ``y = 1 / R0(delta)`` the share of each day's eggs whose pupae go back to the
colony (egg equivalents) and ``H = 1 - y``:

- pupae released per day ``R = V 1e6 / (7 yield)``;
- eggs per day ``B = R / (l_theta H)``; trays per day ``B / rho``; diet ``d B / rho``;
- cages loaded per day ``B l_theta_c y / k``; occupied ``(delta - theta_c + 1)`` times
  that; laying on the days with ``mx > 0``;
- rack occupancy ``(A_lc - L)`` times the trays per day; pupal holding
  ``B (H sum_{A_lc}^{theta-1} lx + y sum_{A_lc}^{theta_c-1} lx)``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from planner.demography import single_stage_harvest
from planner.errors import DemographyError
from planner.scenario.schema import TASKS, WEEKDAYS, Scenario

__all__ = ["StationaryNeeds", "stationary_needs", "capacities", "crew_task_hours"]


@dataclass(frozen=True)
class StationaryNeeds:
    """Daily averages that a constant weekly volume needs at one (theta, delta)."""

    volume: float            #: product [million/week]
    harvest_age: int         #: theta [day]
    discard_age: int         #: delta [day]
    harvest_fraction: float  #: H [-]
    output_per_female: float  #: P [female-unit pupae per adult female per day]
    eggs: float              #: eggs collected and seeded [eggs/day]
    trays: float             #: trays seeded [trays/day]
    diet: float              #: diet mixed [kg/day]
    rack_occupancy: float    #: trays in racks [tray slots]
    cages_loaded: float      #: cages loaded [cages/day]
    cage_occupancy: float    #: occupied cages [cage slots]
    laying_cages: float      #: cages laying eggs [cages]
    released: float          #: pupae harvested for release [pupae/day]
    to_colony: float         #: pupae loaded into cages [pupae/day]
    pupal_holding: float     #: pupae held between larval collection and harvest [million]
    task_hours: dict         #: hours by task [h/day]
    cost_per_week: float     #: variable cost [currency/week]

    @property
    def crew_hours(self) -> float:
        """All crews' hours [h/day]."""
        return float(sum(self.task_hours.values()))


def stationary_needs(scn: Scenario, volume: float, harvest_age: int,
                     discard_age: int) -> StationaryNeeds:
    """Daily needs of a constant product ``volume`` [million/week] at one (theta, delta).

    Raises
    ------
    DemographyError
        When the colony cannot sustain a harvest at these ages (R0(delta) <= 1).
    """
    col = scn.colony
    re_ = col.rearing
    lt = col.to_life_table()
    lx = lt.lx
    res = single_stage_harvest(lt, harvest_age, discard_age, col.stages.emergence_age)
    h = res.harvest_fraction
    y = 1.0 - h
    released = volume * 1e6 / (7.0 * re_.product_yield)
    eggs = released / (lx[harvest_age] * h)
    trays = eggs / re_.eggs_per_tray
    diet = trays * re_.diet_per_tray
    theta_c = re_.cage_loading_age
    to_colony = eggs * lx[theta_c] * y
    cages = to_colony / re_.pupae_per_cage
    span = discard_age - theta_c + 1
    laying_days = int(np.count_nonzero(col.female_mx()[theta_c: discard_age + 1] > 0))
    a_lc = col.stages.larval_collection_age
    holding = eggs * (h * lx[a_lc:harvest_age].sum() + y * lx[a_lc:theta_c].sum()) / 1e6
    lab = scn.labour
    tasks = {
        "diet_mixing": lab.diet_mixing * diet,
        "egg_collection": lab.egg_collection * cages * laying_days,
        "seeding": lab.seeding * trays,
        "larval_collection": lab.larval_collection * trays,
        "harvest_packing": lab.harvest_packing * released / 1e6,
        "cage_loading": lab.cage_loading * cages,
        "cage_care": lab.cage_care * cages * span,
        "cage_discard": lab.cage_discard * cages,
    }
    c = scn.costs
    cost = 7.0 * (c.diet_per_kg * diet + c.per_tray_seeded * trays + c.per_cage_loaded * cages
                  + c.per_cage_day * cages * span)
    return StationaryNeeds(
        volume=volume, harvest_age=harvest_age, discard_age=discard_age, harvest_fraction=h,
        output_per_female=res.output_per_female, eggs=eggs, trays=trays, diet=diet,
        rack_occupancy=trays * (a_lc - re_.seed_lag), cages_loaded=cages,
        cage_occupancy=cages * span, laying_cages=cages * laying_days, released=released,
        to_colony=to_colony, pupal_holding=holding, task_hours=tasks, cost_per_week=cost)


def best_pair(scn: Scenario, volume: float) -> StationaryNeeds:
    """The (theta, delta) candidate pair with the lowest stationary variable cost."""
    best = None
    for theta in scn.colony.rearing.harvest_ages:
        for delta in scn.colony.rearing.discard_ages:
            try:
                n = stationary_needs(scn, volume, theta, delta)
            except DemographyError:
                continue
            if best is None or n.cost_per_week < best.cost_per_week:
                best = n
    if best is None:
        raise DemographyError("no allowed pair of harvest and discard ages lets the colony "
                              "sustain a harvest (R0 up to every discard age is at most 1)")
    return best


def crew_task_hours(scn: Scenario, task_hours: dict) -> dict[str, float]:
    """Task hours summed by the crew that does each task [h/day]."""
    out = {c.name: 0.0 for c in scn.crews}
    for c in scn.crews:
        for t in (TASKS if c.tasks == "all" else c.tasks):
            out[c.name] += task_hours.get(t, 0.0)
    return out


def capacities(scn: Scenario) -> dict:
    """The facility's capacities, with daily averages over a week."""
    f = scn.facility
    kitchen = scn.kitchen.diet_kg.as_list()
    crews = {}
    for c in scn.crews:
        hours = c.hours.as_list()
        crews[c.name] = {"hours_by_weekday": dict(zip(WEEKDAYS, hours)),
                         "regular_per_day": sum(hours) / 7.0,
                         "with_overtime_per_day": sum(hours) / 7.0 + c.overtime_limit,
                         "overtime_limit": c.overtime_limit}
    return {
        "cage_slots": f.cage_slots,
        "rack_slots": f.rack_slots,
        "pupal_holding": f.pupal_holding,
        "kitchen_by_weekday": dict(zip(WEEKDAYS, kitchen)),
        "kitchen_per_day": sum(kitchen) / 7.0,
        "crews": crews,
        "adult_rooms": {r.name: r.cage_slots for r in f.adult_rooms},
        "larval_rooms": {r.name: r.rack_slots for r in f.larval_rooms},
    }
