"""Solving a :class:`LinearModel` with PuLP: CBC (default) or HiGHS, one option.

The model's matrices become a PuLP problem (expressions built from (variable,
coefficient) lists); the solution comes back as a flat vector ``x``. Shadow prices come
from a second solve: the LP with every integer variable fixed at its value (duals of a
MILP are not sensitivities).

Status
------
``optimal`` (proven, or within the relative gap), ``feasible`` (stopped by the time
limit with a plan whose gap is not closed: marked *time-limited* wherever shown),
``infeasible``, ``unbounded``, ``no solution`` (stopped before any plan was found: the
solver's objective number is not shown), ``solver missing``.
"""

from __future__ import annotations

import contextlib
import dataclasses
import math
import os
import re
import tempfile
import time
from dataclasses import dataclass, field

import numpy as np
import pulp

from planner.errors import SolverError
from planner.optimise.children import guard_children, solve_folder
from planner.optimise.model import LinearModel, solver_name

pulp.set_v4_migration_warnings(False)

__all__ = ["SolveSettings", "SolveInfo", "Solution", "solve", "available_solvers", "to_pulp",
           "default_solver", "CLOSED_GAP"]

#: A relative gap at or below this counts as closed [-]: CBC's log rounds its bound to
#: about ten digits, so a proven optimum can show a gap of 1e-12.
CLOSED_GAP = 1e-9
#: Share of the time limit that phase 0 (options, policy switches) may use [-].
PHASE0_SHARE = 0.3
#: Share of the time limit that phase 1 (cages, trays relaxed) may use [-].
PHASE1_SHARE = 0.7
#: Share of the time limit for phase 2a (trays, cages fixed) [-], at least
#: :data:`PHASE2A_MIN_SECONDS`.
PHASE2A_SHARE = 0.1
PHASE2A_MIN_SECONDS = 5.0
#: Shares of the time limit for the neighbourhood route's LP relaxation, its first
#: neighbourhood (trays relaxed) and its second (trays whole) [-].
NEIGHBOURHOOD_LP_SHARE = 0.3
NEIGHBOURHOOD_A_SHARE = 0.35
NEIGHBOURHOOD_B_SHARE = 0.25
#: At most this many neighbourhoods around the best plan before the whole problem [-].
NEIGHBOURHOOD_ROUNDS = 3
#: Each neighbourhood search also stops after this many times the LP relaxation's own
#: time, or :data:`NEIGHBOURHOOD_MIN_SECONDS` if more [-], [s]: a neighbourhood that
#: is slow to search is left to the rounds around its best plan and to the whole
#: problem. Measured on the 104-week demo (HiGHS): the first neighbourhood finds a plan
#: 0.4 % above the bound in 8 s and needs 50 s to prove 0.2 %; stopped at 3 LP times
#: (12 s) the plan closes the 0.5 % gap after one round, 22 s in all instead of 56 s.
#: (Searching it by windows of 26 weeks, relax and fix, was slower: each window's
#: problem is as slow to solve as the whole.)
NEIGHBOURHOOD_LP_TIMES = 3.0
NEIGHBOURHOOD_MIN_SECONDS = 3.0
#: When the rounded neighbourhood's plan is further than this many times the relative
#: gap from the bound, the cages are searched over their whole range instead [-].
NEIGHBOURHOOD_WIDEN = 4.0
#: A solver call that ran for this share of its time limit or more hit the limit [-].
LIMIT_HIT_SHARE = 0.97


def default_solver() -> str:
    """HiGHS when it is installed (it solves the demo two to four times faster than CBC,
    see bench/plan.py), else CBC (bundled with PuLP)."""
    return "highs" if "highs" in available_solvers() else "cbc"


@dataclass(frozen=True)
class SolveSettings:
    """Solver options.

    Attributes
    ----------
    solver : str
        ``"highs"``, ``"cbc"`` or ``"auto"`` (HiGHS when installed, else CBC).
    time_limit : float
        [s] wall clock.
    relative_gap : float
        [-] the solver may stop when (incumbent - bound) / |incumbent| is below this.
    threads : int
        Solver threads (HiGHS keeps the same value within one process).
    duals : bool
        Also solve the LP with the integers fixed, for shadow prices.
    log_path : str, optional
        Where the solver writes its log (read for the progress display and CBC's bound).
    strategy : str
        ``"neighbourhood"`` (default), ``"phased"`` or ``"direct"`` (see :func:`solve`).
    absolute_gap : float, optional
        [objective unit] the solver may also stop when incumbent - bound is below this
        (for objectives whose optimum is near 0, where a relative gap means nothing).
    spent : float
        [s] of the time limit already used before the solve (the start state, the model
        build): the solver gets the rest, and the seconds reported include it.
    """

    solver: str = "auto"
    time_limit: float = 120.0
    relative_gap: float = 0.005
    threads: int = 1
    duals: bool = True
    log_path: str | None = None
    strategy: str = "neighbourhood"
    absolute_gap: float | None = None
    spent: float = 0.0

    def __post_init__(self):
        if self.solver == "auto":
            object.__setattr__(self, "solver", default_solver())

    def for_lp(self, duals: bool = False) -> "SolveSettings":
        """The same solver, threads and time limit, for a linear programme (solved to
        optimality in one call)."""
        return SolveSettings(solver=self.solver, time_limit=self.time_limit,
                             relative_gap=0.0, threads=self.threads, duals=duals,
                             strategy="direct")


