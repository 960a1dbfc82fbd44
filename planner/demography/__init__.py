"""Demography of a rearing colony: what the life table says the colony can yield.

The science is in plain functions over numpy arrays; the thin classes
:class:`LifeTable`, :class:`StageMatrix` and the harvest results carry a validated
table and name its quantities. Every quantity states its unit in its docstring.
"""

from planner.demography.cohort import (CohortAnalysis, CohortRecords, analyse_cohort,
                                       kaplan_meier, read_cohort_records)
from planner.demography.harvest import (SingleStageHarvest, all_stage_harvest,
                                        all_stage_harvest_fraction, harvest_grid,
                                        single_stage_harvest)
from planner.demography.lifetable import (LifeTable, cohort_generation_time, doubling_time,
                                          generation_time, intrinsic_rate, leslie_matrix,
                                          net_reproductive_rate, read_life_table,
                                          reproductive_values, stable_age_distribution)
from planner.demography.matrix import StageMatrix, read_stage_matrix

__all__ = [
    "LifeTable", "read_life_table", "net_reproductive_rate", "intrinsic_rate",
    "generation_time", "cohort_generation_time", "doubling_time", "stable_age_distribution",
    "reproductive_values", "leslie_matrix",
    "StageMatrix", "read_stage_matrix",
    "SingleStageHarvest", "single_stage_harvest", "harvest_grid",
    "all_stage_harvest", "all_stage_harvest_fraction",
    "CohortRecords", "CohortAnalysis", "read_cohort_records", "analyse_cohort", "kaplan_meier",
]
