"""The one exceptions module of Broodline.

Every error that a user can cause by what they hand Broodline (a file, a value, an
option) is a :class:`BroodlineError`. The command line prints its message, one line
per problem, on stderr and exits with code 2; it never shows a traceback for them.

A message names, where they are known, the *source* (file, sheet or table), the
*place* (row, column, field path), the *value* and *why* it is wrong, and, where one
exists, the *fix*::

    lifetable.csv: row 5, column 'lx': value 1.2: lx is a survival probability and
    must lie in [0, 1] (divide counts of survivors by the number of eggs)
"""

from __future__ import annotations

from collections.abc import Iterable

__all__ = [
    "BroodlineError",
    "InputError",
    "InputErrors",
    "DemographyError",
    "SolverError",
]


#: Longest value or file name shown in a message [characters]; longer ones are
#: shortened in the middle (a message never repeats a 100 kB name).
MAX_VALUE_CHARS = 120


def shorten(text: str, limit: int = MAX_VALUE_CHARS) -> str:
    """``text`` as shown in a message: cut in the middle when over ``limit`` characters,
    with its full length said."""
    if len(text) <= limit:
        return text
    keep = (limit - 5) // 2
    return f"{text[:keep]} ... {text[-keep:]} ({len(text)} characters)"


def _fmt_value(value: object) -> str:
    return shorten(repr(value) if isinstance(value, str) else str(value))


class BroodlineError(Exception):
    """Base class of every error a user can cause; the CLI exits with code 2."""

    def lines(self) -> list[str]:
        """The message as one line per independent problem."""
        return [str(self)]


class InputError(BroodlineError):
    """A malformed input: one file, one place, one value, one reason.

    Parameters
    ----------
    why : str
        What is wrong, in the user's terms, ideally with the fix.
    source : str, optional
        File name (or sheet, or table) the value came from.
    place : str, optional
        Row, column or field path inside the source, e.g. ``"row 5, column 'lx'"``.
    value : object, optional
        The offending value, shown with ``repr`` for text.
    """

    _NOVALUE = object()

    def __init__(self, why: str, *, source: str | None = None, place: str | None = None,
                 value: object = _NOVALUE):
        self.why = why
        self.source = source
        self.place = place
        self.value = value
        super().__init__(self._compose())

    def _compose(self) -> str:
        head = []
        if self.source:
            head.append(str(self.source))
        where = []
        if self.place:
            where.append(self.place)
        if self.value is not InputError._NOVALUE:
            where.append(f"value {_fmt_value(self.value)}")
        if where:
            head.append(", ".join(where))
        return ": ".join(head + [self.why])


class InputErrors(BroodlineError):
    """Several independent input errors reported together."""

    def __init__(self, errors: Iterable[InputError]):
        self.errors = list(errors)
        super().__init__("\n".join(str(e) for e in self.errors))

    def lines(self) -> list[str]:
        return [str(e) for e in self.errors]


class DemographyError(BroodlineError):
    """The data are well formed but the biology does not allow what was asked
    (e.g. a harvest from a colony whose net reproductive rate is at most 1)."""


class SolverError(BroodlineError):
    """The solver is missing, or failed in a way the user can act on."""


class NoPlanError(SolverError):
    """A solve that an answer needs ended with no plan (nothing found within the time
    limit, or an infeasible start state); the CLI exits with code 3."""

    exit_code = 3
