"""The plan workbook: what a rearing manager works from.

Sheets: Summary, Orders (with a chart), Daily plan, Tasks (one printed page per day: the
crews' work in the order it is done, with a box to tick and initial per line), Cage
register, Tray register, Rooms (with a chart), Labour (with a chart), Costs,
Bottlenecks, Demography. Numbers are stored as numbers with number formats, dates as
dates; units are in the headers. The same plan gives the same workbook content; the file
is written atomically.
"""

from __future__ import annotations

import datetime as dt
from copy import copy
from pathlib import Path

import pandas as pd
from openpyxl import Workbook
from openpyxl.chart import AreaChart, BarChart, LineChart, Reference
from openpyxl.styles import Alignment, Border, Font, PatternFill, Side
from openpyxl.utils import get_column_letter
from openpyxl.worksheet.pagebreak import Break

from planner.demography import single_stage_harvest
from planner.errors import DemographyError, InputError
from planner.cautions import CAUTIONS
from planner.fileio import save_workbook
from planner.reports.tables import (daily_table, daily_units, utilisation_summary,
                                    weekly_costs, weekly_table)
from planner.scenario.schema import WEEKDAYS

__all__ = ["write_plan_workbook", "write_sweep_workbook", "SHEET_NAMES", "CAUTIONS"]

SHEET_NAMES = ["Summary", "Orders", "Daily plan", "Tasks", "At a glance", "Cage register",
               "Tray register", "Rooms", "Labour", "Costs", "Bottlenecks", "Demography"]


_STAMP = dt.datetime(2000, 1, 1)
_BOLD = Font(bold=True)
_TITLE = Font(bold=True, size=14)
_HEAD_FILL = PatternFill("solid", fgColor="DDE6F0")
_WARN = Font(bold=True, color="B00000")
_THIN = Side(style="thin", color="999999")
_BOX = Border(left=_THIN, right=_THIN, top=_THIN, bottom=_THIN)
_FMT = {"int": "#,##0", "num": "#,##0.00", "frac": "0.000", "pct": "0.0%", "date": "yyyy-mm-dd",
        "money": "#,##0", "big": "#,##0"}


def _fmt_for(unit: str, sample) -> str | None:
    if isinstance(sample, (dt.date, dt.datetime)):
        return _FMT["date"]
    if isinstance(sample, bool) or not isinstance(sample, (int, float)):
        return None
    if unit in ("eggs", "pupae", "females", "kg", "cages", "trays", "slots"):
        return _FMT["big"] if unit in ("eggs", "pupae", "females") else _FMT["num"]
    if unit in ("-", "share"):
        return _FMT["frac"]
    return _FMT["num"]


def _header(name: str, unit: str) -> str:
    return f"{name} [{unit}]" if unit else name


def _table(ws, frame: pd.DataFrame, start_row: int = 1, units: dict | None = None,
           col: int = 1) -> int:
    """Write a frame with a header row; returns the next free row."""
    units = units or {}
    for j, name in enumerate(frame.columns):
        c = ws.cell(row=start_row, column=col + j, value=_header(str(name), units.get(name, "")))
        c.font = _BOLD
        c.fill = _HEAD_FILL
        c.alignment = Alignment(wrap_text=True, vertical="top")
    for i, row in enumerate(frame.itertuples(index=False), start=start_row + 1):
        for j, value in enumerate(row):
            value = _cell(value)
            c = ws.cell(row=i, column=col + j, value=value)
            fmt = _fmt_for(units.get(frame.columns[j], ""), value)
            if fmt:
                _style(c, number_format=fmt)
    return start_row + len(frame) + 1


def _style(cell, **attrs) -> None:
    """Set ``attrs`` (font, fill, border, number_format, ...) on ``cell``; cells given the
    same attributes share the first one's style record, which skips openpyxl's hashing
    of each style object on every cell (most of a large workbook's write time)."""
    cache = cell.parent.parent.__dict__.setdefault("_broodline_styles", {})
    key = tuple(sorted((k, v if isinstance(v, str) else id(v)) for k, v in attrs.items()))
    arr = cache.get(key)
    if arr is None:
        for k, v in attrs.items():
            setattr(cell, k, v)
        cache[key] = (copy(cell._style), tuple(attrs.values()))  # values kept alive
    else:
        cell._style = copy(arr[0])


def _cell(value):
    if value is None:
        return None
    if isinstance(value, float) and value != value:  # NaN
        return None
    if hasattr(value, "item"):
        value = value.item()
    if isinstance(value, pd.Timestamp):
        return value.date()
    return value


