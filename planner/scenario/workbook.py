"""The input workbook: a scenario as an ``.xlsx`` file for people who plan in spreadsheets.

The layout is generated from the schema (:mod:`planner.scenario.schema`): the table
:data:`SHEETS` only says which part of a :class:`~planner.scenario.schema.Scenario` goes
on which sheet; the rows and columns of each sheet come from the pydantic
``model_fields`` of that part, so a field added to the schema appears in the workbook.

Four kinds of sheet:

- **field sheets** (a single model, e.g. *Plan*): columns ``field, value, unit,
  description``, one row per field. Nested models are flattened with dotted names
  (``rearing.harvest_ages``); values by weekday get one row per day (``diet_kg.Mon``).
- **row sheets** (a list of models, e.g. *Orders*): one row per item, one column per
  field, each header carrying its unit in brackets (``weekly volume [million/week]``).
- **column sheets** (a model of parallel lists: the *Life table*): one row per index.
- **list sheets** (a list of plain values: the *Holidays*): one value per row.

Cell conventions: an empty cell means "not given" (the field's default); dates are real
date cells; yes/no cells hold ``yes`` or ``no``; lists of numbers or names are
comma-separated text (``24, 25, 26``). Reading validates with
:func:`planner.scenario.load.validate`, so a workbook and the equivalent TOML give the
same scenario and the same checks; every message names the sheet, row and column.

Numbers are written by openpyxl with 16 significant digits (``'%.16g'``): a float that
needs 17 digits to be exact comes back as the nearest 16-digit float. Values typed by a
person (and every value of the demo) round-trip exactly.
"""

from __future__ import annotations

import datetime as dt
import math
import re
import types
import typing
from dataclasses import dataclass
from pathlib import Path
from typing import Literal

from pydantic import BaseModel
from pydantic.fields import FieldInfo

from planner.csvtable import closest
from planner.errors import InputError, InputErrors
from planner.fileio import save_workbook
from planner.scenario.load import format_loc, validate
from planner.scenario.schema import TASKS, WEEKDAYS, Scenario, Weekly

__all__ = ["write_workbook", "write_template", "read_workbook", "SHEETS", "SheetSpec",
           "INSTRUCTIONS"]

INSTRUCTIONS = "Instructions"
#: Fixed workbook timestamps, so that the same scenario gives the same file content.
_STAMP = dt.datetime(2000, 1, 1)
#: Table sheets get data validation down to this row (or further, if they hold more).
_TABLE_ROWS = 500
_DATE_FORMAT = "yyyy-mm-dd"
_DAY_LABEL = {d: d.capitalize() for d in WEEKDAYS}
_FIELD_HEADERS = ("field", "value", "unit", "description")
_EMPTY = object()   # a cell that gives no value


# -- layout ----------------------------------------------------------------------------

@dataclass(frozen=True)
class SheetSpec:
    """Where one part of a scenario goes.

    Attributes
    ----------
    title : str
        Sheet name (at most 31 characters).
    path : tuple of str
        Field path of the part inside :class:`Scenario` (``()`` for its own fields).
    kind : {'fields', 'rows', 'columns', 'list'}
        Layout (see the module docstring).
    howto : str
        One line for the Instructions sheet: what goes there.
    headers : tuple of str
        Column headers of a field sheet.
    """

    title: str
    path: tuple[str, ...]
    kind: Literal["fields", "rows", "columns", "list"]
    howto: str
    headers: tuple[str, str, str, str] = _FIELD_HEADERS


SHEETS: tuple[SheetSpec, ...] = (
    SheetSpec("Scenario", (), "fields", "Name of this planning scenario and free notes."),
    SheetSpec("Colony", ("colony",), "fields",
              "The colony model of the strain: stage ages, female fraction, how it is reared, "
              "the harvest and discard ages the facility allows, the product yield. Lists "
              "such as rearing.harvest_ages are comma-separated text: 24, 25, 26."),
    SheetSpec("Life table", ("colony", "life_table"), "columns",
              "The daily life table, one row per day of age from 0 with no gaps: survival lx "
              "from egg laying and eggs per living female per day mx (see mx_counts on the "
              "Colony sheet)."),
    SheetSpec("Facility", ("facility",), "fields",
              "Facility-wide limits (rooms are on the next two sheets); leave pupal_holding "
              "empty if it does not limit."),
    SheetSpec("Adult rooms", ("facility", "adult_rooms"), "rows",
              "One row per adult room and the oviposition cages it can hold."),
    SheetSpec("Larval rooms", ("facility", "larval_rooms"), "rows",
              "One row per larval room and the larval trays its racks can hold."),
    SheetSpec("Kitchen", ("kitchen",), "fields",
              "Diet the kitchen can mix on each weekday (0 on a closed day) and on a holiday."),
    SheetSpec("Crews", ("crews",), "rows",
              "One row per crew: regular hours on each weekday and on a holiday, the overtime "
              "limit, and its tasks as comma-separated names or 'all'. Each task belongs to "
              "exactly one crew. Tasks: " + ", ".join(TASKS) + "."),
    SheetSpec("Labour", ("labour",), "fields",
              "Hours of work per unit of each task; the unit column says per what.",
              headers=("task", "hours per unit", "unit", "description")),
    SheetSpec("Costs", ("costs",), "fields",
              "Variable costs, the shortfall price and the fixed regular crew cost, all in "
              "the currency on the first row."),
    SheetSpec("Calendar", ("calendar",), "fields",
              "Plan start date, the weekdays on which pupae ship (yes or no for each day) and "
              "whether they may ship on holidays."),
    SheetSpec("Holidays", ("calendar", "holidays"), "list",
              "One date per row, or a range FIRST..LAST as text (2027-08-02..2027-08-08): days "
              "with holiday crew hours and holiday kitchen capacity."),
    SheetSpec("Orders", ("orders",), "rows",
              "One row per standing weekly order. First and last week: a plan week number "
              "(1 = the week that starts on the plan start) or a date in that week; leave "
              "the last week empty for an open-ended order."),
    SheetSpec("Start", ("start",), "fields",
              "How the plan starts: either a standard week volume (as if the routine for "
              "that weekly volume had been running), or the batches on the Start cages and "
              "Start trays sheets, not both."),
    SheetSpec("Start cages", ("start", "cages"), "rows",
              "Batches of oviposition cages loaded before the plan starts (leave empty when "
              "starting from the standard week)."),
    SheetSpec("Start trays", ("start", "trays"), "rows",
              "Batches of larval trays seeded before the plan starts."),
    SheetSpec("Expansion", ("expansion",), "rows",
              "One row per addition the facility may buy (used by the expansion planner). "
              "Leave all seven diet or crew-hour cells of a row empty if it adds none."),
    SheetSpec("Plan", ("plan",), "fields", "Horizon and solver settings."),
)

#: Fields written as one yes/no cell per weekday instead of a list of day names.
WEEKDAY_SETS = {("calendar", "shipping_days")}

_CLAIMED = {s.path for s in SHEETS}


