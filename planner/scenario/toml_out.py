"""Writing scenarios and colony models back to TOML (no third-party writer needed).

``dump_toml(scenario)`` writes every field, with the colony model and its life table
inline, so that ``load -> dump -> load`` gives the same :class:`Scenario`.
"""

from __future__ import annotations

import datetime as dt
import json
import math
import re

from pydantic import BaseModel

__all__ = ["dump_toml", "to_toml_text"]

_BARE = re.compile(r"^[A-Za-z0-9_-]+$")


def _key(k: str) -> str:
    return k if _BARE.match(k) else json.dumps(k)


def _scalar(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        text = repr(v)
        return text if any(c in text for c in ".en") else text + ".0"
    if isinstance(v, dt.datetime):
        return v.isoformat()
    if isinstance(v, dt.date):
        return v.isoformat()
    if isinstance(v, str):
        return json.dumps(v, ensure_ascii=False)
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_scalar(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{ " + ", ".join(f"{_key(k)} = {_scalar(x)}" for k, x in v.items()) + " }"
    raise TypeError(f"cannot write {type(v).__name__} to TOML")


def _is_table(v) -> bool:
    return isinstance(v, dict) and not _inline(v)


_WEEKDAYS = {"mon", "tue", "wed", "thu", "fri", "sat", "sun"}


def _inline(v) -> bool:
    """Weekday values ({mon = .., ..., sun = ..}) are written inline."""
    return isinstance(v, dict) and bool(v) and set(v) <= _WEEKDAYS


def _is_table_array(v) -> bool:
    return isinstance(v, list) and bool(v) and all(isinstance(x, dict) for x in v)


def _emit(d: dict, prefix: str, out: list[str]) -> None:
    for k, v in d.items():
        if not (_is_table(v) or _is_table_array(v)):
            out.append(f"{_key(k)} = {_scalar(v)}")
    for k, v in d.items():
        path = f"{prefix}.{_key(k)}" if prefix else _key(k)
        if _is_table(v):
            out.append("")
            out.append(f"[{path}]")
            _emit(v, path, out)
        elif _is_table_array(v):
            for item in v:
                out.append("")
                out.append(f"[[{path}]]")
                _emit(item, path, out)


def to_toml_text(data: dict, header: str | None = None) -> str:
    """TOML text of a plain dict (scalars, lists, dates, tables, arrays of tables)."""
    out: list[str] = []
    if header:
        out += [f"# {line}" if line else "#" for line in header.splitlines()]
    _emit(data, "", out)
    return "\n".join(out).strip() + "\n"


def dump_toml(model: BaseModel, header: str | None = None) -> str:
    """TOML text of a scenario or colony model (every field, None left out)."""
    return to_toml_text(model.model_dump(mode="python", exclude_none=True), header)
