"""Reference-solver benchmark (not a test: prints figures).

    python benchmarks/bench_solver.py [--designs 20000] [--grid-check 1000] [--jobs 2] [--time-designs 5000]
                                       [--rounds 3]

On random designs spanning the solver's whole domain (every material of the table, both core
types, core 5-500 nm, shell 1-500 nm, dopings 1e15-1e20 cm^-3, D_it 0-1e15 cm^-2 eV^-1, neutral
level anywhere in the gap, 77-500 K) it prints, in one run:
  - the convergence rate and Newton iteration counts (and with full and with incomplete ionisation),
  - solver throughput with 1 and with --jobs workers (forked processes, and threads for the
    ratio), next to the same solver with the Thomas
    tridiagonal solve at 256 designs per batch (the 1.1 release's linear algebra, for the
    ratio) and the depletion engine on the same designs, and the largest difference between
    the two linear solvers' answers,
  - grid convergence: |V_bi(default grid) - V_bi(4x finer grid)| on --grid-check designs.
"""

from __future__ import annotations

import argparse
import os
import time

import numpy as np

import radialpn
from radialpn.training import NODES, solve


def designs(n: int, seed: int = 2026) -> dict:
    rng = np.random.default_rng(seed)
    mats = np.array(radialpn.material_names()[:6])
    mat = mats[rng.integers(0, mats.size, n)]
    t = rng.uniform(77, 500, n)
    gap = np.array([float(radialpn.get_material(m).band_gap(x)) for m, x in zip(mat, t)])
    return dict(material=mat, core_type=np.where(rng.random(n) < 0.5, "p", "n"),
                core_radius_nm=10 ** rng.uniform(np.log10(5), np.log10(500), n),
                shell_thickness_nm=10 ** rng.uniform(0, np.log10(500), n),
                core_doping_cm3=10 ** rng.uniform(15, 20, n), shell_doping_cm3=10 ** rng.uniform(15, 20, n),
                dit_cm2eV=np.where(rng.random(n) < 0.05, 0.0, 10 ** rng.uniform(9, 15, n)),
                cnl_eV=rng.uniform(0, 1, n) * gap, temperature_K=t)


