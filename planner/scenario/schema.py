"""The scenario schema: what a user hands Broodline, validated into one pydantic model.

Two kinds of file feed it (see :mod:`planner.scenario.load` and
:mod:`planner.scenario.workbook`):

- a **colony model** (``models/*.toml``, one per strain): life table, stage ages, female
  fraction, how the strain is reared, the allowed harvest and discard ages, product yield;
- a **scenario**: facility (rooms, diet kitchen), crews and labour standards, costs,
  calendar, orders, start state, expansion options and plan settings.

Every quantity states its unit in brackets in its field description; a bare number is
taken in that unit and a text such as ``"30 min"`` is converted (:mod:`.units`).
Ages are whole days from egg laying (``x = 0``).
"""

from __future__ import annotations

import datetime as dt
import typing
from functools import partial
from typing import Annotated, Literal

import numpy as np
from pydantic import (AfterValidator, BaseModel, BeforeValidator, ConfigDict, Field, field_validator,
                      model_validator)

from planner.scenario.units import parse_quantity

__all__ = [
    "WEEKDAYS", "TASKS", "Weekly", "InlineLifeTable", "Stages", "Rearing", "Variation", "ColonyModel",
    "AdultRoom", "LarvalRoom", "Facility", "Kitchen", "Crew", "LabourStandards", "Costs",
    "Calendar", "Order", "StartCages", "StartTrays", "StartState", "ExpansionOption",
    "PlanSettings", "Scenario", "Q",
]

WEEKDAYS = ("mon", "tue", "wed", "thu", "fri", "sat", "sun")
_DAY_NAMES = {d: d for d in WEEKDAYS} | {
    "monday": "mon", "tuesday": "tue", "wednesday": "wed", "thursday": "thu",
    "friday": "fri", "saturday": "sat", "sunday": "sun", "tues": "tue", "thur": "thu",
    "thurs": "thu"}

#: Tasks of the crews, each with the unit its labour standard is counted in.
TASKS: dict[str, str] = {
    "diet_mixing": "h per kg of diet mixed",
    "egg_collection": "h per laying cage per day",
    "seeding": "h per tray seeded",
    "larval_collection": "h per tray collected",
    "harvest_packing": "h per million pupae harvested for release",
    "cage_loading": "h per cage loaded",
    "cage_care": "h per occupied cage per day",
    "cage_discard": "h per cage discarded",
}


def Q(unit: str, description: str, **constraints):
    """A float field with a unit: described as ``'<description> [<unit>]'``."""
    return Annotated[float, BeforeValidator(partial(parse_quantity, unit=unit)),
                     Field(description=f"{description} [{unit}]",
                           json_schema_extra={"unit": unit}, **constraints)]


def N(unit: str, description: str, **constraints):
    """An integer field with a unit."""
    return Annotated[int, BeforeValidator(partial(parse_quantity, unit=unit)),
                     Field(description=f"{description} [{unit}]",
                           json_schema_extra={"unit": unit}, **constraints)]


#: Largest order book and look-ahead a plan is built for: the model grows with both, and
#: building it must stay within the time limit (104 plan weeks is the horizon's own cap).
MAX_ORDERS = 200
MAX_LOOKAHEAD_WEEKS = 26

#: The dates a plan may use: a calendar day outside these years is a typing mistake
#: (and dates near year 1 or 9999 overflow once the horizon is added).
FIRST_YEAR, LAST_YEAR = 1900, 2200


def _plain_date(value):
    """A date field takes a TOML date or an ISO text, never a number or true/false
    (pydantic would read 0 as 1970-01-01)."""
    if isinstance(value, (bool, int, float)):
        raise ValueError(f"a date is needed (e.g. 2027-03-01), not {value!r}")
    return value


def _date_range(value: dt.date) -> dt.date:
    if not FIRST_YEAR <= value.year <= LAST_YEAR:
        raise ValueError(f"the date {value} is outside the years {FIRST_YEAR}-{LAST_YEAR} "
                         f"a plan can use")
    return value