@dataclass(frozen=True)
class Slot:
    """One cell of a field sheet row, or one column of a table sheet.

    Attributes
    ----------
    path : tuple of str
        Field path relative to the sheet's model (or to one row's model).
    kind : str
        How the cell is written and read: 'number', 'integer', 'text', 'date', 'bool',
        'choice', 'weekref', 'list' (comma-separated numbers), 'names' (comma-separated
        names or a keyword) or 'flag' (a yes/no weekday of a weekday set).
    unit : str
        Unit shown in the header or the unit column.
    description : str
        Meaning of the field, from the schema.
    required : bool
        Whether the schema needs a value (no default).
    choices : tuple
        Allowed values of a 'choice' (or the keywords of a 'names') slot.
    label : str
        Name on a field sheet (``rearing.harvest_ages``, ``diet_kg.Mon``).
    header : str
        Column header on a table sheet (``weekly volume [million/week]``).
    """

    path: tuple[str, ...]
    kind: str
    unit: str
    description: str
    required: bool
    choices: tuple = ()
    label: str = ""
    header: str = ""


# -- reading the schema ----------------------------------------------------------------

def _flatten_annotation(annotation) -> tuple[list, list[FieldInfo]]:
    """The types of a (possibly Annotated, Optional or union) annotation, None left out,
    and the FieldInfo metadata found inside it."""
    metas: list[FieldInfo] = []

    def walk(a) -> list:
        origin = typing.get_origin(a)
        if origin is typing.Annotated:
            args = typing.get_args(a)
            metas.extend(m for m in args[1:] if isinstance(m, FieldInfo))
            return walk(args[0])
        if origin in (typing.Union, types.UnionType):
            return [t for x in typing.get_args(a) for t in walk(x)]
        return [] if a is type(None) else [a]

    return walk(annotation), metas


def _is_model(t) -> bool:
    return isinstance(t, type) and issubclass(t, BaseModel)


def _classify(info: FieldInfo) -> tuple[str, tuple, object]:
    """(kind, choices, inner type) of a field: kind is a Slot kind, or 'model',
    'weekly', 'models' (a list of models) or 'values' (a list of plain values)."""
    bases, _ = _flatten_annotation(info.annotation)
    literals = tuple(v for b in bases if typing.get_origin(b) is Literal
                     for v in typing.get_args(b))
    lists = [b for b in bases if typing.get_origin(b) is list]
    models = [b for b in bases if _is_model(b)]
    if models:
        return ("weekly" if issubclass(models[0], Weekly) else "model"), (), models[0]
    if lists:
        inner = typing.get_args(lists[0])[0]
        if typing.get_origin(inner) is typing.Annotated:  # e.g. a bounded Date
            inner = typing.get_args(inner)[0]
        if _is_model(inner):
            return "models", (), inner
        if literals:
            return "names", literals, inner
        return ("list" if inner in (int, float) else "values"), (), inner
    if literals:
        return "choice", literals, None
    if bool in bases:
        return "bool", (), bool
    if dt.date in bases and int in bases:
        return "weekref", (), None
    for t, kind in ((dt.date, "date"), (int, "integer"), (float, "number"), (str, "text")):
        if t in bases:
            return kind, (), t
    raise TypeError(f"the workbook cannot hold a field of type {info.annotation!r}")


def _scalar_kind(t) -> str:
    """Slot kind of one element of a list field."""
    return {float: "number", int: "integer", str: "text", dt.date: "date"}[t]


_BRACKET = re.compile(r"\[([^\]]+)\]")


def _description(info: FieldInfo, name: str = "") -> str:
    """The schema's description of a field, or its name in words if it has none."""
    _, metas = _flatten_annotation(info.annotation)
    for meta in [info] + metas:
        if meta.description:
            return meta.description
    return name.replace("_", " ")


def _schema_unit(info: FieldInfo) -> str:
    """The unit of a field: its ``json_schema_extra['unit']``, else the first bracketed
    text of its description, else ''."""
    _, metas = _flatten_annotation(info.annotation)
    for meta in [info] + metas:
        extra = meta.json_schema_extra
        if isinstance(extra, dict) and "unit" in extra:
            return str(extra["unit"])
    m = _BRACKET.search(_description(info))
    return m.group(1) if m else ""


def _shown_unit(kind: str, info: FieldInfo, choices: tuple = ()) -> str:
    """The unit text of a slot: the schema unit for quantities, else a word for the kind."""
    unit = _schema_unit(info)
    if kind in ("number", "integer", "list", "choice") and unit:
        return unit
    return {"number": "-", "integer": "-", "text": "text", "date": "date", "bool": "yes/no",
            "flag": "yes/no", "choice": "choice", "weekref": "week no. or date",
            "list": "list", "names": "names or " + " or ".join(map(str, choices))}[kind]


def _default_note(info: FieldInfo) -> str:
    """' (default: ...)' for an optional field whose description does not say it."""
    text = _description(info)
    if info.is_required() or "default" in text:
        return ""
    value = info.get_default(call_default_factory=True)
    if value is None:
        return " (optional)"
    if value == []:
        return " (default: none)"
    if isinstance(value, bool):
        value = "yes" if value else "no"
    return f" (default: {value})" if value != "" else " (default: empty)"


def _words(path: tuple[str, ...]) -> str:
    return " ".join(_DAY_LABEL.get(p, p.replace("_", " ")) for p in path)


def _dotted(path: tuple[str, ...]) -> str:
    return ".".join(_DAY_LABEL.get(p, p) for p in path)


def _slot(path, kind, info, *, unit=None, required=None, choices=(), description=None) -> Slot:
    unit = unit if unit is not None else _shown_unit(kind, info, choices)
    desc = description if description is not None else _description(info, path[-1])
    if kind == "list":
        desc += " (a list: comma-separated, e.g. 1, 2, 3)"
    return Slot(path=path, kind=kind, unit=unit,
                description=desc + _default_note(info),
                required=info.is_required() if required is None else required,
                choices=choices, label=_dotted(path), header=f"{_words(path)} [{unit}]")


def _flatten(model: type[BaseModel], where: tuple[str, ...], prefix: tuple[str, ...] = (),
             required: bool = True) -> list[Slot]:
    """The slots of ``model``, found at ``where + prefix`` inside a Scenario.

    Nested models are flattened, weekday values get one slot per day, and fields that
    have a sheet of their own are left out.
    """
    out: list[Slot] = []
    for name, info in model.model_fields.items():
        path = prefix + (name,)
        full = where + path
        if full in _CLAIMED:
            continue
        kind, choices, inner = _classify(info)
        need = required and info.is_required()
        if full in WEEKDAY_SETS:
            out += [_slot(path + (d,), "flag", info, required=False,
                          description=f"{_description(info)}: yes if pupae ship on "
                                      f"{_DAY_LABEL[d]}") for d in WEEKDAYS]
        elif kind == "weekly":
            unit = _schema_unit(info) or "-"
            out += [_slot(path + (d,), "number", info, unit=unit, required=need,
                          description=f"{_description(info)} ({_DAY_LABEL[d]})")
                    for d in WEEKDAYS]
        elif kind == "model":
            out += _flatten(inner, where, path, need)
        elif kind in ("models", "values"):
            raise TypeError(f"{format_loc(full)} is a list with no sheet of its own: add it "
                            "to planner.scenario.workbook.SHEETS")
        else:
            out.append(_slot(path, kind, info, required=need, choices=choices))
    return out


