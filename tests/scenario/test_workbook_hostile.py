"""Hostile input workbooks (issue 12: the XML cases and item 12's zipped million-row
sheet). Each is refused in one line, well under a second, without parsing the payload."""

import time
import zipfile
from pathlib import Path

import pytest

from planner.errors import InputError, InputErrors
from planner.scenario.workbook import MAX_UNZIPPED_BYTES, read_workbook

TEMPLATE = Path(__file__).resolve().parents[2] / "templates" / "broodline-input.xlsx"

_NS = 'xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main"'


def _sheet(doctype: str, text: str) -> str:
    """A worksheet whose cell A1 holds ``text`` (an inline string)."""
    return (f'<?xml version="1.0"?>\n{doctype}\n<worksheet {_NS}><sheetData><row r="1">'
            f'<c r="A1" t="inlineStr"><is><t>{text}</t></is></c></row></sheetData>'
            '</worksheet>')


LAUGHS = _sheet('<!DOCTYPE worksheet [<!ENTITY lol "lol">'
                + "".join(f'<!ENTITY lol{i} "{("&lol" + (str(i - 1) if i > 1 else "") + ";") * 10}">'
                          for i in range(1, 10)) + "]>", "&lol9;")
EXTERNAL = _sheet('<!DOCTYPE worksheet [<!ENTITY ext SYSTEM "file:///etc/passwd">]>', "&ext;")
#: The template's first worksheet (the instructions); any parsed part would do.
PART = "xl/worksheets/sheet1.xml"


def _with_part(tmp_path, name: str, content: bytes | None = None, extra=None) -> Path:
    """The template with one part replaced (or added)."""
    out = tmp_path / "hostile.xlsx"
    with zipfile.ZipFile(TEMPLATE) as src, zipfile.ZipFile(out, "w",
                                                             zipfile.ZIP_DEFLATED) as dst:
        names = src.namelist()
        for item in names:
            data = src.read(item)
            if item == name and content is not None:
                data = content
            dst.writestr(item, data)
        if name not in names and content is not None:
            dst.writestr(name, content)
        if extra:
            extra(dst)
    return out


def test_openpyxl_reads_with_defusedxml():
    """openpyxl switches to defusedxml when it is installed (its documented behaviour);
    Broodline depends on it."""
    from openpyxl.xml import DEFUSEDXML
    assert DEFUSEDXML is True


@pytest.mark.parametrize("payload", [LAUGHS, EXTERNAL], ids=["entity-expansion", "external"])
def test_xml_entities_are_refused_in_one_line(tmp_path, payload):
    f = _with_part(tmp_path, PART, payload.encode())
    t0 = time.perf_counter()
    with pytest.raises(InputError) as info:
        read_workbook(f)
    assert time.perf_counter() - t0 < 1.0
    line = str(info.value)
    assert "not a readable .xlsx workbook" in line and "declares entities" in line
    assert "root:" not in line  # nothing of /etc/passwd
    assert len(line.splitlines()) == 1


def test_a_very_long_string_is_refused_or_read_never_a_crash(tmp_path):
    """A shared string of 20 MB (under the unpacked limit) in sharedStrings.xml, used by
    a cell of every sheet's first row: whatever reports it shortens the value, never an
    internal error."""
    long = "x" * 20_000_000
    sst = (f'<?xml version="1.0"?>\n<sst {_NS} count="1" uniqueCount="1"><si><t>{long}</t>'
           '</si></sst>')

    def extra(dst):
        dst.writestr("xl/sharedStrings.xml", sst)

    with zipfile.ZipFile(TEMPLATE) as z:
        sheet = z.read("xl/worksheets/sheet2.xml").decode()
    # the first cell of the second sheet (the first data sheet) refers to string 0
    sheet = sheet.replace('t="inlineStr"><is><t>', 't="s"><v>0</v><is><t>', 1)
    f = _with_part(tmp_path, "xl/worksheets/sheet2.xml", sheet.encode(), extra=extra)
    with pytest.raises((InputError, InputErrors)) as info:
        read_workbook(f)
    assert all(len(ln) < 2000 for ln in info.value.lines())


def test_a_zipped_sheet_that_unpacks_too_far_is_refused_from_the_directory(tmp_path):
    """Item 12: a million-row sheet zipped to a few MB took over 60 s in `check`. The zip
    directory gives the unpacked size before any sheet is parsed."""
    rows = "".join(f'<row r="{i}"><c r="A{i}" t="inlineStr"><is><t>x</t></is></c></row>'
                   for i in range(1, 1_000_001))
    sheet = ('<?xml version="1.0"?><worksheet xmlns="http://schemas.openxmlformats.org/'
             f'spreadsheetml/2006/main"><sheetData>{rows}</sheetData></worksheet>').encode()
    assert len(sheet) > MAX_UNZIPPED_BYTES
    f = _with_part(tmp_path, "xl/worksheets/sheet1.xml", sheet)
    assert f.stat().st_size < 6_000_000
    t0 = time.perf_counter()
    with pytest.raises(InputError, match="unpacks to"):
        read_workbook(f)
    assert time.perf_counter() - t0 < 1.0


