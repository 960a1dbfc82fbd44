"""The plan as CSV files: ``daily.csv`` and ``weekly.csv`` (written atomically)."""

from __future__ import annotations

from pathlib import Path

from planner.errors import InputError
from planner.fileio import write_text_atomic
from planner.reports.tables import daily_table, daily_units, weekly_table

__all__ = ["write_csvs", "csv_header"]


def csv_header(name: str, unit: str) -> str:
    """A CSV column header: the name with its unit in brackets (none for dates, days and
    yes/no columns)."""
    return f"{name} [{unit}]" if unit else name


def write_csvs(res, folder: str | Path) -> dict[str, Path]:
    """Write ``daily.csv`` (one row a day) and ``weekly.csv`` (week, customer, ordered,
    released, shortfall) into ``folder`` (created if missing, inside an existing folder);
    every header carries its unit in brackets, e.g. ``eggs_collected [eggs]``."""
    folder = Path(folder)
    if folder.exists() and not folder.is_dir():
        raise InputError("--csv needs a folder, not a file", source=str(folder))
    if not folder.parent.exists():
        raise InputError("the folder for the CSV files cannot be made here (its parent "
                         "does not exist)", source=str(folder))
    folder.mkdir(exist_ok=True)
    daily = daily_table(res)
    units = daily_units(res)
    daily.columns = [csv_header(c, units.get(c, "")) for c in daily.columns]
    weekly = weekly_table(res)
    weekly = weekly.drop(columns=["week_start"])
    weekly.columns = [csv_header(c, "million" if c in ("ordered", "released", "shortfall")
                                 else "") for c in weekly.columns]
    out = {"daily": folder / "daily.csv", "weekly": folder / "weekly.csv"}
    write_text_atomic(out["daily"], daily.to_csv(index=False, float_format="%.10g"))
    write_text_atomic(out["weekly"], weekly.to_csv(index=False, float_format="%.10g"))
    return out