def _widths(ws, widths: dict[int, float] | None = None, default: float = 14) -> None:
    for j in range(1, ws.max_column + 1):
        ws.column_dimensions[get_column_letter(j)].width = (widths or {}).get(j, default)


def _print_setup(ws, title_rows: str | None = None, landscape: bool = True) -> None:
    ws.page_setup.paperSize = ws.PAPERSIZE_A4
    ws.page_setup.orientation = "landscape" if landscape else "portrait"
    ws.page_setup.fitToWidth = 1
    ws.page_setup.fitToHeight = 0
    ws.sheet_properties.pageSetUpPr.fitToPage = True
    if title_rows:
        ws.print_title_rows = title_rows


def _status_lines(res) -> list[tuple[str, object, str]]:
    info = res.info
    s = res.summary()
    cur = s["currency"]
    rows = [
        ("status", info.status + (" — TIME-LIMITED: the plan is feasible but not proven "
                                  "cheapest" if info.time_limited else ""), ""),
        ("solver message", info.message, ""),
        ("solver", info.solver, ""),
        ("objective (all modelled weeks, shortfall priced)", info.objective, cur),
        ("best bound", info.best_bound, cur),
        ("relative gap", info.gap, "-"),
        ("solve time", info.seconds, "s"),
        ("variable cost (reported weeks; what the plan controls)", s["variable_cost"], cur),
        ("total cost (variable + fixed regular crew)", s["total_cost"], cur),
        ("shortfall price of unmet orders (reported weeks)", s["shortfall_cost"], cur),
        ("cost per million delivered", s["cost_per_million"], f"{cur}/million"),
        ("delivered", s["released_million"], "million"),
        ("ordered", s["ordered_million"], "million"),
        ("short", s["shortfall_million"], "million"),
        ("discard ages used", ", ".join(map(str, s["discard_ages_used"])) or "-", "day"),
        ("harvest ages used", ", ".join(map(str, s["harvest_ages_used"])) or "-", "day"),
    ]
    return rows


def _summary(wb, res, scenario_file: str | None):
    ws = wb.active
    ws.title = "Summary"
    scn = res.scenario
    ws["A1"] = f"Rearing plan: {scn.name}"
    ws["A1"].font = _TITLE
    data = res.data
    ws["A2"] = (f"{data.report_weeks} weeks from {data.start_date} to "
                f"{data.date(data.report_days - 1)}; colony {scn.colony.name}"
                + (f"; scenario {scenario_file}" if scenario_file else ""))
    row = 4
    if res.info.time_limited:
        ws.cell(row=row, column=1, value="TIME-LIMITED PLAN: the solver stopped at its time "
                "limit; the plan keeps every rule but may not be the cheapest.").font = _WARN
        row += 2
    ws.cell(row=row, column=1, value="quantity").font = _BOLD
    ws.cell(row=row, column=2, value="value").font = _BOLD
    ws.cell(row=row, column=3, value="unit").font = _BOLD
    for name, value, unit in _status_lines(res):
        row += 1
        ws.cell(row=row, column=1, value=name)
        c = ws.cell(row=row, column=2, value=_cell(value))
        if isinstance(value, float):
            c.number_format = "0.00%" if name == "relative gap" else _FMT["num"]
        ws.cell(row=row, column=3, value=unit)
    row += 2
    ws.cell(row=row, column=1, value="Order fill by customer").font = _BOLD
    fill = res.weekly.groupby("customer", as_index=False)[["ordered", "released",
                                                           "shortfall"]].sum()
    fill["fill"] = fill["released"] / fill["ordered"]
    row = _table(ws, fill, row + 1, {"ordered": "million", "released": "million",
                                     "shortfall": "million", "fill": "-"})
    for r in range(row - len(fill), row):
        ws.cell(row=r, column=5).number_format = "0.0%"
    row += 1
    ws.cell(row=row, column=1, value="Bottlenecks").font = _BOLD
    for text in res.bottlenecks or ["none: no resource limited the plan"]:
        row += 1
        ws.cell(row=row, column=1, value=text)
    if res.shortfalls:
        row += 2
        ws.cell(row=row, column=1, value="Orders that cannot be filled").font = _WARN
        for s in res.shortfalls:
            row += 1
            ws.cell(row=row, column=1, value=s["text"])
    for note in data.start.notes:
        row += 2
        ws.cell(row=row, column=1, value=f"note: {note}")
    row += 2
    ws.cell(row=row, column=1, value="Cautions").font = _BOLD
    for text in CAUTIONS:
        row += 1
        ws.cell(row=row, column=1, value=text)
    _widths(ws, {1: 48, 2: 34, 3: 16, 4: 14, 5: 12})
    _print_setup(ws, landscape=False)


