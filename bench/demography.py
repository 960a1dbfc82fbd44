"""Speed of the demographic layer (medians over repeated runs; printed, not asserted).

Run: python bench/demography.py
"""

from __future__ import annotations

import os
import sys
import tempfile
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _timing import median_seconds, report  # noqa: E402

from planner.demography import (LifeTable, analyse_cohort, harvest_grid,  # noqa: E402
                                read_cohort_records, single_stage_harvest)


def table_120() -> LifeTable:
    """An invented 120-day life table (egg to day 119)."""
    age = np.arange(120)
    daily = np.where(age < 30, 0.985, np.exp(-0.002 * np.exp(0.05 * np.maximum(age - 30, 0))))
    lx = np.concatenate([[1.0], np.cumprod(daily[:-1])])
    mx = np.where(age >= 38, 12 * np.exp(-(age - 38) / 40), 0.0)
    return LifeTable(age, lx, mx)


def full_analysis(lt: LifeTable) -> None:
    LifeTable(lt.age, lt.lx, lt.mx)  # validation
    lt.summary()
    lt.to_frame()
    lt.leslie_matrix()
    single_stage_harvest(lt, 30, 80, 32)


def cohort_file(path: Path, females: int = 300, seed: int = 1) -> None:
    """300 single-female cages observed daily from emergence (day 30) to death."""
    rng = np.random.default_rng(seed)
    lines = ["cage,day,females,eggs"]
    for c in range(females):
        life = 30 + int(rng.gamma(4, 8))
        for d in range(30, life + 2):
            alive = int(d <= life)
            eggs = int(rng.poisson(10)) if (alive and d >= 34) else 0
            lines.append(f"F{c:03d},{d},{alive},{eggs}")
    path.write_text("\n".join(lines) + "\n")


def main() -> None:
    print(f"Broodline demography benchmark ({os.cpu_count()} CPUs); medians of repeated runs")
    lt = table_120()
    t = median_seconds(lambda: full_analysis(lt), repeat=15)
    print(report("full analysis of a 120-day life table", t, 0.020))
    t = median_seconds(lambda: harvest_grid(lt, emergence_age=32), repeat=15)
    pairs = len(harvest_grid(lt, emergence_age=32))
    print(report(f"H/P grid over all theta < delta ({pairs} feasible pairs)", t, 0.020))
    with tempfile.TemporaryDirectory() as tmp:
        f = Path(tmp) / "cohort.csv"
        cohort_file(f)
        rec = read_cohort_records(f)
        t = median_seconds(lambda: analyse_cohort(rec, bootstrap=2000, seed=1, jackknife=False),
                           repeat=5)
        print(report(f"2,000 bootstrap resamples, {rec.n_females}-female cohort", t, 2.0))
        t = median_seconds(lambda: read_cohort_records(f), repeat=5)
        print(report("reading that cohort file", t))


if __name__ == "__main__":
    main()
