"""Input files that are not what they claim: each is one clear InputError (file, why),
never a hang or a traceback. Facts of the operating system (common practice, no source):
/dev/zero never ends, a FIFO blocks its reader, names over 255 bytes are refused."""

import os

import pytest

from planner.errors import InputError
from planner.fileio import MAX_TEXT_BYTES, input_file, read_text, short_name


def test_a_folder_is_named_as_a_folder(tmp_path):
    with pytest.raises(InputError, match="folder"):
        read_text(tmp_path, "TOML")


@pytest.mark.skipif(not os.path.exists("/dev/zero"), reason="needs /dev/zero")
def test_a_device_is_refused_before_it_is_read():
    with pytest.raises(InputError, match="not a regular file"):
        read_text("/dev/zero", "CSV")


def test_a_link_to_a_device_is_a_device(tmp_path):
    if not os.path.exists("/dev/zero"):
        pytest.skip("needs /dev/zero")
    link = tmp_path / "table.csv"
    link.symlink_to("/dev/zero")
    with pytest.raises(InputError, match="not a regular file"):
        read_text(link, "CSV")


def test_a_fifo_is_refused_without_blocking(tmp_path):
    fifo = tmp_path / "scenario.toml"
    os.mkfifo(fifo)
    with pytest.raises(InputError, match="not a regular file"):
        read_text(fifo, "TOML")


def test_a_name_the_system_refuses_is_one_short_line(tmp_path):
    name = tmp_path / ("x" * 300 + ".toml")
    with pytest.raises(InputError) as err:
        read_text(name, "TOML")
    text = str(err.value)
    assert "cannot open" in text and len(text) < 400
    assert "characters)" in text  # the name is shortened in the middle, not repeated whole


def test_an_oversized_file_is_refused_by_its_size(tmp_path):
    big = tmp_path / "big.csv"
    with open(big, "wb") as f:
        f.truncate(MAX_TEXT_BYTES + 10)  # sparse: no disk used
    with pytest.raises(InputError, match="limit"):
        input_file(big, "CSV", MAX_TEXT_BYTES)


def test_a_missing_file_and_a_long_name_in_a_message():
    with pytest.raises(InputError, match="not found"):
        read_text("no-such-file.toml", "TOML")
    long = "a" * 5000
    shown = short_name(long)
    assert len(shown) < 160 and shown.startswith("aaa") and "5000 characters" in shown


def test_a_csv_without_its_header_line_is_one_line(tmp_path):
    """bench/fuzz.py found that deleting a life table's header line gave one line per
    column (the first data row taken as the header); it is one mistake, one line."""
    from planner.csvtable import read_csv_table
    from planner.errors import InputError, InputErrors
    f = tmp_path / "lt.csv"
    f.write_text("# a comment\n0,1.0,0\n1,0.9,0\n2,0.8,3\n")
    with pytest.raises((InputError, InputErrors)) as info:
        read_csv_table(f, required=["age", "lx", "mx"])
    lines = info.value.lines()
    assert len(lines) == 1 and "should be the header (age, lx, mx)" in lines[0], lines