#: A calendar date in the years a plan can use.
Date = Annotated[dt.date, BeforeValidator(_plain_date), AfterValidator(_date_range)]


def _takes_bool(annotation) -> bool:
    """Whether a field's annotation admits true/false."""
    if annotation is bool:
        return True
    return any(_takes_bool(a) for a in typing.get_args(annotation))


class _Model(BaseModel):
    model_config = ConfigDict(extra="forbid", validate_assignment=False,
                              populate_by_name=True, str_strip_whitespace=True,
                              allow_inf_nan=False)

    @model_validator(mode="before")
    @classmethod
    def _no_bool_numbers(cls, value):
        """true/false only where a field is a switch: pydantic would read true as 1 in a
        number, a week or a weekday table."""
        if not isinstance(value, dict):
            return value
        for key, v in value.items():
            field = cls.model_fields.get(key)
            if field is None:
                for f in cls.model_fields.values():
                    if f.alias == key:
                        field = f
                        break
            if field is None or _takes_bool(field.annotation):
                continue
            items = v if isinstance(v, list) else [v]
            if any(isinstance(x, bool) for x in items):
                raise ValueError(f"{key}: a number or text is needed here, not true/false")
        return value


def weekday_key(name: str) -> str:
    """Normalise a weekday name ('Mon', 'monday', 'MON') to 'mon'."""
    key = _DAY_NAMES.get(str(name).strip().lower())
    if key is None:
        raise ValueError(f"{name!r} is not a weekday (use Mon, Tue, Wed, Thu, Fri, Sat, Sun)")
    return key


def _weekday_dict(value):
    if isinstance(value, dict):
        return {weekday_key(k): v for k, v in value.items()}
    return value


class Weekly(_Model):
    """One value per weekday (all seven must be given; write 0 for a closed day)."""

    mon: float = Field(ge=0)
    tue: float = Field(ge=0)
    wed: float = Field(ge=0)
    thu: float = Field(ge=0)
    fri: float = Field(ge=0)
    sat: float = Field(ge=0)
    sun: float = Field(ge=0)

    @model_validator(mode="before")
    @classmethod
    def _keys(cls, value):
        return _weekday_dict(value)

    def as_list(self) -> list[float]:
        """Values Monday to Sunday."""
        return [getattr(self, d) for d in WEEKDAYS]

    @classmethod
    def every_day(cls, value: float) -> "Weekly":
        return cls(**{d: value for d in WEEKDAYS})


def _weekly_or_number(value):
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return {d: value for d in WEEKDAYS}
    return value


WeeklyOrNumber = Annotated[Weekly, BeforeValidator(_weekly_or_number)]


# -- colony model ----------------------------------------------------------------------

class InlineLifeTable(_Model):
    """A daily life table given inline: ages 0, 1, 2, ... [day]."""

    age: list[float] = Field(description="ages [day], 0, 1, 2, ...")
    lx: list[float] = Field(description="survival from egg laying to each age [-]")
    mx: list[float] = Field(description="eggs per living female per day at each age "
                                        "[eggs/female/day] (see mx_counts)")

    @model_validator(mode="after")
    def _check(self):
        from planner.demography.lifetable import MAX_COLONY_MX, validate_life_table
        from planner.errors import InputError
        try:
            validate_life_table(self.age, self.lx, self.mx, source="life_table",
                                max_mx=MAX_COLONY_MX)
        except InputError as exc:
            raise ValueError(str(exc)) from None
        if not np.allclose(self.age, np.arange(len(self.age))):
            raise ValueError("the planner needs a daily life table with ages 0, 1, 2, ... "
                             "[day] and no gaps")
        return self


