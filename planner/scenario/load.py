"""Reading colony models and scenarios from TOML (and dispatching workbooks), with
errors that name the file, the place, the value and the reason.

Relative paths inside a file (the colony model of a scenario, the life table of a colony
model) resolve against that file's folder.
"""

from __future__ import annotations

import tomllib
import typing
from pathlib import Path

from pydantic import BaseModel, ValidationError

from planner.csvtable import closest, read_csv_table
from planner.demography.lifetable import MAX_COLONY_MX, validate_life_table
from planner.errors import InputError, InputErrors
from planner.fileio import read_text
from planner.scenario.schema import ColonyModel, Scenario

__all__ = ["load_colony", "load_scenario", "read_toml", "validate", "colony_raw_from_file",
           "unknown_keys", "format_loc"]


# -- generic helpers -------------------------------------------------------------------

def read_toml(path: Path) -> dict:
    """Parse a TOML file; syntax errors and missing files are one-line InputErrors."""
    text = read_text(path, "TOML")
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"not valid TOML: {exc}", source=path.name) from None
    except RecursionError:
        raise InputError("not valid input: arrays or tables nested too deeply for the "
                         "parser (no field of a scenario nests more than three levels)",
                         source=path.name) from None


def _model_of(annotation) -> tuple[str, type[BaseModel]] | None:
    """('model' | 'list', Model) if an annotation holds a pydantic model."""
    origin = typing.get_origin(annotation)
    if isinstance(annotation, type) and issubclass(annotation, BaseModel):
        return "model", annotation
    if origin is typing.Annotated:
        return _model_of(typing.get_args(annotation)[0])
    if origin in (list, tuple):
        inner = _model_of(typing.get_args(annotation)[0]) if typing.get_args(annotation) else None
        return ("list", inner[1]) if inner else None
    for arg in typing.get_args(annotation) if origin is not None else ():
        found = _model_of(arg)
        if found:
            return found
    return None


def unknown_keys(model: type[BaseModel], raw, loc: tuple = ()) -> list[tuple[tuple, str, str]]:
    """Every key of ``raw`` that ``model`` does not know: (loc, key, suggestion)."""
    if not isinstance(raw, dict):
        return []
    out = []
    fields = model.model_fields
    names = list(fields)
    if model.__name__ == "Weekly":
        return out  # weekday keys are normalised by the model itself
    for key, value in raw.items():
        if key not in fields:
            out.append((loc, key, closest(str(key), names) or ""))
            continue
        found = _model_of(fields[key].annotation)
        if not found:
            continue
        kind, sub = found
        if kind == "model":
            out += unknown_keys(sub, value, loc + (key,))
        elif isinstance(value, list):
            for i, item in enumerate(value):
                out += unknown_keys(sub, item, loc + (key, i))
    return out


def format_loc(loc: tuple) -> str:
    """('orders', 2, 'weekly_volume') -> 'orders[3].weekly_volume' (1-based rows)."""
    text = ""
    for part in loc:
        if isinstance(part, int):
            text += f"[{part + 1}]"
        else:
            text += ("." if text else "") + str(part)
    return text or "(top level)"


_UNION_TAGS = ("int", "float", "str", "bool", "date", "list[", "literal[", "function-",
               "json-or-python", "lax-or-strict", "is-instance", "tagged-union", "Weekly",
               "InlineLifeTable", "constrained-")


def _clean_loc(loc: tuple) -> tuple:
    return tuple(p for p in loc if isinstance(p, int) or not str(p).startswith(_UNION_TAGS))


def _field_info(model: type[BaseModel], loc: tuple):
    """The pydantic FieldInfo at ``loc`` inside ``model``, or None."""
    info = None
    current = model
    for part in loc:
        if isinstance(part, int):
            continue
        if current is None or part not in current.model_fields:
            return None
        info = current.model_fields[part]
        found = _model_of(info.annotation)
        current = found[1] if found else None
    return info


def _unit_of(model, loc) -> str:
    info = _field_info(model, loc)
    if info is None:
        return ""
    for meta in [info] + list(getattr(info, "metadata", [])):
        extra = getattr(meta, "json_schema_extra", None)
        if isinstance(extra, dict) and "unit" in extra:
            return f" [{extra['unit']}]"
    return ""


