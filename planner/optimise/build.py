"""Building the planning programme from :class:`PlanData` (numpy, no triple loops).

Decisions (variable blocks)
---------------------------
=============  ===========================  =====================================  ========
block          index                        meaning                                unit
=============  ===========================  =====================================  ========
cages          day s, discard age delta     cages loaded on day s, emptied at the  cages
                                            end of age delta (integer)
trays          day s                        larval trays seeded (integer)          trays
release        laying day d, harvest age    pupae of laying day d harvested for    1000 pupae
               theta                        release at age theta (shipping days)
load           laying day d, discard age    pupae of laying day d loaded into      1000 pupae
               delta                        cages of discard age delta
overtime       crew, day                    overtime hours                         h
ship           customer, week               product shipped to the customer        million
shortfall      customer, week               unmet order                            million
buy            expansion option             units bought (integer)                 units
use_discard    discard age                  the one discard age (policy switch)    binary
use_harvest    harvest age                  the one harvest age (policy switch)    binary
share          priority class, week         largest relative shortfall of the      -
                                            class's customers that week
volume         -                            the asked volume (``Question.volume``) million/week
start_week     first week                   the order starts that week             binary
                                            (``Question.start_choice``)
=============  ===========================  =====================================  ========

What an answer changes in the programme is declared in a :class:`Question` and applied
here; no code outside the builder edits a built model.

Constraint families: see :data:`FAMILIES` (name, rows, maths); the README tables them.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from planner.optimise.data import PlanData
from planner.optimise.model import LinearModel

__all__ = ["build_model", "FAMILIES", "BuiltModel", "PUPAE_UNIT", "Question",
           "PRIORITY_STEP", "SHARE_WEIGHT"]

#: Pupae (and eggs) per model unit: release, load and the egg and pupae rows are in
#: thousands, which keeps the matrix coefficients within a few orders of magnitude.
PUPAE_UNIT = 1000.0

#: An unmet million of a priority class costs this many times one of the class below
#: it [-] (a lexicographic objective in one solve: one pupa serves one order, so a class
#: is never robbed for the one below).
PRIORITY_STEP = 100.0
#: Objective weight of a class's largest relative shortfall in a week, per million
#: ordered by the class that week, as a share of its shortfall price [-]: small, so it
#: only decides how a short week is shared (pro rata), never how much is short.
SHARE_WEIGHT = 1e-3


@dataclass
class Question:
    """What an answer changes in the programme (applied by :func:`build_model`).

    Attributes
    ----------
    volume : (customer, weeks), optional
        The customer's order rows in these plan weeks (1-based) ask for the variable
        ``V`` [million/week] instead of their data; its shortfall there is held at 0
        and ``V`` is maximised with weight ``volume_weight`` [currency per million/week].
    start_choice : (customer, weekly volume, weeks, first weeks, penalty), optional
        The customer's order of ``weekly volume`` [million/week] runs ``weeks`` weeks
        from one first week chosen among ``first weeks`` (binary ``start_week``); each
        week later costs ``penalty`` [currency]. The customer's data rows only need to
        exist in every week that some start covers.
    shortfall_cap : dict, optional
        ``{(customer, week): ub}``: shortfall of these cells at most ub [million].
    fixed : dict, optional
        ``{block: {label: value}}``: variables fixed at values.
    lift : tuple of str
        Capacity families lifted (``cage_slots``, ``racks``, ``diet``,
        ``pupal_holding``, ``labour``): what the start state and the biology allow.
    """

    volume: tuple[str, tuple[int, ...]] | None = None
    volume_weight: float = 1e7
    start_choice: tuple | None = None
    shortfall_cap: dict = field(default_factory=dict)
    fixed: dict = field(default_factory=dict)
    lift: tuple[str, ...] = ()


#: A capacity "without limit" (Question.lift).
LIFTED = 1e12

#: Constraint families: name -> (one row per, maths, unit of the rows).
FAMILIES = {
    "eggs": ("seeding day t", "rho trays[t] <= E[t - L], the eggs laid on day t - L by the "
             "pupae loaded into cages (lx, mx from the loading age)", "thousand eggs"),
    "pupae": ("laying day d", "sum_theta release[d,theta]/l_theta + sum_delta load[d,delta]/"
              "l_theta_c <= rho trays[d + L] (egg equivalents)", "thousand eggs"),
    "colony": ("loading day t, delta", "load[t - theta_c, delta] <= k cages[t, delta] (pupae "
               "loaded fit the cages)", "thousand pupae"),
    "colony_fill": ("loading day t, delta", "load[t - theta_c, delta] >= f k cages[t, delta] "
                    "(cages loaded at least to the minimum fill f)", "thousand pupae"),
    "diet": ("day t", "diet_per_tray trays[t] <= kitchen[t] (+ expansion)", "kg"),
    "racks": ("day t", "trays seeded in the last rack_days days <= rack slots", "tray slots"),
    "cage_slots": ("day t", "cages loaded and not yet emptied <= cage slots", "cage slots"),
    "pupal_holding": ("day t", "pupae between larval collection and harvest <= holding",
                      "million pupae"),
    "labour": ("crew, day t", "sum of task hours <= regular hours + overtime", "h"),
    "orders": ("customer, week w", "ship[c,w] + shortfall[c,w] >= ordered[c,w] (or >= V, or "
               ">= volume sum_s start_week[s] over the starts that cover w)", "million"),
    "share": ("customer, week w", "shortfall[c,w] <= share[p(c),w] ordered[c,w] (a short "
              "week shared pro rata within a priority class)", "million"),
    "one_start": ("-", "sum_s start_week[s] = 1", "-"),
    "end": ("customer, look-ahead week", "as orders, for the weeks after the horizon that "
            "the colony must still serve", "million"),
    "shipping": ("week w", "sum_c ship[c,w] <= yield sum release harvested on shipping days "
                 "of week w / 1e6", "million"),
    "one_discard_age": ("-", "sum_delta use_discard[delta] = 1", "-"),
    "discard_choice": ("day t, delta", "cages[t,delta] <= U use_discard[delta]", "cages"),
    "one_harvest_age": ("-", "sum_theta use_harvest[theta] = 1", "-"),
    "harvest_choice": ("laying day d, theta", "release[d,theta] <= Pmax_d use_harvest[theta]",
                       "pupae"),
}


class BuiltModel:
    """A :class:`LinearModel` with the :class:`PlanData` it was built from, and the
    constant (start-state) parts of each expression kept for reporting and checking."""

    def __init__(self, model: LinearModel, data: PlanData, constants: dict):
        self.model = model
        self.data = data
        self.constants = constants

    @property
    def blocks(self):
        return self.model.blocks

    def asked(self, x: np.ndarray) -> np.ndarray:
        """Volume each order cell asks for in the plan ``x`` [million], in the order of
        ``constants['order_cells']``: the data's, or the question's volume variable, or
        the chosen start's."""
        return np.array([b - float(np.dot(vals, x[cols])) if len(cols) else b
                         for cols, vals, b in self.constants["asked"]], float)

    @property
    def families(self):
        return self.model.families