class Stages(_Model):
    """Stage ages of the strain, counted from egg laying."""

    hatch_age: N("day", "age at which eggs hatch", ge=0)
    larval_collection_age: N("day", "age at which mature larvae leave the diet and trays "
                                    "leave the racks", gt=0)
    emergence_age: N("day", "age at which adults emerge", gt=0)

    @model_validator(mode="after")
    def _order(self):
        if not (self.hatch_age < self.larval_collection_age < self.emergence_age):
            raise ValueError(f"stage ages must increase: hatch ({self.hatch_age}) < larval "
                             f"collection ({self.larval_collection_age}) < emergence "
                             f"({self.emergence_age}) [day]")
        return self


class Rearing(_Model):
    """How the strain is reared, and the choices the facility allows."""

    pupae_per_cage: N("pupae", "pupae an oviposition cage holds when full", gt=0)
    min_cage_fill: Q("-", "smallest share of pupae_per_cage a cage may be loaded with", ge=0,
                     le=1) = 0.8
    cage_loading_age: N("day", "age (from egg laying) of the pupae loaded into cages",
                        gt=0)
    eggs_per_tray: Q("eggs", "eggs seeded on one larval tray, counted at collection "
                             "(losses until seeding are in lx)", gt=0)
    diet_per_tray: Q("kg", "larval diet per tray", gt=0)
    seed_lag: N("day", "days from egg collection to seeding", ge=0)
    eggs_per_ml: Q("eggs/ml", "eggs per millilitre, to measure eggs by volume on the task "
                              "sheets", gt=0) | None = None
    harvest_ages: list[int] = Field(min_length=1, description="ages (from egg laying) at which "
                                    "pupae may be harvested for release [day]")
    discard_ages: list[int] = Field(min_length=1, description="ages (from egg laying) at whose "
                                    "end cages may be emptied [day]")
    product_yield: Q("-", "share of harvested pupae that counts toward an order (e.g. the male "
                          "share for a male-only product, times the emergence after handling)",
                     gt=0, le=1)

    @field_validator("harvest_ages", "discard_ages")
    @classmethod
    def _sorted_unique(cls, v: list[int]) -> list[int]:
        if len(set(v)) != len(v):
            raise ValueError("an age is listed twice")
        return sorted(v)


class Variation(_Model):
    """How much the biology varies around the life table's means (for the risk replay).

    A seeding batch is the trays seeded on one day from one day's eggs."""

    hatch_cv: Q("-", "coefficient of variation of egg hatch between seeding batches "
                     "(beta-distributed around the life table's hatch)", ge=0) = 0.08
    larval_cv: Q("-", "coefficient of variation of larval survival between seeding batches "
                      "(beta-distributed around the life table's)", ge=0) = 0.12
    fecundity_cv: Q("-", "coefficient of variation of eggs per female between cages "
                         "(gamma-distributed, mean 1)", ge=0) = 0.25
    tray_loss: Q("-", "chance that a seeded tray is lost whole (contamination)", ge=0,
                 lt=1) = 0.01