def _orders(wb, res):
    ws = wb.create_sheet("Orders")
    w = weekly_table(res)
    end = _table(ws, w, 1, {"ordered": "million", "released": "million", "shortfall": "million"})
    # the chart: ordered and released by week, all customers together
    tot = w.groupby("week", as_index=False)[["ordered", "released"]].sum()
    col0 = 9
    _table(ws, tot, 1, {"ordered": "million", "released": "million"}, col=col0)
    chart = BarChart()
    chart.title = "Ordered and released by week"
    chart.y_axis.title = "million insects"
    chart.x_axis.title = "week"
    values = Reference(ws, min_col=col0 + 1, max_col=col0 + 2, min_row=1, max_row=len(tot) + 1)
    cats = Reference(ws, min_col=col0, min_row=2, max_row=len(tot) + 1)
    chart.add_data(values, titles_from_data=True)
    chart.set_categories(cats)
    chart.height, chart.width = 9, 22
    ws.add_chart(chart, f"{get_column_letter(col0 + 4)}2")
    _widths(ws, {3: 30})
    _print_setup(ws, "1:1")
    return end


def _daily(wb, res):
    ws = wb.create_sheet("Daily plan")
    _table(ws, daily_table(res), 1, daily_units(res))
    ws.freeze_panes = "B2"
    _widths(ws, default=13)
    _print_setup(ws, "1:1")


_TASK_HEAD = ["done", "initials", "task", "what", "quantity", "unit", "eggs", "volume [ml]",
              "room", "batch", "hours [h]"]


def _tasks(wb, res, schedule):
    ws = wb.create_sheet("Tasks")
    data = res.data
    lines = schedule.lines
    daily = res.daily
    for j, name in enumerate(_TASK_HEAD, start=1):
        c = ws.cell(row=1, column=j, value=name)
        c.font = _BOLD
        c.fill = _HEAD_FILL
    row = 2
    by_crew_day: dict[tuple, list] = {}  # one pass over the lines (small frames are slow)
    for ln in lines.itertuples():
        by_crew_day.setdefault((int(ln.day), ln.crew), []).append(ln)
    for t in range(data.report_days):
        wd = WEEKDAYS[int(data.weekday[t])].capitalize()
        title = f"{wd} {data.date(t)}" + (" (holiday)" if data.holiday[t] else "") + \
            (" — shipping day" if data.can_ship[t] else "")
        ws.cell(row=row, column=1, value=title).font = _TITLE
        row += 1
        for crew in data.crews:
            g = by_crew_day.get((t, crew), [])
            avail = float(daily.at[t, f"available: {crew}"])
            ot = float(daily.at[t, f"overtime: {crew}"])
            ws.cell(row=row, column=1, value=f"{crew}: {avail:g} h regular" +
                    (f" + {ot:.1f} h overtime" if ot > 1e-6 else "")).font = _BOLD
            row += 1
            for ln in g:
                cells = ["\u2610", "", ln.title, ln.what, _cell(ln.quantity), ln.unit,
                         _cell(ln.eggs), _cell(ln.volume_ml), ln.room, ln.batch, ln.hours]
                for j, v in enumerate(cells, start=1):
                    c = ws.cell(row=row, column=j, value=v)
                    if j in (5, 7, 8):
                        # whole things whole (cages, trays, pupae and eggs to 1,000), kg to 0.1
                        _style(c, border=_BOX, number_format=(
                            "#,##0.0" if j == 5 and ln.unit == "kg" else _FMT["int"]))
                    elif j == 11:
                        _style(c, border=_BOX, number_format="0.00")
                    else:
                        _style(c, border=_BOX)
                row += 1
            total = float(sum(ln.hours for ln in g))
            ws.cell(row=row, column=10, value="total").font = _BOLD
            c = ws.cell(row=row, column=11, value=total)
            c.number_format = "0.00"
            c.font = _BOLD
            ws.cell(row=row, column=12, value=f"of {avail + ot:.2f} h planned")
            row += 2
        ws.row_breaks.append(Break(id=row - 1))
    _widths(ws, {1: 6, 2: 9, 3: 26, 4: 58, 5: 11, 6: 8, 7: 12, 8: 11, 9: 18, 10: 8, 11: 9,
                 12: 18})
    _print_setup(ws, "1:1")


