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
from planner.optimise.model import LinearModel, solver_name

pulp.set_v4_migration_warnings(False)

__all__ = ["SolveSettings", "SolveInfo", "Solution", "solve", "available_solvers", "to_pulp"]


@dataclass(frozen=True)
class SolveSettings:
    """Solver options.

    Attributes
    ----------
    solver : str
        ``"cbc"`` or ``"highs"``.
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
        ``"two-phase"`` or ``"direct"`` (see :func:`solve`).
    absolute_gap : float, optional
        [objective unit] the solver may also stop when incumbent - bound is below this
        (for objectives whose optimum is near 0, where a relative gap means nothing).
    """

    solver: str = "cbc"
    time_limit: float = 120.0
    relative_gap: float = 0.005
    threads: int = 1
    duals: bool = True
    log_path: str | None = None
    strategy: str = "two-phase"
    absolute_gap: float | None = None

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
    return prob, variables, rows


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
                 warm: bool = False):
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
        return pulp.HiGHS(msg=bool(log_path), timeLimit=s.time_limit,
                          gapRel=None if lp_only else s.relative_gap,
                          gapAbs=None if lp_only else s.absolute_gap, threads=s.threads,
                          **kwargs)
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


def _check_available(name: str) -> None:
    if name not in available_solvers():
        extra = " (install it with: pip install 'broodline[highs]')" if name == "highs" else ""
        raise SolverError(f"the solver {name!r} is not available here{extra}")


def _run(prob, variables, model, settings: SolveSettings, tmp: str, log: str,
         time_limit: float, gap: float | None, warm: bool = False):
    """One solver call: (PuLP status, solution status, x, bound, seconds). With ``warm``,
    CBC starts from the variables' current values."""
    run = SolveSettings(solver=settings.solver, time_limit=max(time_limit, 1.0),
                        relative_gap=gap if gap is not None else settings.relative_gap,
                        threads=settings.threads, duals=False,
                        absolute_gap=settings.absolute_gap)
    solver = _make_solver(run, tmp, log, warm=warm)
    t0 = time.perf_counter()
    try:
        with _quiet():
            prob.solve(solver)
    except pulp.PulpSolverError as exc:
        raise SolverError(f"the {settings.solver} solver failed: {exc}") from None
    seconds = time.perf_counter() - t0
    x = np.array([v.varValue if v.varValue is not None else 0.0 for v in variables])
    integ = np.array([v.cat == pulp.LpInteger for v in variables])
    x[integ] = np.round(x[integ])
    bound = None
    if settings.solver == "highs":
        with contextlib.suppress(Exception):
            bound = float(prob.solverModel.getInfo().mip_dual_bound)
            if not math.isfinite(bound):
                bound = None
    else:
        bound = _cbc_bound(log)
    if bound is not None:
        bound += float(model.c0)  # the solvers are not given the objective's constant
    if not integ.any():
        bound = None  # an LP's optimum is its own bound; set by the caller
    return pulp.LpStatus[prob.status], prob.sol_status, x, bound, seconds


def solve(model: LinearModel, settings: SolveSettings = SolveSettings(),
          initial: np.ndarray | None = None) -> Solution:
    """Solve the model; never raises for an infeasible or unsolved model (see status).

    ``initial``: a whole plan of the same model (values of every variable) that CBC starts
    from (ignored by HiGHS, whose PuLP interface takes no start).

    Strategy ``"two-phase"`` (default): the integer blocks marked ``phase=2`` (larval
    trays, whose counts are large and whose LP values are nearly whole) are relaxed while
    the solver settles the other integers (cages, options); then those are fixed and the
    phase-2 integers are solved for. The final plan is whole in every integer; its gap is
    measured against the first phase's bound, which bounds the full problem from below.
    ``"direct"`` solves the full problem at once.
    """
    _check_available(settings.solver)
    prob, variables, rows = to_pulp(model)
    integ = model.integrality.astype(bool)
    phase = np.ones(model.n, int)
    for b in model.blocks.values():
        phase[b.offset:b.offset + b.size] = b.phase
    phase2 = integ & (phase == 2)
    phase0 = integ & (phase == 0)
    two = settings.strategy == "two-phase" and phase2.any() and (integ & ~phase2).any()
    start = np.asarray(initial, float) if initial is not None and settings.solver == "cbc" \
        else None
    warm = _set_start(variables, start)
    with tempfile.TemporaryDirectory(prefix="broodline-solve-") as tmp:
        log = settings.log_path or os.path.join(tmp, "solver.log")
        if not two:
            status, sol_status, x, bound, seconds = _run(prob, variables, model, settings, tmp,
                                                         log, settings.time_limit, None,
                                                         warm=warm)
            info = _interpret(settings, status, sol_status, x, model, bound, seconds)
        elif phase0.any():
            info, x = _with_phase0(prob, variables, model, settings, tmp, log, integ, phase0,
                                   phase2, start=start)
        else:
            info, x = _two_phase(prob, variables, model, settings, tmp, log, integ, phase2,
                                 start=start)
        if initial is not None:
            info, x = _keep_start(model, np.asarray(initial, float), info, x, settings)
        duals: dict[str, np.ndarray] = {}
        relaxed: dict[str, np.ndarray] = {}
        if settings.duals and info.has_plan:
            duals, dual_status = _fixed_integer_duals(model, prob, variables, rows, x,
                                                      settings, tmp)
            info.dual_status = dual_status
            if integ.any():
                relaxed = _relaxed_duals(model, settings, tmp)
            else:
                relaxed = duals
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
    msg = ("the plan the solver was started from; the solver found none better in the "
           "time limit" + (f" (gap {gap:.2%})" if gap is not None else ""))
    return SolveInfo(settings.solver, "feasible" if limited else "optimal", not limited,
                     limited, obj0, bound, gap, info.seconds, msg), x0


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