class ColonyModel(_Model):
    """A colony model: one strain, its life table and how it is reared."""

    name: str = Field(min_length=1, description="name of the strain or line")
    species: str = Field("", description="what insect it is")
    notes: str = Field("", description="free notes: sources, ranges, caveats")
    age_unit: Literal["day"] = Field("day", description="unit of age; the planner works in days")
    life_table: InlineLifeTable = Field(description="the daily life table (in a file: the name "
                                                    "of a CSV with columns age,lx,mx beside the "
                                                    "model file)")
    mx_counts: Literal["all eggs", "female eggs"] = Field(
        "all eggs", description="whether the mx column counts all eggs or female eggs only")
    female_fraction: Q("-", "share of eggs and adults that are female", gt=0, le=1)
    stages: Stages
    rearing: Rearing
    variation: Variation = Field(default_factory=Variation,
                                 description="variation around the means (risk replay)")

    @model_validator(mode="after")
    def _ages_fit(self):
        st, re_ = self.stages, self.rearing
        last = len(self.life_table.age) - 1
        errs = []
        if not (st.larval_collection_age <= re_.cage_loading_age <= st.emergence_age):
            errs.append(f"rearing.cage_loading_age = {re_.cage_loading_age}: cages are loaded "
                        f"with pupae, between larval collection ({st.larval_collection_age}) "
                        f"and emergence ({st.emergence_age}) [day]")
        if re_.seed_lag >= st.larval_collection_age:
            errs.append(f"rearing.seed_lag = {re_.seed_lag}: eggs must be seeded before the "
                        f"larval collection age ({st.larval_collection_age}) [day]")
        # one line per cause, listing every age it concerns
        ages = lambda xs: ", ".join(str(a) for a in xs)  # noqa: E731
        early = [a for a in re_.harvest_ages if a <= st.larval_collection_age]
        if early:
            errs.append(f"rearing.harvest_ages: {ages(early)} not after larval collection "
                        f"({st.larval_collection_age} day): there are no pupae yet")
        before_load = [a for a in re_.discard_ages if a <= re_.cage_loading_age]
        if before_load:
            errs.append(f"rearing.discard_ages: {ages(before_load)} not after the cage "
                        f"loading age ({re_.cage_loading_age} day)")
        elif re_.discard_ages:
            late = [a for a in re_.harvest_ages if a > min(re_.discard_ages)]
            if late:
                what = f"harvest age {late[0]} is" if len(late) == 1 else \
                    f"harvest ages {ages(late)} are"
                errs.append(f"rearing.harvest_ages: {what} after the discard age "
                            f"{min(re_.discard_ages)} [day]: harvest before cages are emptied")
        beyond = [f"{name} {ages(xs)}" for name, xs in (
            ("harvest_ages", [a for a in re_.harvest_ages if a > last]),
            ("discard_ages", [a for a in re_.discard_ages if a > last]),
            ("emergence_age", [st.emergence_age] if st.emergence_age > last else []))
            if xs]
        if beyond:
            errs.append(f"rearing: ages beyond the life table, which ends at day {last}: "
                        + "; ".join(beyond) + " (a longer life table, or earlier ages)")
        if errs:
            raise ValueError("\n".join(errs))
        return self

    # -- derived, in the planner's units ----------------------------------------------
    def lx(self) -> np.ndarray:
        """Survival from egg laying by day of age [-] (l0 = 1)."""
        lx = np.asarray(self.life_table.lx, float)
        return lx / lx[0]

    def female_mx(self) -> np.ndarray:
        """Female eggs per female per day by age [female eggs/female/day]."""
        mx = np.asarray(self.life_table.mx, float)
        return mx * self.female_fraction if self.mx_counts == "all eggs" else mx

    def eggs_per_pupa(self) -> np.ndarray:
        """Eggs (both sexes) laid per day by one insect of age x in a cage, per insect
        alive at that age: ``phi * mx_all`` = female mx [eggs/insect/day]."""
        return self.female_mx()

    def to_life_table(self):
        """The colony's :class:`planner.demography.LifeTable` (female mx)."""
        from planner.demography import LifeTable
        return LifeTable(self.life_table.age, self.lx(), self.female_mx(), age_unit="day",
                         source=self.name)


# -- facility -----------------------------------------------------------------------

class AdultRoom(_Model):
    """An adult room holding oviposition cages."""

    name: str = Field(min_length=1)
    cage_slots: N("cage slots", "oviposition cages the room can hold", ge=0)


class LarvalRoom(_Model):
    """A larval room with racks for larval trays."""

    name: str = Field(min_length=1)
    rack_slots: N("tray slots", "larval trays the racks can hold", ge=0)


class Facility(_Model):
    """Rooms and their slots."""

    adult_rooms: list[AdultRoom] = Field(min_length=1)
    larval_rooms: list[LarvalRoom] = Field(min_length=1)
    pupal_holding: Q("million pupae", "pupae that can be held between larval collection and "
                                      "harvest (leave out if not limiting)", ge=0) | None = None

    @property
    def cage_slots(self) -> int:
        return sum(r.cage_slots for r in self.adult_rooms)

    @property
    def rack_slots(self) -> int:
        return sum(r.rack_slots for r in self.larval_rooms)