#: Colours of a batch's age on the glance sheet: (first day of the band as a share of
#: the batch's time in its room, fill, words for the legend).
_AGE_BANDS = [(0.0, "E3F2FD", "first quarter of its time in the room"),
              (0.25, "90CAF9", "second quarter"),
              (0.5, "FFE082", "third quarter"),
              (0.75, "FFAB91", "last quarter (emptied or collected soon)")]


def _glance(wb, res, schedule):
    """The week on one page, per week: each room's batches down (cages in adult rooms,
    trays on racks in larval rooms), the week's days across, each cell the batch's count
    that day coloured by the batch's age; then each crew's planned hours against its
    regular hours."""
    ws = wb.create_sheet("At a glance")
    data = res.data
    daily = res.daily
    n = data.report_days
    fills = [(lo, PatternFill("solid", fgColor=c), words) for lo, c, words in _AGE_BANDS]
    ws.cell(row=1, column=1, value="Plan at a glance: each week on its own page").font = _TITLE
    ws.cell(row=2, column=1, value="cell: cages (adult rooms) or trays (larval rooms) of the "
            "batch in the room that day; colour: the batch's age")
    for j, (_, fill, words) in enumerate(fills):
        c = ws.cell(row=3, column=2 + 2 * j, value=words)
        ws.cell(row=3, column=1 + 2 * j, value="").fill = fill
        c.alignment = Alignment(wrap_text=False)
    parts = []  # (kind, room, batch, first day, length, count)
    for p in schedule.cages.itertuples():
        parts.append(("cages", p.room, p.batch, int(p.load_day), data.span(p.discard_age),
                      int(p.cages)))
    for p in schedule.trays.itertuples():
        parts.append(("trays", p.room, p.batch, int(p.seed_day), data.rack_days, int(p.trays)))
    row = 5
    for w0 in range(0, n, 7):
        days = range(w0, min(w0 + 7, n))
        ws.cell(row=row, column=1, value=f"Week {w0 // 7 + 1} (from {data.date(w0)})").font = \
            _TITLE
        row += 1
        head = ["room", "batch"] + [f"{WEEKDAYS[int(data.weekday[t])].capitalize()} "
                                    f"{data.date(t)}" for t in days]
        for j, text in enumerate(head, start=1):
            c = ws.cell(row=row, column=j, value=text)
            c.font, c.fill, c.border = _BOLD, _HEAD_FILL, _BOX
        row += 1
        for kind, rooms in (("cages", data.scenario.facility.adult_rooms),
                            ("trays", data.scenario.facility.larval_rooms)):
            for room in rooms:
                here = [q for q in parts if q[0] == kind and q[1] == room.name
                        and q[3] <= days[-1] and q[3] + q[4] > days[0]]
                if not here:
                    ws.cell(row=row, column=1, value=room.name).border = _BOX
                    ws.cell(row=row, column=2, value="(empty)").border = _BOX
                    row += 1
                for _, _, batch, start, length, count in sorted(here, key=lambda q: q[3]):
                    _style(ws.cell(row=row, column=1, value=room.name), border=_BOX)
                    _style(ws.cell(row=row, column=2, value=f"{batch} ({kind})"), border=_BOX)
                    for j, t in enumerate(days, start=3):
                        c = ws.cell(row=row, column=j)
                        if start <= t < start + length:
                            c.value = count
                            share = (t - start) / length
                            _style(c, border=_BOX, fill=next(
                                f for lo, f, _ in reversed(fills) if share >= lo))
                        else:
                            _style(c, border=_BOX)
                    row += 1
        row += 1
        for j, text in enumerate(["crew", "hours [h]"] + head[2:], start=1):
            c = ws.cell(row=row, column=j, value=text)
            c.font, c.fill, c.border = _BOLD, _HEAD_FILL, _BOX
        row += 1
        for crew in data.crews:
            for label, col in (("planned", f"hours: {crew}"), ("regular", f"available: {crew}"),
                               ("overtime", f"overtime: {crew}")):
                _style(ws.cell(row=row, column=1, value=crew), border=_BOX)
                _style(ws.cell(row=row, column=2, value=label), border=_BOX)
                for j, t in enumerate(days, start=3):
                    c = ws.cell(row=row, column=j, value=round(float(daily.at[t, col]), 2))
                    _style(c, border=_BOX, number_format="0.0")
                row += 1
        ws.row_breaks.append(Break(id=row))
        row += 2
    _widths(ws, {1: 18, 2: 16, **{j: 15 for j in range(3, 10)}})
    _print_setup(ws, None)


def _register(wb, name, frame, units):
    ws = wb.create_sheet(name)
    _table(ws, frame, 1, units)
    ws.freeze_panes = "A2"
    _widths(ws, {2: 22})
    _print_setup(ws, "1:1")


