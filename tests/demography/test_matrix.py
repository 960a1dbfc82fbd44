"""Stage-classified matrices against a published matrix and against numpy."""

import json
import math
from pathlib import Path

import numpy as np
import pytest

from planner.demography import LifeTable, StageMatrix, read_stage_matrix
from planner.errors import DemographyError, InputError


# -- Crouse, Crowder & Caswell (1987), loggerhead sea turtle --------------------------
# Published: lambda = 0.9450 (r = -0.0565 per year); stable stage distribution and
# reproductive values in their Table 4. The stable distribution below is that table
# as rounded to 3 decimals in public course code that recreates it
# (github.com/Ellie7/parrot-proj, Crouse.R); the reproductive values are typed from
# memory (3 significant digits). Tolerances follow that rounding.
CROUSE_STABLE = [0.207, 0.670, 0.115, 0.007, 0.000, 0.000, 0.002]
CROUSE_REPRO = [1.0, 1.40, 6.00, 116.0, 569.0, 507.0, 588.0]


def test_crouse_1987_dominant_eigenvalue(crouse_csv):
    m = read_stage_matrix(crouse_csv, interval="year")
    assert m.finite_rate == pytest.approx(0.9450, abs=5e-5)
    assert m.intrinsic_rate == pytest.approx(-0.0565, abs=5e-4)


def test_crouse_1987_stable_stage_distribution(crouse_csv):
    m = read_stage_matrix(crouse_csv, interval="year")
    w = m.stable_distribution()
    assert w.sum() == pytest.approx(1.0, abs=1e-12)
    np.testing.assert_allclose(w, CROUSE_STABLE, atol=5e-4 + 1e-9)


def test_crouse_1987_reproductive_values(crouse_csv):
    m = read_stage_matrix(crouse_csv, interval="year")
    np.testing.assert_allclose(m.reproductive_values(), CROUSE_REPRO, rtol=5e-3)


def test_eigenvectors_agree_with_numpy(crouse_csv):
    m = read_stage_matrix(crouse_csv)
    a = m.a
    lam = m.finite_rate
    np.testing.assert_allclose(a @ m.stable_distribution(), lam * m.stable_distribution(),
                               atol=1e-12)
    np.testing.assert_allclose(m.reproductive_values() @ a, lam * m.reproductive_values(),
                               rtol=1e-9)
    mods = np.sort(np.abs(np.linalg.eigvals(a)))[::-1]
    assert m.damping_ratio == pytest.approx(mods[0] / mods[1])


def test_r0_and_generation_time_of_a_leslie_matrix_match_the_life_table(fly_csv):
    # A Leslie matrix split into its first row (F) and sub-diagonal (T) must give the
    # life table's own R0 (births from age 1 on) and T = ln R0 / r.
    from planner.demography import read_life_table
    lt = read_life_table(fly_csv, female_fraction=0.5)
    names = [f"a{int(x)}" for x in lt.age]
    m = StageMatrix(names, lt.leslie_matrix())
    assert m.net_reproductive_rate == pytest.approx(lt.net_reproductive_rate(), rel=1e-9)
    assert m.generation_time == pytest.approx(lt.generation_time, rel=1e-6)


def test_generation_time_at_lambda_one_is_finite():
    lt = LifeTable([0, 1, 2, 3], [1, 1, 1, 0.5], [0, 0, 0.5, 1.0])
    m = StageMatrix(["a", "b", "c", "d"], lt.leslie_matrix())
    assert m.finite_rate == pytest.approx(1.0)
    assert math.isfinite(m.generation_time) and m.generation_time > 0


def test_fecundity_directive_marks_cells(tmp_path):
    # Stasis of dormant eggs sits in the first row but is survival, not fecundity.
    f = tmp_path / "m.csv"
    f.write_text("# fecundity: egg<-adult\nstage,egg,larva,adult\n"
                 "egg,0.2,0,30\nlarva,0.5,0.3,0\nadult,0,0.4,0.6\n")
    m = read_stage_matrix(f)
    assert m.fecundity[0, 0] == 0 and m.fecundity[0, 2] == 30
    assert m.transitions[0, 0] == 0.2
    assert "egg<-adult" in m.fecundity_rule
    # R0 from the next-generation matrix, by hand: F (I - T)^-1
    t = m.transitions
    ngm = m.fecundity @ np.linalg.inv(np.eye(3) - t)
    assert m.net_reproductive_rate == pytest.approx(max(np.linalg.eigvals(ngm).real))