def _set_start(variables, start: np.ndarray | None) -> bool:
    """Give the variables a start plan's values (for CBC's warm start); False if none."""
    if start is None:
        return False
    for v, val in zip(variables, start):
        v.varValue = float(val)
    return True


def _with_phase0(prob, variables, model, settings, tmp, log, integ, phase0, phase2,
                 start=None):
    """Phase 0: the few large choices (options bought, policy binaries) with every other
    integer relaxed; then, with those fixed, the two-phase solve of the rest. The gap is
    measured against phase 0's bound, a valid bound of the full problem."""
    t0 = time.perf_counter()
    rest = np.flatnonzero(integ & ~phase0)
    with _continuous(variables, rest):
        status, sol_status, x0, bound0, t = _run(prob, variables, model, settings, tmp,
                                                 log + ".0", 0.3 * settings.time_limit,
                                                 settings.relative_gap / 5,
                                                 warm=_set_start(variables, start))
    info0 = _interpret(settings, status, sol_status, x0, model, bound0, t)
    if not info0.has_plan:
        return info0, x0
    fixed = np.flatnonzero(phase0)
    saved = [(variables[k].lowBound, variables[k].upBound) for k in fixed]
    for k in fixed:
        variables[k].lowBound = variables[k].upBound = float(x0[k])
    left = dataclasses.replace(settings, time_limit=max(settings.time_limit -
                                                         (time.perf_counter() - t0), 10.0))
    info, x = _two_phase(prob, variables, model, left, tmp, log, integ & ~phase0, phase2,
                         outer_bound=info0.best_bound, start=start)
    for k, (lo, hi) in zip(fixed, saved):
        variables[k].lowBound, variables[k].upBound = lo, hi
    info.seconds = time.perf_counter() - t0
    return info, x


def _two_phase(prob, variables, model, settings, tmp, log, integ, phase2, outer_bound=None,
               start=None):
    """Phase 1 with the phase-2 integers relaxed; phase 2a with the other integers fixed;
    phase 2b, if time and gap allow, in the neighbourhood 'keep every unit, add at most
    one' of phase 1, started from 2a's plan; phase 3, if the gap is still open, the whole
    problem started from the best whole plan. The best whole plan wins; its gap is
    measured against the best valid bound (phase 1's or phase 3's)."""
    first = np.flatnonzero(integ & ~phase2)
    second = np.flatnonzero(phase2)
    budget = settings.time_limit
    t_start = time.perf_counter()
    with _continuous(variables, second):
        status, sol_status, x1, bound, t1 = _run(prob, variables, model, settings, tmp, log,
                                                 0.7 * budget, None,
                                                 warm=_set_start(variables, start))
    info1 = _interpret(settings, status, sol_status, x1, model, bound, t1)
    if not info1.has_plan:
        return info1, x1
    saved = [(variables[k].lowBound, variables[k].upBound) for k in first]

    def remaining() -> float:
        return budget - (time.perf_counter() - t_start)

    best_x, best_obj = None, math.inf
    for k in first:
        variables[k].lowBound = variables[k].upBound = float(x1[k])
    st, ss, x2, _, _ = _run(prob, variables, model, settings, tmp, log + ".2a",
                            max(min(0.1 * budget, remaining()), 5.0), settings.relative_gap / 10)
    if _interpret(settings, st, ss, x2, model, None, 0.0).has_plan:
        best_x, best_obj = x2, float(model.c @ x2 + model.c0)
    gap = _gap(best_obj, info1.best_bound) if best_x is not None else None
    if remaining() > 2.0 and _open(best_obj, info1.best_bound, settings):
        for k, (lo, hi) in zip(first, saved):
            variables[k].lowBound = float(x1[k])
            variables[k].upBound = float(x1[k] + 1) if hi is None else float(min(x1[k] + 1, hi))
        st, ss, x3, _, _ = _run(prob, variables, model, settings, tmp, log + ".2b",
                                remaining(), settings.relative_gap / 2,
                                warm=best_x is not None)
        if _interpret(settings, st, ss, x3, model, None, 0.0).has_plan:
            obj3 = float(model.c @ x3 + model.c0)
            if obj3 < best_obj - 1e-9:
                best_x, best_obj = x3, obj3
    for k, (lo, hi) in zip(first, saved):
        variables[k].lowBound, variables[k].upBound = lo, hi
    # with phases fixed outside, only the outer bound bounds the full problem
    bound = info1.best_bound if outer_bound is None else outer_bound
    if outer_bound is None and remaining() > 2.0 and _open(best_obj, bound, settings):
        # phase 3: the whole problem, started from the best whole plan so far
        if best_x is not None:
            for v, val in zip(variables, best_x):
                v.varValue = float(val)
        st, ss, x4, b4, _ = _run(prob, variables, model, settings, tmp, log + ".3",
                                 remaining(), None, warm=best_x is not None)
        i4 = _interpret(settings, st, ss, x4, model, b4, 0.0)
        if i4.has_plan and i4.objective < best_obj - 1e-9:
            best_x, best_obj = x4, i4.objective
        if b4 is not None and (bound is None or b4 > bound):
            bound = b4
    seconds = time.perf_counter() - t_start
    if best_x is None:
        info1.status = "no solution"
        info1.message = ("phase 1 found cage counts, but no whole number of trays fits them in "
                         "the time left; give the solver more time (--time-limit)")
        info1.objective = None
        return info1, x1
    gap = _gap(best_obj, bound)
    limited = _open(best_obj, bound, settings)
    if not limited:
        msg = "optimal within the relative gap" + (f" ({gap:.2%})" if gap and gap > 1e-9 else "")
        status = "optimal"
    else:
        msg = (f"stopped at the time limit ({settings.time_limit:g} s) with a plan whose gap is "
               f"{'unknown' if gap is None else f'{gap:.2%}'}: the plan is feasible but may "
               "not be the cheapest")
        status = "feasible"
    return SolveInfo(settings.solver, status, not limited, limited, best_obj,
                     bound, gap, seconds, msg), best_x


