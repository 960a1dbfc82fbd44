"""Hostile scenario and colony input (issue 12 items 1, 3, 5, 6, 13): each mutation that
used to pass ``check`` and crash ``plan`` (or crash ``check``) is refused at input with
one line naming the field."""

import numpy as np
import pytest

from planner.demography import LifeTable, single_stage_harvest
from planner.errors import InputError, InputErrors
from planner.scenario import load_scenario



def refused(demo_dir, old, new) -> str:
    f = demo_dir / "scenario.toml"
    text = f.read_text()
    assert old in text, old
    f.write_text(text.replace(old, new, 1))
    with pytest.raises((InputError, InputErrors)) as info:
        load_scenario(f)
    lines = info.value.lines()
    assert len(lines) == 1, lines
    return lines[0]


@pytest.mark.parametrize("old,new,field", [
    ("weekly_volume = 6.0", "weekly_volume = inf", "orders[1].weekly_volume"),
    ("shortfall_per_million = 20000.0", "shortfall_per_million = nan",
     "costs.shortfall_per_million"),
    ("standard_week_volume = 10.0", "standard_week_volume = -inf",
     "start.standard_week_volume"),
    ("diet_kg = { Mon = 2600", "diet_kg = { Mon = inf", "kitchen.diet_kg.mon"),
    ("per_tray_seeded = 0.40", "per_tray_seeded = inf", "costs.per_tray_seeded"),
])
def test_non_finite_numbers_are_refused_naming_the_field(demo_dir, old, new, field):
    line = refused(demo_dir, old, new)
    assert field in line and "finite" in line


@pytest.mark.parametrize("new", ["start = 9999-12-01", "start = 0001-01-01"])
def test_dates_a_plan_cannot_reach_are_refused(demo_dir, new):
    line = refused(demo_dir, "start = 2027-01-04", new)
    assert "calendar.start" in line and "outside the years" in line


def test_a_number_is_not_a_date(demo_dir):
    # pydantic's lax mode would read 0 as 1970-01-01
    line = refused(demo_dir, "start = 2027-01-04", "start = 0")
    assert "calendar.start" in line and "a date is needed" in line


@pytest.mark.parametrize("old,new,where", [
    ("first_week = 1", "first_week = true", "first_week"),
    ("diet_kg = { Mon = 2600", "diet_kg = { Mon = true", "kitchen.diet_kg"),
    ("holiday_hours = 24", "holiday_hours = false", "holiday_hours"),
])
def test_true_false_is_not_a_number(demo_dir, old, new, where):
    line = refused(demo_dir, old, new)
    assert where in line and "true/false" in line


def test_switches_still_take_true_false(demo_dir):
    f = demo_dir / "scenario.toml"
    f.write_text(f.read_text() + "\n")
    scn = load_scenario(f)
    assert isinstance(scn.calendar.ship_on_holidays, bool)


def test_deeply_nested_toml_is_one_line_not_a_recursion_error(demo_dir):
    f = demo_dir / "scenario.toml"
    f.write_text(f.read_text() + "\nzz = " + "[" * 500 + "]" * 500 + "\n")
    with pytest.raises(InputError, match="nested too deeply"):
        load_scenario(f)


def test_huge_fecundity_keeps_a_positive_share_and_its_closed_form():
    """mx = 1e17 on every laying day: H rounds to 1 in floating point, so the kept share
    is computed as (1 - R0(theta)) / (R0(delta) - R0(theta)) itself. With R0(theta) = 0
    the output per female reduces by algebra to (R0(delta) - 1) lx(theta) / sum of lx
    over the adult ages, which must hold here too."""
    age = np.arange(0, 20, dtype=float)
    lx = np.exp(-0.05 * age)
    mx = np.where(age >= 10, 1e17, 0.0)
    table = LifeTable(age=age, lx=lx, mx=mx)
    r = single_stage_harvest(table, harvest_age=5, discard_age=19, emergence_age=10)
    kept = 1.0 / float((lx * mx).sum())
    assert r.harvest_fraction == pytest.approx(1.0)
    assert np.isfinite(r.output_per_female) and r.output_per_female > 0
    expected = ((lx * mx).sum() - 1.0) * lx[5] / lx[10:].sum()
    assert r.output_per_female == pytest.approx(expected, rel=1e-9)
    share = r.structure_share
    assert np.all(np.isfinite(share)) and share.sum() == pytest.approx(1.0)
    assert kept > 0