class Kitchen(_Model):
    """The diet kitchen."""

    diet_kg: WeeklyOrNumber = Field(description="diet that can be mixed each weekday [kg/day]")
    holiday_kg: Q("kg/day", "diet that can be mixed on a holiday", ge=0) | None = Field(
        None, description="diet that can be mixed on a holiday [kg/day] (default: Sunday's)")


class Crew(_Model):
    """A crew: its regular hours by weekday, overtime and the tasks it does."""

    name: str = Field(min_length=1)
    hours: WeeklyOrNumber = Field(description="regular crew hours each weekday [h/day]")
    holiday_hours: Q("h/day", "regular hours on a holiday", ge=0) | None = Field(
        None, description="regular hours on a holiday [h/day] (default: Sunday's)")
    overtime_limit: Q("h/day", "overtime the crew may work in one day", ge=0) = 0.0
    tasks: list[str] | Literal["all"] = Field(
        "all", description="tasks this crew does: " + ", ".join(TASKS) + " (or 'all')")

    @field_validator("tasks")
    @classmethod
    def _known_tasks(cls, v):
        if v == "all":
            return v
        for t in v:
            if t not in TASKS:
                from planner.csvtable import closest
                hint = closest(t, list(TASKS))
                raise ValueError(f"unknown task {t!r}" + (f" (did you mean {hint!r}?)" if hint
                                                         else "") + "; tasks are "
                                 + ", ".join(TASKS))
        return v


class LabourStandards(_Model):
    """Hours of work per unit of each task."""

    diet_mixing: Q("h/kg", "per kg of diet mixed", ge=0) = 0.0
    egg_collection: Q("h/cage/day", "per laying cage per day, for egg collection", ge=0) = 0.0
    seeding: Q("h/tray", "per tray seeded", ge=0) = 0.0
    larval_collection: Q("h/tray", "per tray whose larvae are collected", ge=0) = 0.0
    harvest_packing: Q("h/million", "per million pupae harvested and packed for release",
                       ge=0) = 0.0
    colony_harvest: Q("h/million", "per million pupae harvested for the colony's own cages "
                      "(done by the crew that harvests for release; leave out to use "
                      "harvest_packing)", ge=0) | None = None
    cage_loading: Q("h/cage", "per cage loaded with pupae", ge=0) = 0.0
    cage_care: Q("h/cage/day", "per occupied cage per day (feeding, water, cleaning)",
                 ge=0) = 0.0
    cage_discard: Q("h/cage", "per cage emptied and cleaned", ge=0) = 0.0

    @property
    def colony_harvest_rate(self) -> float:
        """Hours per million pupae harvested for the colony's cages [h/million]."""
        return self.harvest_packing if self.colony_harvest is None else self.colony_harvest


class Costs(_Model):
    """Variable and fixed costs, in the scenario's currency."""

    currency: str = Field("EUR", description="currency of every cost")
    diet_per_kg: Q("currency/kg", "larval diet", ge=0) = 0.0
    per_tray_seeded: Q("currency/tray", "consumables per tray seeded", ge=0) = 0.0
    per_cage_loaded: Q("currency/cage", "cage set-up per cage loaded", ge=0) = 0.0
    per_cage_day: Q("currency/cage/day", "room running per occupied cage per day", ge=0) = 0.0
    overtime_per_hour: Q("currency/h", "overtime", ge=0) = 0.0
    shortfall_per_million: Q("currency/million", "price of an unmet million insects of an "
                                                  "order (used only when an order cannot be "
                                                  "met)", gt=0) = 1.0e5
    regular_crew_per_week: Q("currency/week", "regular staff (fixed: reported, not "
                                               "optimised)", ge=0) = 0.0


