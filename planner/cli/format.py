"""Human and JSON output of the command line: aligned tables with units, clean JSON."""

from __future__ import annotations

import datetime as _dt
import json
import math
from collections.abc import Iterable, Sequence

import sys

__all__ = ["num", "table", "kv_table", "to_jsonable", "dumps"]


def _is_number(v) -> bool:
    return isinstance(v, _types("number")) and not isinstance(v, _types("bool"))


def num(value, digits: int = 4) -> str:
    """A number with ``digits`` significant digits; whole numbers without decimals;
    inf and NaN spelled out."""
    if value is None:
        return "-"
    if isinstance(value, _types("bool")):
        return "yes" if value else "no"
    if not _is_number(value):
        return str(value)
    v = float(value)
    if math.isnan(v):
        return "n/a"
    if math.isinf(v):
        return "never" if v > 0 else "-inf"
    if v == int(v) and abs(v) < 1e12:
        return f"{int(v):,}"
    return _sig(v, digits)


def _sig(v: float, digits: int) -> str:
    """``digits`` significant digits, trailing zeros kept; scientific when tiny or huge."""
    if v == 0:
        return "0"
    if abs(v) >= 1e9 or abs(v) < 1e-4:
        return f"{v:.{digits - 1}e}"
    return f"{v:,.{_decimals(abs(v), digits)}f}"


def _decimals(magnitude: float, digits: int) -> int:
    if magnitude == 0:
        return 0
    return int(min(max(digits - 1 - math.floor(math.log10(magnitude)), 0), 8))


def _column_format(values: list, digits: int) -> list[str]:
    """Numbers of one column with a common number of decimals."""
    nums = [float(v) for v in values if _is_number(v) and math.isfinite(float(v))]
    if not nums or all(v == int(v) for v in nums):
        return [num(v, digits) for v in values]
    mags = [abs(v) for v in nums if v != 0]
    if mags and max(mags) / min(mags) >= 10:
        # mixed scales: significant digits per cell
        return [_sig(float(v), digits) if _is_number(v) and math.isfinite(float(v))
                else num(v, digits) for v in values]
    dec = _decimals(max(abs(v) for v in nums), digits)
    out = []
    for v in values:
        if not _is_number(v) or not math.isfinite(float(v)):
            out.append(num(v, digits))
            continue
        text = f"{float(v):,.{dec}f}"
        if float(v) != 0 and float(text.replace(",", "")) == 0:
            text = f"{float(v):.{digits - 1}e}"
        out.append(text)
    return out


def table(rows: Iterable[Sequence], headers: Sequence[str], *, digits: int = 4,
          title: str | None = None) -> str:
    """An aligned text table; text left-aligned, numbers right-aligned with the
    same number of decimals down a column."""
    rows = [list(r) for r in rows]
    ncol = len(headers)
    cols = [[r[j] for r in rows] for j in range(ncol)]
    numeric = [bool(c) and all(_is_number(v) or v is None for v in c) for c in cols]
    text_cols = [_column_format(c, digits) if numeric[j] else
                 [v if isinstance(v, str) else num(v, digits) for v in c]
                 for j, c in enumerate(cols)]
    body = [[text_cols[j][i] for j in range(ncol)] for i in range(len(rows))]
    widths = [max([len(h)] + [len(r[j]) for r in body]) for j, h in enumerate(headers)]

    def fmt(cells):
        return "  ".join(c.rjust(w) if numeric[j] else c.ljust(w)
                         for j, (c, w) in enumerate(zip(cells, widths))).rstrip()

    out = [title] if title else []
    out.append(fmt(list(headers)))
    out.append("  ".join("-" * w for w in widths))
    out.extend(fmt(r) for r in body)
    return "\n".join(out)


def kv_table(items: Iterable[tuple[str, object, str]], *, digits: int = 4,
             title: str | None = None) -> str:
    """A quantity / value / unit table: numbers right-aligned, text left-aligned."""
    rows = [(name, value if isinstance(value, str) else num(value, digits), unit,
             not isinstance(value, str)) for name, value, unit in items]
    w0 = max([len("quantity")] + [len(r[0]) for r in rows])
    wn = max([len("value")] + [len(r[1]) for r in rows if r[3]])
    w1 = max([wn] + [len(r[1]) for r in rows])
    out = [title] if title else []
    out.append(f"{'quantity'.ljust(w0)}  {'value'.rjust(wn).ljust(w1)}  unit")
    out.append(f"{'-' * w0}  {'-' * w1}  ----")
    for n, v, u, is_num in rows:
        shown = v.rjust(wn).ljust(w1) if is_num else v.ljust(w1)
        out.append(f"{n.ljust(w0)}  {shown}  {u}".rstrip())
    return "\n".join(out)


def to_jsonable(obj):
    """Plain JSON types: numpy scalars and arrays unpacked, inf and NaN as null."""
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(v) for v in obj]
    if isinstance(obj, _types("array")):
        return [to_jsonable(v) for v in obj.tolist()]
    if isinstance(obj, _types("bool")):
        return bool(obj)
    if isinstance(obj, _types("int")):
        return int(obj)
    if isinstance(obj, _types("float")):
        v = float(obj)
        return v if math.isfinite(v) else None
    if isinstance(obj, (_dt.date, _dt.datetime)):
        return obj.isoformat()
    if hasattr(obj, "__fspath__"):
        return str(obj)
    return obj


def dumps(obj) -> str:
    """One JSON object, valid for strict parsers (no NaN or Infinity)."""
    return json.dumps(to_jsonable(obj), indent=2, allow_nan=False, ensure_ascii=False)


def checked(convert, ok, rule: str):
    """An argparse type: convert the text, then check it against ``ok``; the message
    reads ``'<text>' is not <rule>``."""
    import argparse

    def parse(text: str):
        try:
            value = convert(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text!r} is not {rule}") from None
        if not ok(value):
            raise argparse.ArgumentTypeError(f"{text!r} is not {rule}")
        return value
    return parse


#: Help of the arguments every command shares.
SCENARIO_HELP = "scenario file (.toml, or an input workbook .xlsx)"
JSON_HELP = "print one JSON object on stdout instead of tables"


def _types(kind: str) -> tuple:
    """Python types of a kind, with numpy's when numpy is loaded (if it is not, no value
    can be a numpy one: the command line does not load numpy to print its help)."""
    np = sys.modules.get("numpy")
    base = {"number": (int, float), "bool": (bool,), "int": (int,), "float": (float,),
            "array": ()}[kind]
    if np is None:
        return base
    extra = {"number": (np.integer, np.floating), "bool": (np.bool_,), "int": (np.integer,),
             "float": (np.floating,), "array": (np.ndarray,)}[kind]
    return base + extra


def load_scenario(path):
    """:func:`planner.scenario.load_scenario`, loaded when a command runs (not when the
    parser is built)."""
    from planner.scenario import load_scenario as load
    return load(path)


def demo_scenario_path(which: str = "fly"):
    """:func:`planner.scenario.demo_scenario_path`, loaded on use."""
    from planner.scenario import demo_scenario_path as where
    return where(which)
