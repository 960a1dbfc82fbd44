"""Mutations of the demo's input files and a guarded in-process run of the command line.

Used by ``tests/test_fuzz.py`` (a bounded run in the suite) and ``bench/fuzz.py`` (the
long run, printed as a table by category). One case is one mutation of one file: one
mistake. The harness runs ``broodline check`` (and, for accepted scenarios, optionally
``plan``) in this process and records the exit code, stderr, seconds and whether a plan
file was left behind.
"""

from __future__ import annotations

import contextlib
import io
import random
import re
import shutil
import signal
import time
from dataclasses import dataclass
from datetime import datetime
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
MODELS = ROOT / "models"

#: Categories of mutation: the file mutated.
CATEGORIES = ("scenario", "colony", "life table", "workbook")

#: Values a hostile tester types into a TOML value.
TOML_VALUES = (
    "-1", "0", "1e17", "1e308", "-1e308", "inf", "-inf", "nan", '""', '"x"', "true",
    "false", "[]", "[1, 2]", "{}", "9999-12-01", "0001-01-01", "1900-01-01", "1" + "0" * 30,
    "1.5", "-0.0", '"' + "a" * 300 + '"', "[" * 600 + "]" * 600, "2147483648", "0.0001",
    '"Mon"', "[2027-01-04]", '{ Mon = 1 }', "1000000", "-1000000", '"\\u0000"',
)

#: Values typed into a CSV cell.
CSV_VALUES = ("-1", "0", "1e17", "inf", "nan", "", "x", "1.5", "2", "1e308", "-0", "0x10",
              "1,2", '"', "9" * 400, "NULL", " ", "1e-320")

#: Values typed into a workbook cell.
CELL_VALUES = (-1, 0, 1e17, 1e308, float("inf"), float("nan"), "", "x", True, False, 1.5,
               "a" * 300, datetime(9999, 12, 1), datetime(1900, 1, 1), "inf", "1e17",
               "Mon, Tue", "yes", "no", None, 10 ** 20, "=1/0", "#DIV/0!")

_NUMBER = re.compile(r"(?<![\w.-])-?\d+(?:\.\d+)?(?:[eE][-+]?\d+)?(?![\w.-])")
_ASSIGN = re.compile(r"^(\s*[A-Za-z_][\w.\"-]*\s*=\s*)(.+?)(\s*#.*)?$")


class CaseTimeout(BaseException):
    """A case ran past its time (a BaseException: the command line does not catch it)."""


@dataclass
class Base:
    """The unmutated inputs in a folder: scenario, colony model, life table, workbook."""

    folder: Path
    scenario: Path
    colony: Path
    life_table: Path
    workbook: Path


def make_base(folder: Path, horizon_weeks: int = 3) -> Base:
    """Copy the demo (colony model beside the scenario; a short horizon so that a plan
    of an accepted mutation is quick) and write its input workbook."""
    from planner.scenario import demo_scenario_path, load_scenario
    from planner.scenario.workbook import write_workbook
    folder.mkdir(parents=True, exist_ok=True)
    for name in ("fernhollow-fly.toml", "fernhollow-fly-lifetable.csv"):
        shutil.copy(MODELS / name, folder / name)
    text = demo_scenario_path("fly").read_text().replace("../fernhollow-fly.toml",
                                                        "fernhollow-fly.toml")
    text = re.sub(r"(?m)^horizon_weeks = \d+", f"horizon_weeks = {horizon_weeks}", text)
    scenario = folder / "scenario.toml"
    scenario.write_text(text)
    workbook = folder / "scenario.xlsx"
    write_workbook(load_scenario(scenario), workbook)
    return Base(folder, scenario, folder / "fernhollow-fly.toml",
                folder / "fernhollow-fly-lifetable.csv", workbook)


def _mutate_toml(text: str, rng: random.Random) -> tuple[str, str]:
    lines = text.split("\n")
    kind = rng.choice(("value", "number", "delete", "duplicate", "truncate", "garble",
                       "swap"))
    if kind == "value":
        spots = [i for i, ln in enumerate(lines) if _ASSIGN.match(ln)]
        i = rng.choice(spots)
        m = _ASSIGN.match(lines[i])
        v = rng.choice(TOML_VALUES)
        lines[i] = m.group(1) + v + (m.group(3) or "")
        return "\n".join(lines), f"value of line {i + 1} -> {v[:20]}"
    if kind == "number":
        hits = list(_NUMBER.finditer(text))
        h = rng.choice(hits)
        v = rng.choice(TOML_VALUES)
        return text[:h.start()] + v + text[h.end():], f"number at {h.start()} -> {v[:20]}"
    if kind == "delete":
        i = rng.randrange(len(lines))
        del lines[i]
        return "\n".join(lines), f"line {i + 1} deleted"
    if kind == "duplicate":
        i = rng.randrange(len(lines))
        lines.insert(i, lines[i])
        return "\n".join(lines), f"line {i + 1} duplicated"
    if kind == "truncate":
        k = rng.randrange(len(text))
        return text[:k], f"cut at {k}"
    if kind == "garble":
        k = rng.randrange(len(text))
        junk = rng.choice(("\x00", "\ufeff", "\"", "[", "]", "=", "\\", "\udcff", "{", "\t"))
        return text[:k] + junk + text[k:], f"{junk!r} at {k}"
    i, j = rng.randrange(len(lines)), rng.randrange(len(lines))
    lines[i], lines[j] = lines[j], lines[i]
    return "\n".join(lines), f"lines {i + 1} and {j + 1} swapped"