class Calendar(_Model):
    """Plan start, shipping days and holidays."""

    start: Date = Field(description="first day of the plan (a Monday keeps plan weeks "
                                       "aligned with calendar weeks)")
    shipping_days: list[str] = Field(min_length=1, description="weekdays on which pupae "
                                                               "ship (Mon ... Sun)")
    holidays: list[Date] = Field(default_factory=list, description="dates with holiday "
                                 "crew hours and kitchen; a range FIRST..LAST (text, e.g. "
                                 "'2027-08-02..2027-08-08') stands for every day in it")
    ship_on_holidays: bool = Field(False, description="whether pupae may ship on holidays")

    @field_validator("holidays", mode="before")
    @classmethod
    def _ranges(cls, v):
        """Expand each 'FIRST..LAST' text into its days (both ends included)."""
        if not isinstance(v, list):
            return v
        out = []
        for item in v:
            if not (isinstance(item, str) and ".." in item):
                out.append(item)
                continue
            first, _, last = item.partition("..")
            try:
                d0, d1 = dt.date.fromisoformat(first.strip()), dt.date.fromisoformat(last.strip())
            except ValueError:
                raise ValueError(f"holiday range {item!r}: write two dates FIRST..LAST, e.g. "
                                 "2027-08-02..2027-08-08") from None
            if d1 < d0:
                raise ValueError(f"holiday range {item!r}: the last day is before the first")
            if (d1 - d0).days > 366:
                raise ValueError(f"holiday range {item!r} is longer than a year; split it")
            out += [d0 + dt.timedelta(days=k) for k in range((d1 - d0).days + 1)]
        return out

    @field_validator("shipping_days")
    @classmethod
    def _days(cls, v):
        keys = [weekday_key(d) for d in v]
        if len(set(keys)) != len(keys):
            raise ValueError("a shipping day is listed twice")
        return [d for d in WEEKDAYS if d in keys]


WeekRef = int | Date


class Order(_Model):
    """A customer's standing weekly order."""

    customer: str = Field(min_length=1)
    weekly_volume: Q("million/week", "insects of product per week", gt=0)
    first_week: WeekRef = Field(1, description="first plan week (1 = the week starting on the "
                                               "plan start) or a date in that week")
    last_week: WeekRef | None = Field(None, description="last plan week or a date in it "
                                                        "(default: open-ended)")
    shortfall_per_million: Q("currency/million", "this order's own shortfall price (default: "
                                                 "the scenario's)", gt=0) | None = None
    priority: int = Field(1, ge=1, le=9, strict=True,
                          description="priority class [-]: 1 is served first; a short week "
                                      "falls on the larger numbers first, and customers of "
                                      "one class share it pro rata")

    @field_validator("first_week", "last_week")
    @classmethod
    def _positive_week(cls, v):
        if isinstance(v, int) and not isinstance(v, bool) and v < 1:
            raise ValueError("plan weeks are numbered from 1")
        return v


class StartCages(_Model):
    """Cages already loaded on the plan's first day."""

    load_date: Date
    count: N("cages", "cages in the batch", gt=0)
    discard_age: N("day", "age at whose end the batch is emptied", gt=0)
    room: str | None = Field(None, description="adult room (default: any)")


class StartTrays(_Model):
    """Larval trays already seeded on the plan's first day."""

    seed_date: Date
    count: N("trays", "trays in the batch", gt=0)


class StartState(_Model):
    """What is in the facility on day 0: batches, or the standard week at a volume."""

    standard_week_volume: Q("million/week", "start as if the standard week for this constant "
                                            "weekly volume had been running", gt=0) | None = None
    cages: list[StartCages] = Field(default_factory=list)
    trays: list[StartTrays] = Field(default_factory=list)

    @model_validator(mode="after")
    def _one_kind(self):
        if self.standard_week_volume is not None and (self.cages or self.trays):
            raise ValueError("give either standard_week_volume or batches of cages and trays, "
                             "not both")
        if self.standard_week_volume is None and not self.cages:
            raise ValueError("the start state has no cages: the colony cannot lay eggs; list "
                             "the cages in the facility or set standard_week_volume")
        return self


