"""Scenario and colony-model files: round trips and every error case, one line each."""

import tomllib
from pathlib import Path

import pytest

from planner.errors import BroodlineError, InputError, InputErrors
from planner.scenario import demo_scenario_path, dump_toml, load_colony, load_scenario
from planner.scenario.load import validate
from planner.scenario.schema import ColonyModel, Scenario
from planner.scenario.units import parse_quantity

MODELS = Path(__file__).resolve().parents[2] / "models"


def load_variant(demo_dir, old, new, count=1):
    f = demo_dir / "scenario.toml"
    text = f.read_text()
    assert old in text, old
    f.write_text(text.replace(old, new, count))
    return load_scenario(f)


def messages(exc: BroodlineError) -> list[str]:
    return exc.lines()


@pytest.mark.parametrize("which", ["fly", "moth"])
def test_demo_scenarios_validate(which):
    scn = load_scenario(demo_scenario_path(which))
    assert scn.orders and scn.crews
    assert "invented" in scn.name.lower()


@pytest.mark.parametrize("which", ["fly", "moth"])
def test_toml_round_trip(which):
    scn = load_scenario(demo_scenario_path(which))
    text = dump_toml(scn)
    again = validate(Scenario, tomllib.loads(text), "dumped.toml")
    assert again == scn
    assert dump_toml(again) == text


@pytest.mark.parametrize("name", ["fernhollow-fly.toml", "fernhollow-moth.toml"])
def test_colony_model_round_trip(name):
    col = load_colony(MODELS / name)
    again = validate(ColonyModel, tomllib.loads(dump_toml(col)), "dumped.toml")
    assert again == col
    assert col.female_mx().max() > 0


def test_relative_paths_resolve_against_the_file(demo_dir, tmp_path, monkeypatch):
    monkeypatch.chdir("/")
    scn = load_scenario(demo_dir / "scenario.toml")
    assert scn.colony.name == "FH-L3 fruit fly"


def test_unknown_key_suggests_the_closest(demo_dir):
    with pytest.raises(InputError) as info:
        load_variant(demo_dir, "horizon_weeks", "horizon_week")
    msg = str(info.value)
    assert "scenario.toml" in msg and "plan" in msg and "'horizon_weeks'" in msg


def test_unknown_top_level_table(demo_dir):
    with pytest.raises(InputError, match="did you mean 'orders'"):
        load_variant(demo_dir, "[[orders]]", "[[order]]", count=3)


def test_wrong_unit(demo_dir):
    with pytest.raises(InputError) as info:
        load_variant(demo_dir, "diet_per_kg = 0.85", 'diet_per_kg = "0.85 lb"')
    assert "costs.diet_per_kg" in str(info.value) and "wrong unit 'lb'" in str(info.value)


def test_convertible_unit_is_converted(demo_dir):
    scn = load_variant(demo_dir, "time_limit = 120", 'time_limit = "2 min"')
    assert scn.plan.time_limit == 120.0


def test_wrong_type(demo_dir):
    with pytest.raises(InputError) as info:
        load_variant(demo_dir, "cage_slots = 20 ", 'cage_slots = "many" ')
    assert "facility.adult_rooms[1].cage_slots" in str(info.value)
    assert "'many'" in str(info.value)


def test_negative_capacity(demo_dir):
    with pytest.raises(InputError) as info:
        load_variant(demo_dir, "rack_slots = 4800", "rack_slots = -5")
    msg = str(info.value)
    assert "facility.larval_rooms[1].rack_slots" in msg and "at least 0" in msg and "-5" in msg


def test_order_that_ends_before_it_starts(demo_dir):
    with pytest.raises(InputError, match=r"orders\[3\].*ends \(week 5\) before it starts"):
        load_variant(demo_dir, "first_week = 13", "first_week = 13\nlast_week = 5")


def test_several_independent_errors_at_once(demo_dir):
    f = demo_dir / "scenario.toml"
    text = f.read_text().replace("rack_slots = 4800", "rack_slots = -5") \
        .replace("horizon_weeks", "horizon_wekes").replace("diet_per_kg = 0.85", "diet_per_kg = 'x'")
    f.write_text(text)
    with pytest.raises(InputErrors) as info:
        load_scenario(f)
    lines = messages(info.value)
    assert len(lines) == 3
    assert all(line.startswith("scenario.toml: ") for line in lines)