def _model_at(path: tuple[str, ...]) -> tuple[type[BaseModel], FieldInfo | None]:
    """The model (or row model) at a Scenario field path, and the path's FieldInfo."""
    model, info = Scenario, None
    for name in path:
        info = model.model_fields[name]
        _, _, inner = _classify(info)
        model = inner if _is_model(inner) else model
    return model, info


def sheet_slots(spec: SheetSpec) -> list[Slot]:
    """The rows (field sheet) or columns (table sheets) of one sheet, from the schema."""
    model, info = _model_at(spec.path)
    if spec.kind in ("fields", "rows"):
        return _flatten(model, spec.path)
    if spec.kind == "columns":
        out = []
        for name, field in model.model_fields.items():
            _, _, inner = _classify(field)
            out.append(_slot((name,), _scalar_kind(inner), field))
        return out
    _, _, inner = _classify(info)
    kind = _scalar_kind(inner)
    return [Slot(path=(), kind=kind, unit=_shown_unit(kind, info),
                 description=_description(info), required=False, label=spec.path[-1],
                 header=f"{_words(spec.path[-1:])} [{_shown_unit(kind, info)}]")]


# -- cell values -----------------------------------------------------------------------

def _number_text(x) -> str:
    return str(x) if isinstance(x, int) else repr(x)


def _to_cell(value, slot: Slot):
    """The cell content for a field value (None: an empty cell)."""
    if value is None:
        return None
    if slot.kind == "bool":
        return "yes" if value else "no"
    if slot.kind == "list":
        return ", ".join(_number_text(x) for x in value)
    if slot.kind == "names":
        return value if isinstance(value, str) else ", ".join(value)
    if slot.kind == "text":
        return str(value)
    return value


def _cell_text(value) -> str | None:
    """A number typed into a text cell, as text ('12', not '12.0')."""
    if isinstance(value, bool):
        return None
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float) and math.isfinite(value):
        return str(int(value)) if value.is_integer() else repr(value)
    return None


def _split(text: str) -> list[str]:
    return [p.strip() for p in re.split(r"[,;]", text) if p.strip()]


def _list_item(text: str):
    for conv in (int, float):
        try:
            return conv(text)
        except ValueError:
            pass
    return text  # the schema reports it


def _from_cell(value, slot: Slot):
    """The raw value of a cell for validation, or ``_EMPTY`` for an empty cell."""
    if value is None:
        return _EMPTY
    if isinstance(value, str):
        value = value.strip()
        if value == "":
            return _EMPTY
    kind = slot.kind
    if isinstance(value, dt.datetime) and kind in ("date", "weekref") \
            and value.time() == dt.time(0):
        value = value.date()
    if kind == "date" and isinstance(value, (int, float)) and not isinstance(value, bool):
        from openpyxl.utils.datetime import from_excel
        try:   # a date cell that lost its date format holds the day number
            serial = from_excel(value)
        except (ValueError, OverflowError):
            return value
        return serial.date() if serial.time() == dt.time(0) else serial
    if kind == "text":
        text = _cell_text(value)
        return text if text is not None else value
    if kind == "choice":
        for choice in slot.choices:
            if str(choice).lower() == str(value).lower():
                return choice
        return value
    if kind == "list":
        return [_list_item(p) for p in _split(value)] if isinstance(value, str) else [value]
    if kind == "names":
        if isinstance(value, str) and value.lower() in slot.choices:
            return value.lower()
        return _split(value) if isinstance(value, str) else value
    if kind == "weekref" and isinstance(value, float) and value.is_integer():
        return int(value)
    return value


def _flag(value) -> bool | None:
    """A yes/no cell: True, False, None (empty); raises ValueError otherwise."""
    if value is None or (isinstance(value, str) and not value.strip()):
        return None
    if isinstance(value, bool):
        return value
    text = str(value).strip().lower()
    if text in ("yes", "y", "true", "1", "x"):
        return True
    if text in ("no", "n", "false", "0"):
        return False
    raise ValueError("write yes or no")


def _get(data, path: tuple):
    for p in path:
        if not isinstance(data, dict) or p not in data:
            return None
        data = data[p]
    return data


def _put(data: dict, path: tuple, value) -> None:
    for p in path[:-1]:
        data = data.setdefault(p, {})
    data[path[-1]] = value


def _ensure(data: dict, path: tuple) -> dict:
    for p in path:
        data = data.setdefault(p, {})
    return data


# -- writing ---------------------------------------------------------------------------

def _styles():
    from openpyxl.styles import Alignment, Font, PatternFill
    return {"head": Font(bold=True), "fill": PatternFill("solid", fgColor="DDE5EE"),
            "wrap": Alignment(wrap_text=True, vertical="top"),
            "top": Alignment(vertical="top")}


def _set(cell, value) -> None:
    """Write a value; dates get a date format, text starting with '=' stays text."""
    cell.value = value
    if isinstance(value, dt.date):
        cell.number_format = _DATE_FORMAT
    elif isinstance(value, str) and value.startswith("="):
        cell.data_type = "s"


class _Validations:
    """Data validations of one sheet, one per rule, cells added in a fixed order."""

    def __init__(self):
        self.rules: dict[tuple, list[str]] = {}

    def add(self, slot: Slot, ref: str) -> None:
        rule = _rule(slot)
        if rule is not None:
            self.rules.setdefault(rule, []).append(ref)

    def apply(self, ws) -> None:
        from openpyxl.worksheet.datavalidation import DataValidation
        for (kind, f1, f2, op, message), refs in self.rules.items():
            dv = DataValidation(type=kind, formula1=f1, formula2=f2, operator=op,
                                allow_blank=True, showErrorMessage=True,
                                errorTitle="Broodline", error=message)
            for ref in refs:
                dv.add(ref)
            ws.add_data_validation(dv)


def _rule(slot: Slot) -> tuple | None:
    """(type, formula1, formula2, operator, error message) of a slot's validation."""
    if slot.kind in ("bool", "flag"):
        return ("list", '"yes,no"', None, None, "Choose yes or no.")
    if slot.kind == "choice":
        options = ",".join(map(str, slot.choices))
        return ("list", f'"{options}"', None, None, f"Choose one of: {options}.")
    if slot.kind == "date":
        return ("date", "DATE(1990,1,1)", None, "greaterThanOrEqual",
                "Enter a date (YYYY-MM-DD).")
    return None


def _head_row(ws, headers, st) -> None:
    for j, text in enumerate(headers, start=1):
        cell = ws.cell(row=1, column=j, value=text)
        cell.font, cell.fill = st["head"], st["fill"]
    ws.freeze_panes = "A2"


