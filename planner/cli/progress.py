"""A progress line while the solver works: elapsed time, and the best plan and bound so far
when the solver's log reports them.

The solver writes its log to a file (CBC's progress lines ``Cbc0010I After N nodes ...
best solution X, best possible Y``; HiGHS's table rows ending in the incumbent, the bound
and the gap); a thread reads the newest lines every half second and rewrites one line on
stderr. It is off with ``--quiet`` and whenever stdout is not a terminal.
"""

from __future__ import annotations

import glob
import os
import re
import sys
import threading
import time

__all__ = ["Progress", "parse_progress"]

_NUM = r"(-?inf|[-+]?[0-9]*\.?[0-9]+(?:[eE][-+]?[0-9]+)?)"
_CBC = re.compile(_NUM + r" best solution, best possible " + _NUM)
_CBC_FIRST = re.compile(r"Integer solution of " + _NUM + r" found")
_HIGHS = re.compile(r"%\s+" + _NUM + r"\s+" + _NUM + r"\s+(?:[0-9.]+%|inf|Large)\s+\d+\s+\d+")


def parse_progress(text: str) -> tuple[float | None, float | None]:
    """(best plan, best bound) from the last matching solver log line, or Nones."""
    best = bound = None
    for line in text.splitlines()[-400:]:
        m = _CBC.search(line)
        if m:
            best, bound = float(m.group(1)), float(m.group(2))
            continue
        m = _CBC_FIRST.search(line)
        if m:
            best = float(m.group(1))
            continue
        m = _HIGHS.search(line)
        if m:
            low, high = float(m.group(1)), float(m.group(2))
            bound = low if low > float("-inf") else bound
            best = high if high < float("inf") else best
    return best, bound


class Progress:
    """Context manager showing solver progress on stderr (a no-op when disabled)."""

    def __init__(self, log_path: str, label: str, enabled: bool, stream=None, unit: str = ""):
        self.log_path = log_path
        self.label = label
        self.unit = f" {unit}" if unit else ""
        self.enabled = enabled
        self.stream = stream or sys.stderr
        self._stop = threading.Event()
        self._thread = None
        self._t0 = 0.0

    def __enter__(self):
        self._t0 = time.perf_counter()
        if self.enabled:
            self._thread = threading.Thread(target=self._run, daemon=True)
            self._thread.start()
        return self

    def __exit__(self, *exc):
        self._stop.set()
        if self._thread is not None:
            self._thread.join(timeout=2)
            self.stream.write("\r" + " " * 78 + "\r")
            self.stream.flush()
        return False

    def _read(self) -> str:
        text = ""
        for path in sorted(glob.glob(self.log_path + "*")):
            try:
                with open(path, encoding="utf-8", errors="replace") as f:
                    text += f.read()[-20000:]
            except OSError:
                continue
        return text

    def _run(self) -> None:
        while not self._stop.wait(0.5):
            best, bound = parse_progress(self._read()) if os.path.exists(
                os.path.dirname(self.log_path) or ".") else (None, None)
            elapsed = time.perf_counter() - self._t0
            line = f"{self.label}: {elapsed:5.0f} s"
            if best is not None:
                line += f", best plan {best:,.0f}{self.unit}"
            if bound is not None:
                line += f", bound {bound:,.0f}"
            self.stream.write("\r" + line[:78].ljust(78))
            self.stream.flush()
