"""The plan workbook and CSV files, reloaded with openpyxl and pandas and checked
against the plan object."""

import datetime as dt

import numpy as np
import openpyxl
import pandas as pd
import pytest

from planner.reports import SHEET_NAMES, write_csvs, write_plan_workbook
from planner.reports.tables import DAILY_COLUMNS


@pytest.fixture(scope="module")
def written(fly_plan, fly_schedule, tmp_path_factory):
    folder = tmp_path_factory.mktemp("plan")
    path = write_plan_workbook(fly_plan, folder / "plan.xlsx", schedule=fly_schedule)
    csvs = write_csvs(fly_plan, folder / "csv")
    return path, csvs, openpyxl.load_workbook(path)


def _sheet_frame(ws, header_row=1):
    rows = list(ws.iter_rows(min_row=header_row, values_only=True))
    header = [h for h in rows[0] if h is not None]
    return pd.DataFrame([r[:len(header)] for r in rows[1:] if any(v is not None for v in r)],
                        columns=header)


def test_sheets_and_names(written):
    _, _, wb = written
    assert wb.sheetnames == SHEET_NAMES
    assert all(len(n) <= 31 for n in wb.sheetnames)


def test_daily_sheet_equals_the_plan(written, fly_plan):
    _, _, wb = written
    sheet = _sheet_frame(wb["Daily plan"])
    d = fly_plan.horizon_daily
    assert len(sheet) == len(d) == fly_plan.data.report_days
    for col, name, unit in DAILY_COLUMNS:
        header = f"{name} [{unit}]" if unit else name
        got = sheet[header].to_list()
        want = d[col].to_list()
        if col == "date":
            assert all(isinstance(v, dt.datetime) for v in got)
            assert [v.date() for v in got] == want
        elif isinstance(want[0], (bool, np.bool_, str)):
            assert got == [bool(v) if isinstance(v, (bool, np.bool_)) else v for v in want]
        else:
            np.testing.assert_allclose(np.array(got, float), np.array(want, float), rtol=1e-12)


def test_daily_csv_equals_the_plan(written, fly_plan):
    _, csvs, _ = written
    df = pd.read_csv(csvs["daily"])
    df.columns = [c.split(" [")[0] for c in df.columns]
    for name in ("date", "cages_loaded", "cages_occupied", "cage_slots", "trays_seeded",
                 "trays_occupied", "rack_slots", "diet_kg", "diet_limit_kg", "crew_hours",
                 "crew_hours_available", "overtime_hours", "eggs_collected", "eggs_seeded",
                 "pupae_released", "pupae_to_colony"):
        assert name in df.columns
    d = fly_plan.horizon_daily
    assert list(df["date"]) == [x.isoformat() for x in d["date"]]
    for name in ("cages_occupied", "trays_seeded", "eggs_collected", "pupae_released",
                 "crew_hours", "overtime_hours"):
        np.testing.assert_allclose(df[name], d[name], rtol=1e-9)
    weekly = pd.read_csv(csvs["weekly"])
    assert list(weekly.columns) == ["week", "customer", "ordered [million]",
                                    "released [million]", "shortfall [million]"]
    assert weekly["ordered [million]"].sum() == pytest.approx(fly_plan.weekly["ordered"].sum())


def test_readme_column_table_equals_the_csv_headers(written, fly_plan):
    """Issue 13: README called the egg and pupae columns millions; they are counts. Every
    header carries its unit, and README's table lists the same headers and units."""
    import re
    from pathlib import Path
    _, csvs, _ = written
    header = list(pd.read_csv(csvs["daily"], nrows=0).columns)
    text = (Path(__file__).resolve().parents[2] / "README.md").read_text()
    block = text[text.index("`daily.csv` columns"):text.index("`weekly.csv`:")]
    rows = re.findall(r"^\| `([^`]+)` \| ([^|]+) \|$", block, re.M)
    listed = [name if unit.strip() == "-" else f"{name} [{unit.strip()}]" for name, unit in rows]
    crews = [f"{p}: {c} [h]" for c in fly_plan.data.crews for p in ("hours", "available",
                                                                       "overtime")]
    assert header == listed + crews
    assert "eggs_collected [eggs]" in header and "pupae_released [pupae]" in header