def _print_setup(ws) -> None:
    ws.page_setup.orientation = "landscape"
    ws.page_setup.fitToWidth = 1
    ws.page_setup.fitToHeight = 0
    ws.sheet_properties.pageSetUpPr.fitToPage = True
    ws.print_title_rows = "1:1"


def _width(values, floor: int = 8, cap: int = 60) -> float:
    longest = max((len(str(v)) for v in values if v is not None), default=0)
    return float(min(max(longest, floor), cap) + 2)


def _write_fields(ws, spec: SheetSpec, slots: list[Slot], data: dict, st) -> None:
    """A field sheet: one row per slot (field, value, unit, description)."""
    from openpyxl.utils import get_column_letter
    _head_row(ws, spec.headers, st)
    dvs = _Validations()
    section = _get(data, spec.path)
    for r, slot in enumerate(slots, start=2):
        if slot.kind == "flag":
            days = _get(section, slot.path[:-1]) or []
            value = "yes" if slot.path[-1] in days else "no"
        else:
            value = _to_cell(_get(section, slot.path), slot)
        ws.cell(row=r, column=1, value=slot.label)
        _set(ws.cell(row=r, column=2), value)
        ws.cell(row=r, column=3, value=slot.unit)
        ws.cell(row=r, column=4, value=slot.description).alignment = st["wrap"]
        for j in (1, 2, 3):
            ws.cell(row=r, column=j).alignment = st["top"]
        if slot.kind == "text" and isinstance(value, str) and "\n" in value:
            ws.cell(row=r, column=2).alignment = st["wrap"]
        dvs.add(slot, f"B{r}")
    dvs.apply(ws)
    for j, cap in ((1, 40), (2, 60), (3, 24), (4, 90)):
        col = [c.value for c in ws[get_column_letter(j)]]
        ws.column_dimensions[get_column_letter(j)].width = _width(col, cap=cap)


def _table_rows(spec: SheetSpec, slots: list[Slot], data: dict) -> list[list]:
    """The cell values of a table sheet, row by row."""
    value = _get(data, spec.path)
    if spec.kind == "rows":
        return [[_to_cell(_get(item, s.path), s) for s in slots] for item in value or []]
    if spec.kind == "columns":
        cols = [value.get(s.path[0], []) for s in slots]
        return [[_to_cell(c[i] if i < len(c) else None, s) for c, s in zip(cols, slots)]
                for i in range(max(map(len, cols), default=0))]
    return [[_to_cell(v, slots[0])] for v in value or []]


def _write_table(ws, spec: SheetSpec, slots: list[Slot], data: dict, st) -> None:
    """A table sheet: headers with units, one row per item, validations per column."""
    from openpyxl.utils import get_column_letter
    _head_row(ws, [s.header for s in slots], st)
    rows = _table_rows(spec, slots, data)
    for r, values in enumerate(rows, start=2):
        for j, (value, slot) in enumerate(zip(values, slots), start=1):
            _set(ws.cell(row=r, column=j), value)
    last = max(_TABLE_ROWS, len(rows) + 1)
    dvs = _Validations()
    for j, slot in enumerate(slots, start=1):
        letter = get_column_letter(j)
        dvs.add(slot, f"{letter}2:{letter}{last}")
        values = [slot.header] + [row[j - 1] for row in rows]
        ws.column_dimensions[letter].width = _width(values, cap=40)
    dvs.apply(ws)


def _instructions(ws, intro: list[str], st) -> None:
    """The Instructions sheet: general rules, what each sheet holds, each column's meaning."""
    lines: list[tuple] = [("Broodline input workbook",)]
    lines += [(text,) for text in intro]
    lines += [
        ("",),
        ("How to fill it",),
        ("Broodline reads every sheet except this one: keep the sheet names and the column "
         "headers as they are.",),
        ("Units are in brackets in each column header, or in the unit column of a field "
         "sheet. Write plain numbers in that unit; a text with a unit of the same kind is "
         "converted (e.g. '2 min' for a value in s).",),
        ("An empty cell means 'not given': the default in the description is used, or an "
         "error says that the value is required.",),
        ("Dates are date cells (YYYY-MM-DD). yes/no cells take yes or no. Lists are "
         "comma-separated text, e.g. 24, 25, 26.",),
        ("Table sheets hold one row per item, as many rows as needed; empty rows are "
         "skipped.",),
        ("Check a filled workbook with: broodline check FILE.xlsx",),
        ("",),
        ("sheet", "what goes there"),
    ]
    lines += [(spec.title, spec.howto) for spec in SHEETS]
    lines += [("",), ("sheet", "column", "meaning")]
    for spec in SHEETS:
        if spec.kind != "fields":
            lines += [(spec.title, s.header, s.description) for s in sheet_slots(spec)]
    for r, line in enumerate(lines, start=1):
        for j, text in enumerate(line, start=1):
            cell = ws.cell(row=r, column=j, value=text)
            cell.alignment = st["wrap"]
            if r == 1 or line[0] in ("How to fill it", "sheet"):
                cell.font = st["head"]
    for letter, width in (("A", 60), ("B", 40), ("C", 70)):
        ws.column_dimensions[letter].width = width


def _build(scenario: Scenario, intro: list[str]):
    """The openpyxl Workbook of a scenario."""
    from openpyxl import Workbook
    wb = Workbook()
    st = _styles()
    ws = wb.active
    ws.title = INSTRUCTIONS
    _instructions(ws, intro, st)
    data = scenario.model_dump(mode="python")
    for spec in SHEETS:
        ws = wb.create_sheet(spec.title)
        slots = sheet_slots(spec)
        if spec.kind == "fields":
            _write_fields(ws, spec, slots, data, st)
        else:
            _write_table(ws, spec, slots, data, st)
        _print_setup(ws)
    wb.properties.creator = "Broodline"
    wb.properties.created = _STAMP
    wb.properties.modified = _STAMP
    return wb


def _check_target(path: Path) -> None:
    """An output workbook's name ends in .xlsx and its place takes a new file."""
    from planner.fileio import output_file, short_name
    if path.is_dir():
        raise InputError("this is a folder; give a file name ending in .xlsx for the "
                         "workbook to write", source=short_name(path))
    if path.suffix.lower() != ".xlsx":
        raise InputError("the workbook to write must have a name ending in .xlsx "
                         "(e.g. broodline-input.xlsx)", source=short_name(path))
    output_file(path, "workbook")


_DEFAULT_INTRO = ["A Broodline planning scenario. One sheet per section of the scenario; "
                  "the Instructions below say how to fill each of them."]


def write_workbook(scenario: Scenario, path: str | Path, *,
                   intro: list[str] | None = None) -> Path:
    """Write a filled input workbook for a scenario, atomically.

    Parameters
    ----------
    scenario : Scenario
        The scenario to write; reading the file back gives the same scenario.
    path : str or Path
        Target ``.xlsx`` file; an existing file is replaced only once the new one is
        complete.
    intro : list of str, optional
        Lines at the top of the Instructions sheet.

    Returns
    -------
    Path
        The written file.
    """
    path = Path(path)
    _check_target(path)
    wb = _build(scenario, intro if intro is not None else _DEFAULT_INTRO)
    return save_workbook(wb, path)


