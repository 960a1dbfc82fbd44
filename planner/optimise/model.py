"""A solver-neutral linear model: variable blocks and constraint families as sparse
matrices.

The planner's programme is assembled here with numpy (no Python loops over the
triple index of cohort, age and day): each constraint family is ``A x (<=, >=, ==) b``
with one labelled row per day, week or cohort. :mod:`planner.optimise.solve` turns the
model into a PuLP problem (CBC or HiGHS); the tests hand the same matrices to
``scipy.optimize.milp``.

Names
-----
A variable or row is shown as ``family[label, label]`` (e.g. ``eggs[2027-03-04]``);
the solver sees :func:`solver_name`, which maps that to ``family__label__label`` with
only letters, digits and underscores, and is unique by construction.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp

__all__ = ["VariableBlock", "Family", "LinearModel", "solver_name", "display_name"]

_SAFE = re.compile(r"[^A-Za-z0-9]")


def display_name(family: str, labels: tuple) -> str:
    """``family[l1, l2]`` as shown to people."""
    return f"{family}[{', '.join(str(x) for x in labels)}]" if labels else family


def solver_name(family: str, labels: tuple) -> str:
    """A solver-safe, unique name: ``family__l1__l2`` with unsafe characters as 'x'.

    Labels are dates (written 20270304), ages, or short identifiers; families are lower
    case words with single underscores, so ``__`` separates the parts unambiguously.
    """
    parts = [family] + [_part(x) for x in labels]
    return "__".join(parts)


def _part(x) -> str:
    if isinstance(x, (int, np.integer)):
        return f"m{-int(x)}" if x < 0 else str(int(x))
    return _SAFE.sub("x", str(x).replace("-", ""))


#: Largest coefficient or right-hand side a row may carry [the family's unit]. Solvers
#: treat numbers near 1e15-1e20 as infinite and lose every digit of a plan long before
#: that; a facility's numbers in these units stay below a million.
MAX_MAGNITUDE = 1e12


def _check_magnitude(name, unit, resource, vals, b) -> None:
    """Refuse rows no solver can read: numbers that are not finite or beyond
    :data:`MAX_MAGNITUDE` come from an input far outside what a colony or facility has."""
    from planner.errors import InputError
    for what, arr in (("coefficient", vals), ("limit", b)):
        if arr.size == 0:
            continue
        big = float(np.max(np.abs(arr))) if np.isfinite(arr).all() else math.inf
        if big > MAX_MAGNITUDE:
            raise InputError(
                f"the {resource or name} rows of the plan reach a {what} of {big:.3g} "
                f"{unit} (at most {MAX_MAGNITUDE:g}): a number in the colony model or the "
                "scenario (fecundity mx, a capacity, an order volume) is far outside what a "
                "facility has; check its unit", place=f"constraint family {name!r}")


@dataclass
class VariableBlock:
    """A block of variables over a grid of labels, some of which may be absent.

    Attributes
    ----------
    name : str
        Family name of the variables (``cages``, ``trays``, ...).
    labels : list of tuple
        One label tuple per variable of the block, in the block's order.
    lb, ub : ndarray
        Bounds [the variable's unit].
    integer : bool
        Integer variables.
    phase : int
        2 for integer variables that the solve settles after the others (trays).
    offset : int
        Position of the block's first variable in the model's flat vector.
    unit : str
        Unit of the variables, for reports.
    """

    name: str
    labels: list[tuple]
    lb: np.ndarray
    ub: np.ndarray
    integer: bool
    offset: int = 0
    unit: str = ""
    phase: int = 1
    index: dict = field(default_factory=dict)

    def __post_init__(self):
        self.index = {lab: i for i, lab in enumerate(self.labels)}

    @property
    def size(self) -> int:
        return len(self.labels)

    def cols(self, labels) -> np.ndarray:
        """Flat column indices of the given labels (each must exist)."""
        return np.array([self.offset + self.index[lab] for lab in labels], dtype=np.int64)

    def col(self, label) -> int | None:
        """Flat column of one label, or None if the block has no such variable."""
        i = self.index.get(label)
        return None if i is None else self.offset + i

    def values(self, x: np.ndarray) -> np.ndarray:
        """This block's slice of a solution vector."""
        return x[self.offset:self.offset + self.size]


@dataclass
class Family:
    """A constraint family: rows ``A x sense b`` with labels.

    ``sense`` is one of ``"<="``, ``">="``, ``"=="``. ``resource`` names what the family
    limits (for utilisation and shadow prices), ``unit`` the unit of its rows.
    """

    name: str
    labels: list[tuple]
    sense: str
    A: sp.csr_matrix
    b: np.ndarray
    unit: str = ""
    resource: str | None = None
    description: str = ""

    @property
    def size(self) -> int:
        return len(self.labels)

    def lhs(self, x: np.ndarray) -> np.ndarray:
        return self.A @ x

    def violation(self, x: np.ndarray) -> np.ndarray:
        """Amount by which each row is violated (0 where satisfied)."""
        lhs = self.lhs(x)
        if self.sense == "<=":
            return np.maximum(lhs - self.b, 0.0)
        if self.sense == ">=":
            return np.maximum(self.b - lhs, 0.0)
        return np.abs(lhs - self.b)


class LinearModel:
    """Variables, constraint families and a linear objective ``c x + c0`` (minimised)."""

    def __init__(self, name: str):
        self.name = name
        self.blocks: dict[str, VariableBlock] = {}
        self.families: dict[str, Family] = {}
        self.n = 0
        self.c0 = 0.0
        self.cost_terms: dict[str, tuple[np.ndarray, np.ndarray]] = {}

    # -- variables ------------------------------------------------------------------
    def add_block(self, name: str, labels: list[tuple], lb=0.0, ub=np.inf, integer=False,
                  unit: str = "", phase: int = 1) -> VariableBlock:
        if name in self.blocks:
            raise ValueError(f"variable block {name!r} defined twice")
        m = len(labels)
        lb = np.broadcast_to(np.asarray(lb, float), (m,)).copy()
        ub = np.broadcast_to(np.asarray(ub, float), (m,)).copy()
        block = VariableBlock(name, list(labels), lb, ub, integer, self.n, unit, phase)
        self.blocks[name] = block
        self.n += m
        for fam in self.families.values():  # a block added late: widen the matrices
            fam.A = sp.hstack([fam.A, sp.csr_matrix((fam.size, m))]).tocsr()
        return block

    def add_to_family(self, name: str, rows, cols, vals) -> None:
        """Add coefficients to an existing family's rows."""
        fam = self.families[name]
        extra = sp.csr_matrix((np.asarray(vals, float), (np.asarray(rows, np.int64),
                                                          np.asarray(cols, np.int64))),
                              shape=fam.A.shape)
        fam.A = (fam.A + extra).tocsr()

    @property
    def lb(self) -> np.ndarray:
        return np.concatenate([b.lb for b in self.blocks.values()]) if self.blocks else np.zeros(0)

    @property
    def ub(self) -> np.ndarray:
        return np.concatenate([b.ub for b in self.blocks.values()]) if self.blocks else np.zeros(0)

    @property
    def integrality(self) -> np.ndarray:
        """1 for integer columns, 0 for continuous (scipy.optimize.milp's convention)."""
        return np.concatenate([np.full(b.size, int(b.integer)) for b in self.blocks.values()])

    def column_labels(self) -> list[tuple[str, tuple]]:
        out = []
        for b in self.blocks.values():
            out += [(b.name, lab) for lab in b.labels]
        return out

    # -- constraints ----------------------------------------------------------------
    def add_family(self, name: str, labels: list[tuple], sense: str, rows, cols, vals, b,
                   unit: str = "", resource: str | None = None,
                   description: str = "") -> Family:
        """Add rows from COO triplets (row index within the family, column, value)."""
        if name in self.families:
            raise ValueError(f"constraint family {name!r} defined twice")
        if sense not in ("<=", ">=", "=="):
            raise ValueError(f"bad sense {sense!r}")
        rows = np.asarray(rows, np.int64)
        cols = np.asarray(cols, np.int64)
        vals = np.asarray(vals, float)
        keep = vals != 0
        b = np.asarray(b, float).reshape(len(labels))
        _check_magnitude(name, unit, resource, vals[keep], b)
        A = sp.csr_matrix((vals[keep], (rows[keep], cols[keep])), shape=(len(labels), self.n))
        A.sum_duplicates()
        fam = Family(name, list(labels), sense, A, b,
                     unit, resource, description)
        self.families[name] = fam
        return fam

    # -- objective ------------------------------------------------------------------
    def add_cost(self, term: str, cols, coefs) -> None:
        """Add ``sum coefs * x[cols]`` to the objective, remembered under ``term``."""
        cols = np.asarray(cols, np.int64)
        coefs = np.asarray(coefs, float)
        old = self.cost_terms.get(term)
        if old is not None:
            cols = np.concatenate([old[0], cols])
            coefs = np.concatenate([old[1], coefs])
        self.cost_terms[term] = (cols, coefs)

    @property
    def c(self) -> np.ndarray:
        c = np.zeros(self.n)
        for cols, coefs in self.cost_terms.values():
            np.add.at(c, cols, coefs)
        return c

    def cost_breakdown(self, x: np.ndarray) -> dict[str, float]:
        """The objective split by term for a solution ``x``."""
        return {t: float(np.dot(coefs, x[cols])) for t, (cols, coefs) in self.cost_terms.items()}

    # -- whole-model views ------------------------------------------------------------
    def stacked(self):
        """(A_ub, b_ub, A_eq, b_eq) with >= rows negated: for scipy's solvers."""
        ub_rows, ub_b, eq_rows, eq_b = [], [], [], []
        for f in self.families.values():
            if f.sense == "<=":
                ub_rows.append(f.A)
                ub_b.append(f.b)
            elif f.sense == ">=":
                ub_rows.append(-f.A)
                ub_b.append(-f.b)
            else:
                eq_rows.append(f.A)
                eq_b.append(f.b)
        empty = sp.csr_matrix((0, self.n))
        return (sp.vstack(ub_rows).tocsr() if ub_rows else empty,
                np.concatenate(ub_b) if ub_b else np.zeros(0),
                sp.vstack(eq_rows).tocsr() if eq_rows else empty,
                np.concatenate(eq_b) if eq_b else np.zeros(0))

    def size_summary(self) -> dict:
        ints = int(self.integrality.sum()) if self.n else 0
        rows = sum(f.size for f in self.families.values())
        nnz = sum(f.A.nnz for f in self.families.values())
        return {"variables": self.n, "integer_variables": ints, "constraints": rows,
                "nonzeros": nnz}
