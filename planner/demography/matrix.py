"""Stage-classified (Lefkovitch) projection matrices.

``A[i, j]`` is the number of stage-i individuals at t+1 per stage-j individual at t
(column = from, row = to). ``A = F + T``: ``F`` holds the fecundity entries (new
individuals), ``T`` the transitions of survivors (growth and stasis).

References
----------
.. [1] Lefkovitch, L. P. (1965). The study of population growth in organisms grouped by
   stages. Biometrics 21, 1–18.
.. [2] Caswell, H. (2001). Matrix Population Models, 2nd ed. Sinauer. Chapter 4
   (eigenvectors, damping ratio), section 5.3 (R0 from the next-generation matrix
   F (I - T)^-1) and eq. 5.62 (generation time T = ln R0 / ln lambda).
.. [3] Crouse, D. T., Crowder, L. B. & Caswell, H. (1987). A stage-based population model
   for loggerhead sea turtles and implications for conservation. Ecology 68, 1412–1423.
   (A published stage matrix used in the tests.)
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:  # pandas is loaded where a table is made: `check` does without it
    import pandas as pd

from planner.csvtable import parse_number, read_csv_table
from planner.errors import DemographyError, InputError

__all__ = ["StageMatrix", "read_stage_matrix", "perron"]


def perron(a: np.ndarray) -> tuple[float, np.ndarray, np.ndarray, float]:
    """Dominant eigenvalue, right and left eigenvectors and damping ratio of ``a``.

    Returns
    -------
    lam : float
        Dominant eigenvalue [-] (finite rate per projection interval).
    w : ndarray
        Right eigenvector scaled to sum to 1 (stable stage distribution) [-].
    v : ndarray
        Left eigenvector scaled so that its first non-zero entry is 1 (reproductive
        values) [-].
    damping : float
        ``lam / |lambda_2|`` [-]; ``inf`` when every other eigenvalue is 0.
    """
    a = np.asarray(a, dtype=float)
    vals, right = np.linalg.eig(a)
    i = int(np.argmax(vals.real))
    lam = float(vals[i].real)
    w = np.real(right[:, i])
    w = w / w.sum() if w.sum() != 0 else np.abs(w) / np.abs(w).sum()
    w[np.abs(w) < 1e-14] = 0.0
    lvals, left = np.linalg.eig(a.T)
    k = int(np.argmin(np.abs(lvals - vals[i])))
    v = np.real(left[:, k])
    nz = np.flatnonzero(np.abs(v) > 1e-14 * np.abs(v).max())
    v = v / v[nz[0]]
    v[np.abs(v) < 1e-14 * np.abs(v).max()] = 0.0
    others = np.abs(np.delete(vals, i))
    second = float(others.max()) if others.size else 0.0
    damping = lam / second if second > 0 else math.inf
    return lam, w, v, damping


@dataclass(frozen=True, eq=False)
class StageMatrix:
    """A stage-classified projection matrix and its fecundity/transition split.

    Parameters
    ----------
    stages : list of str
        Stage names, in the order of rows and columns.
    a : array_like
        Projection matrix, ``a[i, j]`` = to stage i from stage j, per projection
        interval [-].
    fecundity_mask : array_like of bool, optional
        Which entries are fecundity (F); the others are transitions (T). Default: the
        first row.
    interval : str
        Name of the projection interval (``"day"``, ``"week"``, ...).
    """

    stages: tuple[str, ...]
    a: np.ndarray
    fecundity_mask: np.ndarray
    interval: str = "day"
    source: str | None = None
    fecundity_rule: str = "first row"
    notes: tuple[str, ...] = field(default=())

    def __init__(self, stages, a, fecundity_mask=None, interval: str = "day",
                 source: str | None = None, fecundity_rule: str | None = None):
        a = np.array(a, dtype=float)
        src = source or "stage matrix"
        if a.ndim != 2 or a.shape[0] != a.shape[1]:
            raise InputError(f"the matrix must be square; it has {a.shape[0]} rows and "
                             f"{a.shape[1] if a.ndim == 2 else 0} columns", source=src)
        if len(stages) != a.shape[0]:
            raise InputError(f"{len(stages)} stage names for a {a.shape[0]}x{a.shape[0]} matrix",
                             source=src)
        if not np.isfinite(a).all():
            raise InputError("every entry must be a finite number", source=src)
        neg = np.argwhere(a < 0)
        if neg.size:
            i, j = neg[0]
            raise InputError("projection entries cannot be negative", source=src,
                             place=f"to '{stages[i]}' from '{stages[j]}'", value=float(a[i, j]))
        if fecundity_mask is None:
            fecundity_mask = np.zeros(a.shape, bool)
            fecundity_mask[0, :] = True
            fecundity_rule = fecundity_rule or "first row"
        mask = np.asarray(fecundity_mask, bool)
        a.flags.writeable = False
        mask.flags.writeable = False
        object.__setattr__(self, "stages", tuple(stages))
        object.__setattr__(self, "a", a)
        object.__setattr__(self, "fecundity_mask", mask)
        object.__setattr__(self, "interval", interval)
        object.__setattr__(self, "source", source)
        object.__setattr__(self, "fecundity_rule", fecundity_rule or "given mask")
        object.__setattr__(self, "notes", ())

    @classmethod
    def from_csv(cls, path: str | Path, interval: str = "day") -> "StageMatrix":
        """Read a matrix CSV (see :func:`read_stage_matrix`)."""
        return read_stage_matrix(path, interval=interval)

    @property
    def fecundity(self) -> np.ndarray:
        """F: the fecundity entries of A [-]."""
        return np.where(self.fecundity_mask, self.a, 0.0)

    @property
    def transitions(self) -> np.ndarray:
        """T: the survival transitions of A [-]."""
        return np.where(self.fecundity_mask, 0.0, self.a)

    def _perron(self):
        return perron(self.a)

    @property
    def finite_rate(self) -> float:
        """Dominant eigenvalue lambda [per interval]."""
        return self._perron()[0]

    @property
    def intrinsic_rate(self) -> float:
        """r = ln lambda [per interval]; -inf for lambda = 0."""
        lam = self.finite_rate
        return math.log(lam) if lam > 0 else -math.inf

    def stable_distribution(self) -> np.ndarray:
        """Stable stage distribution (right eigenvector, sums to 1) [-]."""
        return self._perron()[1]

    def reproductive_values(self) -> np.ndarray:
        """Reproductive values (left eigenvector, v of the first stage = 1) [-]."""
        return self._perron()[2]

    @property
    def damping_ratio(self) -> float:
        """lambda_1 / |lambda_2| [-]: how fast the stable distribution is approached."""
        return self._perron()[3]

    @property
    def net_reproductive_rate(self) -> float:
        """R0 = dominant eigenvalue of F (I - T)^-1 [-] (Caswell 2001, sec. 5.3)."""
        t = self.transitions
        rho_t = float(np.max(np.abs(np.linalg.eigvals(t)))) if t.size else 0.0
        if rho_t >= 1 - 1e-12:
            raise DemographyError(
                f"{self.source or 'stage matrix'}: the transitions alone (without fecundity) "
                f"have spectral radius {rho_t:.4g} >= 1, so some stage lives for ever and the "
                "net reproductive rate is infinite; check which entries are fecundity")
        n = np.linalg.inv(np.eye(t.shape[0]) - t)
        return float(np.max(np.linalg.eigvals(self.fecundity @ n).real))

    @property
    def generation_time(self) -> float:
        """T = ln R0 / ln lambda [interval] (Caswell 2001, eq. 5.62).

        At lambda = 1 the ratio is 0/0; the mean age of mothers at the stable
        distribution, ``lambda v'w / v'Fw`` (Bienvenu & Legendre 2015, Am. Nat. 185,
        804–816), its limit, is returned instead.
        """
        lam, w, v, _ = self._perron()
        r0 = self.net_reproductive_rate
        if abs(math.log(lam)) < 1e-12:
            return float(lam * (v @ w) / (v @ self.fecundity @ w))
        if r0 <= 0:
            raise DemographyError("the matrix has no fecundity: the generation time is undefined")
        return math.log(r0) / math.log(lam)

    def summary(self) -> dict:
        """Headline figures keyed as in the command line's JSON output."""
        lam, w, v, damping = self._perron()
        note = None
        try:
            r0, gen = self.net_reproductive_rate, self.generation_time
        except DemographyError as exc:
            # lambda, w, v and the damping ratio do not depend on which entries are
            # fecundity; R0 and T do, and need the fecundity entries marked
            r0, gen = None, None
            note = (f"{exc}. R0 and the generation time are left out; mark every entry "
                    "that is new offspring with a '# fecundity: to<-from, ...' line in the "
                    "file or --fecundity 'to<-from, ...' (e.g. 'seed<-flowering, "
                    "rosette<-flowering')")
        return {
            "finite_rate": lam,
            "intrinsic_rate": math.log(lam) if lam > 0 else -math.inf,
            "stable_distribution": dict(zip(self.stages, w.tolist())),
            "reproductive_values": dict(zip(self.stages, v.tolist())),
            "net_reproductive_rate": r0,
            "generation_time": gen,
            "damping_ratio": damping,
            "fecundity_entries": self.fecundity_rule,
            "interval": self.interval,
            "note": note,
        }

    def to_frame(self) -> pd.DataFrame:
        """The matrix as a DataFrame (rows = to, columns = from)."""
        import pandas as pd

        return pd.DataFrame(self.a, index=list(self.stages), columns=list(self.stages))