def test_huge_fecundity_cannot_reach_the_solver(demo_dir):
    """An LP whose rows carry 1e16 crashed HiGHS's read-back (IndexError); the model
    builder refuses such rows with the family's name."""
    from planner.optimise.model import MAX_MAGNITUDE, LinearModel
    m = LinearModel("t")
    m.add_block("x", [("a",)], lb=0.0, ub=np.inf)
    with pytest.raises(InputError, match="far outside"):
        m.add_family("eggs", [("d1",)], "<=", [0], [0], [10 * MAX_MAGNITUDE], [1.0],
                     unit="thousand eggs", resource="eggs")


def _repeat_block(text: str, head: str) -> str:
    i = text.index(head)
    j = text.index("\n[", i + len(head))
    return text[:j] + "\n" + text[i:j] + text[j:]


@pytest.mark.parametrize("head,where", [("[[crews]]", "crews[2].name"),
                                        ("[[facility.adult_rooms]]",
                                         "facility.adult_rooms[2].name"),
                                        ("[[facility.larval_rooms]]",
                                         "facility.larval_rooms[2].name")])
def test_a_repeated_block_is_one_line_naming_it(demo_dir, head, where):
    """Items 13 and 14: a duplicated [[crews]] block gave one line per task (and
    duplicated room names passed); one cause, one line."""
    f = demo_dir / "scenario.toml"
    f.write_text(_repeat_block(f.read_text(), head))
    with pytest.raises((InputError, InputErrors)) as info:
        load_scenario(f)
    lines = info.value.lines()
    assert len(lines) == 1 and where in lines[0] and "is also the name" in lines[0], lines


def test_model_sizes_are_bounded_at_input(demo_dir):
    """Item 8: lookahead_weeks = 1000 built a model past any time limit; the look-ahead
    and the order book have stated caps."""
    from planner.scenario.schema import MAX_LOOKAHEAD_WEEKS, MAX_ORDERS
    line = refused(demo_dir, "horizon_weeks = 26", "horizon_weeks = 26\nlookahead_weeks = 1000")
    assert "plan.lookahead_weeks" in line and str(MAX_LOOKAHEAD_WEEKS) in line
    f = demo_dir / "scenario.toml"
    text = f.read_text().replace("horizon_weeks = 26\nlookahead_weeks = 1000",
                                 "horizon_weeks = 26")
    order = '\n[[orders]]\ncustomer = "Extra"\nfirst_week = 1\nweekly_volume = 0.1\n'
    f.write_text(text + order * (MAX_ORDERS + 1))
    with pytest.raises((InputError, InputErrors)) as info:
        load_scenario(f)
    assert any("orders" in ln and str(MAX_ORDERS) in ln for ln in info.value.lines())


@pytest.mark.parametrize("target,words", [("/dev/full", "ending in .xlsx"),
                                          (".", "this is a folder"),
                                          ("/proc/input.xlsx", "cannot be written")])
def test_template_names_the_output_problem(target, words, capsys):
    """Item 14: `template /dev/full` and `template DIR` said 'an input workbook must be an
    .xlsx file' about a file to be written."""
    from planner.cli.main import main
    rc = main(["template", target])
    err = capsys.readouterr().err.strip().splitlines()
    assert rc == 2 and len(err) == 1 and words in err[0], err


