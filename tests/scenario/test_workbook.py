"""The input workbook: round trips against the TOML scenario, the committed template, and
every error a filled workbook can carry (one line each, naming sheet, row and column)."""

import datetime as dt
import os
import tomllib
from pathlib import Path

import openpyxl
import pytest

from planner.errors import InputError, InputErrors
from planner.scenario import demo_scenario_path, dump_toml, load_scenario
from planner.scenario import workbook
from planner.scenario.load import validate
from planner.scenario.schema import Scenario
from planner.scenario.workbook import read_workbook, write_template, write_workbook

TEMPLATE = Path(__file__).resolve().parents[2] / "templates" / "broodline-input.xlsx"


@pytest.fixture(scope="module")
def demo() -> Scenario:
    return load_scenario(demo_scenario_path("fly"))


@pytest.fixture
def demo_xlsx(tmp_path, demo) -> Path:
    return write_workbook(demo, tmp_path / "demo.xlsx")


def varied(demo: Scenario) -> Scenario:
    """The demo with every optional part the demo leaves out filled in (batches instead of
    the standard week, dates as order weeks, one crew doing all tasks, ...)."""
    d = demo.model_dump(mode="python")
    d["notes"] = "=not a formula, a note\nsecond line"
    d["colony"]["species"] = ""
    d["colony"]["rearing"]["eggs_per_ml"] = None
    d["colony"]["mx_counts"] = "female eggs"
    d["facility"]["pupal_holding"] = None
    d["kitchen"]["holiday_kg"] = None
    d["crews"] = [dict(d["crews"][0], tasks="all", holiday_hours=None, name="2027")]
    d["calendar"].update(holidays=[], ship_on_holidays=True, shipping_days=["tue", "sun"])
    d["orders"][0].update(last_week=dt.date(2027, 5, 3), shortfall_per_million=30000.5)
    d["orders"][1]["first_week"] = dt.date(2027, 1, 13)
    d["start"] = {"standard_week_volume": None,
                  "cages": [{"load_date": dt.date(2026, 12, 20), "count": 12,
                             "discard_age": 57, "room": "Adult room A"},
                            {"load_date": dt.date(2026, 12, 27), "count": 10,
                             "discard_age": 64, "room": None}],
                  "trays": [{"seed_date": dt.date(2027, 1, 2), "count": 300}]}
    d["expansion"][3]["crew"] = None
    d["expansion"][1]["crew_hours"] = {day: 1.25 for day in ("mon", "tue", "wed", "thu",
                                                            "fri", "sat", "sun")}
    d["costs"].update(diet_per_kg=0.1 + 0.25, currency="NZD", per_cage_day=1e-7)
    d["labour"]["harvest_packing"] = 2.0 / 3.0
    d["plan"].update(solver="highs", lookahead_weeks=4, cycle_days=14,
                     single_discard_age=True, relative_gap=0.0)
    return Scenario.model_validate(d)


def find_column(ws, prefix: str) -> int:
    """1-based column of the header that starts with ``prefix``."""
    for cell in ws[1]:
        if isinstance(cell.value, str) and cell.value.startswith(prefix):
            return cell.column
    raise AssertionError(f"no column {prefix!r} on sheet {ws.title!r}")


def find_field(ws, name: str) -> int:
    """Row of a field on a field sheet."""
    for (cell,) in ws.iter_rows(min_col=1, max_col=1):
        if cell.value == name:
            return cell.row
    raise AssertionError(f"no field {name!r} on sheet {ws.title!r}")


def cell(wb, sheet: str, where, column: str | None = None):
    """A field's value cell (``where`` = field name) or a table cell (``where`` = row,
    ``column`` = start of its header)."""
    ws = wb[sheet]
    if column is None:
        return ws.cell(find_field(ws, where), 2)
    return ws.cell(where, find_column(ws, column))


def edit(path: Path, change) -> Path:
    """Open a workbook, let ``change(wb)`` edit it, save it under a new name."""
    wb = openpyxl.load_workbook(path)
    change(wb)
    out = path.with_name("edited.xlsx")
    wb.save(out)
    return out


def read_errors(path: Path, change) -> list[str]:
    """The error lines of reading ``path`` after ``change(wb)``."""
    with pytest.raises((InputError, InputErrors)) as exc:
        read_workbook(edit(path, change))
    return exc.value.lines()


# -- round trips ---------------------------------------------------------------------

@pytest.mark.parametrize("which", ["fly", "moth"])
def test_toml_to_workbook_to_scenario(tmp_path, which):
    scn = load_scenario(demo_scenario_path(which))
    again = read_workbook(write_workbook(scn, tmp_path / "s.xlsx"))
    assert again == scn


