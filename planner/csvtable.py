"""Reading small numeric CSV tables with errors that point at the line.

Used by every CSV reader of Broodline (life tables, stage matrices, cohort records).
Lines that are empty or start with ``#`` are skipped (a ``#`` line may carry
directives for the reader, returned in :attr:`CsvTable.comments`). Row numbers in error
messages are the line numbers of the file as an editor shows them (header = line 1
when there are no comment lines before it).
"""

from __future__ import annotations

import csv
import difflib
import io
import math
from dataclasses import dataclass, field
from pathlib import Path

from planner.errors import InputError, InputErrors
from planner.fileio import read_text

__all__ = ["CsvTable", "read_csv_table", "parse_number", "closest"]


def closest(word: str, choices: list[str]) -> str | None:
    """The closest valid name to ``word`` (for 'did you mean' hints), or None."""
    hits = difflib.get_close_matches(word, choices, n=1, cutoff=0.6)
    return hits[0] if hits else None


def parse_number(text: str, *, source: str, place: str, integer: bool = False) -> float:
    """Parse a finite number (or a whole number) or raise :class:`InputError`."""
    raw = text.strip()
    if raw == "":
        raise InputError("the cell is empty; a number is needed here", source=source, place=place)
    try:
        value = float(raw)
    except ValueError:
        raise InputError("text where a number belongs", source=source, place=place, value=raw) from None
    if not math.isfinite(value):
        raise InputError("the number must be finite", source=source, place=place, value=raw)
    if integer and value != int(value):
        raise InputError("a whole number is needed here", source=source, place=place, value=raw)
    return value


@dataclass
class CsvTable:
    """A parsed CSV: header, rows of stripped text cells, and their line numbers."""

    source: str
    header: list[str]
    rows: list[list[str]]
    lines: list[int]
    comments: list[str] = field(default_factory=list)

    def column(self, name: str, *, integer: bool = False) -> list[float]:
        """The numbers of one column; every bad cell is reported at once."""
        j = self.header.index(name)
        values, errors = [], []
        for cells, line in zip(self.rows, self.lines):
            try:
                values.append(parse_number(cells[j], source=self.source,
                                           place=f"row {line}, column '{name}'", integer=integer))
            except InputError as exc:
                errors.append(exc)
        if errors:
            raise errors[0] if len(errors) == 1 else InputErrors(errors)
        return values


def read_csv_table(path: str | Path, *, required: list[str] | None = None,
                   optional: list[str] | None = None, text: str | None = None,
                   exact_first: str | None = None) -> CsvTable:
    """Read a CSV file and check its header.

    Parameters
    ----------
    path : str or Path
        The file (its name is used in messages).
    required, optional : list of str, optional
        Column names that must / may appear (any order, names are case-insensitive and
        stripped). Any other column is an error, with the closest valid name suggested.
        When both are None, the header is returned unchecked.
    text : str, optional
        The file's content, if already read.
    exact_first : str, optional
        The first header cell must be this word (used by the stage-matrix reader).
    """
    path = Path(path)
    source = path.name
    if text is None:
        text = read_text(path, "CSV", "is it a spreadsheet? save it as CSV")
    comments: list[str] = []
    header: list[str] | None = None
    header_line = 0
    rows: list[list[str]] = []
    lines: list[int] = []
    reader = csv.reader(io.StringIO(text))
    try:
        for cells in reader:
            line = reader.line_num
            stripped = [c.strip() for c in cells]
            if not any(stripped):
                continue
            if stripped[0].startswith("#"):
                comments.append(",".join(cells).lstrip("#").strip())
                continue
            if header is None:
                header = [c.lower() for c in stripped]
                header_line = line
                continue
            rows.append(stripped)
            lines.append(line)
    except csv.Error as exc:
        raise InputError(f"not a readable CSV file ({exc})", source=source) from None
    if header is None:
        raise InputError("the file is empty: it needs a header row and at least one data row",
                         source=source)
    if exact_first is not None and header[0] != exact_first:
        raise InputError(f"the first header cell must be '{exact_first}'", source=source,
                         place=f"row {header_line}, column 1", value=header[0])
    if required is not None or optional is not None:
        required = [c.lower() for c in (required or [])]
        allowed = required + [c.lower() for c in (optional or [])]
        if required and not any(name in allowed for name in header):
            # no known column at all: the header line is missing (or is not the first
            # line that is not a comment); one mistake, one line
            raise InputError(f"this row should be the header ({', '.join(required)}) "
                             f"but holds {','.join(header)[:60]!r}: put the header line "
                             "first", source=source, place=f"row {header_line}")
        errors = []
        seen = set()
        for name in header:
            if name in seen:
                errors.append(InputError("the column appears twice", source=source,
                                         place=f"row {header_line}", value=name))
            seen.add(name)
            if name not in allowed:
                hint = closest(name, allowed)
                why = "unknown column" + (f" (did you mean '{hint}'?)" if hint else "")
                why += f"; the columns are {', '.join(allowed)}"
                errors.append(InputError(why, source=source, place=f"row {header_line}", value=name))
        for name in required:
            if name not in header:
                errors.append(InputError(f"missing column '{name}'; the header must name "
                                         f"{', '.join(required)}", source=source,
                                         place=f"row {header_line}"))
        if errors:
            raise errors[0] if len(errors) == 1 else InputErrors(errors)
    if not rows:
        raise InputError("the file has a header but no data rows", source=source)
    width = len(header)
    for cells, line in zip(rows, lines):
        if len(cells) != width:
            raise InputError(f"the row has {len(cells)} cells but the header has {width}",
                             source=source, place=f"row {line}")
    return CsvTable(source=source, header=header, rows=rows, lines=lines, comments=comments)