def timed(fn):
    t = time.perf_counter()
    out = fn()
    return out, time.perf_counter() - t


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--designs", type=int, default=20000)
    ap.add_argument("--grid-check", type=int, default=1000)
    ap.add_argument("--jobs", type=int, default=os.cpu_count() or 1)
    ap.add_argument("--time-designs", type=int, default=5000, help="designs per timed run")
    ap.add_argument("--rounds", type=int, default=3, help="interleaved timing rounds")
    a = ap.parse_args()
    d = designs(a.designs)
    print(f"reference solver, {a.designs:,} random designs over the whole domain, {NODES} nodes, "
          f"{os.cpu_count()} cores")
    for stat in ("fermi-dirac", "boltzmann"):
        out = solve(d, stat)
        ok = out["status"] == "ok"
        stuck = np.char.startswith(out["status"].astype(str), "solver: no convergence")
        it = out["iterations"][table_ok := ~np.char.startswith(out["status"].astype(str), "outside")]
        print(f"  {stat:12s} converged {1 - stuck.sum() / table_ok.sum():.4%} of {table_ok.sum()} designs inside the "
              f"table's ranges ({stuck.sum()} not; {ok.sum()} answered); Newton steps mean {it.mean():.1f}, "
              f"p99 {np.percentile(it, 99):.0f}, max {it.max()}; max charge residual "
              f"{np.nanmax(out['charge_residual']):.1e}")
    for ion in ("full", "incomplete"):  # the charge model of docs/physics.md section 9 on every row
        out, ti = timed(lambda: solve(d, ionisation=ion))
        stuck = np.array([str(x).startswith("solver: no convergence") for x in out["status"]])
        it = out["iterations"][out["status"] == "ok"]
        print(f"  ionisation {ion:10s} no convergence {stuck.sum()} of {stuck.size}; answered "
              f"{np.mean(out['status'] == 'ok'):.2%}; Newton steps mean {it.mean():.2f}, max {it.max()}; "
              f"{stuck.size / ti:,.0f} designs/s")
    n = min(a.time_designs, a.designs)
    dt = {k: (v[:n] if np.ndim(v) else v) for k, v in d.items()}
    solve({k: (v[:600] if np.ndim(v) else v) for k, v in d.items()}, n_jobs=a.jobs)  # start the workers
    runs = {"new 1": dict(), f"new {a.jobs}": dict(n_jobs=a.jobs, parallel="processes"),
            "threads": dict(n_jobs=a.jobs, parallel="threads"), "old 1": dict(tridiagonal="thomas", batch=256),
            f"old {a.jobs}": dict(tridiagonal="thomas", batch=256, n_jobs=a.jobs, parallel="threads")}
    times = {k: [] for k in runs}
    for _ in range(a.rounds):  # interleaved, so a change of machine load hits both paths alike
        for k, kw in runs.items():
            times[k].append(timed(lambda: solve(dt, **kw))[1])
    _, td = timed(lambda: radialpn.deplete(dt))
    t1, tj = np.median(times["new 1"]), np.median(times[f"new {a.jobs}"])
    to, toj = np.median(times["old 1"]), np.median(times[f"old {a.jobs}"])
    r1 = np.median(np.array(times["old 1"]) / np.array(times["new 1"]))
    rj = np.median(np.array(times[f"old {a.jobs}"]) / np.array(times[f"new {a.jobs}"]))
    new, old = solve(d), solve(d, tridiagonal="thomas", batch=256)
    both = (new["status"] == "ok") & (old["status"] == "ok")
    dv = np.max(np.abs(new["vbi_V"][both] - old["vbi_V"][both]))
    tt = np.median(times["threads"])
    rp = np.median(np.array(times["threads"]) / np.array(times[f"new {a.jobs}"]))
    print(f"  throughput (fermi-dirac, {n:,} designs, median of {a.rounds} interleaved rounds): solver 1 worker "
          f"{n / t1:,.0f} designs/s, {a.jobs} forked worker processes {n / tj:,.0f} designs/s (x{t1 / tj:.2f}; "
          f"goal 6,000/s), {a.jobs} threads {n / tt:,.0f} designs/s (processes x{rp:.2f} threads, median of pairs)")
    print(f"    Thomas solve, 256 per batch (1.1's linear algebra, on threads): 1 worker {n / to:,.0f} designs/s, "
          f"{a.jobs} workers {n / toj:,.0f} "
          f"designs/s; speed-up x{r1:.2f} (1 worker), x{rj:.2f} ({a.jobs} workers), median of pairs; on all "
          f"{a.designs:,}: same status {np.mean(new['status'] == old['status']):.2%}, max |dV_bi| {dv:.1e} V")
    print(f"    depletion engine {n / td:,.0f} designs/s (x{tj / td:,.0f} the {a.jobs}-worker solver)")
    print(f"  machine load (1-minute average) {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores at the end")
    g = {k: (v[:a.grid_check] if np.ndim(v) else v) for k, v in d.items()}
    coarse, fine = solve(g, n_jobs=a.jobs), solve(g, nodes=4 * NODES, n_jobs=a.jobs)
    dv = np.abs(coarse["vbi_V"] - fine["vbi_V"]) * 1e3
    print(f"  grid convergence on {a.grid_check} designs, {NODES} vs {4 * NODES} nodes: |dV_bi| median "
          f"{np.nanmedian(dv):.4f} mV, p99 {np.nanpercentile(dv, 99):.4f} mV, max {np.nanmax(dv):.4f} mV; "
          f"same regime {np.mean(coarse['regime'] == fine['regime']):.2%}")


if __name__ == "__main__":
    main()