def _rooms(wb, res, schedule):
    ws = wb.create_sheet("Rooms")
    data = res.data
    days = range(data.report_days)
    frame = pd.DataFrame({"date": [data.date(t) for t in days]})
    from planner.schedule.rooms import rooms_of
    for kind, reg, count_col, span in (("cage", schedule.cages, "cages", None),
                                       ("tray", schedule.trays, "trays", data.rack_days)):
        for room, slots in rooms_of(res, kind):
            occ = [0.0] * data.report_days
            part = reg[reg["room"] == room]
            for p in part.itertuples():
                start = p.load_day if kind == "cage" else p.seed_day
                length = data.span(p.discard_age) if kind == "cage" else span
                for t in range(max(start, 0), min(start + length, data.report_days)):
                    occ[t] += getattr(p, count_col)
            frame[f"{room}: occupied"] = occ
            frame[f"{room}: slots"] = slots[:data.report_days]
    units = {c: ("cages" if any(c.startswith(r.name) for r in data.scenario.facility.adult_rooms)
                 else "slots") for c in frame.columns if c != "date"}
    _table(ws, frame, 1, units)
    chart = LineChart()
    chart.title = "Room occupancy and slots"
    chart.y_axis.title = "slots"
    chart.x_axis.title = "day"
    refs = Reference(ws, min_col=2, max_col=min(frame.shape[1], 5), min_row=1,
                     max_row=len(frame) + 1)
    chart.add_data(refs, titles_from_data=True)
    chart.height, chart.width = 9, 24
    ws.add_chart(chart, f"{get_column_letter(frame.shape[1] + 2)}2")
    ws.freeze_panes = "B2"
    _widths(ws, default=16)
    _print_setup(ws, "1:1")


def _labour(wb, res, schedule):
    ws = wb.create_sheet("Labour")
    data = res.data
    lines = schedule.lines
    piv = lines.pivot_table(index="day", columns=["crew", "task"], values="hours",
                            aggfunc="sum", fill_value=0.0)
    frame = pd.DataFrame({"date": [data.date(t) for t in range(data.report_days)]})
    for crew in data.crews:
        for task in [c[1] for c in piv.columns if c[0] == crew]:
            frame[f"{crew}: {task}"] = [float(piv[(crew, task)].get(t, 0.0))
                                        for t in range(data.report_days)]
        frame[f"{crew}: total"] = [float(res.daily.at[t, f"hours: {crew}"])
                                   for t in range(data.report_days)]
        frame[f"{crew}: regular"] = [float(res.daily.at[t, f"available: {crew}"])
                                     for t in range(data.report_days)]
        frame[f"{crew}: overtime"] = [float(res.daily.at[t, f"overtime: {crew}"])
                                      for t in range(data.report_days)]
    end = _table(ws, frame, 1, {c: "h" for c in frame.columns if c != "date"})
    # hours by task and weekday against the crew's hours (means over the plan)
    row = end + 2
    ws.cell(row=row, column=1, value="Mean hours by weekday").font = _BOLD
    frame["weekday"] = [WEEKDAYS[int(data.weekday[t])].capitalize()
                        for t in range(data.report_days)]
    means = frame.drop(columns="date").groupby("weekday", sort=False).mean()
    means = means.reindex([d.capitalize() for d in WEEKDAYS]).reset_index()
    _table(ws, means, row + 1, {c: "h" for c in means.columns if c != "weekday"})
    chart = BarChart()
    chart.type = "col"
    chart.title = "Mean crew hours by weekday"
    chart.y_axis.title = "h"
    first = row + 1
    cols = [j + 1 for j, c in enumerate(means.columns) if c.endswith(": total") or
            c.endswith(": regular")]
    for j in cols:
        chart.add_data(Reference(ws, min_col=j, min_row=first, max_row=first + 7),
                       titles_from_data=True)
    chart.set_categories(Reference(ws, min_col=1, min_row=first + 1, max_row=first + 7))
    chart.height, chart.width = 9, 20
    ws.add_chart(chart, f"{get_column_letter(frame.shape[1] + 2)}2")
    ws.freeze_panes = "B2"
    _widths(ws, default=15)
    _print_setup(ws, "1:1")


def _costs(wb, res):
    ws = wb.create_sheet("Costs")
    cur = res.scenario.costs.currency
    frame = weekly_costs(res)
    end = _table(ws, frame, 1, {c: cur for c in frame.columns if c != "week"})
    row = end + 2
    ws.cell(row=row, column=1, value="By category").font = _BOLD
    cat = res.costs.pivot_table(index="term", columns="period", values="cost",
                                aggfunc="sum").fillna(0.0).reset_index()
    _table(ws, cat, row + 1, {c: cur for c in cat.columns if c != "term"})
    _widths(ws, {1: 26})
    _print_setup(ws, "1:1")