def _interpret(s, status, sol_status, x, model, bound, seconds) -> SolveInfo:
    has_ints = bool(model.integrality.any())
    if sol_status == pulp.LpSolutionOptimal or (status == "Optimal" and sol_status == 1):
        objective = float(model.c @ x + model.c0)
        if not has_ints:
            bound = objective
        gap = _gap(objective, bound)
        return SolveInfo(s.solver, "optimal", True, False, objective, bound, gap, seconds,
                         "optimal" + ("" if not has_ints or gap is None or gap <= 1e-9 else
                                      f" within the relative gap ({gap:.2%})"))
    if sol_status == pulp.LpSolutionIntegerFeasible:
        objective = float(model.c @ x + model.c0)
        gap = _gap(objective, bound)
        limited = gap is None or gap > s.relative_gap
        msg = (f"stopped at the time limit ({s.time_limit:g} s) with a plan whose gap is "
               f"{'unknown' if gap is None else f'{gap:.2%}'}: the plan is feasible but may "
               "not be the cheapest") if limited else "optimal within the relative gap"
        return SolveInfo(s.solver, "feasible" if limited else "optimal", not limited, limited,
                         objective, bound, gap, seconds, msg)
    if status == "Infeasible" or sol_status == pulp.LpSolutionInfeasible:
        return SolveInfo(s.solver, "infeasible", False, False, None, None, None, seconds,
                         "the model has no feasible plan (check capacities and the start state)")
    if status == "Unbounded":
        return SolveInfo(s.solver, "unbounded", False, False, None, None, None, seconds,
                         "the model is unbounded (a cost or bound is missing)")
    return SolveInfo(s.solver, "no solution", False, True, None, bound, None, seconds,
                     f"the solver stopped (time limit {s.time_limit:g} s) before finding any "
                     "plan; give it more time (--time-limit) or a larger gap")


def _open(objective: float, bound: float | None, s: SolveSettings) -> bool:
    """Whether the gap between a plan and the bound is still above the settings' target."""
    if objective is None or not math.isfinite(objective) or bound is None:
        return True
    if s.absolute_gap is not None and objective - bound <= s.absolute_gap:
        return False
    return _gap(objective, bound) > s.relative_gap * (1 + 1e-9)


def _gap(objective: float, bound: float | None) -> float | None:
    if bound is None or objective is None:
        return None
    return max(0.0, (objective - bound)) / max(abs(objective), 1e-9)


def _relaxed_duals(model, settings, tmp) -> dict[str, np.ndarray]:
    """Row duals of the LP relaxation (integrality dropped): the long-run value of one
    more unit of each right-hand side when cages and trays may be fractional."""
    prob, _, rows = to_pulp(model, relax=True)
    lp_settings = settings.for_lp()
    try:
        with _quiet():
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
        with _quiet():
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
