"""Long fuzz run of the command line on mutated demo inputs (printed, not asserted).

Run: python bench/fuzz.py [--cases 10000] [--seed 1] [--plan-every 25] [--timeout 60]
                          [--jobs 1] [--show 10]

Each case mutates one of the demo's input files once (tests/fuzzing.py: the scenario,
its colony model, its life table or its input workbook; categories in turn) and runs
``broodline check`` in a worker process; every ``--plan-every``-th accepted scenario also
runs ``broodline plan --time-limit 5`` (a three-week horizon). Printed, by category: cases
tried, refused cleanly (exit 2 or 3, at most three error lines per mistake), accepted
(exit 0), noisy (refused with more lines), internal errors, runs over the time limit,
plans run and plans that left a file after a failure; then the median and largest
seconds of a check, and the first ``--show`` bad cases with their seed (rerun one with
``--only CATEGORY:SEED``).
"""

from __future__ import annotations

import argparse
import collections
import multiprocessing as mp
import statistics
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from tests.fuzzing import (CATEGORIES, LINES_PER_MISTAKE, make_base, mistakes,  # noqa: E402
                           mutate, run)

_BASE = None


def _init(folder: str) -> None:
    global _BASE
    _BASE = make_base(Path(folder) / f"base-{mp.current_process().pid}")


def _case(job: tuple) -> dict:
    k, category, seed, plan, timeout = job
    folder = _BASE.folder.parent / f"case-{k}"
    scenario, what = mutate(_BASE, category, seed, folder)
    o = run(["check", str(scenario)], timeout=timeout)
    row = {"k": k, "category": category, "seed": seed, "what": what, "code": o.code,
           "seconds": o.seconds, "internal": o.internal, "lines": len(o.error_lines),
           "mistakes": mistakes(what), "stderr": o.stderr[-400:], "plan": None}
    if plan and o.code == 0 and category != "workbook":
        out = scenario.with_name("plan.xlsx")
        p = run(["plan", str(scenario), "-o", str(out), "--time-limit", "5", "--quiet",
                 "--replicates", "100"], timeout=timeout, output=out)
        row["plan"] = {"code": p.code, "internal": p.internal, "seconds": p.seconds,
                       "left_file": p.code not in (0, None) and p.wrote,
                       "stderr": p.stderr[-400:]}
    import shutil
    shutil.rmtree(folder, ignore_errors=True)
    return row


def _verdict(r: dict) -> str:
    if r["code"] is None:
        return "over time"
    if r["internal"] or r["code"] not in (0, 2, 3):
        return "internal error"
    if r["code"] == 0:
        return "accepted"
    if r["lines"] > LINES_PER_MISTAKE * r["mistakes"]:
        return "noisy"
    return "clean"


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cases", type=int, default=10_000)
    ap.add_argument("--seed", type=int, default=1, help="first seed (case k uses seed + k)")
    ap.add_argument("--plan-every", type=int, default=25,
                    help="plan every N-th case whose check accepted it (0: never)")
    ap.add_argument("--timeout", type=float, default=60.0, help="[s] per command")
    ap.add_argument("--jobs", type=int, default=1, help="worker processes")
    ap.add_argument("--show", type=int, default=10)
    ap.add_argument("--only", help="CATEGORY:SEED, one case, its stderr printed")
    a = ap.parse_args()
    tmp = tempfile.mkdtemp(prefix="broodline-fuzz-")
    if a.only:
        category, seed = a.only.rsplit(":", 1)
        _init(tmp)
        r = _case((0, category, int(seed), True, a.timeout))
        print(r["what"], "->", _verdict(r), r["code"], f"{r['seconds']:.2f} s")
        print(r["stderr"])
        if r["plan"]:
            print("plan:", r["plan"])
        return 0
    jobs = [(k, CATEGORIES[k % len(CATEGORIES)], a.seed + k,
             a.plan_every > 0 and (k // len(CATEGORIES)) % a.plan_every == 0, a.timeout)
            for k in range(a.cases)]
    t0 = time.perf_counter()
    with mp.get_context("fork").Pool(a.jobs, initializer=_init, initargs=(tmp,)) as pool:
        rows = list(pool.imap_unordered(_case, jobs, chunksize=8))
    wall = time.perf_counter() - t0
    cols = ("tried", "clean", "accepted", "noisy", "internal error", "over time",
            "plans", "plan errors", "file left")
    table = collections.OrderedDict((c, collections.Counter()) for c in CATEGORIES)
    for r in rows:
        t = table[r["category"]]
        t["tried"] += 1
        t[_verdict(r)] += 1
        if r["plan"]:
            t["plans"] += 1
            p = r["plan"]
            t["plan errors"] += int(p["internal"] or p["code"] not in (0, 2, 3))
            t["file left"] += int(p["left_file"])
    print(f"broodline fuzz: {a.cases} cases from seed {a.seed}, {a.jobs} worker(s), "
          f"{wall:.0f} s wall")
    head = f"{'category':<11}" + "".join(f"{c:>15}" for c in cols)
    print(head)
    total = collections.Counter()
    for cat, t in table.items():
        total.update(t)
        print(f"{cat:<11}" + "".join(f"{t[c]:>15}" for c in cols))
    print(f"{'all':<11}" + "".join(f"{total[c]:>15}" for c in cols))
    secs = sorted(r["seconds"] for r in rows if r["code"] is not None)
    if secs:
        print(f"check seconds: median {statistics.median(secs):.3f}, 99th percentile "
              f"{secs[int(0.99 * (len(secs) - 1))]:.3f}, largest {secs[-1]:.2f}")
    bad = [r for r in rows if _verdict(r) in ("internal error", "over time", "noisy")
           or (r["plan"] and (r["plan"]["internal"] or r["plan"]["left_file"]))]
    bad.sort(key=lambda r: r["k"])
    for r in bad[:a.show]:
        print(f"- {r['category']}:{r['seed']} ({r['what']}): {_verdict(r)}, exit {r['code']}; "
              + " | ".join(r["stderr"].strip().splitlines()[:3]))
    return 0


if __name__ == "__main__":
    sys.exit(main())