@dataclass
class SolveInfo:
    """What the solver said."""

    solver: str
    status: str
    proven_optimal: bool
    time_limited: bool
    objective: float | None
    best_bound: float | None
    gap: float | None
    seconds: float
    message: str = ""
    dual_status: str | None = None
    calls: int = 0  #: solver calls made

    @property
    def has_plan(self) -> bool:
        return self.status in ("optimal", "feasible")

    def as_dict(self) -> dict:
        return {"solver": self.solver, "status": self.status,
                "proven_optimal": self.proven_optimal, "time_limited": self.time_limited,
                "objective": self.objective, "best_bound": self.best_bound, "gap": self.gap,
                "solve_seconds": self.seconds, "message": self.message}


@dataclass
class Solution:
    """A solved model: values, duals (fixed-integer LP) and the solver's report."""

    model: LinearModel
    x: np.ndarray
    info: SolveInfo
    duals: dict[str, np.ndarray] = field(default_factory=dict)
    relaxed_duals: dict[str, np.ndarray] = field(default_factory=dict)


def available_solvers() -> list[str]:
    """Solvers usable here: 'cbc' (bundled with PuLP) and 'highs' (the highs extra)."""
    names = pulp.listSolvers(onlyAvailable=True)
    out = []
    if "PULP_CBC_CMD" in names:
        out.append("cbc")
    if "HiGHS" in names:
        out.append("highs")
    return out


def to_pulp(model: LinearModel, relax: bool = False):
    """The PuLP problem of a model: (problem, variables in column order, rows by family)."""
    prob = pulp.LpProblem(model.name, pulp.LpMinimize)
    lb, ub = model.lb, model.ub
    integ = model.integrality.astype(bool) & (not relax)
    variables = []
    for k, (block, label) in enumerate(model.column_labels()):
        variables.append(pulp.LpVariable(
            solver_name(block, label), lowBound=float(lb[k]),
            upBound=None if math.isinf(ub[k]) else float(ub[k]),
            cat=pulp.LpInteger if integ[k] else pulp.LpContinuous))
    c = model.c
    nz = np.flatnonzero(c)
    prob.setObjective(pulp.LpAffineExpression([(variables[j], float(c[j])) for j in nz],
                                              constant=float(model.c0)))
    senses = {"<=": pulp.LpConstraintLE, ">=": pulp.LpConstraintGE, "==": pulp.LpConstraintEQ}
    rows: dict[str, list] = {}
    for fam in model.families.values():
        A = fam.A.tocsr()
        out = []
        for i, label in enumerate(fam.labels):
            lo, hi = A.indptr[i], A.indptr[i + 1]
            expr = pulp.LpAffineExpression(
                [(variables[j], float(v)) for j, v in zip(A.indices[lo:hi], A.data[lo:hi])])
            con = pulp.LpConstraint(expr, senses[fam.sense], solver_name(fam.name, label),
                                    float(fam.b[i]))
            prob.addConstraint(con)
            out.append(con)
        rows[fam.name] = out
    prob._broodline_model = (model, variables)  # read by _HiGHS for its one-call build
    # PuLP collects the variables by walking every row on each call of variables() (a few
    # times per solve: 0.4 s a solve on a 130-week model); no row is added after this
    ordered = prob.variables()
    prob.variables = lambda: ordered
    return prob, variables, rows


def _row_bounds(model: LinearModel):
    """(A in CSC, row lower, row upper) of every family in the model's order."""
    import scipy.sparse as sp
    mats, lo, hi = [], [], []
    for f in model.families.values():
        mats.append(f.A)
        b = np.asarray(f.b, float)
        lo.append(b if f.sense in (">=", "==") else np.full(f.size, -np.inf))
        hi.append(b if f.sense in ("<=", "==") else np.full(f.size, np.inf))
    if not mats:
        return sp.csc_matrix((0, model.n)), np.zeros(0), np.zeros(0)
    return sp.vstack(mats).tocsc(), np.concatenate(lo), np.concatenate(hi)


if hasattr(pulp, "HiGHS") and getattr(pulp.HiGHS, "buildSolverModel", None) is not None:
    class _HiGHS(pulp.HiGHS):
        """PuLP's HiGHS interface with three additions: the model is handed to HiGHS in
        one call from the model's sparse matrices (PuLP adds it row by row), a start plan
        (HiGHS's ``setSolution``), and a target objective at which the search stops
        (a callback that interrupts once an improving plan is at or below it)."""

        def __init__(self, *args, start=None, target=None, **kwargs):
            super().__init__(*args, **kwargs)
            self.start, self.target = start, target

        def buildSolverModel(self, lp):
            held = getattr(lp, "_broodline_model", None)
            if held is None:
                return super().buildSolverModel(lp)
            import highspy
            model, variables = held
            cache = getattr(lp, "_broodline_rows", None)
            if cache is None:
                cache = lp._broodline_rows = _row_bounds(model)
            A, lo, hi = cache
            inf = highspy.kHighsInf
            h = highspy.HighsLp()
            h.num_col_, h.num_row_ = model.n, A.shape[0]
            h.col_cost_ = np.asarray(model.c, float)
            h.col_lower_ = np.array([-inf if v.lowBound is None else v.lowBound
                                     for v in variables], float)
            h.col_upper_ = np.array([inf if v.upBound is None else v.upBound
                                     for v in variables], float)
            h.row_lower_ = np.where(np.isinf(lo), -inf, lo)
            h.row_upper_ = np.where(np.isinf(hi), inf, hi)
            h.a_matrix_.format_ = highspy.MatrixFormat.kColwise
            h.a_matrix_.start_ = A.indptr
            h.a_matrix_.index_ = A.indices
            h.a_matrix_.value_ = A.data
            ints = [v.cat == pulp.LpInteger for v in variables]
            if self.mip and any(ints):
                kint, kcont = highspy.HighsVarType.kInteger, highspy.HighsVarType.kContinuous
                h.integrality_ = [kint if i else kcont for i in ints]
            lp.solverModel.passModel(h)
            for k, v in enumerate(variables):
                v.index = k
            for i, con in enumerate(lp._constraints.values()):
                con.index = i

        def callSolver(self, lp):
            import highspy
            h = lp.solverModel
            if self.start is not None:
                sol = highspy.HighsSolution()
                sol.col_value = [float(v) for v in self.start]
                sol.value_valid = True
                h.setSolution(sol)
            if self.target is not None:
                kind = highspy.cb.HighsCallbackType
                state = {"best": math.inf}
                target = float(self.target)

                def stop_at_target(ctype, message, out, data_in, user):
                    if ctype == kind.kCallbackMipImprovingSolution:
                        state["best"] = min(state["best"], out.objective_function_value)
                    elif ctype == kind.kCallbackMipInterrupt and state["best"] <= target:
                        data_in.user_interrupt = True

                h.setCallback(stop_at_target, None)
                h.startCallback(kind.kCallbackMipImprovingSolution)
                h.startCallback(kind.kCallbackMipInterrupt)
            h.run()
