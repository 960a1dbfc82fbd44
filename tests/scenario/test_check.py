"""`broodline check`: its figures against the demographic layer's own formulas."""

import json

import numpy as np
import pytest

from planner.cli.main import main
from planner.demography import single_stage_harvest
from planner.scenario import demo_scenario_path, load_scenario
from planner.scenario.check import check_report
from planner.scenario.sizing import stationary_needs


@pytest.fixture(scope="module")
def fly():
    return load_scenario(demo_scenario_path("fly"))


def test_pairs_match_single_stage_harvest(fly):
    rep = check_report(fly)
    lt = fly.colony.to_life_table()
    rearing = fly.colony.rearing
    assert len(rep["harvest_pairs"]) == len(rearing.harvest_ages) * len(rearing.discard_ages)
    for p in rep["harvest_pairs"]:
        ref = single_stage_harvest(lt, p["harvest_age"], p["discard_age"], 28)
        assert p["harvest_fraction"] == pytest.approx(ref.harvest_fraction)
        assert p["output_per_female"] == pytest.approx(ref.output_per_female)


def test_stationary_needs_hold_zero_growth_and_the_output_per_female(fly):
    # Eggs laid by the cages equal the eggs seeded (replacement), and released pupae per
    # adult female equal P / phi from the single-stage formula.
    col = fly.colony
    lx, mf = col.lx(), col.female_mx()
    k, tc, eps = col.rearing.pupae_per_cage, col.rearing.cage_loading_age, col.stages.emergence_age
    for theta, delta in [(24, 57), (26, 71)]:
        n = stationary_needs(fly, 12.0, theta, delta)
        laid = n.cages_loaded * k * np.sum(lx[tc:delta + 1] / lx[tc] * mf[tc:delta + 1])
        assert laid == pytest.approx(n.eggs, rel=1e-12)
        females = n.cages_loaded * k * col.female_fraction * np.sum(lx[eps:delta + 1] / lx[tc])
        p = single_stage_harvest(col.to_life_table(), theta, delta, eps).output_per_female
        assert n.released / females == pytest.approx(p / col.female_fraction, rel=1e-12)
        assert n.released * 7 * col.rearing.product_yield == pytest.approx(12e6)


def test_largest_week_and_shortage_flags(fly):
    rep = check_report(fly)
    assert rep["orders"]["largest_volume"] == pytest.approx(14.0)
    assert rep["orders"]["total_by_week"][0] == pytest.approx(10.0)
    needs = {n["resource"]: n for n in rep["estimate"]["needs"]}
    assert needs["cage slots"]["available"] == sum(r.cage_slots for r in fly.facility.adult_rooms)
    assert rep["ok"] == (not any(n["short"] for n in needs.values()))


def test_a_short_resource_is_flagged(tmp_path):
    scn = load_scenario(demo_scenario_path("fly"))
    small = scn.model_copy(deep=True)
    small.facility.adult_rooms[0].cage_slots = 4
    small.facility.adult_rooms[1].cage_slots = 4
    rep = check_report(small)
    assert "cage slots" in rep["short"] and not rep["ok"]


def test_check_cli_json(capsys):
    code = main(["check", str(demo_scenario_path("moth")), "--json"])
    out, err = capsys.readouterr()
    assert code == 0, err
    data = json.loads(out)
    for key in ("colony", "harvest_pairs", "capacities", "calendar", "orders", "estimate",
                "short", "reasons", "sustainable"):
        assert key in data
    assert data["sustainable"]["short"] and not data["ok"]  # the moth demo is short


def test_check_cli_human(capsys):
    code = main(["check", str(demo_scenario_path("fly"))])
    out, _ = capsys.readouterr()
    assert code == 0
    assert "First estimate for the largest week" in out and "[million]" in out
    assert "Calendar" in out and "holidays in the horizon     2027-04-06 (Tue, week 14)" in out
    assert "Sustainable volume (standard week, linear programme)" in out and ": ok." in out


def test_check_cli_bad_file_is_one_line_per_problem(tmp_path, capsys):
    f = tmp_path / "s.toml"
    f.write_text('name = "x"\ncolony = "missing.toml"\n')
    code = main(["check", str(f)])
    _, err = capsys.readouterr()
    assert code == 2 and "Traceback" not in err
    assert err.startswith("error: s.toml: colony")