def _bottlenecks(wb, res):
    ws = wb.create_sheet("Bottlenecks")
    ws["A1"] = "Bottlenecks"
    ws["A1"].font = _TITLE
    row = 2
    for text in res.bottlenecks or ["none: no resource limited the plan"]:
        row += 1
        ws.cell(row=row, column=1, value=text)
    row += 2
    ws.cell(row=row, column=1, value="Utilisation over the reported days").font = _BOLD
    u = utilisation_summary(res)
    row = _table(ws, u, row + 1, {"mean_utilisation": "-", "peak_utilisation": "-"})
    row += 1
    cur = res.scenario.costs.currency
    ws.cell(row=row, column=1, value=(
        f"Shadow prices [{cur} per unit, one more unit on every day of the week]: 'value' "
        "with this plan's cages and trays held; 'relaxed_value' in the continuous "
        "relaxation")).font = _BOLD
    prices = res.shadow_prices
    if not prices.empty:
        _table(ws, prices, row + 1, {"value": cur, "relaxed_value": cur})
    _widths(ws, {1: 30})
    _print_setup(ws, "1:1")


def _demography(wb, res):
    ws = wb.create_sheet("Demography")
    col = res.scenario.colony
    lt = col.to_life_table()
    s = lt.summary()
    ws["A1"] = f"Demography of {col.name}"
    ws["A1"].font = _TITLE
    items = [("net reproductive rate R0", s["net_reproductive_rate"], "female eggs per female egg"),
             ("intrinsic rate r", s["intrinsic_rate"], "per day"),
             ("finite rate lambda", s["finite_rate"], "per day"),
             ("generation time T", s["generation_time"], "day"),
             ("female fraction", col.female_fraction, "-")]
    row = 3
    for name, value, unit in items:
        ws.cell(row=row, column=1, value=name)
        ws.cell(row=row, column=2, value=float(value)).number_format = "0.0000"
        ws.cell(row=row, column=3, value=unit)
        row += 1
    used = res.cage_batches[res.cage_batches["source"] == "plan"]
    rel = res.harvests[res.harvests["kind"] == "release"]
    pairs = []
    if not used.empty and not rel.empty:
        main_delta = int(used.groupby("discard_age")["count"].sum().idxmax())
        main_theta = int(rel.groupby("age")["pupae"].sum().idxmax())
        for theta in sorted(rel["age"].unique()):
            for delta in sorted(used["discard_age"].unique()):
                pairs.append((int(theta), int(delta)))
    else:
        main_theta, main_delta = col.rearing.harvest_ages[0], col.rearing.discard_ages[0]
    row += 1
    ws.cell(row=row, column=1, value="Harvest at the ages the plan uses").font = _BOLD
    table = []
    for theta, delta in pairs:
        try:
            h = single_stage_harvest(lt, theta, delta, col.stages.emergence_age)
        except DemographyError:
            continue
        table.append({"harvest_age": theta, "discard_age": delta,
                      "net_reproductive_rate": h.net_reproductive_rate,
                      "harvest_fraction": h.harvest_fraction,
                      "output_per_female": h.output_per_female})
    row = _table(ws, pd.DataFrame(table), row + 1,
                 {"harvest_age": "day", "discard_age": "day", "harvest_fraction": "-",
                  "output_per_female": "per female per day"}) + 1
    try:
        h = single_stage_harvest(lt, main_theta, main_delta, col.stages.emergence_age)
        ws.cell(row=row, column=1, value=f"Stationary age structure at harvest age {main_theta} "
                f"and discard age {main_delta} day (the ages used most)").font = _BOLD
        st = h.stationary_structure.reset_index()
        st.columns = ["age", "share"]
        row = _table(ws, st, row + 1, {"age": "day", "share": "-"}) + 1
    except DemographyError:
        pass
    ws.cell(row=row, column=1, value="Life table").font = _BOLD
    frame = pd.DataFrame({"age": lt.age, "lx": lt.lx, "mx": lt.mx, "lxmx": lt.lx * lt.mx})
    _table(ws, frame, row + 1, {"age": "day", "lx": "-", "mx": "female eggs/female/day",
                                "lxmx": "-"})
    _widths(ws, {1: 34, 2: 14, 3: 26})
    _print_setup(ws, landscape=False)