@pytest.mark.parametrize("kind", ["link-to-dev-zero", "fifo", "folder"])
def test_a_workbook_that_is_not_a_regular_file_is_refused_at_once(tmp_path, kind):
    """Item 4: a workbook linked to /dev/zero grew to 8.2 GB; a FIFO hung."""
    import os
    f = tmp_path / "book.xlsx"
    if kind == "link-to-dev-zero":
        f.symlink_to("/dev/zero")
    elif kind == "fifo":
        os.mkfifo(f)
    else:
        f.mkdir()
    t0 = time.perf_counter()
    with pytest.raises(InputError) as info:
        read_workbook(f)
    assert time.perf_counter() - t0 < 1.0
    assert "regular file" in str(info.value) or "folder" in str(info.value)


def test_a_blank_workbook_is_one_line(tmp_path):
    """Item 14: a blank workbook gave one line per missing sheet (18 lines)."""
    import openpyxl
    f = tmp_path / "blank.xlsx"
    openpyxl.Workbook().save(f)
    with pytest.raises((InputError, InputErrors)) as info:
        read_workbook(f)
    lines = info.value.lines()
    assert len(lines) == 1 and "none of Broodline's input sheets" in lines[0], lines


def _template_with(tmp_path, edit) -> Path:
    import openpyxl
    wb = openpyxl.load_workbook(TEMPLATE)
    edit(wb)
    f = tmp_path / "edited.xlsx"
    wb.save(f)
    return f


@pytest.mark.parametrize("sheet,cells", [("Plan", "A2:B2"), ("Calendar", "B2:B3")])
def test_merged_cells_are_refused_naming_the_range(tmp_path, sheet, cells):
    """Item 13: a merged cell over the plan horizon let the default of 26 weeks be used
    without a word; merged calendar cells lost the covered values."""
    f = _template_with(tmp_path, lambda wb: wb[sheet].merge_cells(cells))
    with pytest.raises((InputError, InputErrors)) as info:
        read_workbook(f)
    lines = info.value.lines()
    assert len(lines) == 1 and "merged cells" in lines[0] and cells in lines[0], lines


@pytest.mark.parametrize("cell", ["B2", "C2"])
def test_true_false_cells_are_not_numbers_or_weeks(tmp_path, cell):
    """Item 13: `first_week = true` was taken as week 1; in a workbook a TRUE cell in a
    number or week column is refused, naming the cell."""
    def edit(wb):
        wb["Orders"][cell] = True
    f = _template_with(tmp_path, edit)
    with pytest.raises((InputError, InputErrors)) as info:
        read_workbook(f)
    lines = info.value.lines()
    assert len(lines) == 1 and "Orders" in lines[0] and "true/false" in lines[0], lines


def test_a_stray_value_at_the_last_cell_is_refused_naming_it(tmp_path):
    """Item 12: one stray cell at XFD1048576 made `check` walk the whole sheet (over 60 s).
    A value beyond the rows and columns an input sheet may use is named and refused."""
    f = _template_with(tmp_path, lambda wb: wb["Orders"].cell(row=1_048_576, column=16_384,
                                                              value="x"))
    t0 = time.perf_counter()
    with pytest.raises((InputError, InputErrors)) as info:
        read_workbook(f)
    assert time.perf_counter() - t0 < 1.0
    lines = info.value.lines()
    assert len(lines) == 1 and "XFD1048576" in lines[0] and "Orders" in lines[0], lines


def test_a_formatted_empty_cell_far_out_changes_nothing(tmp_path):
    """Item 12: a formatting-only cell at XFD1048576 (no value) is not part of the used
    range: the workbook reads as before, without walking a million rows."""
    from openpyxl.styles import PatternFill

    def edit(wb):
        wb["Orders"].cell(row=1_048_576, column=16_384).fill = PatternFill("solid",
                                                                           fgColor="FFFF00")
        wb["Plan"].cell(row=60_000, column=3).value = "   "
    f = _template_with(tmp_path, edit)
    t0 = time.perf_counter()
    got = read_workbook(f)
    assert time.perf_counter() - t0 < 1.0
    assert got == read_workbook(TEMPLATE)


def test_a_hundred_thousand_order_rows_are_refused_before_parsing(tmp_path):
    """Item 12: 100,000 order rows (inside the unpacked-size limit) took over 60 s in
    `check`. The rows of each sheet are counted on the raw XML before any parse."""
    from planner.scenario.workbook import MAX_SHEET_ROWS
    import openpyxl
    wb = openpyxl.load_workbook(TEMPLATE)
    part = f"xl/worksheets/sheet{wb.sheetnames.index('Orders') + 1}.xml"
    rows = "".join(f'<row r="{i}"><c r="A{i}" t="inlineStr"><is><t>c</t></is></c>'
                   f'<c r="B{i}"><v>1</v></c><c r="D{i}"><v>0.5</v></c></row>'
                   for i in range(2, 100_002))
    sheet = (f'<?xml version="1.0"?><worksheet {_NS}><sheetData>{rows}</sheetData>'
             '</worksheet>').encode()
    assert len(sheet) < MAX_UNZIPPED_BYTES
    f = _with_part(tmp_path, part, sheet)
    t0 = time.perf_counter()
    with pytest.raises(InputError) as info:
        read_workbook(f)
    assert time.perf_counter() - t0 < 1.0
    text = str(info.value)
    assert "'Orders'" in text and "100,000 rows" in text and f"{MAX_SHEET_ROWS:,}" in text
