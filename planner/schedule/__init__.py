"""Schedule and tasks: the plan's batches in rooms, and what each crew does each day."""

from planner.schedule.rooms import cage_register, tray_register
from planner.schedule.tasks import Schedule, build_schedule, check_totals, task_lines

__all__ = ["Schedule", "build_schedule", "task_lines", "cage_register", "tray_register",
           "check_totals"]
