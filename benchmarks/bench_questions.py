"""Design questions end to end (not a test: prints figures and ratios within one run).

    python benchmarks/bench_questions.py [--section ask,spread,search] [--repeat 5]
        [--spread-runs 100000] [--search 100000,1000000]

ask     cold `radialpn ask` (a new process each time, median of --repeat) against a new
        process that only imports numpy (the floor every run pays), taken in turn.
spread  `radialpn.spread` of --spread-runs Monte Carlo runs with the surrogate, against the
        same spread with the depletion engine (the analytic model the surrogate's features
        come from) in the same run.
search  `radialpn.search` over each --search candidate count with the surrogate (no solver
        re-check), against the depletion engine over the same candidates.

Each section prints the goal of issue 13 beside its figure (cold ask <= 0.3 s, spread of 1e5
<= 0.5 s, search of 1e6 <= 2 s). The machine may be shared: quote the ratios and the load
average printed with them.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time

import numpy as np

import radialpn

DESIGN = dict(material="GaAs", core_type="p", core_radius_nm=60.0, shell_thickness_nm=40.0, core_doping_cm3=1e18,
              shell_doping_cm3=1e18, dit_cm2eV=1e12)
ASK = ["-m", "radialpn.cli", "ask", "--material", "GaAs", "--core-type", "p", "--core-radius", "60nm",
       "--shell-thickness", "40nm", "--core-doping", "1e18", "--shell-doping", "1e18", "--dit", "1e12"]
SPREADS = {"shell_thickness_nm": "2nm", "core_radius_nm": "5%", "shell_doping_cm3": "20%"}
VARY = {"core_radius_nm": (20, 200), "shell_thickness_nm": (10, 150)}


def _run(argv):
    t = time.perf_counter()
    subprocess.run([sys.executable, *argv], check=True, stdout=subprocess.DEVNULL)
    return time.perf_counter() - t


def ask(repeat):
    _run(ASK)  # warm the file cache
    cold, floor = [], []
    for _ in range(repeat):  # in turn, so drifting load hits both alike
        cold.append(_run(ASK))
        floor.append(_run(["-c", "import numpy"]))
    c, f = float(np.median(cold)), float(np.median(floor))
    print(f"cold ask: median {c:.3f} s (min {min(cold):.3f}), a process importing numpy only {f:.3f} s -> "
          f"x{c / f:.2f} the floor; goal <= 0.3 s (x{c / 0.3:.2f} of it)")


def timed(fn):
    t = time.perf_counter()
    out = fn()
    return time.perf_counter() - t, out


def spread(runs):
    run = lambda engine: radialpn.spread(DESIGN, SPREADS, samples=runs, engine=engine)  # noqa: E731
    radialpn.spread(DESIGN, SPREADS, samples=1000)  # bundle loaded, tables built
    ts, s = timed(lambda: run("surrogate"))
    td, _ = timed(lambda: run("depletion"))
    print(f"spread of {runs:,} runs: surrogate {ts:.2f} s (yield {s['yield']:.3f}), depletion engine {td:.2f} s -> "
          f"surrogate x{ts / td:.1f} the depletion engine; goal <= 0.5 s for 1e5 (x{ts * 1e5 / runs / 0.5:.1f} of it)")


def search(counts):
    radialpn.search(DESIGN, VARY, candidates=1000, confirm=False)
    for n in counts:
        ts, s = timed(lambda: radialpn.search(DESIGN, VARY, candidates=n, engine="surrogate", confirm=False))
        td, _ = timed(lambda: radialpn.search(DESIGN, VARY, candidates=n, engine="depletion", confirm=False))
        print(f"search over {n:,} candidates: surrogate {ts:.2f} s ({s['feasible']:,} feasible), depletion engine "
              f"{td:.2f} s -> surrogate x{ts / td:.1f} the depletion engine; goal <= 2 s for 1e6 "
              f"(x{ts * 1e6 / n / 2:.1f} of it)")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--section", default="ask,spread,search")
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--spread-runs", type=int, default=100_000)
    ap.add_argument("--search", default="100000,1000000")
    a = ap.parse_args()
    workers = getattr(radialpn, "worker_threads", lambda: "default")()  # older installs lack it
    print(f"load average {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores, {workers} worker thread(s)")
    sections = a.section.split(",")
    if "ask" in sections:
        ask(a.repeat)
    if "spread" in sections:
        spread(a.spread_runs)
    if "search" in sections:
        search([int(x) for x in a.search.split(",")])
    print(f"load average {os.getloadavg()[0]:.2f} at the end")


if __name__ == "__main__":
    main()