def _kv_rows(ws, row: int, rows: list[tuple[str, object, str]]) -> int:
    """(quantity, value, unit) rows from ``row``; lists and dicts written as text.
    Returns the next free row."""
    for name, value, unit in rows:
        if isinstance(value, list):
            shown = ", ".join(map(str, value))
        elif isinstance(value, dict):
            shown = ", ".join(f"{k}: {v}" for k, v in value.items())
        else:
            shown = _cell(value)
        ws.cell(row=row, column=1, value=name)
        c = ws.cell(row=row, column=2, value=shown)
        if isinstance(value, float):
            c.number_format = _FMT["num"]
        elif isinstance(value, dt.date):
            c.number_format = _FMT["date"]
        ws.cell(row=row, column=3, value=unit)
        row += 1
    return row


def _front(wb, title: str, heading: str, rows: list[tuple[str, object, str]]):
    """A key/value sheet put first (quote or expansion answers)."""
    ws = wb.create_sheet(title, 0)
    ws["A1"] = heading
    ws["A1"].font = _TITLE
    for j, name in enumerate(("quantity", "value", "unit"), start=1):
        ws.cell(row=3, column=j, value=name).font = _BOLD
    _kv_rows(ws, 4, rows)
    _widths(ws, {1: 46, 2: 60, 3: 18})
    _print_setup(ws, landscape=False)
    wb.active = 0


def _risk(wb, risk, rows: list[tuple[str, object, str]] | None = None) -> None:
    """Fill probability by week, and the fan chart of released volume against the order."""
    ws = wb.create_sheet("Risk", 1)
    ws["A1"] = (f"Risk: {risk.replicates} replays of the plan with random biology "
                f"(seed {risk.seed})")
    ws["A1"].font = _TITLE
    row = _kv_rows(ws, 3, rows or []) + 1
    t = risk.weekly_table()
    weeks = t[t["customer"] == "all"].copy()
    fan = pd.DataFrame({
        "week": weeks["week"].to_numpy(), "ordered": weeks["ordered"].to_numpy(),
        "planned": weeks["planned"].to_numpy(),
        "fill_probability": weeks["fill_probability"].to_numpy(),
        "expected_shortfall": weeks["expected_shortfall"].to_numpy(),
        "p5": weeks["p5"].to_numpy(), "p50": weeks["p50"].to_numpy(),
        "p95": weeks["p95"].to_numpy(),
        # the fan's bands, stacked: P5, then P5 to P50, then P50 to P95
        "band_p5_p50": (weeks["p50"] - weeks["p5"]).to_numpy(),
        "band_p50_p95": (weeks["p95"] - weeks["p50"]).to_numpy()})
    units = {c: "million" for c in fan.columns} | {"week": "", "fill_probability": "-"}
    ws.cell(row=row, column=1, value="All customers by week").font = _BOLD
    head = row + 1
    end = _table(ws, fan, head, units)
    cols = list(fan.columns)
    area = AreaChart()
    area.grouping = "stacked"
    area.title = "Released volume (P5, P50, P95 fan) against the order"
    area.y_axis.title = "million"
    area.x_axis.title = "plan week"
    for name in ("p5", "band_p5_p50", "band_p50_p95"):
        j = cols.index(name) + 1
        area.add_data(Reference(ws, min_col=j, min_row=head, max_row=end - 1),
                      titles_from_data=True)
    area.set_categories(Reference(ws, min_col=1, min_row=head + 1, max_row=end - 1))
    area.series[0].graphicalProperties.noFill = True
    area.series[0].graphicalProperties.line.noFill = True
    line = LineChart()
    j = cols.index("ordered") + 1
    line.add_data(Reference(ws, min_col=j, min_row=head, max_row=end - 1), titles_from_data=True)
    area += line
    area.height, area.width = 10, 24
    ws.add_chart(area, f"L{head}")
    bars = BarChart()
    bars.type = "col"
    bars.title = "Chance of filling the week's orders"
    bars.y_axis.title = "probability"
    bars.y_axis.scaling.min, bars.y_axis.scaling.max = 0, 1
    j = cols.index("fill_probability") + 1
    bars.add_data(Reference(ws, min_col=j, min_row=head, max_row=end - 1), titles_from_data=True)
    bars.set_categories(Reference(ws, min_col=1, min_row=head + 1, max_row=end - 1))
    bars.height, bars.width = 8, 24
    ws.add_chart(bars, f"L{head + 22}")
    row = end + 1
    ws.cell(row=row, column=1, value="By week and customer (pro rata within the week)").font = _BOLD
    per = t[t["customer"] != "all"].drop(columns=["planned"])
    _table(ws, per, row + 1, {c: "million" for c in per.columns} |
           {"week": "", "customer": "", "fill_probability": "-"})
    _widths(ws, default=14)
    _print_setup(ws, landscape=True)