def parse_fecundity(spec: str, stages: list[str], source: str | None = None) -> np.ndarray:
    """The fecundity mask of a text such as ``"egg"`` (a whole row) or
    ``"seed<-flowering, rosette<-flowering"`` (single entries, to<-from), items separated
    by commas."""
    mask = np.zeros((len(stages), len(stages)), bool)
    items = [x.strip() for x in spec.split(",") if x.strip()]
    if not items:
        raise InputError("the fecundity entries name no stage; write e.g. 'egg' or "
                         "'egg<-adult, larva<-adult'", source=source)
    for item in items:
        to, sep, frm = (x.strip() for x in item.partition("<-"))
        for name in (to, frm) if sep else (to,):
            if name not in stages:
                raise InputError(f"the fecundity entries name an unknown stage; the "
                                 f"stages are {', '.join(stages)}", source=source,
                                 value=name)
        if sep:
            mask[stages.index(to), stages.index(frm)] = True
        else:
            mask[stages.index(to), :] = True
    return mask


def _fecundity_directive(comments: list[str], stages: list[str], source: str):
    """Parse a ``# fecundity: ...`` comment into a mask and a description.

    Items are separated by commas; each is a stage name (its whole row is fecundity) or
    ``to<-from`` (one entry).
    """
    for text in comments:
        head, _, rest = text.partition(":")
        if head.strip().lower() != "fecundity":
            continue
        mask = parse_fecundity(rest, stages, source)
        items = [x.strip() for x in rest.split(",") if x.strip()]
        return mask, "as listed in the file: " + ", ".join(items)
    return None, "first row"