else:  # pragma: no cover - PuLP without its HiGHS interface
    _HiGHS = None


@contextlib.contextmanager
def _quiet():
    """Silence C-level prints on stdout (HiGHS prints a banner even when told not to)."""
    try:
        fd = os.dup(1)
    except OSError:  # pragma: no cover - no stdout
        yield
        return
    with open(os.devnull, "w") as null:
        try:
            import sys
            sys.stdout.flush()
            os.dup2(null.fileno(), 1)
            yield
        finally:
            os.dup2(fd, 1)
            os.close(fd)


def _make_solver(s: SolveSettings, tmpdir: str, log_path: str | None, lp_only: bool = False,
                 warm: bool = False, start: np.ndarray | None = None,
                 target: float | None = None):
    """A PuLP solver. CBC starts from the variables' values when ``warm``; HiGHS starts
    from ``start`` and stops once a plan reaches ``target`` (solver units: the objective
    without its constant)."""
    if s.solver == "cbc":
        solver = pulp.PULP_CBC_CMD(msg=False, timeLimit=s.time_limit,
                                   gapRel=None if lp_only else s.relative_gap,
                                   gapAbs=None if lp_only else s.absolute_gap,
                                   threads=s.threads, logPath=log_path, warmStart=warm)
        solver.tmpDir = tmpdir
        return solver
    if s.solver == "highs":
        kwargs = {}
        if log_path:
            kwargs = {"log_file": log_path, "log_to_console": False}
        cls = _HiGHS or pulp.HiGHS
        if _HiGHS is not None:
            kwargs.update(start=start, target=target)
        return cls(msg=bool(log_path), timeLimit=s.time_limit,
                   gapRel=None if lp_only else s.relative_gap,
                   gapAbs=None if lp_only else s.absolute_gap, threads=s.threads, **kwargs)
    raise SolverError(f"unknown solver {s.solver!r}; use 'cbc' or 'highs'")


_CBC_BOUND = re.compile(r"^Lower bound:\s*([-+0-9.eE]+)", re.M)
_CBC_OBJECTIVE = re.compile(r"^Objective value:\s*([-+0-9.eE]+)", re.M)
_CBC_PROVEN = re.compile(r"^Result - Optimal solution found\s*$", re.M)
_CBC_BEST = re.compile(r"best possible\s*([-+0-9.eE]+)")


def _cbc_bound(log_path: str | None) -> float | None:
    """CBC's best bound from its log: the objective when it proved optimality, else its
    'Lower bound' line, else the last 'best possible' of its progress lines."""
    if not log_path or not os.path.exists(log_path):
        return None
    text = open(log_path, encoding="utf-8", errors="replace").read()
    if _CBC_PROVEN.search(text):
        m = _CBC_OBJECTIVE.findall(text)
        if m:
            return float(m[-1])
    m = _CBC_BOUND.findall(text)
    if m:
        return float(m[-1])
    m = _CBC_BEST.findall(text)
    return float(m[-1]) if m else None


def _cbc_proven(log_path: str | None) -> bool:
    """Whether CBC's log says it proved its plan optimal."""
    if not log_path or not os.path.exists(log_path):
        return False
    with contextlib.suppress(OSError):
        return bool(_CBC_PROVEN.search(open(log_path, encoding="utf-8",
                                            errors="replace").read()))
    return False


def _check_available(name: str) -> None:
    if name not in available_solvers():
        extra = " (install it with: pip install highspy)" if name == "highs" else ""
        raise SolverError(f"the solver {name!r} is not available here{extra}")


@dataclass
class _Call:
    """What one solver call returned."""

    status: str            # PuLP's status word
    sol_status: int        # PuLP's solution status
    x: np.ndarray
    bound: float | None    # the solver's best bound (MILP), objective units
    seconds: float
    hit: bool              # the call stopped at its time limit
    x_relaxed: np.ndarray | None = None  # the values as solved (integers not rounded)


_CBC_TIME = re.compile(r"Stopped on time|time limit", re.I)


def _limit_hit(prob, settings: SolveSettings, log: str | None, seconds: float,
               limit: float) -> bool:
    """Whether a solver call stopped at its time limit: the solver's own word where it
    gives one, else its run time against the limit."""
    if settings.solver == "highs":
        with contextlib.suppress(Exception):
            return "TimeLimit" in str(prob.solverModel.getModelStatus())
    elif log and os.path.exists(log):
        with contextlib.suppress(OSError):
            tail = open(log, encoding="utf-8", errors="replace").read()[-4000:]
            if "Result -" in tail:
                return bool(_CBC_TIME.search(tail.split("Result -")[-1].splitlines()[0]))
    return seconds >= LIMIT_HIT_SHARE * limit