def _mutate_csv(text: str, rng: random.Random) -> tuple[str, str]:
    lines = text.split("\n")
    data = [i for i, ln in enumerate(lines) if ln and not ln.startswith("#")]
    kind = rng.choice(("cell", "cell", "delete", "duplicate", "truncate", "column"))
    i = rng.choice(data)
    if kind == "cell":
        cells = lines[i].split(",")
        j = rng.randrange(len(cells))
        cells[j] = rng.choice(CSV_VALUES)
        lines[i] = ",".join(cells)
        return "\n".join(lines), f"row {i + 1} cell {j + 1} -> {cells[j][:20]!r}"
    if kind == "delete":
        del lines[i]
        return "\n".join(lines), f"row {i + 1} deleted"
    if kind == "duplicate":
        lines.insert(i, lines[i])
        return "\n".join(lines), f"row {i + 1} duplicated"
    if kind == "truncate":
        k = rng.randrange(len(text))
        return text[:k], f"cut at {k}"
    lines[i] = lines[i] + ",1"
    return "\n".join(lines), f"row {i + 1} has an extra column"


def _mutate_workbook(src: Path, dst: Path, rng: random.Random) -> str:
    import openpyxl
    from planner.scenario.workbook import INSTRUCTIONS
    wb = openpyxl.load_workbook(src)
    sheets = [ws for ws in wb.worksheets if ws.title != INSTRUCTIONS]
    ws = rng.choice(sheets)
    kind = rng.choice(("cell", "cell", "cell", "delete sheet", "rename sheet", "merge",
                       "insert row", "delete row"))
    what = f"sheet {ws.title!r}: {kind}"
    if kind == "cell":
        r = rng.randint(1, ws.max_row + 2)
        c = rng.randint(1, ws.max_column + 1)
        v = rng.choice(CELL_VALUES)
        ws.cell(row=r, column=c).value = v
        what += f" {ws.cell(row=r, column=c).coordinate} -> {str(v)[:20]!r}"
    elif kind == "delete sheet":
        wb.remove(ws)
    elif kind == "rename sheet":
        ws.title = ws.title[:-1] + "x"
    elif kind == "merge":
        r = rng.randint(1, max(ws.max_row, 1))
        ws.merge_cells(start_row=r, start_column=1, end_row=r, end_column=2)
    elif kind == "insert row":
        ws.insert_rows(rng.randint(1, ws.max_row + 1))
    else:
        ws.delete_rows(rng.randint(1, max(ws.max_row, 1)))
    wb.save(dst)
    return what


def mutate(base: Base, category: str, seed: int, folder: Path) -> tuple[Path, str]:
    """Copy the base into ``folder`` with one mutation of the file of ``category``;
    returns (the scenario file to check, what was changed)."""
    rng = random.Random(seed)
    folder.mkdir(parents=True, exist_ok=True)
    for p in (base.scenario, base.colony, base.life_table):
        shutil.copy(p, folder / p.name)
    if category == "workbook":
        out = folder / base.workbook.name
        return out, _mutate_workbook(base.workbook, out, rng)
    target = {"scenario": base.scenario, "colony": base.colony,
              "life table": base.life_table}[category]
    text = target.read_text()
    new, what = (_mutate_csv if category == "life table" else _mutate_toml)(text, rng)
    (folder / target.name).write_bytes(new.encode("utf-8", "surrogateescape"))
    return folder / base.scenario.name, what


def mistakes(what: str) -> int:
    """Independent mistakes a mutation makes: two lines swapped are two misplaced lines."""
    return 2 if "swapped" in what else 1


#: Most stderr error lines one mistake may give.
LINES_PER_MISTAKE = 3


@dataclass
class Outcome:
    """One command-line run."""

    code: int | None        # exit code (None: timed out)
    stderr: str
    seconds: float
    wrote: bool             # the plan file exists after the run

    @property
    def internal(self) -> bool:
        return self.code == 1 or "internal error" in self.stderr

    @property
    def error_lines(self) -> list[str]:
        """The stderr lines that report a mistake (not progress or notes)."""
        return [ln for ln in self.stderr.splitlines() if ln.startswith("error")]


def _alarm(signum, frame):
    raise CaseTimeout()


def run(argv: list[str], timeout: float = 60.0, output: Path | None = None) -> Outcome:
    """``broodline ARGV`` in this process with stdout and stderr captured, stopped after
    ``timeout`` seconds (SIGALRM; the main thread only)."""
    from planner.cli.main import main
    err, out = io.StringIO(), io.StringIO()
    old = signal.signal(signal.SIGALRM, _alarm)
    signal.setitimer(signal.ITIMER_REAL, timeout)
    t0 = time.perf_counter()
    code: int | None
    try:
        with contextlib.redirect_stderr(err), contextlib.redirect_stdout(out):
            code = main(argv)
    except CaseTimeout:
        code = None
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, old)
    return Outcome(code, err.getvalue(), time.perf_counter() - t0,
                   output is not None and output.exists())