def test_workbook_to_toml_to_scenario(demo_xlsx, demo):
    from_wb = read_workbook(demo_xlsx)
    again = validate(Scenario, tomllib.loads(dump_toml(from_wb)), "dumped.toml")
    assert again == from_wb == demo


def test_every_optional_part_round_trips(tmp_path, demo):
    scn = varied(demo)
    assert scn != demo
    again = read_workbook(write_workbook(scn, tmp_path / "varied.xlsx"))
    assert again == scn
    assert again.notes.startswith("=not a formula")
    assert again.costs.diet_per_kg == 0.1 + 0.25 and again.labour.harvest_packing == 2 / 3
    toml_again = validate(Scenario, tomllib.loads(dump_toml(again)), "dumped.toml")
    assert toml_again == scn


def test_load_scenario_dispatches_workbooks(demo_xlsx, demo):
    assert load_scenario(demo_xlsx) == demo


def test_empty_optional_cells_mean_not_given(tmp_path, demo):
    scn = varied(demo)
    assert scn.plan.solver != "cbc" and scn.plan.lookahead_weeks is not None
    assert scn.orders[0].shortfall_per_million is not None

    def clear(wb):
        cell(wb, "Plan", "solver").value = None
        cell(wb, "Plan", "lookahead_weeks").value = None
        cell(wb, "Orders", 2, "shortfall per million").value = "  "
        cell(wb, "Orders", 3, "first week").value = None
    again = read_workbook(edit(write_workbook(scn, tmp_path / "v.xlsx"), clear))
    defaults = Scenario.model_fields["plan"].default_factory()
    assert again.plan.solver == defaults.solver
    assert again.plan.lookahead_weeks is None
    assert again.orders[0].shortfall_per_million is None
    assert again.orders[1].first_week == 1


def test_values_in_other_units_and_spellings_are_read(demo_xlsx):
    def change(wb):
        cell(wb, "Plan", "time_limit").value = "3 min"
        cell(wb, "Plan", "solver").value = "HiGHS"
        cell(wb, "Calendar", "start").value = dt.datetime(2027, 1, 4)
        cell(wb, "Colony", "rearing.harvest_ages").value = 25     # a one-age list
        wb["Orders"].insert_rows(3)   # a blank row between orders is skipped
    scn = read_workbook(edit(demo_xlsx, change))
    assert scn.plan.time_limit == 180.0
    assert scn.plan.solver == "highs"
    assert scn.calendar.start == dt.date(2027, 1, 4)
    assert scn.colony.rearing.harvest_ages == [25]
    assert len(scn.orders) == 3


# -- the committed template ----------------------------------------------------------

def _content(path: Path) -> dict:
    wb = openpyxl.load_workbook(path)
    out = {"sheets": wb.sheetnames}
    for ws in wb.worksheets:
        out[ws.title] = {
            "cells": [[(c.value, c.number_format) for c in row] for row in ws.iter_rows()],
            "validations": sorted((dv.type, dv.formula1, dv.formula2, dv.operator,
                                   str(dv.sqref)) for dv in ws.data_validations.dataValidation),
        }
    return out


def test_template_is_up_to_date(tmp_path):
    fresh = write_template(tmp_path / "template.xlsx")
    assert TEMPLATE.exists(), "run planner.scenario.workbook.write_template on templates/"
    committed, regenerated = _content(TEMPLATE), _content(fresh)
    assert committed["sheets"] == regenerated["sheets"]
    for name in regenerated["sheets"]:
        assert committed[name] == regenerated[name], (
            f"sheet {name!r} differs: regenerate templates/broodline-input.xlsx with "
            "planner.scenario.workbook.write_template")


def test_template_is_the_demo_and_says_so():
    assert read_workbook(TEMPLATE) == load_scenario(demo_scenario_path("fly"))
    wb = openpyxl.load_workbook(TEMPLATE)
    text = " ".join(str(c.value) for row in wb["Instructions"].iter_rows() for c in row
                    if c.value)
    assert "INVENTED demo data" in text
    for spec in workbook.SHEETS:
        assert spec.title in text and len(spec.title) <= 31


def test_same_scenario_same_content(tmp_path, demo):
    a = write_workbook(demo, tmp_path / "a.xlsx")
    b = write_workbook(demo, tmp_path / "b.xlsx")
    assert _content(a) == _content(b)
    props = openpyxl.load_workbook(a).properties
    assert props.created == props.modified == workbook._STAMP


def test_every_table_header_has_a_unit(demo_xlsx):
    wb = openpyxl.load_workbook(demo_xlsx)
    for spec in workbook.SHEETS:
        if spec.kind == "fields":
            ws = wb[spec.title]
            units = [ws.cell(r, 3).value for r in range(2, ws.max_row + 1)]
            assert all(units), spec.title
        else:
            for cell in wb[spec.title][1]:
                assert cell.value.endswith("]") and " [" in cell.value, cell.value


