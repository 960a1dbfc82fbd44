"""Make the two invented demo life tables of models/ (run once; the CSVs are committed).

The numbers are invented, shaped to lie inside the published ranges stated in each
colony model's notes; they describe no real colony. Run: python models/invent_life_tables.py
"""

from pathlib import Path

import numpy as np

HERE = Path(__file__).parent


def write(name: str, lx: np.ndarray, eggs: np.ndarray, header: str) -> None:
    lines = [f"# {header}", "# lx: survival from egg laying [-]; mx: all eggs per living female per day",
             "age,lx,mx"]
    for x, (l, m) in enumerate(zip(lx, eggs)):
        lines.append(f"{x},{l:.4f},{m:.2f}")
    (HERE / name).write_text("\n".join(lines) + "\n", encoding="utf-8")


def fly() -> None:
    """Fernhollow line FH-L3, a tephritid fruit fly on larval diet at 26 C (invented)."""
    ages = np.arange(0, 91)
    daily = np.ones(91)
    daily[0:4] = [0.97, 0.96, 0.95, 0.95]            # egg, hatch on day 4: 0.840
    daily[4:14] = 0.72 ** (1 / 10)                    # larvae in diet: 0.72 survive
    daily[14:17] = 0.94 ** (1 / 3)                    # pupariation losses
    daily[17:28] = (0.90 / 0.94) ** (1 / 11)          # pupae: 0.90 emerge on day 28
    a = np.arange(28, 90) - 28
    hazard = 0.003 * np.exp(0.06 * a)                 # adults: Gompertz
    daily[28:90] = np.exp(-hazard)
    lx = np.concatenate([[1.0], np.cumprod(daily[:-1])])
    eggs = np.where(ages >= 36, 30.0 * (1 - np.exp(-(ages - 35) / 3.0)) * np.exp(-(ages - 36) / 60.0), 0.0)
    write("fernhollow-fly-lifetable.csv", lx, eggs,
          "Invented demo data: Fernhollow line FH-L3 (a tephritid fruit fly), 26 C, cage colony")


def moth() -> None:
    """Fernhollow line FH-C1, a tortricid moth on larval diet at 27 C (invented)."""
    ages = np.arange(0, 51)
    daily = np.ones(51)
    daily[0:5] = 0.80 ** (1 / 5)                      # egg, hatch on day 5: 0.80
    daily[5:24] = 0.60 ** (1 / 19)                    # larvae in diet cells: 0.60
    daily[24:33] = 0.88 ** (1 / 9)                    # pupae: 0.88 emerge on day 33
    a = np.arange(33, 50) - 33
    daily[33:50] = np.exp(-0.02 * np.exp(0.25 * a))   # adults: Gompertz
    lx = np.concatenate([[1.0], np.cumprod(daily[:-1])])
    u = (ages - 34) / 2.0
    eggs = np.where(ages >= 35, 22.0 * u * np.exp(1 - u), 0.0)
    write("fernhollow-moth-lifetable.csv", lx, eggs,
          "Invented demo data: Fernhollow line FH-C1 (a tortricid moth), 27 C, cage colony")


def fly_cohort_records() -> None:
    """Invented daily cage records of line FH-L3 (for `broodline cohort`): six cages of
    40 newly emerged females (day 28 from egg laying), counted every second day to day
    90 (the table's end); deaths drawn from the fly table's adult survival, eggs from its mx (Poisson), two
    females sampled from each cage on day 50 (censored). Seeded: the file is fixed."""
    rng = np.random.default_rng(20261203)
    table = np.loadtxt(HERE / "fernhollow-fly-lifetable.csv", delimiter=",", comments="#",
                       skiprows=3)
    lx, mx = table[:, 1], table[:, 2]
    lines = ["# Invented demo records: line FH-L3 (a tephritid fruit fly), six cages of 40 "
             "females from emergence",
             "# day: age from egg laying [day]; females: alive at the count; eggs: laid since "
             "the last count; removed: sampled (censored)",
             "cage,day,females,eggs,removed"]
    for cage in range(1, 7):
        alive = 40
        prev = 28
        lines.append(f"FH-{cage},28,{alive},0,0")
        for day in range(30, 92, 2):
            eggs = 0
            for d in range(prev, day):
                eggs += int(rng.poisson(alive * mx[d]))
                alive = int(rng.binomial(alive, lx[d + 1] / lx[d]))
            removed = min(2, alive) if day == 50 else 0
            lines.append(f"FH-{cage},{day},{alive - removed},{eggs},{removed}")
            alive -= removed
            prev = day
    (HERE / "fernhollow-fly-cohort-records.csv").write_text("\n".join(lines) + "\n",
                                                           encoding="utf-8")


if __name__ == "__main__":
    fly()
    moth()
    fly_cohort_records()