def _spread(data: PlanData, src_days, src_index, offsets, coefs, shift=0):
    """Rows, source positions and values of ``row = src_day + offset + shift``.

    For every source (a variable's day) and every offset j with coefficient c_j, the
    source contributes c_j to the row of day ``src_day + j + shift``, dropped outside the
    horizon or wrapped in the cycle. Vectorised over sources and offsets.
    """
    src_days = np.asarray(src_days, np.int64)
    offsets = np.asarray(offsets, np.int64)
    coefs = np.asarray(coefs, float)
    raw = src_days[:, None] + offsets[None, :] + shift
    rows, ok = data.rows(raw)
    val = np.broadcast_to(coefs[None, :], raw.shape)
    src = np.broadcast_to(np.asarray(src_index)[:, None], raw.shape)
    keep = ok & (val != 0)
    return rows[keep], src[keep], val[keep]


def _constant(data: PlanData, src_days, counts, offsets, coefs, shift=0) -> np.ndarray:
    """The same spread for start-state batches: a constant per row (day)."""
    out = np.zeros(data.n_days)
    if len(src_days) == 0:
        return out
    rows, src, val = _spread(data, src_days, np.arange(len(src_days)), offsets, coefs, shift)
    np.add.at(out, rows, val * np.asarray(counts, float)[src])
    return out