def read_stage_matrix(path: str | Path, interval: str = "day",
                      fecundity: str | None = None) -> StageMatrix:
    """Read a stage matrix CSV.

    The header row is ``stage,<name>,<name>,...``; each following row is
    ``<name>,<a_i1>,<a_i2>,...`` with column j = from stage j and row i = to stage i,
    rows in the same order as the columns. The first row holds the fecundity entries
    unless a comment line says otherwise: ``# fecundity: egg`` (whole rows) or
    ``# fecundity: egg<-adult, larva<-adult`` (single entries). ``fecundity``, in the
    same form, overrides both.
    """
    table = read_csv_table(path, exact_first="stage")
    src = table.source
    names = table.header[1:]
    raw_names = names
    if not names:
        raise InputError("the header names no stages; write 'stage,<name>,<name>,...'",
                         source=src)
    if len(set(names)) != len(names):
        dup = next(n for n in names if names.count(n) > 1)
        raise InputError("a stage name appears twice in the header", source=src, value=dup)
    n = len(names)
    if len(table.rows) != n:
        raise InputError(f"the matrix is not square: {n} stage columns but {len(table.rows)} "
                         "rows", source=src)
    a = np.zeros((n, n))
    for i, (cells, line) in enumerate(zip(table.rows, table.lines)):
        row_name = cells[0].lower()
        if row_name != names[i]:
            raise InputError(f"rows must follow the column order; expected stage '{names[i]}'",
                             source=src, place=f"row {line}, column 'stage'", value=cells[0])
        for j in range(n):
            a[i, j] = parse_number(cells[j + 1], source=src,
                                   place=f"row {line}, column '{raw_names[j]}'")
            if a[i, j] < 0:
                raise InputError("projection entries cannot be negative", source=src,
                                 place=f"row {line}, column '{raw_names[j]}'", value=a[i, j])
    if fecundity is not None:
        mask = parse_fecundity(fecundity, names, "--fecundity")
        rule = "as given on the command line: " + fecundity.strip()
    else:
        mask, rule = _fecundity_directive(table.comments, names, src)
    return StageMatrix(names, a, fecundity_mask=mask, interval=interval, source=src,
                       fecundity_rule=rule)