TEMPLATE_INTRO = [
    "The example rows are INVENTED demo data (the Fernhollow fly unit: its strain, rooms, "
    "crews and customers). No real facility, company or person is described. Replace them "
    "with your own before planning.",
]


def write_template(path: str | Path) -> Path:
    """Write the input workbook template: the embedded demo scenario as example rows,
    with Instructions saying so.

    Parameters
    ----------
    path : str or Path
        Target ``.xlsx`` file (written atomically).

    Returns
    -------
    Path
        The written file.
    """
    from planner.scenario import demo_scenario_path
    from planner.scenario.load import load_scenario
    demo = load_scenario(demo_scenario_path("fly"))
    return write_workbook(demo, path, intro=TEMPLATE_INTRO + _DEFAULT_INTRO)


# -- reading ---------------------------------------------------------------------------

class _Place(str):
    """A place text that remembers the field location it was made for."""

    loc: tuple = ()


def _norm(text) -> str:
    """Header or name as compared: lower case, '_' as space, single spaces, no spaces
    inside brackets."""
    s = re.sub(r"\s+", " ", str(text).replace("_", " ").strip().lower())
    return re.sub(r"\s*\[\s*(.*?)\s*\]", lambda m: " [" + m.group(1).replace(" ", "") + "]", s)


def _split_header(text: str) -> tuple[str, str | None]:
    """('weekly volume', 'million/week') of a normalised header; unit None if absent."""
    m = re.match(r"^(.*?)\s*(?:\[(.*)\])?$", text)
    return m.group(1), m.group(2)


