"""`radialpn batch` benchmark (not a test: prints figures).

    python benchmarks/bench_batch.py [--rows 300000 1000000] [--engines depletion surrogate]
                                     [--parquet] [--chunk-rows 20000]

Writes a random design table (GaAs and InP, both core types, so the shipped surrogates answer
every row; plus a text id column) of each size to a temporary folder, then runs
``radialpn batch IN.csv -o OUT.csv --engine E --keep-going`` as a separate process per engine
and prints, per size and engine: wall seconds, CPU seconds (user + sys) and peak resident memory
of that process (the kernel's accounting, from wait4), rows/s, and the same figures of a plain
copy of the table through Python's csv module (read every row, write it back) in the same run,
with the ratio batch / copy: what radialpn adds on top of moving the bytes. With --parquet
the same runs read and write Parquet (needs pyarrow). The machine's load average is printed
before and after: on a shared machine compare the CPU seconds and the ratios, not the wall.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time


COPY = """import csv, sys
with open(sys.argv[1], newline="", encoding="utf-8") as f, open(sys.argv[2], "w", newline="", encoding="utf-8") as g:
    csv.writer(g, lineterminator="\\r\\n").writerows(csv.reader(f))
"""


def write_table(path: str, n: int, seed: int = 7) -> None:
    import numpy as np

    rng = np.random.default_rng(seed)
    mats = np.array(["GaAs", "InP"])
    cols = dict(id=np.char.add("w", np.arange(n).astype(str)), material=mats[rng.integers(0, mats.size, n)],
                core_type=np.where(rng.random(n) < 0.5, "p", "n"),
                core_radius_nm=np.round(10 ** rng.uniform(1, 2.5, n), 3),
                shell_thickness_nm=np.round(10 ** rng.uniform(0.5, 2.3, n), 3),
                core_doping_cm3=np.char.mod("%.3e", 10 ** rng.uniform(16, 19, n)),
                shell_doping_cm3=np.char.mod("%.3e", 10 ** rng.uniform(16, 19, n)),
                dit_cm2eV=np.char.mod("%.2e", 10 ** rng.uniform(10, 13, n)),
                temperature_K=np.round(rng.uniform(250, 350, n), 1))
    with open(path, "w", newline="", encoding="utf-8") as fh:
        fh.write(",".join(cols) + "\r\n")
        for s in range(0, n, 100_000):
            parts = [np.asarray(v[s:s + 100_000]).astype(str) for v in cols.values()]
            fh.write("".join(",".join(r) + "\r\n" for r in zip(*parts)))


def to_parquet(src: str, dst: str) -> None:
    import pyarrow.csv as pcsv
    import pyarrow.parquet as pq

    pq.write_table(pcsv.read_csv(src), dst)


def run(cmd) -> dict:
    """Wall, CPU (user + sys) seconds and peak RSS [MB] of one child process."""
    t = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    _, status, ru = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - t
    err = proc.stderr.read().decode(errors="replace")
    proc.stderr.close()
    proc.returncode = os.waitstatus_to_exitcode(status)
    if proc.returncode not in (0, 3):
        raise SystemExit(f"{' '.join(cmd)} failed ({proc.returncode}): {err.strip()[-300:]}")
    return dict(wall=wall, cpu=ru.ru_utime + ru.ru_stime, rss=ru.ru_maxrss / 1024)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, nargs="+", default=[300_000, 1_000_000])
    ap.add_argument("--engines", nargs="+", default=["depletion", "surrogate"])
    ap.add_argument("--parquet", action="store_true", help="also run Parquet in and out")
    ap.add_argument("--chunk-rows", type=int, default=None)
    ap.add_argument("--write-table", nargs=2, metavar=("ROWS", "PATH"), help=argparse.SUPPRESS)
    ap.add_argument("--to-parquet", nargs=2, metavar=("CSV", "PARQUET"), help=argparse.SUPPRESS)
    a = ap.parse_args()
    if a.write_table:
        return write_table(a.write_table[1], int(a.write_table[0]))
    if a.to_parquet:
        return to_parquet(*a.to_parquet)
    exe = [sys.executable, "-m", "radialpn.cli"]
    print(f"radialpn batch, CSV in and out; {os.cpu_count()} cores; load average {os.getloadavg()[0]:.2f} at the start")
    with tempfile.TemporaryDirectory() as tmp:
        for n in a.rows:
            src = os.path.join(tmp, f"in{n}.csv")
            # tables are made in a child process, so this one stays small: a child's peak memory
            # (wait4) counts the copy of the parent it starts as
            subprocess.run([sys.executable, __file__, "--write-table", str(n), src], check=True)
            size = os.path.getsize(src) / 1e6
            copy = run([sys.executable, "-c", COPY, src, os.path.join(tmp, "copy.csv")])
            print(f"  {n:,} rows ({size:.0f} MB): csv-module copy {copy['wall']:.1f} s wall, {copy['cpu']:.1f} s CPU, "
                  f"{copy['rss']:.0f} MB peak")
            formats = [("csv", src)]
            if a.parquet:
                pq_src = os.path.join(tmp, f"in{n}.parquet")
                subprocess.run([sys.executable, __file__, "--to-parquet", src, pq_src], check=True)
                formats.append(("parquet", pq_src))
            for fmt, path in formats:
                for engine in a.engines:
                    cmd = exe + ["batch", path, "-o", os.path.join(tmp, f"out.{fmt}"), "--engine", engine,
                                 "--keep-going"]
                    if a.chunk_rows:
                        cmd += ["--chunk-rows", str(a.chunk_rows)]
                    r = run(cmd)
                    print(f"    {fmt:7s} {engine:10s} {r['wall']:6.1f} s wall ({n / r['wall']:9,.0f} rows/s), "
                          f"{r['cpu']:6.1f} s CPU, {r['rss']:5.0f} MB peak; x{r['cpu'] / copy['cpu']:.1f} the copy's "
                          f"CPU, x{r['wall'] / copy['wall']:.1f} its wall")
    print(f"  load average {os.getloadavg()[0]:.2f} at the end")


if __name__ == "__main__":
    main()