# -- the calendar and the sustainable volume (issue 11, point 6) -------------------------

import datetime as dt  # noqa: E402

from scipy.optimize import linprog  # noqa: E402

from planner.answers.capacity import max_volume_model  # noqa: E402
from planner.answers.checkcap import sustainable_volume  # noqa: E402
from planner.optimise.solve import SolveSettings, available_solvers  # noqa: E402
from planner.scenario.check import SUSTAIN_TOLERANCE, add_sustainable  # noqa: E402
from planner.scenario.schema import Order  # noqa: E402
from planner.scenario.sizing import ALL_DAYS, CalendarDays, weekday_calendar  # noqa: E402

DAYS = ("mon", "tue", "wed", "thu", "fri", "sat", "sun")


@pytest.fixture(scope="module")
def moth():
    return load_scenario(demo_scenario_path("moth"))


def _linprog_volume(scn) -> float:
    """The standard week's max-volume LP solved by scipy's linprog on the model's own
    matrices (an outside solver of the same programme)."""
    built = max_volume_model(scn, relax=True)
    m = built.model
    a_ub, b_ub, a_eq, b_eq = m.stacked()
    bounds = [(lo, None if np.isinf(hi) else hi) for lo, hi in zip(m.lb, m.ub)]
    ref = linprog(m.c, A_ub=a_ub, b_ub=b_ub, A_eq=a_eq if a_eq.shape[0] else None,
                  b_eq=b_eq if a_eq.shape[0] else None, bounds=bounds, method="highs")
    assert ref.status == 0, ref.message
    return float(ref.x[built.blocks["volume"].offset])


def _checked(scn) -> dict:
    return add_sustainable(check_report(scn), **sustainable_volume(scn))


@pytest.mark.parametrize("which", ["fly", "moth"])
def test_sustainable_volume_matches_scipy_linprog_and_cbc(which):
    scn = load_scenario(demo_scenario_path(which))
    ref = _linprog_volume(scn)
    got = sustainable_volume(scn)
    assert got["status"] == "optimal"
    assert got["volume"] == pytest.approx(ref, rel=1e-6)
    cbc = sustainable_volume(scn, SolveSettings(solver="cbc", time_limit=30))
    assert cbc["volume"] == pytest.approx(ref, rel=1e-6)


def test_the_moth_demo_is_flagged_short(moth):
    # its plan is about 12 % short (issue 11): the peak order of 1.0 million/week from
    # week 9 is above what the standard week's LP (scipy's linprog) can sustain
    rep = _checked(moth)
    ref = _linprog_volume(moth)
    book = moth.weekly_orders(moth.plan.horizon_weeks)
    peak = max(sum(v[w] for v in book.values()) for w in range(moth.plan.horizon_weeks))
    assert peak > ref * (1 + SUSTAIN_TOLERANCE)
    assert not rep["ok"] and "sustainable volume" in rep["short"]
    assert rep["sustainable"]["short"] and rep["sustainable"]["largest_week"] == 9
    assert rep["reasons"][0].startswith("orders exceed what the facility can sustain: 1 "
                                        "million/week ordered in week 9 against")
    # the calendar-aware estimate finds short resources too (the calendar-blind one did
    # not: "no resource is short on average")
    assert set(rep["short"]) - {"sustainable volume"}
    # issue 13: a shipped demo that cannot fill its orders says so in its notes, with the
    # volume it sustains (the LP's, to the two digits the note gives)
    import re
    said = re.search(r"about ([0-9.]+) million/week", " ".join(moth.notes.split()))
    assert "Short on purpose" in moth.notes and said
    assert float(said.group(1)) == pytest.approx(ref, abs=0.01)


def test_the_fly_demo_passes(fly):
    rep = _checked(fly)
    ref = _linprog_volume(fly)
    book = fly.weekly_orders(fly.plan.horizon_weeks)
    peak = max(sum(v[w] for v in book.values()) for w in range(fly.plan.horizon_weeks))
    assert peak <= ref  # the scenario file's peak, 6 + 8 million/week, is sustainable
    assert rep["ok"], rep["reasons"]
    assert not rep["sustainable"]["short"]