def _message(err: dict, unit: str = "") -> str:
    """A plain-words message for one pydantic error."""
    kind = err.get("type", "")
    ctx = err.get("ctx") or {}
    msg = err.get("msg", "invalid")
    for prefix in ("Value error, ", "Assertion failed, "):
        if msg.startswith(prefix):
            return msg[len(prefix):]
    plain = {
        "missing": "this field is required",
        "greater_than_equal": f"must be at least {ctx.get('ge')}{unit}",
        "greater_than": f"must be more than {ctx.get('gt')}{unit}",
        "less_than_equal": f"must be at most {ctx.get('le')}{unit}",
        "less_than": f"must be less than {ctx.get('lt')}{unit}",
        "int_parsing": f"a whole number is needed{unit}",
        "int_from_float": f"a whole number is needed{unit}",
        "int_type": f"a whole number is needed{unit}",
        "float_parsing": f"a number is needed{unit}",
        "float_type": f"a number is needed{unit}",
        "finite_number": f"must be a finite number (not inf or nan){unit}",
        "bool_parsing": "true or false is needed",
        "bool_type": "true or false is needed",
        "string_type": "a text is needed",
        "date_parsing": "a date is needed (YYYY-MM-DD)",
        "date_from_datetime_parsing": "a date is needed (YYYY-MM-DD)",
        "date_type": "a date is needed (YYYY-MM-DD)",
        "list_type": "a list is needed, e.g. [1, 2]",
        "dict_type": "a table is needed",
        "model_type": "a table is needed",
        "model_attributes_type": "a table is needed",
        "too_short": f"needs at least {ctx.get('min_length')} entr"
                     f"{'y' if ctx.get('min_length') == 1 else 'ies'}",
        "string_too_short": "cannot be empty",
        "literal_error": f"must be one of {ctx.get('expected')}",
    }
    return plain.get(kind, msg)


def validate(model: type[BaseModel], raw: dict, source: str, locate=None):
    """Validate ``raw`` into ``model``; every problem becomes one line of an InputErrors.

    Cross-field validators report several problems at once, one per line of their
    message. Unknown keys are found first, with the closest valid name suggested.

    Parameters
    ----------
    locate : callable(loc) -> str, optional
        Turns a field location into the place shown in messages (a workbook says sheet,
        row and column); default: the field path.
    """
    grouped = locate is None  # a TOML file: one line per table for keys and missing fields
    locate = locate or format_loc
    problems: list[InputError] = []
    unknown: dict[tuple, list[str]] = {}
    for loc, key, hint in unknown_keys(model, raw):
        unknown.setdefault(tuple(loc or ()), []).append(
            repr(key) + (f" (did you mean {hint!r}?)" if hint else ""))
    for loc, keys in unknown.items():
        why = (f"unknown key {keys[0]}" if len(keys) == 1 or not grouped
               else "unknown keys " + ", ".join(keys))
        if grouped or len(keys) == 1:
            problems.append(InputError(why, source=source, place=locate(loc) if loc else None))
        else:
            problems.extend(InputError(f"unknown key {k}", source=source,
                                       place=locate(loc) if loc else None) for k in keys)
    missing: dict[tuple, list[str]] = {}
    obj = None
    try:
        obj = model.model_validate(raw)
    except ValidationError as exc:
        by_loc: dict[tuple, InputError] = {}
        for err in exc.errors():
            if err.get("type") == "extra_forbidden":
                continue
            loc = _clean_loc(tuple(err.get("loc", ())))
            place = locate(loc) if loc else None
            parts = _message(err, _unit_of(model, loc)).split("\n")
            if len(parts) > 1:
                problems.extend(InputError(p, source=source, place=place) for p in parts)
                continue
            if grouped and err.get("type") == "missing" and loc:
                missing.setdefault(loc[:-1], []).append(str(loc[-1]))
                continue
            value = err.get("input")
            show = loc and err.get("type") != "missing" and not isinstance(value, (dict, list))
            if loc in by_loc:  # the branches of a union: one line, all reasons
                old = by_loc[loc]
                if parts[0] not in old.why:
                    merged = InputError(old.why + "; or " + parts[0], source=source,
                                        place=old.place, **({"value": old.value}
                                                            if old.value is not InputError._NOVALUE
                                                            else {}))
                    problems[problems.index(old)] = merged
                    by_loc[loc] = merged
                continue
            e = InputError(parts[0], source=source, place=place,
                           **({"value": value} if show else {}))
            by_loc[loc] = e
            problems.append(e)
        for parent, names in missing.items():
            # a file cut short or a table moved is one mistake, however many fields it
            # leaves out: one line per table
            place = locate(parent) if parent else None
            if len(names) == 1:
                problems.append(InputError("this field is required", source=source,
                                           place=locate(parent + (names[0],))))
            else:
                shown = ", ".join(names[:8]) + (f" and {len(names) - 8} more"
                                                if len(names) > 8 else "")
                problems.append(InputError(
                    f"{len(names)} required fields are missing: {shown} (is the file "
                    "complete, each key under its own [table]?)", source=source,
                    place=place))
        if not problems:
            raise InputError(str(exc), source=source) from None
    if problems:
        raise InputErrors(problems) if len(problems) > 1 else problems[0]
    return obj


