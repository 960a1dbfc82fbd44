"""Reports: the plan workbook, the CSV files and the plan's summary."""

from planner.reports.csvout import write_csvs
from planner.reports.workbook import (CAUTIONS, SHEET_NAMES, write_plan_workbook,
                                      write_sweep_workbook)

__all__ = ["write_plan_workbook", "write_sweep_workbook", "write_csvs", "SHEET_NAMES",
           "CAUTIONS"]