class ExpansionOption(_Model):
    """An addition the facility may buy (used by the expansion planner)."""

    name: str = Field(min_length=1)
    cage_slots: N("cage slots", "added per unit bought", ge=0) = 0
    rack_slots: N("tray slots", "added per unit bought", ge=0) = 0
    diet_kg: WeeklyOrNumber | None = Field(None, description="kitchen capacity added per unit "
                                                             "[kg/day], by weekday or every day")
    crew_hours: WeeklyOrNumber | None = Field(None, description="crew hours added per unit "
                                                                "[h/day], by weekday or every day")
    crew: str | None = Field(None, description="crew that gets the hours (default: the first)")
    weekly_cost: Q("currency/week", "cost per unit per week once ready", ge=0)
    ready: Date = Field(description="first day the addition can be used")
    max_units: N("units", "how many may be bought", ge=1) = 1

    @model_validator(mode="after")
    def _adds_something(self):
        if not (self.cage_slots or self.rack_slots or self.diet_kg or self.crew_hours):
            raise ValueError("the option adds nothing: give cage_slots, rack_slots, diet_kg or "
                             "crew_hours")
        return self


class PlanSettings(_Model):
    """Horizon and solver settings."""

    horizon_weeks: N("weeks", "length of the plan", ge=1, le=104) = 26
    solver: Literal["auto", "cbc", "highs"] = Field("auto", description="MILP solver: auto (HiGHS when installed, else CBC), highs or cbc")
    time_limit: Q("s", "solver time limit", gt=0) = 120.0
    relative_gap: Q("-", "relative optimality gap at which the solver may stop", ge=0,
                    lt=1) = 0.005
    lookahead_weeks: N("weeks", "weeks after the horizon whose orders the colony must still "
                                "be able to serve (default: from the egg-to-harvest lead time)",
                       ge=0, le=MAX_LOOKAHEAD_WEEKS) | None = None
    cycle_days: Literal[7, 14] = Field(7, description="length of the standard week [day]")
    single_discard_age: bool = Field(False, description="one discard age for all cages")
    single_harvest_age: bool = Field(False, description="one harvest age for all batches")


def _duplicate_names(where: str, names: list[str]) -> list[str]:
    """One message per name used twice in a list of named blocks."""
    out, first = [], {}
    for i, n in enumerate(names):
        if n in first and first[n] is not None:
            out.append(f"{where}[{i + 1}].name: {n!r} is also the name of "
                       f"{where}[{first[n] + 1}]; give each its own name")
            first[n] = None  # one line per repeated name
        elif n not in first:
            first[n] = i
    return out