def test_default_fecundity_is_first_row(crouse_csv):
    m = read_stage_matrix(crouse_csv)
    assert m.fecundity_rule == "first row"
    assert m.fecundity[0, 4] == 127 and m.fecundity[1, 0] == 0


@pytest.mark.parametrize("text,match", [
    ("stage,a,b\na,0,1\n", "not square"),
    ("stage,a,b\na,0,1\nb,0.5,-1\n", "negative"),
    ("stage,a,b\na,0,x\nb,0.5,0\n", "text where a number"),
    ("stage,a,b\nb,0,1\na,0.5,0\n", "column order"),
    ("stages,a,b\na,0,1\nb,0.5,0\n", "first header cell"),
    ("", "empty"),
    ("# fecundity: q\nstage,a,b\na,0,1\nb,0.5,0\n", "unknown stage"),
])
def test_malformed_matrices(tmp_path, text, match):
    f = tmp_path / "bad.csv"
    f.write_text(text)
    with pytest.raises(InputError, match=match):
        read_stage_matrix(f)


def test_immortal_transitions_give_clear_error():
    m = StageMatrix(["a", "b"], [[0, 2], [0.5, 1.0]])
    with pytest.raises(DemographyError, match="lives for ever"):
        _ = m.net_reproductive_rate


TEASEL = Path(__file__).resolve().parents[1] / "data" / "teasel-stage-matrix.csv"
TEASEL_FECUNDITY = "seed1<-flowering, small<-flowering, medium<-flowering, large<-flowering"


def test_caswell2001_teasel_offspring_in_several_stages_is_not_refused():
    """Issue 12 item 15. Teasel, Caswell (2001) Matrix Population Models, 2nd ed. (after
    Werner & Caswell 1977), entries typed from memory: flowering plants make seeds and
    rosettes. With the default rule (first row = fecundity) the transitions loop through
    flowering, so R0 is undefined; lambda, w, v and the damping ratio do not depend on
    the marks and are reported (checked against numpy's eigen-solver), R0 and T are
    null with a note on how to mark the entries. Caswell gives lambda = 2.3227 (typed
    from memory; checked to 0.01)."""
    m = read_stage_matrix(TEASEL)
    s = m.summary()
    vals, vecs = np.linalg.eig(m.a)
    k = int(np.argmax(vals.real))
    assert s["finite_rate"] == pytest.approx(vals[k].real, rel=1e-10)
    assert s["finite_rate"] == pytest.approx(2.3227, abs=0.01)
    w = np.abs(vecs[:, k].real) / np.abs(vecs[:, k].real).sum()
    assert list(s["stable_distribution"].values()) == pytest.approx(w, rel=1e-8)
    second = np.sort(np.abs(vals))[-2]
    assert s["damping_ratio"] == pytest.approx(vals[k].real / second, rel=1e-8)
    assert s["net_reproductive_rate"] is None and s["generation_time"] is None
    assert "# fecundity:" in s["note"] and "--fecundity" in s["note"]

    marked = read_stage_matrix(TEASEL, fecundity=TEASEL_FECUNDITY).summary()
    assert marked["finite_rate"] == pytest.approx(s["finite_rate"], rel=1e-12)
    # R0 > 1 exactly when lambda > 1 (Cushing & Zhou 1994), and T = ln R0 / ln lambda
    r0 = marked["net_reproductive_rate"]
    assert r0 > 1 and marked["note"] is None
    assert marked["generation_time"] == pytest.approx(math.log(r0) / math.log(2.3227),
                                                      rel=0.01)


def test_matrix_cli_fecundity_option(capsys):
    from planner.cli.main import main
    assert main(["matrix", str(TEASEL), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["net_reproductive_rate"] is None and out["note"]
    assert main(["matrix", str(TEASEL), "--json", "--fecundity", TEASEL_FECUNDITY]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["net_reproductive_rate"] > 1
    assert main(["matrix", str(TEASEL), "--fecundity", "seed9<-flowering"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "unknown stage" in err[0]