class _Reader:
    """Reads the sheets of one workbook into a raw scenario dict.

    Collects structural problems (unknown names, missing columns) as InputErrors and
    records for every field location the place text of its cell.
    """

    def __init__(self, source: str):
        self.source = source
        self.raw: dict = {}
        self.places: dict[tuple, str] = {}
        self.problems: list[InputError] = []
        self.covered: set[tuple] = set()   # locations whose 'required' errors are redundant
        self.replaced: set[tuple] = set()  # locations whose errors are already reported
        self.box: dict[str, tuple[int, int]] = {}  # sheet title: (last row, last column)

    def _iter(self, ws, min_row: int, max_row: int | None = None, max_col: int | None = None):
        """ws.iter_rows(values_only=True) within the sheet's used range (a stray
        formatted cell at XFD1048576 does not make a million-row walk)."""
        rows, cols = self.box.get(ws.title, (ws.max_row, ws.max_column))
        max_row = rows if max_row is None else min(max_row, rows)
        max_col = cols if max_col is None else min(max_col, cols)
        if max_row < min_row:
            return iter(())
        return ws.iter_rows(min_row=min_row, max_row=max_row, max_col=max_col,
                            values_only=True)

    def problem(self, why: str, place: str | None = None, **value) -> None:
        self.problems.append(InputError(why, source=self.source, place=place, **value))

    # -- field sheets ------------------------------------------------------------------
    def fields(self, ws, spec: SheetSpec, slots: list[Slot]) -> None:
        """Read a field sheet: a field name in the first column, its value in the second."""
        section = _ensure(self.raw, spec.path)
        self._check_field_headers(ws, spec)
        seen: dict[Slot, int] = {}
        flags: dict[tuple, list[tuple[int, str, bool | None]]] = {}
        for r, row in enumerate(self._iter(ws, 2, max_col=3), 2):
            name, value, unit = (tuple(row) + (None, None, None))[:3]
            slot = self._field_slot(spec, slots, name, value, r, seen)
            if slot is None:
                continue
            place = _Place(f"sheet '{spec.title}', row {r} ({slot.label}), "
                           f"column '{spec.headers[1]}'")
            self.places[spec.path + slot.path] = place
            self._check_unit(slot, unit, r, spec)
            if slot.kind == "flag":
                flags.setdefault(slot.path[:-1], []).append(
                    (r, slot.path[-1], self._flag_cell(value, place)))
            elif (cell := _from_cell(value, slot)) is not _EMPTY:
                _put(section, slot.path, cell)
        for path, days in flags.items():
            self._weekday_set(spec, section, path, days)

    def _field_slot(self, spec: SheetSpec, slots: list[Slot], name, value, r: int,
                    seen: dict) -> Slot | None:
        """The slot that row ``r`` names; None for a blank row or a reported problem."""
        where = f"sheet '{spec.title}', row {r}"
        if name is None or not str(name).strip():
            if _from_cell(value, _TEXT) is not _EMPTY:
                self.problem(f"a value without a name in column '{spec.headers[0]}'; write "
                             "the field name beside it or clear the cell", where, value=value)
            return None
        slot = next((s for s in slots if _norm(s.label) == _norm(name)), None)
        if slot is None:
            self._unknown_field(spec, slots, str(name).strip(), where)
        elif slot in seen:
            self.problem(f"field {slot.label!r} is given twice (also row {seen[slot]}); keep "
                         "one row", where)
            return None
        else:
            seen[slot] = r
        return slot

    def _flag_cell(self, value, place: str) -> bool | None:
        try:
            return _flag(value)
        except ValueError as exc:
            self.problem(str(exc), place, value=value)
            return None

    def _check_field_headers(self, ws, spec: SheetSpec) -> None:
        head = next(self._iter(ws, 1, 1, 2), ())
        want = spec.headers[:2]
        got = tuple(_norm(h) if h is not None else "" for h in (tuple(head) + ("", ""))[:2])
        if got != tuple(_norm(h) for h in want):
            self.problem(f"the first row must be the headers {want[0]!r}, {want[1]!r} "
                         "(names in the first column, values in the second)",
                         f"sheet '{spec.title}', row 1")

    def _unknown_field(self, spec, slots, name: str, where: str) -> None:
        labels = {_norm(s.label): s for s in slots}
        hint = closest(_norm(name), list(labels))
        why = f"unknown field {name!r}"
        if hint:
            why += f" (did you mean {labels[hint].label!r}?)"
            self.covered.add(spec.path + labels[hint].path)
        else:
            why += "; the fields of this sheet are " + ", ".join(s.label for s in slots)
        self.problem(why, f"{where}, column '{spec.headers[0]}'")

    def _check_unit(self, slot: Slot, unit, r: int, spec: SheetSpec) -> None:
        """A unit column changed by hand: the value would be misread, so say so."""
        if unit is None or not str(unit).strip():
            return
        where = f"sheet '{spec.title}', row {r}"
        if _norm(f"[{unit}]") != _norm(f"[{slot.unit}]"):
            self.problem(f"the unit of {slot.label!r} is {slot.unit}; the unit column is not "
                         f"read: write the value in {slot.unit} (or as a text such as "
                         f"'12 {slot.unit}') and put the unit back",
                         f"{where}, column '{spec.headers[2]}'", value=str(unit))

    def _weekday_set(self, spec, section: dict, path: tuple, days: list) -> None:
        rows = [r for r, _, _ in days]
        label = _dotted(path)
        self.places[spec.path + path] = _Place(
            f"sheet '{spec.title}', rows {min(rows)}-{max(rows)} ({label}.Mon to "
            f"{label}.Sun), column '{spec.headers[1]}'")
        if any(flag is not None for _, _, flag in days):
            _put(section, path, [d for d in WEEKDAYS
                                 if any(day == d and flag for _, day, flag in days)])

    # -- table sheets ------------------------------------------------------------------
    def _columns(self, ws, spec: SheetSpec, slots: list[Slot]) -> dict[int, Slot]:
        """Match the header row to the slots: {column index (0-based): slot}."""
        head = next(self._iter(ws, 1, 1), ())
        found: dict[int, Slot] = {}
        where = f"sheet '{spec.title}', row 1"
        before = len(self.problems)
        for j, text in enumerate(head):
            if text is None or not str(text).strip():
                continue
            slot = self._header_slot(spec, slots, str(text).strip(), where)
            if slot is not None and slot in found.values():
                self.problem(f"column {slot.header!r} appears twice; keep one", where)
            elif slot is not None:
                found[j] = slot
        if not found and slots:
            # no header at all in row 1 (a row inserted above them, or a sheet emptied):
            # one mistake, one line
            del self.problems[before:]
            headers = {_norm(s.header) for s in slots}
            moved = next((r for r, row in enumerate(self._iter(ws, 2, 20), 2)
                          if any(v is not None and _norm(v) in headers for v in row)), None)
            hint = (f"the headers are in row {moved}: delete the rows above them" if moved
                    else "copy the header row from the template")
            self.problem(f"row 1 must hold the column headers ({slots[0].header!r}, ...); "
                         f"none is there: {hint}", where)
            self.covered.update(spec.path + slot.path for slot in slots)
            self.covered.add(spec.path)
            return found
        for slot in slots:
            if slot.required and slot not in found.values() \
                    and spec.path + slot.path not in self.covered:
                self.problem(f"column {slot.header!r} is missing; add it back to row 1",
                             f"sheet '{spec.title}'")
                self.covered.add(spec.path + slot.path)
        return found

    def _header_slot(self, spec: SheetSpec, slots: list[Slot], text: str,
                     where: str) -> Slot | None:
        """The slot a header names; an unknown header or another unit is a problem
        (with the closest header suggested)."""
        by_header = {_norm(s.header): s for s in slots}
        by_name = {_split_header(_norm(s.header))[0]: s for s in slots}
        key = _norm(text)
        name, unit = _split_header(key)
        if key in by_header:
            return by_header[key]
        if name in by_name:
            slot = by_name[name]
            if unit is None:
                return slot
            self.problem(f"column {text!r} is in [{slot.unit}] in Broodline; write the values "
                         f"in {slot.unit} and name the column {slot.header!r}", where)
            self.covered.add(spec.path + slot.path)
            return None
        hint = closest(key, list(by_header))
        why = f"unknown column {text!r}"
        if hint:
            why += f" (did you mean {by_header[hint].header!r}?)"
            self.covered.add(spec.path + by_header[hint].path)
        else:
            why += "; the columns of this sheet are " + ", ".join(s.header for s in slots)
        self.problem(why, where)
        return None

    def _data_rows(self, ws, spec: SheetSpec, columns: dict[int, Slot]):
        """(row number, {slot: cell value}) of every non-empty row (none when the header
        row is missing: that is already reported, once)."""
        if not columns:
            return
        headless_reported: set[int] = set()
        for r, row in enumerate(self._iter(ws, 2), start=2):
            cells = {slot: row[j] for j, slot in columns.items() if j < len(row)}
            for j, value in enumerate(row):
                if j not in columns and j not in headless_reported \
                        and _from_cell(value, _TEXT) is not _EMPTY:
                    if not self._has_header(ws, j):
                        from openpyxl.utils import get_column_letter
                        self.problem(f"values in column {get_column_letter(j + 1)}, which "
                                     "has no header; move them or clear them",
                                     f"sheet '{spec.title}', row {r}", value=value)
                    headless_reported.add(j)
            if all(_from_cell(v, _TEXT) is _EMPTY for v in cells.values()):
                continue
            yield r, cells

    @staticmethod
    def _has_header(ws, j: int) -> bool:
        value = ws.cell(row=1, column=j + 1).value
        return value is not None and bool(str(value).strip())

    def rows(self, ws, spec: SheetSpec, slots: list[Slot]) -> None:
        columns = self._columns(ws, spec, slots)
        items: list[dict] = []
        for r, cells in self._data_rows(ws, spec, columns):
            i = len(items)
            self.places[spec.path + (i,)] = _Place(f"sheet '{spec.title}', row {r}")
            for slot in slots:
                self.places[spec.path + (i,) + slot.path] = _Place(
                    f"sheet '{spec.title}', row {r}, column '{slot.header}'")
            item: dict = {}
            for slot, value in cells.items():
                cell = _from_cell(value, slot)
                if cell is not _EMPTY:
                    _put(item, slot.path, cell)
            items.append(item)
        _put(self.raw, spec.path, items)

    def columns(self, ws, spec: SheetSpec, slots: list[Slot]) -> None:
        columns = self._columns(ws, spec, slots)
        lists: dict = {s.path[0]: [] for s in columns.values()}
        rows: list[int] = []
        for r, cells in self._data_rows(ws, spec, columns):
            rows.append(r)
            for slot, value in cells.items():
                i = len(lists[slot.path[0]])
                self.places[spec.path + slot.path + (i,)] = _Place(
                    f"sheet '{spec.title}', row {r}, column '{slot.header}'")
                cell = _from_cell(value, slot)
                lists[slot.path[0]].append(None if cell is _EMPTY else cell)
        _ensure(self.raw, spec.path).update(lists)
        if spec.path == ("colony", "life_table"):
            self._check_life_table(spec, slots, lists, rows)

    def _check_life_table(self, spec, slots, lists: dict, rows: list[int]) -> None:
        """Check a fully numeric life table here, so that messages give sheet rows (the
        schema's own check counts entries from 1)."""
        from planner.demography.lifetable import MAX_COLONY_MX, validate_life_table
        columns = [lists.get(name) for name in ("age", "lx", "mx")]
        if any(c is None or any(isinstance(v, bool) or not isinstance(v, (int, float))
                                for v in c) for c in columns):
            return  # missing columns or non-numbers: the schema check reports them
        try:
            validate_life_table(*columns, source=self.source, rows=rows,
                                max_mx=MAX_COLONY_MX)
        except InputError as exc:
            headers = {s.path[0]: s.header for s in slots}
            place = f"sheet '{spec.title}'"
            if exc.place:
                place += ", " + re.sub(r"column '(\w+)'",
                                       lambda m: f"column '{headers.get(m[1], m[1])}'",
                                       exc.place)
            value = {} if exc.value is InputError._NOVALUE else {"value": exc.value}
            self.problem(exc.why, place, **value)
            self.replaced.add(spec.path)

    def values(self, ws, spec: SheetSpec, slots: list[Slot]) -> None:
        columns = self._columns(ws, spec, slots)
        out = []
        for r, cells in self._data_rows(ws, spec, columns):
            for slot, value in cells.items():
                cell = _from_cell(value, slot)
                if cell is not _EMPTY:
                    self.places[spec.path + (len(out),)] = _Place(
                        f"sheet '{spec.title}', row {r}, column '{slot.header}'")
                    out.append(cell)
        _put(self.raw, spec.path, out)

    # -- places ------------------------------------------------------------------------
    def add_sheet_places(self) -> None:
        """Places for locations without a cell: a sheet, a field row, a whole column."""
        for spec in SHEETS:
            self.places.setdefault(spec.path, _Place(f"sheet '{spec.title}'"))
            for slot in sheet_slots(spec):
                what = (f"field '{slot.label}'" if spec.kind == "fields"
                        else f"column '{slot.header}'")
                for n in range(1, len(slot.path) + 1):
                    part = slot.path[:n]
                    text = what if n == len(slot.path) else f"fields '{_dotted(part)}.*'"
                    self.places.setdefault(spec.path + part,
                                           _Place(f"sheet '{spec.title}', {text}"))

    def locate(self, loc: tuple) -> str:
        """The place text of a pydantic field location (longest known prefix)."""
        for n in range(len(loc), -1, -1):
            hit = self.places.get(tuple(loc[:n]))
            if hit is not None:
                rest = tuple(loc[n:])
                place = _Place(hit + (f", field '{format_loc(rest)}'" if rest else ""))
                place.loc = tuple(loc)
                return place
        place = _Place(format_loc(loc))
        place.loc = tuple(loc)
        return place

    def refine(self, err: InputError) -> InputError:
        """Point a cross-field message that starts with a field path ('start.cages[1].room:
        ...', 'rearing.harvest_ages: ...') at that field's sheet, row and column."""
        m = _LEADING_PATH.match(err.why)
        if not m:
            return err
        base = tuple(getattr(err.place, "loc", ()))
        loc = base + _parse_path(m.group(1))
        depth = next((n for n in range(len(loc), len(base), -1) if loc[:n] in self.places), 0)
        if depth <= len(base):
            return err
        value = {} if err.value is InputError._NOVALUE else {"value": err.value}
        return InputError(err.why, source=err.source, place=self.locate(loc[:depth]), **value)

    def is_redundant(self, err: InputError) -> bool:
        """An error already reported another way: any error at a location checked by the
        reader, or a 'required' error for a field whose row or column was reported."""
        loc = getattr(err.place, "loc", None)
        if loc in self.replaced:
            return True
        if loc is None or err.why != "this field is required":
            return False
        bare = tuple(p for p in loc if not isinstance(p, int))
        return any(bare[:len(c)] == c or c[:len(bare)] == bare for c in self.covered)


