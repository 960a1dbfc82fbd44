"""Timing helpers for the benchmarks: medians over repeated runs, in one process."""

from __future__ import annotations

import statistics
import time
from collections.abc import Callable


def median_seconds(fn: Callable[[], object], repeat: int = 7, warmup: int = 1) -> float:
    """Median wall-clock seconds of ``fn()`` over ``repeat`` runs after ``warmup`` runs."""
    for _ in range(warmup):
        fn()
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def report(name: str, seconds: float, target: float | None = None) -> str:
    """One aligned line: name, median, target and whether it is met."""
    unit = "ms" if seconds < 1 else "s"
    shown = seconds * 1000 if unit == "ms" else seconds
    line = f"{name:<58} {shown:9.2f} {unit}"
    if target is not None:
        t_unit = "ms" if target < 1 else "s"
        t_shown = target * 1000 if t_unit == "ms" else target
        line += f"   target < {t_shown:g} {t_unit}   {'met' if seconds < target else 'MISSED'}"
    return line