def test_dates_are_dates_and_numbers_are_numbers(demo_xlsx, demo):
    wb = openpyxl.load_workbook(demo_xlsx)
    ws = wb["Calendar"]
    start = ws.cell(find_field(ws, "start"), 2)
    assert start.is_date and start.value.date() == demo.calendar.start
    holiday = wb["Holidays"].cell(2, 1)
    assert holiday.is_date and holiday.value.date() == demo.calendar.holidays[0]
    ready = wb["Expansion"].cell(2, find_column(wb["Expansion"], "ready"))
    assert ready.is_date and ready.value.date() == demo.expansion[0].ready
    volume = wb["Orders"].cell(2, find_column(wb["Orders"], "weekly volume"))
    assert volume.data_type == "n" and volume.value == demo.orders[0].weekly_volume
    lx = wb["Life table"].cell(3, find_column(wb["Life table"], "lx"))
    assert lx.data_type == "n" and lx.value == demo.colony.life_table.lx[1]
    ws = wb["Plan"]
    assert ws.cell(find_field(ws, "time_limit"), 2).data_type == "n"


def test_choice_and_date_cells_have_validations(demo_xlsx):
    wb = openpyxl.load_workbook(demo_xlsx)

    def rules(title):
        return {(dv.type, dv.formula1): str(dv.sqref)
                for dv in wb[title].data_validations.dataValidation}

    plan = rules("Plan")
    assert plan[("list", '"auto,cbc,highs"')] == f"B{find_field(wb['Plan'], 'solver')}"
    assert ("list", '"7,14"') in plan and ("list", '"yes,no"') in plan
    assert ("list", '"all eggs,female eggs"') in rules("Colony")
    calendar = rules("Calendar")
    assert ("date", "DATE(1990,1,1)") in calendar
    assert len(calendar[("list", '"yes,no"')].split()) == 8   # seven weekdays + holidays
    letter = openpyxl.utils.get_column_letter(find_column(wb["Start cages"], "load date"))
    assert rules("Start cages")[("date", "DATE(1990,1,1)")].startswith(f"{letter}2:")


# -- errors --------------------------------------------------------------------------

def test_missing_sheet(demo_xlsx):
    lines = read_errors(demo_xlsx, lambda wb: wb.remove(wb["Orders"]))
    assert lines == ["edited.xlsx: the sheet 'Orders' is missing; copy it from the template "
                     "(broodline template OUT.xlsx)"]


def test_renamed_sheet_is_suggested(demo_xlsx):
    def rename(wb):
        wb["Start cages"].title = "Start cage"
        wb["Holidays"].title = "renaming"
        wb["renaming"].title = "holidays"     # case does not matter
    (line,) = read_errors(demo_xlsx, rename)
    assert line == ("edited.xlsx: the sheet 'Start cages' is missing; a sheet is called "
                    "'Start cage': rename it to 'Start cages'")


def _header(wb, sheet, prefix, text):
    cell(wb, sheet, 1, prefix).value = text


def test_unknown_column_suggests_the_closest(demo_xlsx):
    lines = read_errors(demo_xlsx, lambda wb: _header(wb, "Orders", "weekly volume",
                                                      "weekly volumes [million/week]"))
    assert lines == ["edited.xlsx: sheet 'Orders', row 1: unknown column 'weekly volumes "
                     "[million/week]' (did you mean 'weekly volume [million/week]'?)"]


def test_column_in_another_unit(demo_xlsx):
    (line,) = read_errors(demo_xlsx, lambda wb: _header(wb, "Orders", "weekly volume",
                                                        "weekly volume [thousand/week]"))
    assert "sheet 'Orders', row 1" in line and "[million/week]" in line


def test_unknown_field_suggests_the_closest(demo_xlsx):
    def rename(wb):
        ws = wb["Plan"]
        ws.cell(find_field(ws, "time_limit"), 1).value = "time limt"
    (line,) = read_errors(demo_xlsx, rename)
    assert "sheet 'Plan'" in line and "unknown field 'time limt'" in line
    assert "did you mean 'time_limit'" in line


def test_changed_unit_column_is_an_error(demo_xlsx):
    rows = {}

    def spoil(wb):
        target = cell(wb, "Plan", "time_limit")
        rows["limit"] = target.row
        wb["Plan"].cell(target.row, 3).value = "min"
    (line,) = read_errors(demo_xlsx, spoil)
    assert line.startswith(f"edited.xlsx: sheet 'Plan', row {rows['limit']}, column 'unit', "
                           "value 'min': the unit of 'time_limit' is s")