def test_harvest_age_after_discard_age(demo_dir):
    col = demo_dir / "fernhollow-fly.toml"
    col.write_text(col.read_text().replace("harvest_ages = [23, 24, 25, 26]",
                                           "harvest_ages = [23, 24, 25, 55]"))
    with pytest.raises(InputError, match="harvest age 55 is after the discard age 50"):
        load_scenario(demo_dir / "scenario.toml")


def test_missing_life_table_file(demo_dir):
    (demo_dir / "fernhollow-fly-lifetable.csv").unlink()
    with pytest.raises(InputError) as info:
        load_scenario(demo_dir / "scenario.toml")
    assert "fernhollow-fly.toml" in str(info.value) and "life table file" in str(info.value)


def test_bad_life_table_row_names_the_csv(demo_dir):
    f = demo_dir / "fernhollow-fly-lifetable.csv"
    lines = f.read_text().splitlines()
    lines[10] = lines[10].split(",")[0] + ",1.5,0"
    f.write_text("\n".join(lines) + "\n")
    with pytest.raises(InputError, match=r"fernhollow-fly-lifetable.csv: row 11, column 'lx'"):
        load_scenario(demo_dir / "scenario.toml")


def test_missing_colony_model(demo_dir):
    with pytest.raises(InputError, match="colony model 'nope.toml' was not found"):
        load_variant(demo_dir, "fernhollow-fly.toml", "nope.toml")


def test_bad_toml_syntax(demo_dir):
    with pytest.raises(InputError, match="not valid TOML"):
        load_variant(demo_dir, "[plan]", "[plan")


def test_bad_weekday_name(demo_dir):
    with pytest.raises(InputError, match="'Sunn' is not a weekday"):
        load_variant(demo_dir, "Sun = 0 }", "Sunn = 0 }")


def test_missing_weekday_is_an_error_not_a_zero(demo_dir):
    with pytest.raises(InputError, match=r"kitchen.diet_kg.sun"):
        load_variant(demo_dir, ", Sun = 0 }", " }")


def test_task_done_by_two_crews(demo_dir):
    with pytest.raises(InputError, match="'seeding' is done by both"):
        load_variant(demo_dir, '"cage_discard"]', '"cage_discard", "seeding"]')


def test_start_cages_after_plan_start(demo_dir):
    with pytest.raises(InputError, match="not before the plan start"):
        load_variant(demo_dir, "standard_week_volume = 10.0",
                     "\n[[start.cages]]\nload_date = 2027-01-10\ncount = 3\ndiscard_age = 57")


def test_parse_quantity():
    assert parse_quantity("30 min", "h") == pytest.approx(0.5)
    assert parse_quantity("2 weeks", "day") == 14
    assert parse_quantity(5, "kg") == 5
    with pytest.raises(ValueError, match="wrong unit"):
        parse_quantity("3 kg", "h")
    with pytest.raises(ValueError):
        parse_quantity(True, "kg")


def test_scenario_file_of_another_kind(tmp_path):
    f = tmp_path / "s.json"
    f.write_text("{}")
    with pytest.raises(InputError, match=r"\.toml file or an input workbook"):
        load_scenario(f)


def test_a_holiday_week_is_one_range(demo_dir):
    """Issue 13: a holiday week needed seven dates; 'FIRST..LAST' (text) stands for every
    day in it, in TOML and in the workbook (same validator); a reversed range is one
    line naming it."""
    import datetime as dt
    from planner.errors import InputError, InputErrors
    from planner.scenario.workbook import read_workbook, write_workbook
    f = demo_dir / "scenario.toml"
    text = f.read_text()
    f.write_text(text.replace('holidays = [2027-04-06, 2027-05-13]',
                              'holidays = [2027-04-06, "2027-08-02..2027-08-08"]'))
    scn = load_scenario(f)
    want = [dt.date(2027, 4, 6)] + [dt.date(2027, 8, 2) + dt.timedelta(days=k)
                                    for k in range(7)]
    assert scn.calendar.holidays == want
    book = demo_dir / "s.xlsx"
    write_workbook(scn, book)
    import openpyxl
    wb = openpyxl.load_workbook(book)
    ws = wb["Holidays"]
    for row in range(2, ws.max_row + 1):
        ws.cell(row=row, column=1).value = None
    ws["A2"] = "2027-08-02..2027-08-08"
    wb.save(book)
    assert read_workbook(book).calendar.holidays == want[1:]
    f.write_text(text.replace('holidays = [2027-04-06, 2027-05-13]',
                              'holidays = ["2027-08-08..2027-08-02"]'))
    with pytest.raises((InputError, InputErrors)) as info:
        load_scenario(f)
    lines = info.value.lines()
    assert len(lines) == 1 and "before the first" in lines[0]