def test_task_sheet_totals_match_the_daily_plan(written, fly_plan):
    _, _, wb = written
    ws = wb["Tasks"]
    totals, day, crew = {}, None, None
    crews = fly_plan.data.crews
    for row in ws.iter_rows(min_row=2, values_only=True):
        first = row[0]
        if isinstance(first, str) and first[:3] in ("Mon", "Tue", "Wed", "Thu", "Fri", "Sat",
                                                    "Sun"):
            day = dt.date.fromisoformat(first.split()[1])
        elif isinstance(first, str) and any(first.startswith(c + ":") for c in crews):
            crew = first.split(":")[0]
        elif row[9] == "total":
            totals[(day, crew)] = row[10]
    d = fly_plan.horizon_daily
    assert len(totals) == len(d) * len(crews)
    for r in d.itertuples():
        for c in crews:
            assert totals[(r.date, c)] == pytest.approx(d.at[r.Index, f"hours: {c}"], abs=1e-9)
            limit = d.at[r.Index, f"available: {c}"] + d.at[r.Index, f"overtime: {c}"]
            assert totals[(r.date, c)] <= limit + 1e-6


def test_task_sheets_print_one_day_per_page(written, fly_plan):
    _, _, wb = written
    ws = wb["Tasks"]
    assert ws.page_setup.orientation == "landscape"
    assert str(ws.page_setup.paperSize) == "9"  # A4
    assert ws.page_setup.fitToWidth == 1 and ws.sheet_properties.pageSetUpPr.fitToPage
    assert ws.print_title_rows == "$1:$1"
    assert len(ws.row_breaks.brk) == fly_plan.data.report_days
    ticks = [c.value for c in ws["A"] if c.value == "\u2610"]
    assert len(ticks) > fly_plan.data.report_days


def test_task_sheet_counts_are_whole_and_formatted_so(written):
    """Issue 13: '1.00 cages', '295.00 trays' on the sheet. Count cells hold whole
    numbers with a whole-number format; kg keep one decimal."""
    _, _, wb = written
    ws = wb["Tasks"]
    seen = 0
    for row in ws.iter_rows(min_row=2):
        if row[0].value != "\u2610":
            continue
        qty, unit = row[4], row[5].value
        if unit in ("cages", "trays") or "to 1,000" in str(unit):
            assert float(qty.value) % 1 == 0 and qty.number_format == "#,##0"
            seen += 1
        elif unit == "kg":
            assert qty.number_format == "#,##0.0"
    assert seen > 100


def test_cage_register_sheet(written, fly_schedule):
    _, _, wb = written
    sheet = _sheet_frame(wb["Cage register"])
    assert len(sheet) == len(fly_schedule.cages)
    assert sheet["cages [cages]"].sum() == fly_schedule.cages["cages"].sum()
    assert all(isinstance(v, dt.datetime) for v in sheet["load_date"])


def test_summary_has_status_costs_and_cautions(written, fly_plan):
    _, _, wb = written
    text = " ".join(str(c.value) for row in wb["Summary"].iter_rows() for c in row if c.value)
    assert fly_plan.info.status in text
    assert "licensed staff" in text and "estimates" in text
    assert "Order fill by customer" in text


def test_charts_are_native(written):
    _, _, wb = written
    for name in ("Orders", "Rooms", "Labour"):
        assert wb[name]._charts, name


def test_numbers_are_numbers(written):
    _, _, wb = written
    ws = wb["Orders"]
    assert isinstance(ws["D2"].value, (int, float))
    assert ws["B2"].is_date