class _Runner:
    """Solver calls of one :func:`solve` within its time budget, counted."""

    def __init__(self, prob, variables, model, settings: SolveSettings, tmp: str, log: str):
        self.prob, self.variables, self.model = prob, variables, model
        self.settings, self.tmp, self.log = settings, tmp, log
        self.t0 = time.perf_counter() - settings.spent  # building counts in the limit
        self.hit = False
        self.calls = 0

    def remaining(self) -> float:
        """Time left of the budget [s]."""
        return self.settings.time_limit - (time.perf_counter() - self.t0)

    def elapsed(self) -> float:
        return time.perf_counter() - self.t0

    def call(self, time_limit: float, gap: float | None, warm: bool = False,
             suffix: str = "", start: np.ndarray | None = None,
             target: float | None = None, absolute_gap: float | None = None) -> _Call:
        """One solver call (at most the time left); with ``warm``, CBC starts from the
        variables' current values; HiGHS starts from ``start`` (a whole plan) and stops
        at a plan whose objective is at or below ``target`` [objective unit]."""
        s = self.settings
        if self.calls and self.remaining() <= 0:
            # the limit is used up (building the model counts): no further call starts
            self.hit = True
            x = np.zeros(self.model.n)
            return _Call("Not Solved", pulp.LpSolutionNoSolutionFound, x, None, 0.0, True,
                         x.copy())
        limit = max(min(time_limit, self.remaining()), 1.0)
        run = SolveSettings(solver=s.solver, time_limit=limit,
                            relative_gap=gap if gap is not None else s.relative_gap,
                            threads=s.threads, duals=False,
                            absolute_gap=absolute_gap if absolute_gap is not None
                            else s.absolute_gap)
        log = self.log + suffix
        if target is not None and math.isfinite(target):
            target -= float(self.model.c0)  # the solver sees no constant
        else:
            target = None
        solver = _make_solver(run, self.tmp, log, warm=warm, start=start, target=target)
        t0 = time.perf_counter()
        try:
            with guard_children(), _quiet():
                self.prob.solve(solver)
        except pulp.PulpSolverError as exc:
            raise SolverError(f"the {s.solver} solver failed: {exc}") from None
        seconds = time.perf_counter() - t0
        self.calls += 1
        variables = self.variables
        x = np.array([v.varValue if v.varValue is not None else 0.0 for v in variables])
        x_relaxed = x.copy()
        integ = np.array([v.cat == pulp.LpInteger for v in variables])
        x[integ] = np.round(x[integ])
        bound = None
        if s.solver == "highs":
            with contextlib.suppress(Exception):
                bound = float(self.prob.solverModel.getInfo().mip_dual_bound)
                if not math.isfinite(bound):
                    bound = None
        else:
            bound = _cbc_bound(log)
        if bound is not None:
            bound += float(self.model.c0)  # the solvers are not given the objective's constant
        if bound is not None and s.solver == "cbc" and _cbc_proven(log):
            # a proven optimum is its own bound; CBC's log rounds the objective it prints
            bound = self.objective(x)
        if not integ.any():
            bound = None  # an LP's optimum is its own bound; set by the caller
        hit = _limit_hit(self.prob, s, log, seconds, limit)
        self.hit |= hit
        return _Call(pulp.LpStatus[self.prob.status], self.prob.sol_status, x, bound,
                     seconds, hit, x_relaxed)

    def objective(self, x: np.ndarray) -> float:
        return float(self.model.c @ x + self.model.c0)

    def has_plan(self, c: _Call) -> bool:
        return c.sol_status in (pulp.LpSolutionOptimal, pulp.LpSolutionIntegerFeasible) or \
            (c.status == "Optimal" and c.sol_status == 1)