# -- colony models ---------------------------------------------------------------------

def _read_life_table_file(path: Path) -> dict:
    table = read_csv_table(path, required=["age", "lx", "mx"])
    age, lx, mx = table.column("age"), table.column("lx"), table.column("mx")
    validate_life_table(age, lx, mx, source=table.source, rows=table.lines,
                        max_mx=MAX_COLONY_MX)
    return {"age": age, "lx": lx, "mx": mx}


def _found(target: Path, source: str, place: str, value: str, what: str,
           relative_to: str) -> None:
    """Refuse a referenced file that is missing or whose name the system refuses; the
    message shows long names shortened."""
    from planner.fileio import short_name
    try:
        ok = target.exists()
    except OSError as exc:  # e.g. the name is too long
        raise InputError(f"the {what} cannot be opened ({exc.strerror or type(exc).__name__})",
                         source=source, place=place, value=value) from None
    if not ok:
        raise InputError(f"the {what} {short_name(value)!r} was not found (looked in "
                         f"{short_name(target.parent)}); paths are relative to the "
                         f"{relative_to}", source=source, place=place, value=value)


def colony_raw_from_file(path: Path) -> dict:
    """A colony model file's content with its life table file read in."""
    raw = read_toml(path)
    lt = raw.get("life_table")
    if isinstance(lt, str):
        target = (path.parent / lt)
        _found(target, path.name, "life_table", lt, "life table file", "colony model file")
        raw["life_table"] = _read_life_table_file(target)
    return raw


def load_colony(path: str | Path) -> ColonyModel:
    """Read and validate a colony model (TOML)."""
    path = Path(path)
    raw = colony_raw_from_file(path)
    return validate(ColonyModel, raw, path.name)


# -- scenarios -------------------------------------------------------------------------

def scenario_raw_from_toml(path: Path) -> dict:
    """A scenario file's content with its colony model (and life table) read in."""
    raw = read_toml(path)
    colony = raw.get("colony")
    if isinstance(colony, str):
        target = path.parent / colony
        _found(target, path.name, "colony", colony, "colony model", "scenario file")
        raw["colony"] = colony_raw_from_file(target)
    elif isinstance(colony, dict) and isinstance(colony.get("life_table"), str):
        target = path.parent / colony["life_table"]
        _found(target, path.name, "colony.life_table", colony["life_table"],
               "life table file", "scenario file")
        colony["life_table"] = _read_life_table_file(target)
    return raw


def load_scenario(path: str | Path) -> Scenario:
    """Read and validate a scenario: a TOML file, or an input workbook (.xlsx)."""
    path = Path(path)
    if path.suffix.lower() in (".xlsx", ".xlsm"):
        from planner.scenario.workbook import read_workbook
        return read_workbook(path)
    if path.suffix.lower() != ".toml":
        raise InputError("a scenario is a .toml file or an input workbook (.xlsx)",
                         source=str(path))
    raw = scenario_raw_from_toml(path)
    return validate(Scenario, raw, path.name)