def test_missing_required_column(demo_xlsx):
    def drop(wb):
        ws = wb["Adult rooms"]
        ws.delete_cols(find_column(ws, "cage slots"))
    assert read_errors(demo_xlsx, drop) == [
        "edited.xlsx: sheet 'Adult rooms': column 'cage slots [cage slots]' is missing; add it "
        "back to row 1"]


def test_text_in_a_number_cell_names_sheet_row_and_column(demo_xlsx):
    def spoil(wb):
        cell(wb, "Orders", 3, "weekly volume").value = "six"
    (line,) = read_errors(demo_xlsx, spoil)
    assert line.startswith("edited.xlsx: sheet 'Orders', row 3, column 'weekly volume "
                           "[million/week]', value 'six': a number in million/week is needed")


def test_bad_date(demo_xlsx):
    rows = {}

    def spoil(wb):
        target = cell(wb, "Calendar", "start")
        target.value, rows["start"] = "2027-02-30", target.row
    (line,) = read_errors(demo_xlsx, spoil)
    assert line.startswith(f"edited.xlsx: sheet 'Calendar', row {rows['start']} (start), "
                           "column 'value', value '2027-02-30': a date is needed")


def test_several_errors_at_once(demo_xlsx):
    def spoil(wb):
        cell(wb, "Crews", 2, "hours Sun").value = -4
        cell(wb, "Calendar", "shipping_days.Wed").value = "maybe"
        cell(wb, "Expansion", 3, "ready").value = "soon"
        cell(wb, "Life table", 6, "lx").value = 1.5
    lines = read_errors(demo_xlsx, spoil)
    assert len(lines) == 4, lines
    text = "\n".join(lines)
    assert "sheet 'Crews', row 2, column 'hours Sun [h/day]', value -4" in text
    assert "shipping_days.Wed" in text and "yes or no" in text
    assert "sheet 'Expansion', row 3, column 'ready [date]', value 'soon'" in text
    assert "sheet 'Life table', row 6, column 'lx [-]'" in text


def test_cross_field_errors_point_at_the_cell(demo_xlsx):
    rows = {}

    def spoil_colony(wb):
        target = cell(wb, "Colony", "rearing.harvest_ages")
        target.value, rows["ages"] = "24, 25, 66", target.row

    def spoil_order(wb):
        cell(wb, "Orders", 3, "first week").value = 9
        cell(wb, "Orders", 3, "last week").value = 2

    (line,) = read_errors(demo_xlsx, spoil_colony)
    assert line.startswith(f"edited.xlsx: sheet 'Colony', row {rows['ages']} "
                           "(rearing.harvest_ages), column 'value': ")
    assert "harvest age 66 is after the discard age" in line
    (line,) = read_errors(demo_xlsx, spoil_order)
    assert line.startswith("edited.xlsx: sheet 'Orders', row 3: ")
    assert "ends (week 2) before it starts (week 9)" in line


def test_batch_errors_point_at_the_row(tmp_path, demo):
    path = write_workbook(varied(demo), tmp_path / "batches.xlsx")
    lines = read_errors(path, lambda wb: setattr(cell(wb, "Start cages", 3, "room"), "value",
                                                 "Room Z"))
    assert lines == ["edited.xlsx: sheet 'Start cages', row 3, column 'room [text]': "
                     "start.cages[2].room: no adult room is called 'Room Z'"]


def test_not_a_workbook(tmp_path):
    bad = tmp_path / "plan.xlsx"
    bad.write_text("name = 'not a workbook'\n")
    with pytest.raises(InputError, match=r"^plan\.xlsx: not a readable \.xlsx workbook"):
        read_workbook(bad)
    with pytest.raises(InputError, match="file not found"):
        read_workbook(tmp_path / "absent.xlsx")


# -- writing -------------------------------------------------------------------------

def test_failed_write_leaves_the_old_file(tmp_path, demo, monkeypatch):
    target = tmp_path / "plan.xlsx"
    target.write_bytes(b"the previous workbook")

    from openpyxl.writer.excel import ExcelWriter

    def broken(self):
        self._archive.writestr("half.xml", "half a workbook")
        raise OSError("disk full")

    monkeypatch.setattr(ExcelWriter, "write_data", broken)
    with pytest.raises(OSError, match="disk full"):
        write_workbook(demo, target)
    assert target.read_bytes() == b"the previous workbook"
    assert os.listdir(tmp_path) == ["plan.xlsx"]


def test_write_needs_an_xlsx_name(tmp_path, demo):
    with pytest.raises(InputError, match=r"\.xlsx"):
        write_workbook(demo, tmp_path / "plan.ods")
