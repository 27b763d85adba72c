"""Surrogate batch speed on a busy machine (not a test: prints figures and ratios).

    python benchmarks/bench_busy.py [--rows 200000] [--busy 1] [--repeat 3]

Times one surrogate batch (``SurrogateModel.predict`` on ``--rows`` random in-domain designs)
alone, then while ``--busy`` competing processes each spin a CPU-bound Python loop, and prints
both, the slowdown ratio (busy / alone) and, for reference, the same batch on one thread alone.
The batch runs ``radialpn``'s default thread count (``RADIALPN_THREADS``, else
``OMP_NUM_THREADS``, else the cores this process may run on; docs/api.md "Threads"). Each figure
is the median of ``--repeat`` runs; the busy processes start before and stop after their runs.
On a machine shared with other work the "alone" figure is already contended: read the ratio,
and the load average printed with it.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time

import numpy as np

import radialpn

SPIN = "import time\nend = time.time() + 600\nwhile time.time() < end:\n    pass\n"  # stops by itself at worst


def designs(model, n, seed=5):
    """Random designs inside the bundle's domain (log-uniform where the domain spans decades)."""
    rng = np.random.default_rng(seed)
    d = {"material": model.material, "core_type": model.core_type}
    for col, (lo, hi) in model.domain.items():
        d[col] = 10 ** rng.uniform(np.log10(lo), np.log10(hi), n) if lo > 0 and hi / lo > 10 else rng.uniform(lo, hi, n)
    return d


def timed(fn, repeat):
    runs = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        runs.append(time.perf_counter() - t)
    return float(np.median(runs))


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=200_000)
    ap.add_argument("--busy", type=int, default=1, help="competing CPU-bound processes (default 1)")
    ap.add_argument("--repeat", type=int, default=3)
    a = ap.parse_args()
    model = radialpn.load("GaAs", "p")
    d = designs(model, a.rows)
    model.predict({k: (v[:5000] if np.ndim(v) else v) for k, v in d.items()})  # warm: tables built
    answered = int((model.predict(d)["status"] == "ok").sum())
    k = getattr(radialpn, "worker_threads", lambda: "default")()
    alone = timed(lambda: model.predict(d), a.repeat)
    os.environ["RADIALPN_THREADS"] = "1"
    one = timed(lambda: model.predict(d), a.repeat)
    del os.environ["RADIALPN_THREADS"]
    load_before = os.getloadavg()[0]
    spinners = [subprocess.Popen([sys.executable, "-c", SPIN]) for _ in range(a.busy)]
    try:
        time.sleep(0.5)  # let them start spinning
        busy = timed(lambda: model.predict(d), a.repeat)
    finally:
        for p in spinners:
            p.terminate()
        for p in spinners:
            p.wait()
    print(f"surrogate batch of {a.rows:,} designs ({answered:,} answered), {k} thread(s), "
          f"{os.cpu_count()} cores, load average {load_before:.2f} before the busy run")
    print(f"  alone:                {alone:7.2f} s  ({a.rows / alone:9,.0f} designs/s)")
    print(f"  one thread, alone:    {one:7.2f} s  ({a.rows / one:9,.0f} designs/s) -> threads give x{one / alone:.2f}")
    print(f"  with {a.busy} busy process{'es' if a.busy > 1 else ''}: {busy:7.2f} s  ({a.rows / busy:9,.0f} designs/s)")
    print(f"  slowdown busy / alone: x{busy / alone:.2f} (goal <= 1.6 with one busy process on 2 cores)")


if __name__ == "__main__":
    main()