def write_sweep_workbook(table: pd.DataFrame, path: str | Path, currency: str,
                         heading: str) -> Path:
    """The expansion sweep: options bought and cost per million by target, with a chart."""
    path = Path(path)
    if path.suffix.lower() != ".xlsx":
        raise InputError("the workbook must be an .xlsx file", source=str(path))
    wb = Workbook()
    ws = wb.active
    ws.title = "Sweep"
    ws["A1"] = heading
    ws["A1"].font = _TITLE
    units = {"target": "million/week", "total_cost": currency, "expansion_cost": currency,
             "cost_per_million": f"{currency}/million", "delivered_million": "million",
             "shortfall_million": "million", "seconds": "s"}
    units.update({c: "units" for c in table.columns if c.startswith("bought: ")})
    end = _table(ws, table, 3, units)
    chart = LineChart()
    chart.title = "Cost per million by target volume"
    chart.y_axis.title = f"{currency} per million"
    chart.x_axis.title = "target [million/week]"
    j = list(table.columns).index("cost_per_million") + 1
    chart.add_data(Reference(ws, min_col=j, min_row=3, max_row=end - 1), titles_from_data=True)
    chart.set_categories(Reference(ws, min_col=1, min_row=4, max_row=end - 1))
    chart.height, chart.width = 9, 20
    ws.add_chart(chart, f"A{end + 2}")
    bars = BarChart()
    bars.type = "col"
    bars.grouping = "stacked"
    bars.overlap = 100
    bars.title = "Options bought by target volume"
    bars.y_axis.title = "units"
    for c in [c for c in table.columns if c.startswith("bought: ")]:
        k = list(table.columns).index(c) + 1
        bars.add_data(Reference(ws, min_col=k, min_row=3, max_row=end - 1), titles_from_data=True)
    bars.set_categories(Reference(ws, min_col=1, min_row=4, max_row=end - 1))
    bars.height, bars.width = 9, 20
    ws.add_chart(bars, f"L{end + 2}")
    _widths(ws, default=16)
    _print_setup(ws, "3:3")
    wb.properties.creator = "Broodline"
    wb.properties.created = _STAMP
    wb.properties.modified = _STAMP
    return save_workbook(wb, path)


def write_plan_workbook(res, path: str | Path, *, schedule=None,
                        scenario_file: str | None = None,
                        front: tuple[str, str, list] | None = None,
                        risk=None, risk_rows: list | None = None) -> Path:
    """Write the plan workbook atomically; returns its path.

    Parameters
    ----------
    res : PlanResult
        A solved horizon plan (with a plan: status optimal or feasible).
    path : str or Path
        The ``.xlsx`` file; an existing file is replaced only when the new one is complete.
    front : (sheet name, heading, rows), optional
        A sheet of (quantity, value, unit) rows put first (a quote's or expansion's answer).
    risk : RiskResult, optional
        Adds the Risk sheet (fill probability by week, fan chart), headed by ``risk_rows``
        (quantity, value, unit).
    """
    path = Path(path)
    if path.suffix.lower() != ".xlsx":
        raise InputError("the plan workbook must be an .xlsx file", source=str(path))
    if not res.info.has_plan:
        raise InputError(f"there is no plan to write: {res.info.message}", source=str(path))
    from planner.schedule import build_schedule
    schedule = schedule or build_schedule(res)
    wb = Workbook()
    _summary(wb, res, scenario_file)
    _orders(wb, res)
    _daily(wb, res)
    _tasks(wb, res, schedule)
    _glance(wb, res, schedule)
    cur_units = {"pupae": "pupae", "pupae_per_cage": "pupae", "cages": "cages",
                 "discard_age": "day", "load_day": "day", "discard_day": "day"}
    _register(wb, "Cage register", schedule.cages, cur_units)
    _register(wb, "Tray register", schedule.trays, {"trays": "trays", "seed_day": "day",
                                                   "collection_day": "day"})
    _rooms(wb, res, schedule)
    _labour(wb, res, schedule)
    _costs(wb, res)
    _bottlenecks(wb, res)
    _demography(wb, res)
    if risk is not None:
        _risk(wb, risk, risk_rows)
    if front is not None:
        _front(wb, *front)
    wb.properties.creator = "Broodline"
    wb.properties.created = _STAMP
    wb.properties.modified = _STAMP
    return save_workbook(wb, path)