class _Rows:
    """COO triplets of one family, collected piece by piece."""

    def __init__(self):
        self.r, self.c, self.v = [], [], []

    def add(self, rows, cols, vals):
        rows = np.asarray(rows, np.int64)
        self.r.append(rows)
        self.c.append(np.broadcast_to(np.asarray(cols, np.int64), rows.shape))
        self.v.append(np.broadcast_to(np.asarray(vals, float), rows.shape))

    def arrays(self):
        if not self.r:
            return np.zeros(0, np.int64), np.zeros(0, np.int64), np.zeros(0)
        return np.concatenate(self.r), np.concatenate(self.c), np.concatenate(self.v)


def build_model(data: PlanData, *, relax: bool = False,
                question: Question | None = None) -> BuiltModel:
    """Build the programme.

    Parameters
    ----------
    data : PlanData
    relax : bool
        Drop integrality (the LP relaxation).
    question : Question, optional
        What an answer changes (a volume variable, a chosen start, capped shortfalls,
        fixed variables).
    """
    q = question or Question()
    scn = data.scenario
    m = LinearModel(f"broodline_{data.mode}")
    n = data.n_days
    days = np.arange(n)
    deltas = data.discard_ages
    thetas = data.harvest_ages
    lx = data.lx
    costs = scn.costs
    lab = scn.labour
    integer = not relax
    const: dict[str, np.ndarray] = {}

    # -- bounds from capacities (tight, for the choice constraints) ---------------------
    max_options = {"cage_slots": 0.0, "rack_slots": 0.0, "diet_kg": 0.0}
    for attr in max_options:
        adds = data.option_adds(attr)
        if adds.size:
            max_options[attr] = float((adds.max(axis=1) *
                                       [o.max_units for o in data.options]).sum())
    # tight bounds (they strengthen the LP relaxation a great deal); where shadow prices
    # of the rows are wanted, the caller loosens them (planner.answers.capacity)
    cage_ub = float(data.cage_slots.max() + max_options["cage_slots"])
    kitchen_max = data.kitchen + (data.option_adds("diet_kg").T @
                                  np.array([o.max_units for o in data.options], float)
                                  if data.options else 0.0)
    tray_ub = np.minimum(np.floor(kitchen_max / data.diet_per_tray + 1e-9),
                         data.rack_slots.max() + max_options["rack_slots"])

    # -- variables ----------------------------------------------------------------------
    cages = m.add_block("cages", [(int(t), d) for t in days for d in deltas], 0, cage_ub,
                        integer, "cages")
    trays = m.add_block("trays", [(int(t),) for t in days], 0, tray_ub, integer, "trays",
                        phase=2)
    cohorts = data.cohorts
    start_trays = {s: c for s, c in data.start.trays}
    supply_const = np.zeros(len(cohorts))
    seed_day = cohorts + data.seed_lag
    seed_rows, seed_ok = data.rows(seed_day)
    if data.mode == "horizon":
        supply_const = np.array([start_trays.get(int(s), 0) for s in seed_day], float) \
            * (seed_day < 0)
    has_supply = seed_ok | (supply_const > 0)
    rel_labels = []
    for theta in thetas:
        h_rows, h_ok = data.rows(cohorts + theta)
        ok = h_ok & has_supply & data.can_ship[h_rows]
        rel_labels += [(int(d), theta) for d in cohorts[ok]]
    rel_labels.sort()
    U = PUPAE_UNIT
    release = m.add_block("release", rel_labels, 0, np.inf, False, "thousand pupae")
    load_rows, load_ok = data.rows(cohorts + data.theta_c)
    col_cohorts = cohorts[load_ok]
    load = m.add_block("load", [(int(d), dl) for d in col_cohorts for dl in deltas], 0, np.inf,
                       False, "thousand pupae")
    load_cols = load.offset + np.arange(load.size).reshape(len(col_cohorts), len(deltas))
    nc = len(data.crews)
    overtime = m.add_block("overtime", [(data.crews[c], int(t)) for c in range(nc) for t in days],
                           0, data.overtime_limit.reshape(-1), False, "h")
    order_cells = [(ci, w) for ci in range(len(data.customers)) for w in range(data.n_weeks)
                   if data.ordered[ci, w] > 0]
    ship = m.add_block("ship", [(data.customers[c], w + 1) for c, w in order_cells], 0, np.inf,
                       False, "million")
    short = m.add_block("shortfall", [(data.customers[c], w + 1) for c, w in order_cells], 0,
                        np.inf, False, "million")
    buy = m.add_block("buy", [(o.name,) for o in data.options], 0,
                      [o.max_units for o in data.options], integer, "units", phase=0)

    cage_cols = cages.offset + np.arange(n * len(deltas)).reshape(n, len(deltas))
    tray_cols = trays.offset + days

    # -- eggs: rho trays[t] - E[t - L] <= E0[t - L] (thousands) ------------------------
    # E from the pupae loaded: a thousand pupae loaded at theta_c lay
    # 1000 l_a / l_theta_c mf_a eggs at age a, i.e. that many thousand eggs.
    fam = _Rows()
    fam.add(days, tray_cols, data.rho / U)
    e0 = np.zeros(n)
    load_days = col_cohorts + data.theta_c
    for j, delta in enumerate(deltas):
        span = data.span(delta)
        per_pupa = data.egg_coef(delta) / data.k
        fam.add(*_spread(data, load_days, load_cols[:, j], np.arange(span), -per_pupa,
                         data.seed_lag))
    for delta in sorted({dl for _, _, dl in data.start.cages}):
        batches = [(s0, c) for s0, c, dl in data.start.cages if dl == delta]
        e0 += _constant(data, [b[0] for b in batches], [b[1] for b in batches],
                        np.arange(data.span(delta)), data.egg_coef(delta), data.seed_lag)
    const["eggs"] = e0
    m.add_family("eggs", [(data.day_label(t),) for t in days], "<=", *fam.arrays(), e0 / U,
                 unit="thousand eggs", resource="eggs",
                 description=FAMILIES["eggs"][1])

    # -- pupae: sum release/l_theta + sum load/l_tc - rho trays[d+L] <= rho start trays ----
    fam = _Rows()
    cidx = {int(d): i for i, d in enumerate(cohorts)}
    rel_rows = np.array([cidx[d] for d, _ in release.labels], np.int64)
    rel_age = np.array([a for _, a in release.labels], np.int64)
    fam.add(rel_rows, release.offset + np.arange(release.size), 1.0 / lx[rel_age])
    col_rows = np.array([cidx[int(d)] for d in col_cohorts], np.int64)
    fam.add(np.repeat(col_rows, len(deltas)), load_cols.reshape(-1), 1.0 / lx[data.theta_c])
    fam.add(np.arange(len(cohorts))[seed_ok], tray_cols[seed_rows[seed_ok]], -data.rho / U)
    m.add_family("pupae", [(data.day_label(int(d)),) for d in cohorts], "<=", *fam.arrays(),
                 data.rho * supply_const / U, unit="thousand eggs", resource=None,
                 description=FAMILIES["pupae"][1])
    const["supply"] = data.rho * supply_const

    # -- colony: pupae loaded between f k and k per cage --------------------------------
    fill = data.min_cage_fill
    cage_at_load = cage_cols[load_rows[load_ok]]  # (cohorts, deltas)
    idx = np.arange(load.size)
    for name, sense, share in (("colony", "<=", 1.0), ("colony_fill", ">=", fill)):
        if name == "colony_fill" and fill <= 0:
            continue
        fam = _Rows()
        fam.add(idx, load_cols.reshape(-1), 1.0)
        fam.add(idx, cage_at_load.reshape(-1), -share * data.k / U)
        m.add_family(name, [(data.day_label(int(d) + data.theta_c), dl) for d in col_cohorts
                            for dl in deltas], sense, *fam.arrays(), np.zeros(load.size),
                     unit="thousand pupae", description=FAMILIES[name][1])

    # -- diet: d trays[t] - sum adds buy <= kitchen[t] ----------------------------------
    def with_options(fam: _Rows, attr: str, scale: float = 1.0):
        adds = data.option_adds(attr)
        for e in range(len(data.options)):
            nz = np.flatnonzero(adds[e])
            fam.add(nz, buy.offset + e, -scale * adds[e, nz])

    fam = _Rows()
    fam.add(days, tray_cols, data.diet_per_tray)
    with_options(fam, "diet_kg")
    m.add_family("diet", [(data.day_label(t),) for t in days], "<=", *fam.arrays(), data.kitchen,
                 unit="kg", resource="diet kitchen", description=FAMILIES["diet"][1])

    # -- racks ------------------------------------------------------------------------
    fam = _Rows()
    r, s, v = _spread(data, days, tray_cols, np.arange(data.rack_days),
                      np.ones(data.rack_days))
    fam.add(r, s, v)
    with_options(fam, "rack_slots")
    rack0 = _constant(data, [s0 for s0, _ in data.start.trays], [c for _, c in data.start.trays],
                      np.arange(data.rack_days), np.ones(data.rack_days))
    const["racks"] = rack0
    m.add_family("racks", [(data.day_label(t),) for t in days], "<=", *fam.arrays(),
                 data.rack_slots - rack0, unit="tray slots", resource="rack slots",
                 description=FAMILIES["racks"][1])

    # -- cage slots -------------------------------------------------------------------
    fam = _Rows()
    occ0 = np.zeros(n)
    all_deltas = sorted(set(deltas) | {dl for _, _, dl in data.start.cages})
    for delta in all_deltas:
        span = data.span(delta)
        if delta in deltas:
            j = deltas.index(delta)
            fam.add(*_spread(data, days, cage_cols[:, j], np.arange(span), np.ones(span)))
        batches = [(s0, c) for s0, c, dl in data.start.cages if dl == delta]
        occ0 += _constant(data, [b[0] for b in batches], [b[1] for b in batches],
                          np.arange(span), np.ones(span))
    with_options(fam, "cage_slots")
    const["cage_slots"] = occ0
    m.add_family("cage_slots", [(data.day_label(t),) for t in days], "<=", *fam.arrays(),
                 data.cage_slots - occ0, unit="cage slots", resource="cage slots",
                 description=FAMILIES["cage_slots"][1])

    # -- pupal holding (optional) -------------------------------------------------------
    if data.pupal_cap is not None:
        fam = _Rows()
        a_lc, tmax = data.larval_collection_age, max(data.take_ages)
        ages = np.arange(a_lc, tmax)
        # trays of cohort d put rho l_a pupae in holding on day d + a
        r, s, v = _spread(data, days - data.seed_lag, tray_cols, ages, data.rho * lx[ages] / 1e6)
        fam.add(r, s, v)
        hold0 = np.zeros(n)
        if data.start.trays:
            hold0 = _constant(data, [s0 - data.seed_lag for s0, _ in data.start.trays],
                              [c for _, c in data.start.trays], ages, data.rho * lx[ages] / 1e6)
        # a take at age tau removes take * l_a / l_tau from holding for a in [tau, tmax)
        for theta in thetas:
            sel = [lab for lab in release.labels if lab[1] == theta]
            if not sel:
                continue
            later = np.arange(theta, tmax)
            r, s, v = _spread(data, np.array([d for d, _ in sel]), release.cols(sel), later,
                              -lx[later] / lx[theta] * U / 1e6)
            fam.add(r, s, v)
        later = np.arange(data.theta_c, tmax)
        for j in range(len(deltas)):
            fam.add(*_spread(data, col_cohorts, load_cols[:, j], later,
                             -lx[later] / lx[data.theta_c] * U / 1e6))
        const["pupal_holding"] = hold0
        m.add_family("pupal_holding", [(data.day_label(t),) for t in days], "<=",
                     *fam.arrays(), data.pupal_cap - hold0, unit="million pupae",
                     resource="pupal holding", description=FAMILIES["pupal_holding"][1])

    # -- labour -------------------------------------------------------------------------
    fam = _Rows()
    hours0 = np.zeros((nc, n))

    def crew_of(task):
        return data.task_crew[task]

    def task(task_name, rows, cols, vals):
        c = crew_of(task_name)
        fam.add(c * n + np.asarray(rows), cols, vals)

    def task_const(task_name, values):
        hours0[crew_of(task_name)] += values

    task("diet_mixing", days, tray_cols, lab.diet_mixing * data.diet_per_tray)
    task("seeding", days, tray_cols, lab.seeding)
    r, s, v = _spread(data, days, tray_cols, [data.rack_days], [lab.larval_collection])
    task("larval_collection", r, s, v)
    task_const("larval_collection", _constant(
        data, [s0 for s0, _ in data.start.trays], [c for _, c in data.start.trays],
        [data.rack_days], [lab.larval_collection]))
    for delta in all_deltas:
        span = data.span(delta)
        lay = data.laying(delta)
        batches = [(s0, c) for s0, c, dl in data.start.cages if dl == delta]
        bd, bc = [b[0] for b in batches], [b[1] for b in batches]
        pieces = [("egg_collection", np.arange(span), lab.egg_collection * lay),
                  ("cage_care", np.arange(span), np.full(span, lab.cage_care)),
                  ("cage_discard", [span - 1], [lab.cage_discard])]
        for tname, offs, coef in pieces:
            if delta in deltas:
                j = deltas.index(delta)
                task(tname, *_spread(data, days, cage_cols[:, j], offs, coef))
            task_const(tname, _constant(data, bd, bc, offs, coef))
        if delta in deltas:
            task("cage_loading", days, cage_cols[:, deltas.index(delta)], lab.cage_loading)
    hday, hok = data.rows(np.array([d + th for d, th in release.labels], np.int64))
    task("harvest_packing", hday[hok], release.cols(release.labels)[hok],
         lab.harvest_packing * U / 1e6)
    # the colony's own pupae are harvested too (on the day they are loaded)
    for j in range(len(deltas)):
        task("harvest_packing", load_rows[load_ok], load_cols[:, j],
             lab.colony_harvest_rate * U / 1e6)
    oc = overtime.offset + np.arange(nc * n)
    fam.add(np.arange(nc * n), oc, -1.0)
    adds = data.option_adds("crew_hours")
    for e, opt in enumerate(data.options):
        if opt.crew_hours is None:
            continue
        ci = data.crews.index(opt.crew) if opt.crew else 0
        nz = np.flatnonzero(adds[e])
        fam.add(ci * n + nz, buy.offset + e, -adds[e, nz])
    const["labour"] = hours0
    m.add_family("labour", [(data.crews[c], data.day_label(t)) for c in range(nc) for t in days],
                 "<=", *fam.arrays(), (data.crew_hours - hours0).reshape(-1), unit="h",
                 resource="crew hours", description=FAMILIES["labour"][1])

    # -- orders and the look-ahead ('end') ----------------------------------------------
    vol = start = None
    if q.volume is not None:
        vol = m.add_block("volume", [()], 0, np.inf, False, "million/week")
        m.add_cost("volume", [vol.offset], [-q.volume_weight])
    if q.start_choice is not None:
        _, _, _, firsts, _ = q.start_choice
        start = m.add_block("start_week", [(int(w),) for w in firsts], 0, 1, integer,
                            "binary", phase=0)
        m.add_family("one_start", [()], "==", np.zeros(start.size),
                     start.offset + np.arange(start.size), np.ones(start.size), [1.0],
                     description=FAMILIES["one_start"][1])
        m.add_cost("start_week", start.offset + np.arange(start.size),
                   [q.start_choice[4] * (w - firsts[0]) for w in firsts])

    def asked(c: int, w: int):
        """(extra columns, coefficients, rhs) of the order row of customer c, week w."""
        name, week = data.customers[c], w + 1
        if vol is not None and name == q.volume[0] and week in q.volume[1]:
            return [vol.offset], [-1.0], 0.0
        if start is not None and name == q.start_choice[0]:
            _, volume, length, firsts, _ = q.start_choice
            on = [k for k, f in enumerate(firsts) if f <= week < f + length]
            return list(start.offset + np.array(on, np.int64)), [-volume] * len(on), 0.0
        return [], [], float(data.ordered[c, w])

    asked_terms: list = [None] * len(order_cells)
    for name, weeks in (("orders", range(data.report_weeks)),
                        ("end", range(data.report_weeks, data.n_weeks))):
        cells = [(i, c, w) for i, (c, w) in enumerate(order_cells) if w in weeks]
        fam = _Rows()
        rhs = []
        for k_, (i, c, w) in enumerate(cells):
            cols, vals, b = asked(c, w)
            asked_terms[i] = (np.array(cols, np.int64), np.array(vals, float), b)
            fam.add([k_] * (2 + len(cols)), [ship.offset + i, short.offset + i] + cols,
                    [1.0, 1.0] + vals)
            rhs.append(b)
        m.add_family(name, [(data.customers[c], w + 1) for _, c, w in cells], ">=",
                     *fam.arrays(), rhs, unit="million", description=FAMILIES[name][1])
    if vol is not None:
        for i, lab in enumerate(short.labels):
            if lab[0] == q.volume[0] and lab[1] in q.volume[1]:
                short.ub[i] = 0.0
    for i, lab in enumerate(short.labels):
        if lab in q.shortfall_cap:
            short.ub[i] = max(float(q.shortfall_cap[lab]), 0.0)

    # -- priorities: each class's shortfall priced above all classes below together, and
    # a short week shared pro rata within a class --------------------------------------
    prio = np.asarray(data.priority, int) if len(data.customers) else np.zeros(0, int)
    raw = np.array([data.shortfall_price[c, w] for c, w in order_cells], float)
    cell_prio = np.array([prio[c] for c, _ in order_cells], int)
    price = raw.copy()
    below = 0.0  # the dearest effective price of the classes below [currency/million]
    for p_ in sorted(set(cell_prio.tolist()), reverse=True):
        sel = cell_prio == p_
        factor = max(1.0, PRIORITY_STEP * below / float(raw[sel].min())) if below else 1.0
        price[sel] = raw[sel] * factor
        below = float(price[sel].max())
    groups: dict[tuple, list[int]] = {}
    for i, (c, w) in enumerate(order_cells):
        groups.setdefault((int(prio[c]), w), []).append(i)
    shared = [(key, cells) for key, cells in sorted(groups.items()) if len(cells) > 1]
    if shared:
        share = m.add_block("share", [(p, w + 1) for (p, w), _ in shared], 0, 1, False, "-")
        fam = _Rows()
        labels, k_ = [], 0
        cost = []
        for g, ((p, w), cells) in enumerate(shared):
            for i in cells:
                c = order_cells[i][0]
                fam.add([k_, k_], [short.offset + i, share.offset + g],
                        [1.0, -float(data.ordered[c, w])])
                labels.append((data.customers[c], w + 1))
                k_ += 1
            cost.append(SHARE_WEIGHT * float(min(price[i] for i in cells)) *
                        float(sum(data.ordered[order_cells[i][0], w] for i in cells)))
        m.add_family("share", labels, "<=", *fam.arrays(), np.zeros(len(labels)),
                     unit="million", description=FAMILIES["share"][1])
        m.add_cost("share", share.offset + np.arange(share.size), cost)

    # -- shipping: sum_c ship[c,w] - yield/1e6 sum release in week w <= 0 ---------------
    fam = _Rows()
    weeks_with = sorted({w for _, w in order_cells})
    wrow = {w: i for i, w in enumerate(weeks_with)}
    for i, (c, w) in enumerate(order_cells):
        fam.add([wrow[w]], [ship.offset + i], [1.0])
    rel_week = data.week_of_day(hday)
    for col, w, ok in zip(release.cols(release.labels), rel_week, hok):
        if ok and int(w) in wrow:
            fam.add([wrow[int(w)]], [col], [-data.product_yield * U / 1e6])
    m.add_family("shipping", [(w + 1,) for w in weeks_with], "<=", *fam.arrays(),
                 np.zeros(len(weeks_with)), unit="million", description=FAMILIES["shipping"][1])

    # -- policy switches (variable upper bounds: the convex hull of each choice) ---------
    if scn.plan.single_discard_age and len(deltas) > 1:
        use = m.add_block("use_discard", [(d,) for d in deltas], 0, 1, integer, "binary",
                          phase=0)
        m.add_family("one_discard_age", [()], "==", np.zeros(len(deltas)),
                     use.offset + np.arange(len(deltas)), np.ones(len(deltas)), [1.0],
                     description=FAMILIES["one_discard_age"][1])
        fam = _Rows()
        idx = np.arange(n * len(deltas))
        fam.add(idx, cage_cols.reshape(-1), 1.0)
        fam.add(idx, use.offset + np.tile(np.arange(len(deltas)), n), -cage_ub)
        m.add_family("discard_choice", [(data.day_label(t), d) for t in days for d in deltas],
                     "<=", *fam.arrays(), np.zeros(n * len(deltas)), unit="cages",
                     description=FAMILIES["discard_choice"][1])
    if scn.plan.single_harvest_age and len(thetas) > 1:
        use = m.add_block("use_harvest", [(t,) for t in thetas], 0, 1, integer, "binary",
                          phase=0)
        m.add_family("one_harvest_age", [()], "==", np.zeros(len(thetas)),
                     use.offset + np.arange(len(thetas)), np.ones(len(thetas)), [1.0],
                     description=FAMILIES["one_harvest_age"][1])
        fam = _Rows()
        supply_max = data.rho / U * np.where(seed_ok, tray_ub.max(), supply_const)
        pmax = []
        for k_, (d, theta) in enumerate(release.labels):
            pmax.append(supply_max[cidx[d]] * lx[theta])
        idx = np.arange(release.size)
        fam.add(idx, release.offset + idx, 1.0)
        fam.add(idx, use.offset + np.array([thetas.index(t) for _, t in release.labels],
                                           np.int64), -np.array(pmax))
        m.add_family("harvest_choice", [(data.day_label(d), t) for d, t in release.labels],
                     "<=", *fam.arrays(), np.zeros(release.size), unit="thousand pupae",
                     description=FAMILIES["harvest_choice"][1])

    # -- objective ------------------------------------------------------------------------
    m.add_cost("diet", tray_cols, np.full(n, costs.diet_per_kg * data.diet_per_tray))
    m.add_cost("trays", tray_cols, np.full(n, costs.per_tray_seeded))
    m.add_cost("cages", cage_cols.reshape(-1), np.full(cage_cols.size, costs.per_cage_loaded))
    in_window = np.array([[min(data.span(d), n - t) if data.mode == "horizon" else data.span(d)
                           for d in deltas] for t in days], float)
    m.add_cost("cage_days", cage_cols.reshape(-1), costs.per_cage_day * in_window.reshape(-1))
    m.add_cost("overtime", oc, np.full(nc * n, costs.overtime_per_hour))
    m.add_cost("shortfall", short.offset + np.arange(short.size), price)
    if data.options:
        weeks_ready = [max(0, (n - max(r, 0)) / 7.0) for r in data.option_ready]
        m.add_cost("expansion", buy.offset + np.arange(buy.size),
                   [o.weekly_cost * wk for o, wk in zip(data.options, weeks_ready)])
    m.c0 = costs.per_cage_day * float(occ0.sum())
    for fam_name in q.lift:
        if fam_name in m.families:
            m.families[fam_name].b[:] = LIFTED
        if fam_name in ("cage_slots",):
            m.blocks["cages"].ub[:] = np.inf
        if fam_name in ("racks", "diet"):
            m.blocks["trays"].ub[:] = np.inf
        if fam_name == "labour":
            m.blocks["overtime"].ub[:] = np.inf
    for block_name, values in q.fixed.items():
        blk = m.blocks[block_name]
        for lab, v in values.items():
            i = blk.index.get(lab)
            if i is not None:
                blk.lb[i] = blk.ub[i] = float(v)
    const["order_cells"] = order_cells
    const["asked"] = asked_terms
    const["cohorts"] = cohorts
    const["seed_ok"] = seed_ok
    const["cage_cols"] = cage_cols
    return BuiltModel(m, data, const)