@pytest.mark.parametrize("share, flagged", [(1.05, True), (0.99, False)])
def test_orders_above_the_sustainable_volume_are_flagged(fly, share, flagged):
    # a small facility (8 cage slots) with one customer ordering share x what scipy's
    # linprog says the facility can sustain
    small = fly.model_copy(deep=True)
    for room in small.facility.adult_rooms:
        room.cage_slots = 4
    ref = _linprog_volume(small)
    small.orders = [Order(customer="Test customer", weekly_volume=share * ref, first_week=1)]
    rep = _checked(small)
    assert ("sustainable volume" in rep["short"]) == flagged
    assert rep["sustainable"]["volume"] == pytest.approx(ref, rel=1e-6)


def _weekday_sets(scn):
    """Seedable and shippable laying weekdays, from the scenario's kitchen and shipping
    days (modular weekday arithmetic)."""
    lag = scn.colony.rearing.seed_lag
    kitchen = scn.kitchen.diet_kg.as_list()
    ship = {DAYS.index(d) for d in scn.calendar.shipping_days}
    seed = [kitchen[(j + lag) % 7] > 0 for j in range(7)]
    ships = [any((j + a) % 7 in ship for a in scn.colony.rearing.harvest_ages)
             for j in range(7)]
    return seed, ships


@pytest.mark.parametrize("which", ["fly", "moth"])
def test_calendar_estimate_matches_a_weekday_linear_programme(which):
    # Laying weekday j: its eggs (B a day) are seeded only when the kitchen is open L
    # days later; its pupae are released only when some harvest age falls on a shipping
    # day. Least B, and then least eggs seeded, such that release eggs r_j and colony
    # eggs c_j give the week's release and replace the colony (sum c_j >= 7 B / R0):
    # solved with scipy's linprog, against the closed form of the stationary estimate.
    scn = load_scenario(demo_scenario_path(which))
    seed, ships = _weekday_sets(scn)
    cal = weekday_calendar(scn)
    assert (cal.seeding_days, cal.release_days) == (sum(seed),
                                                    sum(a and b for a, b in zip(seed, ships)))
    rearing = scn.colony.rearing
    theta, delta, volume = rearing.harvest_ages[0], rearing.discard_ages[1], 0.9
    n = stationary_needs(scn, volume, theta, delta, cal)
    lt = scn.colony.to_life_table()
    r0 = single_stage_harvest(lt, theta, delta,
                              scn.colony.stages.emergence_age).net_reproductive_rate
    e_r = 7 * volume * 1e6 / (7 * scn.colony.rearing.product_yield) / scn.colony.lx()[theta]
    # x = [B, r_0..r_6, c_0..c_6]
    a_ub, b_ub = [], []
    for j in range(7):
        row = np.zeros(15)
        row[0], row[1 + j], row[8 + j] = -float(seed[j]), 1.0, 1.0
        a_ub.append(row)
        b_ub.append(0.0)
    row = np.zeros(15)
    row[0], row[8:] = 7.0 / r0, -1.0
    a_ub.append(row)
    b_ub.append(0.0)
    row = np.zeros(15)
    row[1:8] = -1.0
    a_ub.append(row)
    b_ub.append(-e_r)
    bounds = [(0, None)] + [(0, None if ships[j] else 0) for j in range(7)] + [(0, None)] * 7
    first = linprog(np.r_[1.0, np.zeros(14)], A_ub=a_ub, b_ub=b_ub, bounds=bounds,
                    method="highs")
    assert first.status == 0
    assert n.eggs_laid == pytest.approx(first.x[0], rel=1e-9)
    bounds[0] = (first.x[0], first.x[0] * (1 + 1e-12))
    second = linprog(np.r_[0.0, np.ones(14)], A_ub=a_ub, b_ub=b_ub, bounds=bounds,
                     method="highs")
    assert second.status == 0
    assert 7 * n.eggs == pytest.approx(second.fun, rel=1e-6)
    # the cages lay B a day: zero growth of the colony from the life table
    col = scn.colony
    lx, mf = col.lx(), col.female_mx()
    k, tc = col.rearing.pupae_per_cage, col.rearing.cage_loading_age
    laid = n.cages_loaded * k * np.sum(lx[tc:delta + 1] / lx[tc] * mf[tc:delta + 1])
    assert laid == pytest.approx(n.eggs_laid, rel=1e-12)
    assert n.diet_per_open_day == pytest.approx(7 * n.diet / sum(seed))