def solve(model: LinearModel, settings: SolveSettings = SolveSettings(),
          initial: np.ndarray | None = None) -> Solution:
    """Solve the model; never raises for an infeasible or unsolved model (see status).

    ``initial``: a whole plan of the same model (values of every variable) that CBC starts
    from (ignored by HiGHS, whose PuLP interface takes no start).

    Strategy ``"neighbourhood"`` (default): the LP relaxation, then searches of its
    neighbourhood (see :func:`_neighbourhood`); if those find no whole plan, the phased
    route follows in the time left. Strategy ``"phased"``: the integer blocks marked ``phase=0`` (options
    bought, policy switches) are settled first with every other integer relaxed; then the
    blocks marked ``phase=2`` (larval trays, whose counts are large and whose LP values
    are nearly whole) are relaxed while the solver settles the other integers (cages);
    then those are fixed and the phase-2 integers are solved for. Whenever the gap of the
    best whole plan against the best valid bound is still open, the whole problem is
    solved last, started from that plan, in the time left. ``"direct"`` solves the full
    problem at once. ``time_limit`` bounds all the calls together.
    """
    _check_available(settings.solver)
    t_enter = time.perf_counter()
    prob, variables, rows = to_pulp(model)
    # handing the model to PuLP counts in the time limit as building it does
    settings = dataclasses.replace(settings,
                                   spent=settings.spent + time.perf_counter() - t_enter)
    integ = model.integrality.astype(bool)
    phase = np.ones(model.n, int)
    for b in model.blocks.values():
        phase[b.offset:b.offset + b.size] = b.phase
    phase2 = integ & (phase == 2)
    phase0 = integ & (phase == 0)
    two = settings.strategy != "direct" and integ.any() and (
        (phase2.any() and (integ & ~phase2).any()) or phase0.any())
    start = np.asarray(initial, float) if initial is not None and settings.solver == "cbc" \
        else None
    warm = _set_start(variables, start)
    with solve_folder() as tmp:
        log = settings.log_path or os.path.join(tmp, "solver.log")
        runner = _Runner(prob, variables, model, settings, tmp, log)
        if not two:
            c = runner.call(settings.time_limit, None, warm=warm)
            info = _interpret(settings, c, model, runner)
            x = c.x
        else:
            got = _neighbourhood(runner, integ, phase0, phase2) \
                if settings.strategy == "neighbourhood" else None
            info, x = got if got is not None else _phased(runner, integ, phase0, phase2, start)
        if initial is not None:
            info, x = _keep_start(model, np.asarray(initial, float), info, x, settings)
        duals: dict[str, np.ndarray] = {}
        relaxed: dict[str, np.ndarray] = {}
        if settings.duals and info.has_plan and runner.remaining() > 1.0:
            # the shadow prices share the time limit: each LP gets what is left
            left = dataclasses.replace(settings, time_limit=runner.remaining())
            duals, dual_status = _fixed_integer_duals(model, prob, variables, rows, x,
                                                      left, tmp)
            info.dual_status = dual_status
            if integ.any() and runner.remaining() > 1.0:
                relaxed = _relaxed_duals(model, dataclasses.replace(
                    settings, time_limit=runner.remaining()), tmp)
            elif not integ.any():
                relaxed = duals
        elif settings.duals and info.has_plan:
            info.dual_status = "not computed: no time left"
    info.calls = runner.calls
    return Solution(model=model, x=x, info=info, duals=duals, relaxed_duals=relaxed)


def _keep_start(model: LinearModel, x0: np.ndarray, info: SolveInfo, x: np.ndarray,
                settings: SolveSettings, tol: float = 1e-6):
    """The start plan, if it is a whole plan of the model and better than what the solver
    returned (or the solver returned none): the solver may lose a start its phases do
    not keep."""
    integ = model.integrality.astype(bool)
    ok = (x0.shape == (model.n,) and np.all(x0 >= model.lb - tol) and
          np.all(x0 <= model.ub + tol) and np.allclose(x0[integ], np.round(x0[integ])) and
          all(float(f.violation(x0).max(initial=0.0)) <= tol * max(1.0, float(
              np.abs(f.b).max(initial=1.0))) for f in model.families.values()))
    if not ok:
        return info, x
    obj0 = float(model.c @ x0 + model.c0)
    if info.has_plan and info.objective is not None and info.objective <= obj0 + 1e-9:
        return info, x
    bound = info.best_bound
    gap = _gap(obj0, bound)
    limited = _open(obj0, bound, settings)
    msg = ("the plan the solver was started from; the solver found none better in "
           f"{info.seconds:.1f} s" + (f" (gap {gap:.2%})" if gap is not None else ""))
    return SolveInfo(settings.solver, "feasible" if limited else "optimal", not limited,
                     limited and info.time_limited, obj0, bound, gap, info.seconds, msg), x0


@contextlib.contextmanager
def _continuous(variables, idx):
    """Relax the integer variables ``idx`` for the duration of the block."""
    for k in idx:
        variables[k].cat = pulp.LpContinuous
    try:
        yield
    finally:
        for k in idx:
            variables[k].cat = pulp.LpInteger


@contextlib.contextmanager
def _fixed(variables, idx, x):
    """Fix the variables ``idx`` at their values in ``x`` for the duration of the block."""
    saved = [(variables[k].lowBound, variables[k].upBound) for k in idx]
    for k in idx:
        variables[k].lowBound = variables[k].upBound = float(x[k])
    try:
        yield saved
    finally:
        for k, (lo, hi) in zip(idx, saved):
            variables[k].lowBound, variables[k].upBound = lo, hi


def _set_start(variables, start: np.ndarray | None) -> bool:
    """Give the variables a start plan's values (for CBC's warm start); False if none."""
    if start is None:
        return False
    for v, val in zip(variables, start):
        v.varValue = float(val)
    return True


@contextlib.contextmanager
def _bounded(variables, idx, lo, hi):
    """Bound the variables ``idx`` to [lo, hi] for the duration of the block."""
    saved = [(variables[k].lowBound, variables[k].upBound) for k in idx]
    for k, a, b in zip(idx, lo, hi):
        variables[k].lowBound, variables[k].upBound = float(a), float(b)
    try:
        yield
    finally:
        for k, (a, b) in zip(idx, saved):
            variables[k].lowBound, variables[k].upBound = a, b


def _target(bound: float | None, s: SolveSettings) -> float | None:
    """The objective at which a plan closes the gap to ``bound`` [objective unit]."""
    if bound is None or not math.isfinite(bound):
        return None
    g = max(s.relative_gap, CLOSED_GAP)
    t = bound / (1 - g) if bound >= 0 else bound / (1 + g)
    if s.absolute_gap is not None:
        t = max(t, bound + s.absolute_gap)
    return t


def _in_use(model: LinearModel, cols: np.ndarray, used: np.ndarray) -> np.ndarray:
    """For each column in ``cols``: whether any variable of its block with the same first
    label (the day of a cage count, whatever its discard age) is in ``used``."""
    out = np.zeros(cols.size, bool)
    pos = {int(k): i for i, k in enumerate(cols)}
    for b in model.blocks.values():
        ks = [k for k in range(b.offset, b.offset + b.size) if k in pos]
        if not ks:
            continue
        keys = [b.labels[k - b.offset][:1] for k in ks]
        on = {key for key, k in zip(keys, ks) if used[k]}
        for key, k in zip(keys, ks):
            out[pos[k]] = key in on
    return out


