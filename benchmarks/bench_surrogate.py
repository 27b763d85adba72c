"""Surrogate speed (not a test: prints figures), against the reference solver in the same run.

    python benchmarks/bench_surrogate.py [--rows 50000] [--solver-rows 4000]

Prints: warm single-query latency (median of 500) through the model's ``predict`` (the
single-design fast path), through ``radialpn.predict`` (the public API, auto engine) and, as
the same-run baseline, the vectorised general path for the same design (a two-row table); the
batch throughput (numpy only) and with the Gaussian-process second opinion; and the reference
solver's throughput on the same kind of designs, with the ratios.
"""

from __future__ import annotations

import argparse
import time

import numpy as np

import radialpn
from radialpn.training import solve


def designs(n, seed=3):
    rng = np.random.default_rng(seed)
    return dict(material="GaAs", core_type="p", core_radius_nm=10 ** rng.uniform(1, np.log10(300), n),
                shell_thickness_nm=10 ** rng.uniform(np.log10(2), np.log10(300), n),
                core_doping_cm3=10 ** rng.uniform(16, 19, n), shell_doping_cm3=10 ** rng.uniform(16, 19, n),
                dit_cm2eV=10 ** rng.uniform(10, 14, n), cnl_eV=rng.uniform(0.3, 0.7, n),
                temperature_K=rng.uniform(250, 400, n))


def rate(fn, n, repeat=3):
    best = min(_t(fn) for _ in range(repeat))
    return n / best


def _t(fn):
    t = time.perf_counter()
    fn()
    return time.perf_counter() - t


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=50000)
    ap.add_argument("--solver-rows", type=int, default=4000)
    a = ap.parse_args()
    m = radialpn.load("GaAs", "p")
    one = {k: (v[0] if np.ndim(v) else v) for k, v in designs(1).items()}
    m.predict(one)
    lat = []
    for _ in range(500):
        t = time.perf_counter()
        m.predict(one)
        lat.append(time.perf_counter() - t)
    lat2 = []
    for _ in range(200):
        t = time.perf_counter()
        m.predict(one, second_opinion=True)
        lat2.append(time.perf_counter() - t)
    api, general = [], []
    two = radialpn.normalize_designs(one).take(np.array([0, 0]))
    radialpn.predict(one)
    for _ in range(500):
        t = time.perf_counter()
        radialpn.predict(one)
        api.append(time.perf_counter() - t)
        t = time.perf_counter()
        m.predict(two)
        general.append(time.perf_counter() - t)
    d = designs(a.rows)
    fast = rate(lambda: m.predict(d), a.rows)
    gp = rate(lambda: m.predict({k: (v[:50000] if np.ndim(v) else v) for k, v in d.items()}, True), 50000, 1)
    s = designs(a.solver_rows, seed=4)
    sol = rate(lambda: solve(s, n_jobs=-1), a.solver_rows, 1)
    # the cost of V_bi's neighbourhood smoothing (m.smooth_points neighbours), same run
    k = m.smooth_points
    m.smooth_points = 1
    lat1 = []
    for _ in range(500):
        t = time.perf_counter()
        m.predict(one)
        lat1.append(time.perf_counter() - t)
    plain = rate(lambda: m.predict(d), a.rows)
    m.smooth_points = k
    print(f"V_bi smoothing over {k} neighbours: single query {1e3 * np.median(lat):.3f} ms against "
          f"{1e3 * np.median(lat1):.3f} ms without (x{np.median(lat) / np.median(lat1):.2f}); batch {fast:,.0f} "
          f"against {plain:,.0f} designs/s (x{plain / fast:.2f} slower)")
    print(f"surrogate {m.name}: single query median {1e3 * np.median(lat):.3f} ms "
          f"(with GP second opinion {1e3 * np.median(lat2):.3f} ms); through radialpn.predict (auto) "
          f"{1e3 * np.median(api):.3f} ms; the vectorised path for the same design {1e3 * np.median(general):.3f} ms "
          f"-> fast path x{np.median(general) / np.median(lat):.1f}; goal <= 0.2 ms through the API")
    print(f"  batch of {a.rows:,}: {fast:,.0f} designs/s (numpy only); with GP second opinion {gp:,.0f} designs/s")
    print(f"  reference solver (all cores): {sol:,.0f} designs/s -> surrogate batch is x{fast / sol:,.0f} faster, "
          f"a single surrogate query x{1 / np.median(lat) / sol:,.1f} the solver's per-design rate")


if __name__ == "__main__":
    main()