def test_same_plan_same_content(fly_plan, fly_schedule, tmp_path):
    a = write_plan_workbook(fly_plan, tmp_path / "a.xlsx", schedule=fly_schedule)
    b = write_plan_workbook(fly_plan, tmp_path / "b.xlsx", schedule=fly_schedule)
    wa, wb_ = openpyxl.load_workbook(a), openpyxl.load_workbook(b)
    for name in wa.sheetnames:
        va = [[c for c in r] for r in wa[name].iter_rows(values_only=True)]
        vb = [[c for c in r] for r in wb_[name].iter_rows(values_only=True)]
        assert va == vb, name


def test_a_failed_write_leaves_the_old_file(fly_plan, fly_schedule, tmp_path, monkeypatch):
    target = tmp_path / "plan.xlsx"
    target.write_bytes(b"last week's plan")
    from openpyxl.writer.excel import ExcelWriter

    def broken(self):
        self._archive.writestr("xl/half.xml", "half")
        raise OSError("disk full")

    monkeypatch.setattr(ExcelWriter, "write_data", broken)
    with pytest.raises(OSError, match="disk full"):
        write_plan_workbook(fly_plan, target, schedule=fly_schedule)
    assert target.read_bytes() == b"last week's plan"
    assert [p.name for p in tmp_path.iterdir()] == ["plan.xlsx"]


def test_a_crew_day_with_overtime_counts_as_full(fly_plan):
    """Issue 13: Bottlenecks showed a crew 'days_full 0' beside 'overtime on 36 days'."""
    from planner.optimise.results import describe_bottlenecks
    from planner.reports.tables import utilisation_summary
    u = utilisation_summary(fly_plan).set_index("resource")
    d = fly_plan.horizon_daily
    worked = False
    for crew in fly_plan.data.crews:
        ot_days = int((d[f"overtime: {crew}"] > 1e-3).sum())
        assert u.at[f"crew hours: {crew}", "days_full"] >= ot_days
        worked |= ot_days > 0
    assert worked, "the demo plan works overtime somewhere"
    text = " ".join(describe_bottlenecks(fly_plan, top=10))
    assert "overtime worked on" in text


def test_the_glance_sheet_shows_each_room_as_occupied(written, fly_plan, fly_schedule):
    """Issue 13: a 'plan at a glance' sheet, rooms down and days across. Its cage cells
    per adult room and day add up to the cages occupied there (from the cage register),
    its tray cells per larval room and day to the trays on racks; every count cell is
    coloured by the batch's age; each crew's planned hours are the plan's."""
    _, _, wb = written
    ws = wb["At a glance"]
    data = fly_plan.data
    occ: dict[tuple[str, str], float] = {}
    hours: dict[tuple[str, str], float] = {}
    head = None
    for row in ws.iter_rows(min_row=1):
        values = [c.value for c in row]
        if values[0] in ("room", "crew"):
            head = values
            continue
        if head is None or values[0] is None:
            continue
        if head[0] == "room" and isinstance(values[1], str) and values[1].endswith(")"):
            for j in range(2, len(head)):
                if head[j] and values[j] is not None:
                    occ[(values[0], head[j].split()[1])] = occ.get(
                        (values[0], head[j].split()[1]), 0) + values[j]
                    assert row[j].fill.fgColor.rgb not in (None, "00000000")
        if head[0] == "crew" and values[1] == "planned":
            for j in range(2, len(head)):
                if head[j]:
                    hours[(values[0], head[j].split()[1])] = values[j]
    want: dict[tuple[str, str], float] = {}
    for reg, length in ((fly_schedule.cages, None), (fly_schedule.trays, data.rack_days)):
        for p in reg.itertuples():
            start = p.load_day if length is None else p.seed_day
            span = data.span(p.discard_age) if length is None else length
            count = p.cages if length is None else p.trays
            for t in range(max(start, 0), min(start + span, data.report_days)):
                key = (p.room, str(data.date(t)))
                want[key] = want.get(key, 0) + count
    assert occ == pytest.approx(want)
    d = fly_plan.horizon_daily
    for c in data.crews:
        for r in d.itertuples():
            assert hours[(c, str(r.date))] == pytest.approx(d.at[r.Index, f"hours: {c}"],
                                                             abs=0.006)