def _neighbourhood(r: _Runner, integ, phase0, phase2):
    """The default route of :func:`solve`: (SolveInfo, x), or None when it finds no
    whole plan (the caller then takes the phased route in the time left).

    1. The LP relaxation (every integer relaxed): its optimum is the bound every later
       plan is measured against. With phase-0 integers (options bought, policy
       switches), the MILP of those with every other integer relaxed instead: its
       bound is the bound, its plan the guide, its phase-0 values kept.
    2. The integers other than the phase-2 blocks (cages, options, switches) are
       searched between the whole numbers either side of their LP values, with the
       phase-2 integers (trays) relaxed; if that plan is far from the bound (more than
       :data:`NEIGHBOURHOOD_WIDEN` times the gap), over their whole range.
    3. Phase-0 integers stay fixed; a phase-1 integer may take its value from step 2 or
       one more on the days that step 1 or 2 uses (a day's cages, any discard age), and
       every phase-2 integer lies within one of its step-2 value's whole neighbours;
       while the gap is still open, the same with one more cage allowed on every day,
       then around each better plan (at most :data:`NEIGHBOURHOOD_ROUNDS` times, while each
       finds a better plan).
    4. Whenever the gap to the bound is still open, the whole problem, started from the
       best plan (HiGHS; CBC from its values), in the time left.

    Each MILP call stops as soon as a plan closes the gap to the LP bound. The
    search in steps 2 and 3 is a neighbourhood of the LP optimum in the spirit of
    relaxation-induced neighbourhood search (Danna, Rothberg & Le Pape 2005) and of
    relaxation enforced neighbourhood search (Berthold 2014).
    """
    s = r.settings
    budget = max(s.time_limit - s.spent, 1.0)
    variables, model = r.variables, r.model
    if phase0.any():
        # options and switches settled with every other integer relaxed: a MILP whose
        # bound is far tighter than the LP's when options are priced by the week
        with _continuous(variables, np.flatnonzero(integ & ~phase0)):
            c = r.call(PHASE0_SHARE * budget, s.relative_gap / 5, suffix=".0")
        if not r.has_plan(c):
            if c.status in ("Infeasible", "Unbounded"):
                return _interpret(s, c, model, r), c.x
            return None
        x_lp = c.x_relaxed
        x_lp[phase0] = np.round(x_lp[phase0])
        bound = c.bound
        if bound is None:
            return None
    else:
        with _continuous(variables, np.flatnonzero(integ)):
            c = r.call(NEIGHBOURHOOD_LP_SHARE * budget, None, suffix=".lp")
        if c.status != "Optimal" or c.hit:  # an LP stopped at its limit is no bound
            if c.status in ("Infeasible", "Unbounded"):
                return _interpret(s, c, model, r), c.x
            return None
        x_lp = c.x_relaxed
        bound = r.objective(x_lp)
    target = _target(bound, s)
    cap = max(NEIGHBOURHOOD_MIN_SECONDS, NEIGHBOURHOOD_LP_TIMES * c.seconds)
    # a neighbourhood may also stop once its own gap is within the slack the LP bound
    # leaves (CBC takes no target; HiGHS stops at the target itself)
    slack = None if target is None or s.solver != "cbc" else max(target - bound, 0.0)
    rest = np.flatnonzero(integ & ~phase2)
    second = np.flatnonzero(phase2)
    lo = np.floor(x_lp + 1e-6)
    hi = np.ceil(x_lp - 1e-6)
    lb, ub = model.lb, model.ub
    with _continuous(variables, second), \
            _bounded(variables, rest, np.maximum(lo[rest], lb[rest]),
                     np.minimum(np.maximum(hi[rest], lo[rest]), ub[rest])):
        ca = r.call(min(NEIGHBOURHOOD_A_SHARE * budget, cap), s.relative_gap / 2.5,
                    suffix=".a",
                    target=_target(bound, dataclasses.replace(
                        s, relative_gap=s.relative_gap / 2.5)))
    xa = ca.x_relaxed if r.has_plan(ca) else None
    if xa is None or _gap(r.objective(xa), bound) > NEIGHBOURHOOD_WIDEN * s.relative_gap:
        # the rounded neighbourhood is poor (whole cages do not fit where the LP's
        # fractions do): the cages over their whole range, trays still relaxed
        with _continuous(variables, second), \
                _bounded(variables, rest, lb[rest], ub[rest]):
            cw = r.call(min(PHASE1_SHARE * budget, r.remaining()), s.relative_gap / 2.5,
                        suffix=".a2", target=_target(bound, dataclasses.replace(
                            s, relative_gap=s.relative_gap / 2.5)))
        if r.has_plan(cw) and (xa is None or
                               r.objective(cw.x_relaxed) < r.objective(xa) - 1e-9):
            xa = cw.x_relaxed
    if xa is None:
        return None
    first = np.flatnonzero(integ & ~phase0 & ~phase2)
    zero = np.flatnonzero(phase0)
    a_first = np.round(xa[first])
    grow = _in_use(model, first, (x_lp > 1e-6) | (np.abs(xa) > 1e-6))
    b_lo = np.concatenate([np.round(xa[zero]), a_first,
                           np.maximum(np.floor(xa[second] + 1e-6) - 1, lb[second])])
    b_hi = np.concatenate([np.round(xa[zero]),
                           np.where(grow, np.minimum(a_first + 1, ub[first]), a_first),
                           np.minimum(np.ceil(xa[second] - 1e-6) + 1, ub[second])])
    idx = np.concatenate([zero, first, second])
    best_x, best_obj = None, math.inf
    with _bounded(variables, idx, b_lo, b_hi):
        cb = r.call(min(NEIGHBOURHOOD_B_SHARE * budget, cap), s.relative_gap / 2, suffix=".b",
                    target=target, absolute_gap=slack)
    if r.has_plan(cb):
        best_x, best_obj = cb.x, r.objective(cb.x)
    centre = np.concatenate([np.round(xa[zero]), a_first, xa[second]])
    for round_ in range(NEIGHBOURHOOD_ROUNDS):
        # 3b: every day's cages may take one more than step 2's (later: the best
        # plan's), its trays one either side; repeated from each better plan
        if r.remaining() <= 2.0 or not _open(best_obj, bound, s):
            break
        c_lo, c_hi = centre.copy(), centre.copy()
        nz, nf = zero.size, first.size
        c_hi[nz:nz + nf] = np.minimum(centre[nz:nz + nf] + 1, ub[first])
        c_lo[nz + nf:] = np.maximum(np.floor(centre[nz + nf:] + 1e-6) - 1, lb[second])
        c_hi[nz + nf:] = np.minimum(np.ceil(centre[nz + nf:] - 1e-6) + 1, ub[second])
        with _bounded(variables, idx, c_lo, c_hi):
            if best_x is not None:
                _set_start(variables, best_x)
            cc = r.call(min(NEIGHBOURHOOD_B_SHARE * budget, cap), s.relative_gap / 2,
                        suffix=f".c{round_}", warm=best_x is not None, start=best_x,
                        target=target, absolute_gap=slack)
        if not (r.has_plan(cc) and r.objective(cc.x) < best_obj - 1e-9):
            break
        best_x, best_obj = cc.x, r.objective(cc.x)
        centre = best_x[idx]
    if r.remaining() > 2.0 and _open(best_obj, bound, s):
        if best_x is not None:
            _set_start(variables, best_x)
        cf = r.call(r.remaining(), None, warm=best_x is not None, suffix=".3",
                    start=best_x, target=target)
        if r.has_plan(cf) and r.objective(cf.x) < best_obj - 1e-9:
            best_x, best_obj = cf.x, r.objective(cf.x)
        if cf.bound is not None and cf.bound > bound:
            bound = cf.bound
    if best_x is None:
        return None
    return _final(s, best_obj, bound, r.elapsed(), r.hit), best_x