def test_calendar_estimate_is_closer_to_the_linear_programme(moth):
    # The volume at which the estimate's first resource binds (cages, racks, diet;
    # crews have overtime), with and without the calendar, against scipy's linprog on
    # the standard week's programme, which has the weekly calendar.
    ref = _linprog_volume(moth)
    est = check_report(moth)["estimate"]
    theta, delta = est["harvest_age"], est["discard_age"]
    f = moth.facility
    kitchen = moth.kitchen.diet_kg.as_list()

    def binds(cal, kitchen_have, diet_need):
        n = stationary_needs(moth, 1.0, theta, delta, cal)
        return min(f.cage_slots / n.cage_occupancy, f.rack_slots / n.rack_occupancy,
                   kitchen_have / diet_need(n))

    blind = binds(ALL_DAYS, sum(kitchen) / 7, lambda n: n.diet)
    opened = [k for k in kitchen if k > 0]
    aware = binds(weekday_calendar(moth), sum(opened) / len(opened),
                  lambda n: n.diet_per_open_day)
    assert abs(aware - ref) < abs(blind - ref)
    assert blind >= 1.0 > aware  # only the calendar-aware estimate sees the peak short


def _dates(scn, week, weekdays):
    first = scn.calendar.start + dt.timedelta(days=7 * (week - 1))
    days = [first + dt.timedelta(days=i) for i in range(7)]
    return [d for d in days if DAYS[d.weekday()] in weekdays]


def test_a_week_without_shipping_day_is_short_and_the_calendar_is_printed(fly, capsys,
                                                                          tmp_path):
    hol = _dates(fly, 5, fly.calendar.shipping_days)  # every shipping day of week 5
    scn = fly.model_copy(update={"calendar": fly.calendar.model_copy(
        update={"holidays": hol})})
    rep = check_report(scn)
    cal = rep["calendar"]
    assert cal["weeks_without_shipping"] == [5]
    assert [h["date"] for h in cal["holidays"]] == [d.isoformat() for d in hol]
    assert all(h["shipping_day_lost"] for h in cal["holidays"])
    assert "week 5: no shipping day" in rep["short"] and not rep["ok"]
    assert any(r.startswith("no shipping day in week 5 (holidays "
                            + ", ".join(d.isoformat() for d in hol)) for r in rep["reasons"])
    assert cal["weeks"][4]["shipping_days"] == []
    assert all(w["shipping_days"] for w in cal["weeks"] if w["week"] != 5)
    f = tmp_path / "s.toml"
    from planner.scenario import dump_toml
    f.write_text(dump_toml(scn))
    assert main(["check", str(f)]) == 0
    out = capsys.readouterr().out
    assert "Calendar" in out and "weeks with no shipping day  5" in out


def test_a_kitchen_shut_on_holidays_lowers_the_seeding_days_of_the_week_it_feeds(fly):
    # holidays on a Tuesday and a Wednesday, the kitchen shut on holidays: the eggs laid
    # L days earlier cannot be seeded; their pupae would reach harvest age theta in the
    # week found with calendar arithmetic.
    hol = _dates(fly, 9, ("tue", "wed"))
    scn = fly.model_copy(update={
        "calendar": fly.calendar.model_copy(update={"holidays": hol}),
        "kitchen": fly.kitchen.model_copy(update={"holiday_kg": 0.0})})
    rep = check_report(scn)
    theta, lag = rep["estimate"]["harvest_age"], fly.colony.rearing.seed_lag
    fed = {((h - dt.timedelta(days=lag) + dt.timedelta(days=theta)) - fly.calendar.start).days
           // 7 + 1 for h in hol}
    usual = rep["calendar"]["seeding_days_per_week"]
    seeding = {w["week"]: w["seeding_days"] for w in rep["calendar"]["weeks"]}
    assert sum(usual - seeding[w] for w in fed) == len(hol)
    assert all(seeding[w] == usual for w in seeding if w not in fed)
    assert all(h["kitchen_shut"] for h in rep["calendar"]["holidays"])
    assert rep["calendar"]["weeks"][8]["kitchen_days"] == 6 - len(hol)