_LEADING_PATH = re.compile(r"^([a-z_]+(?:\[\d+\])?(?:\.[a-z_]+(?:\[\d+\])?)*)[ :]")


def _parse_path(text: str) -> tuple:
    """'start.cages[2].room' -> ('start', 'cages', 1, 'room') (1-based to 0-based)."""
    out: list = []
    for part in text.split("."):
        m = re.fullmatch(r"([a-z_]+)(?:\[(\d+)\])?", part)
        out.append(m.group(1))
        if m.group(2):
            out.append(int(m.group(2)) - 1)
    return tuple(out)


_TEXT = Slot(path=(), kind="text", unit="text", description="", required=False)


#: Largest unpacked content of an input workbook [bytes]: the template unpacks to about
#: 0.1 MB; a sheet of a million rows zipped to 4 MB unpacks to far more than this.
MAX_UNZIPPED_BYTES = 30_000_000


def _unreadable(path: Path, why: str) -> InputError:
    from planner.fileio import short_name
    return InputError(f"not a readable .xlsx workbook ({why}); save it from the spreadsheet "
                      "program as an Excel workbook (.xlsx)", source=short_name(path.name))


def _check_zip(path: Path) -> None:
    """Refuse, from the zip directory alone (no sheet is parsed), a workbook whose parts
    unpack to more than :data:`MAX_UNZIPPED_BYTES`, and from a byte count of each sheet's
    rows one with more than :data:`MAX_SHEET_ROWS` rows."""
    import zipfile
    from planner.fileio import short_name
    counts: dict[str, int] = {}
    try:
        with zipfile.ZipFile(path) as z:
            total = sum(i.file_size for i in z.infolist())
            if total <= MAX_UNZIPPED_BYTES:
                counts = _row_counts(z)
    except (zipfile.BadZipFile, OSError, ValueError, KeyError, SyntaxError, RuntimeError,
            NotImplementedError) as exc:
        raise _unreadable(path, f"{type(exc).__name__}: {exc}") from None
    if total > MAX_UNZIPPED_BYTES:
        raise InputError(f"the workbook unpacks to {total:,} bytes, over the "
                         f"{MAX_UNZIPPED_BYTES:,}-byte limit of an input workbook (a scenario "
                         "fills a few hundred cells): delete stray rows and columns, or copy "
                         "the scenario into a fresh template", source=short_name(path.name))
    over = [(title, n) for title, n in counts.items() if n > MAX_SHEET_ROWS]
    if over:
        title, n = over[0]
        raise InputError(f"sheet {title!r} has {n:,} rows, over the {MAX_SHEET_ROWS:,}-row limit "
                         "of an input sheet: delete the rows below the table (select them, "
                         "Delete rows), or copy the scenario into a fresh template",
                         source=short_name(path.name))


def _row_counts(z) -> dict[str, int]:
    """{sheet title: number of <row> elements in its XML}, counted on the raw bytes before
    any sheet is parsed (the sheet titles from the small workbook part, parsed with
    defusedxml)."""
    import re
    from defusedxml import ElementTree
    names = set(z.namelist())
    titles: dict[str, str] = {}
    if "xl/workbook.xml" in names and "xl/_rels/workbook.xml.rels" in names:
        rels = {el.get("Id"): el.get("Target") for el in
                ElementTree.fromstring(z.read("xl/_rels/workbook.xml.rels")).iter()
                if el.tag.endswith("Relationship")}
        for el in ElementTree.fromstring(z.read("xl/workbook.xml")).iter():
            if el.tag.endswith("}sheet") or el.tag == "sheet":
                rid = next((v for k, v in el.attrib.items() if k.endswith("}id")), None)
                target = (rels.get(rid) or "").lstrip("/")
                part = target if target.startswith("xl/") else "xl/" + target
                titles[part] = el.get("name") or part
    pattern = re.compile(rb"<(?:[A-Za-z_][\w.-]*:)?row[\s/>]")
    counts = {}
    for part in names:
        if part.startswith("xl/worksheets/") and part.endswith(".xml"):
            counts[titles.get(part, part)] = len(pattern.findall(z.read(part)))
    return counts


#: Most rows and columns an input sheet may use: a scenario fills a few hundred rows (at
#: most 200 orders; a life table of a few hundred days) and a dozen columns.
MAX_SHEET_ROWS = 5_000
MAX_SHEET_COLUMNS = 100