def _phased(r: _Runner, integ, phase0, phase2, start):
    """The phased strategy of :func:`solve`: (SolveInfo, x)."""
    s = r.settings
    budget = max(s.time_limit - s.spent, 1.0)
    variables, model = r.variables, r.model
    bound = None
    fixed0 = np.flatnonzero(phase0)
    x0 = None
    if phase0.any():
        with _continuous(variables, np.flatnonzero(integ & ~phase0)):
            c0 = r.call(PHASE0_SHARE * budget, s.relative_gap / 5,
                        warm=_set_start(variables, start), suffix=".0")
        if not r.has_plan(c0):
            return _interpret(s, c0, model, r), c0.x
        bound, x0 = c0.bound, c0.x  # a relaxation's bound bounds the full problem
    best_x, best_obj, inner_bound = None, math.inf, None
    rest = integ & ~phase0
    first = np.flatnonzero(rest & ~phase2)
    second = np.flatnonzero(phase2)
    ctx = _fixed(variables, fixed0, x0) if x0 is not None else contextlib.nullcontext()
    with ctx:
        if first.size and second.size:
            with _continuous(variables, second):
                c1 = r.call(PHASE1_SHARE * budget, None,
                            warm=x0 is None and _set_start(variables, start), suffix=".1")
            if not r.has_plan(c1):
                if x0 is None:
                    return _interpret(s, c1, model, r), c1.x
            else:
                inner_bound = c1.bound
                x1 = c1.x
                with _fixed(variables, first, x1) as saved:
                    c2 = r.call(max(PHASE2A_SHARE * budget, PHASE2A_MIN_SECONDS),
                                s.relative_gap / 10, suffix=".2a")
                    if r.has_plan(c2):
                        best_x, best_obj = c2.x, r.objective(c2.x)
                    if r.remaining() > 2.0 and _open(best_obj, inner_bound, s):
                        # 2b: keep every unit of phase 1, add at most one
                        for k, (lo, hi) in zip(first, saved):
                            variables[k].lowBound = float(x1[k])
                            variables[k].upBound = float(x1[k] + 1) if hi is None else \
                                float(min(x1[k] + 1, hi))
                        c3 = r.call(r.remaining(), s.relative_gap / 2,
                                    warm=best_x is not None, suffix=".2b")
                        if r.has_plan(c3) and r.objective(c3.x) < best_obj - 1e-9:
                            best_x, best_obj = c3.x, r.objective(c3.x)
        elif x0 is not None:
            c1 = r.call(r.remaining(), None, suffix=".1")
            if r.has_plan(c1):
                best_x, best_obj = c1.x, r.objective(c1.x)
                inner_bound = c1.bound
    if x0 is None:
        bound = inner_bound  # with nothing fixed outside, phase 1's bound is valid
    if r.remaining() > 2.0 and _open(best_obj, bound, s):
        # the whole problem, started from the best whole plan so far
        if best_x is not None:
            _set_start(variables, best_x)
        c4 = r.call(r.remaining(), None, warm=best_x is not None, suffix=".3")
        if r.has_plan(c4) and r.objective(c4.x) < best_obj - 1e-9:
            best_x, best_obj = c4.x, r.objective(c4.x)
        if c4.bound is not None and (bound is None or c4.bound > bound):
            bound = c4.bound
    seconds = r.elapsed()
    if best_x is None:
        return SolveInfo(s.solver, "no solution", False, r.hit, None, bound, None, seconds,
                         f"no whole plan found in {seconds:.1f} s (time limit "
                         f"{s.time_limit:g} s); give the solver more time"), \
            (x0 if x0 is not None else np.zeros(model.n))
    return _final(s, best_obj, bound, seconds, r.hit), best_x


