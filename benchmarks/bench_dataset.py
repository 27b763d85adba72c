"""Training-set generation speed (not a test: prints figures).

    python benchmarks/bench_dataset.py [SPEC] [--rows 20000] [--jobs -1] [--keep DIR]

Builds the spec's dataset (by default models/specs/gaas-pcore.toml, scaled to --rows training
rows with proportionate held-out sets) in a temporary directory with local joblib workers and
prints rows per second, next to the same rows solved in-process with one worker (baseline).
"""

from __future__ import annotations

import argparse
import dataclasses
import os
import tempfile
import time
from pathlib import Path

from radialpn.training import build_dataset, load_spec, read_rows, solve


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("spec", nargs="?", default=str(Path(__file__).parents[1] / "models/specs/gaas-pcore.toml"))
    ap.add_argument("--rows", type=int, default=20000, help="training rows (held-out sets scale along)")
    ap.add_argument("--jobs", type=int, default=-1)
    ap.add_argument("--keep", metavar="DIR", help="build here and keep it (default: a temporary directory)")
    a = ap.parse_args()
    spec = load_spec(a.spec)
    f = a.rows / spec.train
    spec = dataclasses.replace(spec, train=a.rows, calibration=max(1, int(spec.calibration * f)),
                               test=max(1, int(spec.test * f)))
    with tempfile.TemporaryDirectory() as tmp:
        out = a.keep or os.path.join(tmp, "ds")
        t = time.perf_counter()
        res = build_dataset(spec, out, n_jobs=a.jobs)
        dt = time.perf_counter() - t
        n = res["rows_total"]
        rows = read_rows(out, columns=["core_radius_nm", "shell_thickness_nm", "core_doping_cm3", "shell_doping_cm3",
                                       "dit_cm2eV", "cnl_eV", "temperature_K", "status"])
        designs = {k: v[:5000] for k, v in rows.items() if k != "status"}
        designs.update(material=spec.material, core_type=spec.core_type)
        t = time.perf_counter()
        solve(designs, spec.statistics)
        base = 5000 / (time.perf_counter() - t)
        print(f"dataset {spec.name}: {n:,} rows ({res['rows_written']:,} solved) in {dt:.1f} s = {n / dt:,.0f} rows/s "
              f"with {os.cpu_count() if a.jobs < 0 else a.jobs} workers, shards written included; "
              f"in-process solver, 1 worker: {base:,.0f} rows/s (x{n / dt / base:.2f}); "
              f"{(rows['status'] == 'ok').mean():.4%} answered")


if __name__ == "__main__":
    main()
