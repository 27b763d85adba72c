"""Reference-solver benchmark (not a test: prints figures).

    python benchmarks/bench_solver.py [--designs 20000] [--grid-check 1000] [--jobs 2]

On random designs spanning the solver's whole domain (every material of the table, both core
types, core 5-500 nm, shell 1-500 nm, dopings 1e15-1e20 cm^-3, D_it 0-1e15 cm^-2 eV^-1, neutral
level anywhere in the gap, 77-500 K) it prints, in one run:
  - the convergence rate and Newton iteration counts (and with full and with incomplete ionisation),
  - solver throughput with 1 and with --jobs workers, next to the depletion engine's on the
    same designs (and their ratio),
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
    a = ap.parse_args()
    d = designs(a.designs)
    print(f"reference solver, {a.designs:,} random designs over the whole domain, {NODES} nodes, "
          f"{os.cpu_count()} cores")
    for stat in ("fermi-dirac", "boltzmann"):
        out, t1 = timed(lambda: solve(d, stat))
        ok = out["status"] == "ok"
        it = out["iterations"]
        print(f"  {stat:12s} converged {ok.mean():.4%} ({(~ok).sum()} not); Newton steps mean {it.mean():.1f}, "
              f"p99 {np.percentile(it, 99):.0f}, max {it.max()}; max charge residual "
              f"{np.nanmax(out['charge_residual']):.1e}")
    for ion in ("full", "incomplete"):  # the charge model of docs/physics.md section 9 on every row
        out, ti = timed(lambda: solve(d, ionisation=ion))
        stuck = np.array([str(x).startswith("solver: no convergence") for x in out["status"]])
        it = out["iterations"][out["status"] == "ok"]
        print(f"  ionisation {ion:10s} no convergence {stuck.sum()} of {stuck.size}; answered "
              f"{np.mean(out['status'] == 'ok'):.2%}; Newton steps mean {it.mean():.2f}, max {it.max()}; "
              f"{stuck.size / ti:,.0f} designs/s")
    _, t1 = timed(lambda: solve(d))
    solve({k: (v[:600] if np.ndim(v) else v) for k, v in d.items()}, n_jobs=a.jobs)  # start the workers
    _, tj = timed(lambda: solve(d, n_jobs=a.jobs))
    _, td = timed(lambda: radialpn.deplete(d))
    n = a.designs
    print(f"  throughput (fermi-dirac): solver 1 worker {n / t1:,.0f} designs/s; {a.jobs} workers {n / tj:,.0f} "
          f"designs/s (x{t1 / tj:.2f}); depletion engine {n / td:,.0f} designs/s (x{t1 / td:,.0f} the 1-worker solver)")
    g = {k: (v[:a.grid_check] if np.ndim(v) else v) for k, v in d.items()}
    coarse, fine = solve(g, n_jobs=a.jobs), solve(g, nodes=4 * NODES, n_jobs=a.jobs)
    dv = np.abs(coarse["vbi_V"] - fine["vbi_V"]) * 1e3
    print(f"  grid convergence on {a.grid_check} designs, {NODES} vs {4 * NODES} nodes: |dV_bi| median "
          f"{np.nanmedian(dv):.4f} mV, p99 {np.nanpercentile(dv, 99):.4f} mV, max {np.nanmax(dv):.4f} mV; "
          f"same regime {np.mean(coarse['regime'] == fine['regime']):.2%}")


if __name__ == "__main__":
    main()