def _final(s: SolveSettings, objective: float, bound: float | None, seconds: float,
           hit: bool) -> SolveInfo:
    """The status of a whole plan with its best bound."""
    gap = _gap(objective, bound)
    if not _open(objective, bound, s):
        msg = "optimal" + (f" within the relative gap ({gap:.2%})"
                           if gap is not None and gap > CLOSED_GAP else "")
        return SolveInfo(s.solver, "optimal", True, False, objective, bound, gap, seconds,
                         msg + f" in {seconds:.1f} s")
    why = (f"stopped at the time limit after {seconds:.1f} s" if hit else
           f"stopped after {seconds:.1f} s")
    msg = (f"{why} with a plan whose gap is "
           f"{'unknown' if gap is None else f'{gap:.2%}'}: the plan is feasible but may "
           "not be the cheapest")
    return SolveInfo(s.solver, "feasible", False, hit, objective, bound, gap, seconds, msg)


def _interpret(s, c: _Call, model, r: _Runner) -> SolveInfo:
    has_ints = bool(model.integrality.any())
    seconds = r.elapsed()
    if c.sol_status == pulp.LpSolutionOptimal or (c.status == "Optimal" and c.sol_status == 1):
        objective = float(model.c @ c.x + model.c0)
        bound = c.bound if has_ints else objective
        if has_ints and c.hit:
            return _final(s, objective, bound, seconds, True)
        gap = _gap(objective, bound)
        return SolveInfo(s.solver, "optimal", True, False, objective, bound, gap, seconds,
                         "optimal" + ("" if not has_ints or gap is None or gap <= CLOSED_GAP
                                      else f" within the relative gap ({gap:.2%})"))
    if c.sol_status == pulp.LpSolutionIntegerFeasible:
        return _final(s, float(model.c @ c.x + model.c0), c.bound, seconds, c.hit)
    if c.status == "Infeasible" or c.sol_status == pulp.LpSolutionInfeasible:
        return SolveInfo(s.solver, "infeasible", False, False, None, None, None, seconds,
                         "the model has no feasible plan (check capacities and the start state)")
    if c.status == "Unbounded":
        return SolveInfo(s.solver, "unbounded", False, False, None, None, None, seconds,
                         "the model is unbounded (a cost or bound is missing)")
    return SolveInfo(s.solver, "no solution", False, c.hit, None, c.bound, None, seconds,
                     f"the solver stopped after {seconds:.1f} s (time limit "
                     f"{s.time_limit:g} s) before finding any plan; give it more time or a "
                     "larger gap")


def _open(objective: float, bound: float | None, s: SolveSettings) -> bool:
    """Whether the gap between a plan and the bound is still above the settings' target
    (a gap at or below :data:`CLOSED_GAP` is closed)."""
    if objective is None or not math.isfinite(objective) or bound is None:
        return True
    if s.absolute_gap is not None and objective - bound <= s.absolute_gap:
        return False
    return _gap(objective, bound) > max(s.relative_gap, CLOSED_GAP) * (1 + 1e-9)


def _gap(objective: float, bound: float | None) -> float | None:
    if bound is None or objective is None:
        return None
    g = max(0.0, (objective - bound)) / max(abs(objective), 1e-9)
    return 0.0 if g <= CLOSED_GAP else g


def _relaxed_duals(model, settings, tmp) -> dict[str, np.ndarray]:
    """Row duals of the LP relaxation (integrality dropped): the long-run value of one
    more unit of each right-hand side when cages and trays may be fractional."""
    prob, _, rows = to_pulp(model, relax=True)
    lp_settings = settings.for_lp()
    try:
        with guard_children(), _quiet():
            prob.solve(_make_solver(lp_settings, tmp, None, lp_only=True))
    except pulp.PulpSolverError:
        return {}
    if pulp.LpStatus[prob.status] != "Optimal":
        return {}
    return {name: -np.array([c.pi if c.pi is not None else 0.0 for c in cons], float)
            for name, cons in rows.items()}


def _fixed_integer_duals(model, prob, variables, rows, x, settings, tmp):
    """Row duals of the LP with the integers fixed at x, as 'value of one more unit of the
    right-hand side' in the objective's currency (negative of d cost / d b)."""
    integ = model.integrality.astype(bool)
    saved = [(v.lowBound, v.upBound, v.cat) for v in variables]
    for k in np.flatnonzero(integ):
        v = variables[k]
        v.lowBound = v.upBound = float(x[k])
        v.cat = pulp.LpContinuous
    lp_settings = settings.for_lp()
    solver = _make_solver(lp_settings, tmp, None, lp_only=True)
    try:
        with guard_children(), _quiet():
            prob.solve(solver)
        ok = pulp.LpStatus[prob.status] == "Optimal"
    except pulp.PulpSolverError:
        ok = False
    duals = {}
    if ok:
        for name, cons in rows.items():
            duals[name] = -np.array([c.pi if c.pi is not None else 0.0 for c in cons], float)
    for v, (lo, hi, cat) in zip(variables, saved):
        v.lowBound, v.upBound, v.cat = lo, hi, cat
    return duals, ("optimal" if ok else "not available")
