"""Depletion-engine throughput on random designs (not a test: prints figures).

    python benchmarks/bench_depletion.py [--designs 1000000] [--repeat 3]

Prints designs/s for the full public path (validation + engine, Fermi-Dirac and Boltzmann),
single-threaded and with the default thread pool, and the ratio between them (same run).
Designs span GaAs, both core types, core 10-300 nm, shell 2-300 nm, dopings 1e16-1e19 cm^-3,
D_it 1e10-1e14 cm^-2 eV^-1, 250-400 K.
"""

from __future__ import annotations

import argparse
import os
import time

import numpy as np

import radialpn


def designs(n: int, seed: int = 1) -> dict:
    rng = np.random.default_rng(seed)
    return dict(
        material="GaAs", core_type=np.where(rng.random(n) < 0.5, "p", "n"),
        core_radius_nm=10 ** rng.uniform(1, np.log10(300), n), shell_thickness_nm=10 ** rng.uniform(np.log10(2), np.log10(300), n),
        core_doping_cm3=10 ** rng.uniform(16, 19, n), shell_doping_cm3=10 ** rng.uniform(16, 19, n),
        dit_cm2eV=10 ** rng.uniform(10, 14, n), temperature_K=rng.uniform(250, 400, n),
    )


def best_of(fn, repeat):
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


THREADS = min(os.cpu_count() or 1, 8)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--designs", type=int, default=1_000_000)
    ap.add_argument("--repeat", type=int, default=3)
    a = ap.parse_args()
    d = designs(a.designs)
    radialpn.deplete({k: (v[:10] if np.ndim(v) else v) for k, v in d.items()})  # build FD tables once
    print(f"depletion engine, {a.designs:,} random GaAs designs, {os.cpu_count()} cores, best of {a.repeat}")
    for stat in ("fermi-dirac", "boltzmann"):
        one = best_of(lambda: radialpn.deplete(d, stat, threads=1), a.repeat)
        many = best_of(lambda: radialpn.deplete(d, stat, threads=THREADS), a.repeat)
        print(f"  {stat:12s} 1 thread: {a.designs / one:12,.0f} designs/s   "
              f"{THREADS} threads: {a.designs / many:12,.0f} designs/s   (x{one / many:.2f})")
    res = radialpn.deplete(d)
    ok = res["status"] == "ok"
    print(f"  rows answered: {ok.mean():.4%}; regimes: " +
          ", ".join(f"{r} {np.mean(res['regime'] == r):.1%}" for r in radialpn.REGIMES))


if __name__ == "__main__":
    main()