def test_one_wrong_age_list_is_one_line(demo_dir):
    """Item 14: `discard_ages = [10]` gave five lines (one per harvest age, and one for
    the discard age itself); the cause is the discard age, and it is one line."""
    f = demo_dir / "fernhollow-fly.toml"
    text = f.read_text()
    assert "discard_ages = [50, 57, 64, 71]" in text
    f.write_text(text.replace("discard_ages = [50, 57, 64, 71]", "discard_ages = [10]"))
    with pytest.raises((InputError, InputErrors)) as info:
        load_scenario(demo_dir / "scenario.toml")
    lines = info.value.lines()
    assert len(lines) == 1 and "discard_ages" in lines[0], lines


def test_a_short_life_table_is_one_line(demo_dir):
    """Item 14: a 30-row life table gave one line per discard age beyond it."""
    f = demo_dir / "fernhollow-fly-lifetable.csv"
    rows = f.read_text().splitlines()
    keep = [r for r in rows if r.startswith("#") or r.startswith("age")]
    body = [r for r in rows if r not in keep][:30]
    f.write_text("\n".join(keep + body) + "\n")
    with pytest.raises((InputError, InputErrors)) as info:
        load_scenario(demo_dir / "scenario.toml")
    lines = info.value.lines()
    assert len(lines) == 1 and "beyond the life table" in lines[0], lines


@pytest.mark.parametrize("key", ["life_table", "colony"])
def test_a_name_too_long_for_the_system_is_one_short_line(demo_dir, key):
    """Item 2: a 100 kB file name gave 'internal error: OSError: File name too long' and
    repeated the whole name; now one line of bounded length."""
    name = "x" * 100_000 + ".csv"
    if key == "life_table":
        f = demo_dir / "fernhollow-fly.toml"
        old = 'life_table = "fernhollow-fly-lifetable.csv"'
        new = f'life_table = "{name}"'
    else:
        f = demo_dir / "scenario.toml"
        old = 'colony = "fernhollow-fly.toml"'
        new = f'colony = "{name}"'
    text = f.read_text()
    assert old in text, old
    f.write_text(text.replace(old, new))
    with pytest.raises(InputError) as info:
        load_scenario(demo_dir / "scenario.toml")
    line = str(info.value)
    assert "cannot be opened" in line and len(line) < 600, line[:300]


def test_a_colony_model_with_impossible_fecundity_is_refused_by_check(demo_dir, capsys):
    """Item 1 (and the fuzz run): every positive mx = 1e17 passed `check` with exit 0 and
    only failed in `plan`. An mx above any insect's (the most fecund queens lay some tens
    of thousands of eggs a day: a fact of the trade, typed from memory) is refused when the
    colony model is read, naming the row."""
    from planner.cli.main import main
    lt = demo_dir / "fernhollow-fly-lifetable.csv"
    lines = lt.read_text().splitlines()
    out = []
    for ln in lines:
        parts = ln.split(",")
        if len(parts) == 3 and parts[0].isdigit() and float(parts[2]) > 0:
            parts[2] = "1e17"
        out.append(",".join(parts))
    lt.write_text("\n".join(out) + "\n")
    code = main(["check", str(demo_dir / "scenario.toml")])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1, err
    assert "mx = 1e+17" in err[0] and "column 'mx'" in err[0] and "lifetable.csv" in err[0]


def test_a_crew_without_its_task_line_is_one_line(demo_dir):
    """bench/fuzz.py: deleting the larval crew's `tasks` line (its default is all tasks)
    gave one line per task done by both crews; one line per pair of crews."""
    f = demo_dir / "scenario.toml"
    f.write_text(f.read_text().replace('tasks = ["diet_mixing", "seeding", '
                                       '"larval_collection"]\n', ""))
    with pytest.raises((InputError, InputErrors)) as info:
        load_scenario(f)
    lines = info.value.lines()
    assert len(lines) == 1 and "are done by both 'Colony crew' and 'Larval crew'" in lines[0]