class Scenario(_Model):
    """A facility's planning scenario: everything the planner needs."""

    name: str = Field(min_length=1)
    notes: str = ""
    colony: ColonyModel
    facility: Facility
    kitchen: Kitchen
    crews: list[Crew] = Field(min_length=1)
    labour: LabourStandards = Field(default_factory=LabourStandards)
    costs: Costs = Field(default_factory=Costs)
    calendar: Calendar
    orders: list[Order] = Field(default_factory=list, max_length=MAX_ORDERS,
                                description=f"the order book (at most {MAX_ORDERS} orders)")
    start: StartState
    expansion: list[ExpansionOption] = Field(default_factory=list)
    plan: PlanSettings = Field(default_factory=PlanSettings)

    @model_validator(mode="after")
    def _cross_checks(self):
        errs = []
        for where, items in (("crews", self.crews), ("facility.adult_rooms",
                             self.facility.adult_rooms), ("facility.larval_rooms",
                             self.facility.larval_rooms), ("expansion", self.expansion)):
            errs += _duplicate_names(where, [x.name for x in items])
        owner: dict[str, str] = {}
        seen: set[str] = set()
        both: dict[tuple[str, str], list[str]] = {}
        for c in self.crews:
            if c.name in seen:
                continue  # a repeated crew is one mistake, reported above
            seen.add(c.name)
            for t in (TASKS if c.tasks == "all" else c.tasks):
                if t in owner:
                    both.setdefault((owner[t], c.name), []).append(t)
                owner[t] = c.name
        for (first, second), tasks in both.items():
            # one line per pair of crews: a moved line gives several tasks to both
            what = (f"task {tasks[0]!r} is" if len(tasks) == 1 else
                    "tasks " + ", ".join(repr(t) for t in tasks) + " are")
            errs.append(f"crews: {what} done by both {first!r} and {second!r}; give each task "
                        "to one crew")
        missing = [t for t in TASKS if t not in owner]
        if missing:
            errs.append("crews: no crew does " + ", ".join(missing) + " (add them to a crew's "
                        "tasks, or set tasks = 'all' on one crew)")
        rooms = {r.name for r in self.facility.adult_rooms}
        for i, b in enumerate(self.start.cages):
            if b.room is not None and b.room not in rooms:
                errs.append(f"start.cages[{i + 1}].room: no adult room is called {b.room!r}")
            if b.load_date >= self.calendar.start:
                errs.append(f"start.cages[{i + 1}].load_date {b.load_date} is not before the "
                            f"plan start {self.calendar.start}")
            last_day = b.load_date + dt.timedelta(days=b.discard_age -
                                                  self.colony.rearing.cage_loading_age)
            if last_day < self.calendar.start:
                errs.append(f"start.cages[{i + 1}]: this batch was emptied on {last_day}, before "
                            "the plan starts; leave it out")
            if b.discard_age <= self.colony.rearing.cage_loading_age or \
                    b.discard_age >= len(self.colony.life_table.age):
                errs.append(f"start.cages[{i + 1}].discard_age {b.discard_age} is outside the "
                            f"ages a cage can have (after {self.colony.rearing.cage_loading_age}, "
                            f"within the life table)")
        for i, b in enumerate(self.start.trays):
            if b.seed_date >= self.calendar.start:
                errs.append(f"start.trays[{i + 1}].seed_date {b.seed_date} is not before the "
                            f"plan start {self.calendar.start}")
        for i, o in enumerate(self.orders):
            a, b = self.week_of(o.first_week), self.week_of(o.last_week) if o.last_week else None
            if b is not None and b < a:
                errs.append(f"orders[{i + 1}] ({o.customer}): the order ends (week {b}) before it "
                            f"starts (week {a})")
            if a < 1:
                errs.append(f"orders[{i + 1}] ({o.customer}): first_week {o.first_week} is "
                            "before the plan starts")
        for i, e in enumerate(self.expansion):
            if e.crew is not None and e.crew not in seen:
                errs.append(f"expansion[{i + 1}].crew: no crew is called {e.crew!r}")
        if errs:
            raise ValueError("\n".join(errs))
        return self

    # -- calendar helpers -------------------------------------------------------------
    def week_of(self, ref: WeekRef | None) -> int | None:
        """Plan week (1-based) of a week number or a date."""
        if ref is None:
            return None
        if isinstance(ref, dt.date):
            return (ref - self.calendar.start).days // 7 + 1
        return int(ref)

    def priorities(self) -> dict[str, int]:
        """Priority class of each customer [-]: the smallest of its orders' classes."""
        out: dict[str, int] = {}
        for o in self.orders:
            out[o.customer] = min(out.get(o.customer, o.priority), o.priority)
        return out

    def weekly_orders(self, weeks: int) -> dict[str, list[float]]:
        """Ordered volume by customer for plan weeks 1..weeks [million/week]."""
        out: dict[str, list[float]] = {}
        for o in self.orders:
            row = out.setdefault(o.customer, [0.0] * weeks)
            a = self.week_of(o.first_week)
            b = self.week_of(o.last_week) if o.last_week is not None else weeks
            for w in range(max(a, 1), min(b, weeks) + 1):
                row[w - 1] += o.weekly_volume
        return out