def _used_box(ws) -> tuple[int, int, str | None]:
    """(last row, last column) holding a value (blank text and formatting-only cells do
    not count), and the farthest such cell (A1 style) when it lies beyond the limits."""
    from openpyxl.utils import get_column_letter
    cells = getattr(ws, "_cells", None)
    if cells is None:  # another openpyxl: fall back to the sheet's own dimensions
        return ws.max_row, ws.max_column, None
    rows = cols = 0
    far = None
    for (r, c), cell in cells.items():
        v = cell.value
        if v is None or (isinstance(v, str) and not v.strip()):
            continue
        rows, cols = max(rows, r), max(cols, c)
        if (r > MAX_SHEET_ROWS or c > MAX_SHEET_COLUMNS) and far is None:
            far = f"{get_column_letter(c)}{r}"
    return rows, cols, far


def _open(path: Path):
    from openpyxl import load_workbook
    from planner.fileio import MAX_WORKBOOK_BYTES, input_file
    path = input_file(path, ".xlsx workbook", MAX_WORKBOOK_BYTES)
    _check_zip(path)
    try:
        # openpyxl parses with defusedxml when it is installed (a core dependency):
        # entity expansion and external entities are refused
        return load_workbook(path, data_only=True)
    except Exception as exc:  # noqa: BLE001 - any unreadable file is the user's to fix
        text = " ".join(f"{type(exc).__name__}: {exc}".split())
        chain, e = [], exc
        while e is not None and len(chain) < 10:
            chain.append(type(e).__name__)
            e = e.__cause__ or e.__context__
        if any("Forbidden" in n or "Entit" in n for n in chain):
            why = ("its XML declares entities, which Broodline refuses: a workbook saved by "
                   "a spreadsheet program has none")
        else:
            why = text if len(text) <= 160 else text[:150] + " ..."
        raise _unreadable(path, why) from None


def _match_sheets(wb, reader: _Reader) -> dict[str, object]:
    """{expected title: worksheet}; a missing sheet is a problem, with the closest
    unclaimed sheet name suggested."""
    by_norm = {ws.title.strip().lower(): ws for ws in wb.worksheets}
    found = {spec.title: by_norm.get(spec.title.lower()) for spec in SHEETS}
    used = {ws.title for ws in found.values() if ws is not None}
    spare = [ws.title for ws in wb.worksheets if ws.title not in used
             and ws.title.strip().lower() != INSTRUCTIONS.lower()]
    if all(ws is None for ws in found.values()):
        # a blank or foreign workbook is one mistake, not one per sheet
        reader.problem("none of Broodline's input sheets (" + ", ".join(
            spec.title for spec in SHEETS) + ") is in this workbook; start from the "
            "template (broodline template OUT.xlsx)")
        return found
    plain = []
    for spec in SHEETS:
        if found[spec.title] is None:
            hint = closest(spec.title, spare) or closest(spec.title.lower(),
                                                         [s.lower() for s in spare])
            hint = next((s for s in spare if s.lower() == (hint or "").lower()), hint)
            if hint:
                reader.problem(f"the sheet {spec.title!r} is missing; a sheet is called "
                               f"{hint!r}: rename it to {spec.title!r}")
            else:
                plain.append(spec.title)
    if plain:
        what = f"the sheet {plain[0]!r} is" if len(plain) == 1 else \
            "the sheets " + ", ".join(repr(t) for t in plain) + " are"
        reader.problem(f"{what} missing; copy {'it' if len(plain) == 1 else 'them'} from "
                       "the template (broodline template OUT.xlsx)")
    return found


def _raise(problems: list[InputError]):
    raise problems[0] if len(problems) == 1 else InputErrors(problems)


def read_workbook(path: str | Path) -> Scenario:
    """Read a filled input workbook into a validated scenario.

    Parameters
    ----------
    path : str or Path
        The ``.xlsx`` file (see :func:`write_template`).

    Returns
    -------
    Scenario
        The same scenario as the equivalent TOML file would give.

    Raises
    ------
    InputError, InputErrors
        One line per problem: the file, sheet, row, column, value and what is wrong.
    """
    path = Path(path)
    wb = _open(path)
    reader = _Reader(path.name)
    sheets = _match_sheets(wb, reader)
    for title, ws in sheets.items():
        merged = [str(r) for r in getattr(ws, "merged_cells", None) or ()] \
            if ws is not None else []
        if merged:
            # a merged range keeps only its first cell's value: the others would be
            # read as empty (and an empty field takes its default without a word)
            shown = ", ".join(merged[:5]) + (f" and {len(merged) - 5} more"
                                             if len(merged) > 5 else "")
            reader.problem(f"sheet {title!r} has merged cells ({shown}); unmerge them and "
                           "give each cell its own value")
        if ws is not None:
            rows, cols, far = _used_box(ws)
            if far is not None:
                reader.problem(f"sheet {title!r} has a value in cell {far}, beyond the "
                               f"{MAX_SHEET_ROWS:,} rows and {MAX_SHEET_COLUMNS} columns an "
                               "input sheet may use; clear it (or delete those rows and "
                               "columns)")
            reader.box[ws.title] = (max(rows, 1), max(cols, 1))
    if reader.problems:
        _raise(reader.problems)
    for spec in SHEETS:
        read = {"fields": reader.fields, "rows": reader.rows, "columns": reader.columns,
                "list": reader.values}[spec.kind]
        read(sheets[spec.title], spec, sheet_slots(spec))
    reader.add_sheet_places()
    found: list[InputError] = []
    scenario = None
    try:
        scenario = validate(Scenario, reader.raw, path.name, locate=reader.locate)
    except InputErrors as exc:
        found = exc.errors
    except InputError as exc:
        found = [exc]
    problems = reader.problems + [reader.refine(e) for e in found
                                  if not reader.is_redundant(e)]
    if problems:
        _raise(_group_required(problems, path.name))
    return scenario


_CELL_PLACE = re.compile(r"^(sheet '[^']*', row \d+), column '(.*)'$")


def _group_required(problems: list[InputError], source: str) -> list[InputError]:
    """The empty required cells of one row as one line (a stray value in an empty row,
    or a row half filled, is one mistake)."""
    rows: dict[str, list[int]] = {}
    for i, e in enumerate(problems):
        m = _CELL_PLACE.match(str(e.place or ""))
        if e.why == "this field is required" and m:
            rows.setdefault(m.group(1), []).append(i)
    drop: set[int] = set()
    merged: dict[int, InputError] = {}
    for place, idx in rows.items():
        if len(idx) < 2:
            continue
        names = [_CELL_PLACE.match(str(problems[i].place)).group(2) for i in idx]
        shown = ", ".join(repr(n) for n in names[:6]) + (
            f" and {len(names) - 6} more" if len(names) > 6 else "")
        merged[idx[0]] = InputError(f"{len(names)} required cells of this row are empty "
                                    f"({shown}): fill the row or clear it", source=source,
                                    place=place)
        drop.update(idx[1:])
    return [merged.get(i, e) for i, e in enumerate(problems) if i not in drop]
