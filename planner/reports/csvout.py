"""The plan as CSV files: ``daily.csv`` and ``weekly.csv`` (written atomically)."""

from __future__ import annotations

from pathlib import Path

from planner.errors import InputError
from planner.fileio import write_text_atomic
from planner.reports.tables import daily_table, weekly_table

__all__ = ["write_csvs"]


def write_csvs(res, folder: str | Path) -> dict[str, Path]:
    """Write ``daily.csv`` (one row a day; units in the README) and ``weekly.csv`` (week,
    customer, ordered, released, shortfall [million]) into ``folder`` (created if
    missing, inside an existing folder)."""
    folder = Path(folder)
    if folder.exists() and not folder.is_dir():
        raise InputError("--csv needs a folder, not a file", source=str(folder))
    if not folder.parent.exists():
        raise InputError("the folder for the CSV files cannot be made here (its parent "
                         "does not exist)", source=str(folder))
    folder.mkdir(exist_ok=True)
    daily = daily_table(res)
    weekly = weekly_table(res)
    weekly = weekly.drop(columns=["week_start"])
    out = {"daily": folder / "daily.csv", "weekly": folder / "weekly.csv"}
    write_text_atomic(out["daily"], daily.to_csv(index=False, float_format="%.10g"))
    write_text_atomic(out["weekly"], weekly.to_csv(index=False, float_format="%.10g"))
    return out
