"""Mutated inputs never crash the command line (issue 12, "keep it that way").

Each example mutates one of the demo's input files (the scenario, its colony model, its
life table or its input workbook) once, at a place and with a value drawn by hypothesis
(see tests/fuzzing.py for the mutations), and runs ``broodline check``; a second test
runs ``broodline plan`` on mutated scenarios. Asserted for every case: the exit code is
0, 2 or 3; no "internal error"; at most three error lines per mistake; a failed plan
leaves no plan file. Derandomised so that the suite gives the same cases on every run;
``bench/fuzz.py`` runs 10,000 fresh ones. Bounded to about a minute.
"""

from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tests.fuzzing import CATEGORIES, LINES_PER_MISTAKE, make_base, mistakes, mutate, run



def _fuzz(examples: int):
    return settings(max_examples=examples, deadline=None, derandomize=True, database=None,
                    suppress_health_check=[HealthCheck.too_slow,
                                           HealthCheck.function_scoped_fixture])


@pytest.fixture(scope="module")
def base(tmp_path_factory):
    return make_base(tmp_path_factory.mktemp("fuzz-base"))


def _case_folder(base, tag: str) -> Path:
    folder = base.folder.parent / tag
    return folder


def _assert_clean(outcome, what: str):
    assert outcome.code is not None, f"{what}: over the case's time limit"
    assert outcome.code in (0, 2, 3), f"{what}: exit {outcome.code}\n{outcome.stderr}"
    assert not outcome.internal, f"{what}: {outcome.stderr}"
    most = LINES_PER_MISTAKE * mistakes(what)
    assert len(outcome.error_lines) <= most, f"{what}: {outcome.stderr}"


@_fuzz(100)
@given(category=st.sampled_from(CATEGORIES), seed=st.integers(0, 2 ** 32 - 1))
def test_a_mutated_input_is_checked_or_refused_cleanly(base, category, seed):
    scenario, what = mutate(base, category, seed, _case_folder(base, f"check-{seed}"))
    _assert_clean(run(["check", str(scenario)], timeout=30), f"{category}: {what}")


@_fuzz(10)
@given(category=st.sampled_from(("scenario", "colony", "life table")),
       seed=st.integers(0, 2 ** 32 - 1))
def test_a_mutated_scenario_is_planned_or_refused_and_a_failure_writes_nothing(
        base, category, seed):
    scenario, what = mutate(base, category, seed, _case_folder(base, f"plan-{seed}"))
    out = scenario.with_name("plan.xlsx")
    got = run(["plan", str(scenario), "-o", str(out), "--time-limit", "3", "--quiet",
               "--replicates", "50"], timeout=45, output=out)
    _assert_clean(got, f"{category}: {what}")
    if got.code != 0:
        assert not got.wrote, f"{category}: {what}: exit {got.code} but {out.name} written"
    else:
        assert got.wrote
