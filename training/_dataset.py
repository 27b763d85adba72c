"""Training sets from the reference solver: planned in deterministic shards, solved in
parallel through joblib (local processes, or a Dask cluster through joblib's dask backend),
written shard by shard, resumable after any interruption.

Layout of a dataset directory::

    manifest.json                 spec, its SHA-256, solver version, plan
    train/r00-00000.csv ...       Sobol base (round 0) and refinement rounds 1..R
    calibration/r00-00000.csv     uniform, own seed: conformal calibration only
    test/r00-00000.csv            uniform, own seed: held out

A shard's rows are fixed by the spec alone (rounds > 0 also by the solver's answers of earlier
rounds, which are themselves fixed), and a shard is written to a temporary file and renamed, so
it is either complete or absent: running the same command again after Ctrl-C or kill -9 solves
exactly the missing shards and the directory ends up byte-identical to an uninterrupted run.
"""

from __future__ import annotations

import contextlib
import csv
import json
import os
import time
import zlib
from pathlib import Path

import numpy as np

from .. import INPUT_COLUMNS, OUTPUT_COLUMNS, RadialpnError, get_material, register_material
from .._materials import is_builtin, material_parameters

from ._sampling import refinement_points, sobol_points, uniform_points
from ._solver import SOLVER_VERSION, solve
from ._spec import DomainSpec

SPLITS = ("train", "calibration", "test")
EXTRA = ("core_majority_ln", "shell_majority_ln", "charge_residual", "iterations", "solver_version", "ionisation")
COLUMNS = ("row_id", "split", "round") + INPUT_COLUMNS + OUTPUT_COLUMNS + EXTRA


class DatasetError(RadialpnError):
    """A dataset directory cannot be used (another spec, another solver version, damaged)."""


def _seed(spec: DomainSpec, tag: str) -> int:
    """Independent, reproducible seed per split and round."""
    return int(np.random.SeedSequence([spec.seed, zlib.crc32(tag.encode())]).generate_state(1)[0])


def plan(spec: DomainSpec) -> list:
    """[(split, round, rows)] in build order."""
    refine = int(round(spec.train * spec.refine_fraction)) if spec.refine_rounds else 0
    rounds = [("train", 0, spec.train - refine)]
    for r in range(1, spec.refine_rounds + 1):
        share = refine // spec.refine_rounds + (refine % spec.refine_rounds if r == spec.refine_rounds else 0)
        rounds.append(("train", r, share))
    rounds += [("calibration", 0, spec.calibration), ("test", 0, spec.test)]
    return [x for x in rounds if x[2] > 0]


def _shard_path(root: Path, split: str, rnd: int, k: int) -> Path:
    return root / split / f"r{rnd:02d}-{k:05d}.csv"


def _fmt(x) -> str:
    if isinstance(x, (float, np.floating)):
        return "" if np.isnan(x) else repr(float(x))
    return str(x.item() if hasattr(x, "item") else x)


def solve_shard(designs: dict, statistics: str, ionisation: str = "full", material=None) -> dict:
    """Worker task: solve one shard (single process, no nested parallelism), with the spec's
    dopant ionisation model (the bundle's features use the same, and a bundle refuses rows that
    the caller's model resolves differently). ``material``: a user ``Material`` to register
    first (a worker process does not inherit the parent's user materials)."""
    if material is not None:
        register_material(material)
    return solve(designs, statistics, n_jobs=1, ionisation=ionisation)


def _write_shard(path: Path, split: str, rnd: int, first: int, designs: dict, out: dict) -> None:
    n = len(out["status"])
    cols = {**{k: np.broadcast_to(np.asarray(v, dtype=object if isinstance(v, str) else None), (n,))
               for k, v in designs.items()}, **out}
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    with open(tmp, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(COLUMNS)
        for i in range(n):
            head = [f"{split}-r{rnd}-{first + i}", split, rnd]
            w.writerow(head + [_fmt(cols[c][i]) for c in COLUMNS[3:]])
        fh.flush()
        os.fsync(fh.fileno())
    os.replace(tmp, path)


def _round_units(spec: DomainSpec, root: Path, split: str, rnd: int, n: int) -> np.ndarray:
    d = len(spec.variables)
    if split == "train" and rnd == 0:
        return sobol_points(n, d, _seed(spec, "train-0"))
    if split != "train":
        return uniform_points(n, d, _seed(spec, split))
    frame = read_rows(root, ("train",), max_round=rnd - 1, columns=[v.name for v in spec.variables] + ["regime"])
    return refinement_points(spec.to_unit(frame), np.asarray(frame["regime"]), n, _seed(spec, f"train-{rnd}"))


def _complete(designs: dict, material, n: int) -> dict:
    """Columns a spec leaves out take the material's default CNL, 300 K and no interlayer."""
    designs.setdefault("cnl_eV", np.full(n, material.cnl_eV))
    designs.setdefault("temperature_K", np.full(n, 300.0))
    designs.setdefault("interlayer_nm", np.zeros(n))
    return designs


def split_designs(spec: DomainSpec, split: str) -> dict:
    """The designs of a uniform split (``"calibration"`` or ``"test"``) of ``spec``, in row
    order: fixed by the spec alone (their own seed), so they can be rebuilt without the
    training set, e.g. to recalibrate a bundle's intervals without refitting it."""
    if split not in ("calibration", "test"):
        raise DatasetError(f"split: one of calibration, test (got {split!r})")
    n = spec.calibration if split == "calibration" else spec.test
    return _complete(spec.designs(uniform_points(n, len(spec.variables), _seed(spec, split))),
                     get_material(spec.material), n)


def _check_manifest(spec: DomainSpec, root: Path) -> None:
    path = root / "manifest.json"
    # the material's parameters too: an edited built-in value must not resume shards solved with
    # the old one (a manifest without the key, from before 0.3, is refused the same way)
    want = {"spec_sha256": spec.digest(), "solver_version": SOLVER_VERSION,
            "material_parameters": material_parameters(get_material(spec.material))}
    if path.exists():
        try:
            have = json.loads(path.read_text())
        except ValueError:
            raise DatasetError(f"{path}: damaged manifest; use a new directory") from None
        if not isinstance(have, dict):
            raise DatasetError(f"{path}: damaged manifest; use a new directory")
        for key, value in want.items():
            if have.get(key) != value:
                raise DatasetError(f"{root}: holds a dataset of another {key.split('_')[0]} "
                                   f"({have.get(key)!s:.12} vs {value!s:.12}); use a new directory")
        return
    root.mkdir(parents=True, exist_ok=True)
    # deterministic: the same spec and solver give the same bytes (no timestamp)
    manifest = dict(want, spec=spec.to_dict(), plan=[list(x) for x in plan(spec)], columns=list(COLUMNS))
    tmp = root / f".manifest.json.{os.getpid()}.tmp"
    tmp.write_text(json.dumps(manifest, indent=2, sort_keys=True))
    os.replace(tmp, path)


@contextlib.contextmanager
def _locked(root: Path):
    """Hold an exclusive lock on ``root`` for one build: a second run into the same folder is
    refused at once instead of colliding on its files (POSIX advisory lock; released on any exit)."""
    root.mkdir(parents=True, exist_ok=True)
    try:
        import fcntl
    except ImportError:  # not POSIX: no lock
        yield
        return
    with open(root / ".lock", "a") as fh:
        try:
            fcntl.flock(fh, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            raise DatasetError(f"{root}: another radialpn run is writing this dataset; wait for it to finish or "
                               "use another folder") from None
        try:
            yield
        finally:
            fcntl.flock(fh, fcntl.LOCK_UN)


def build_dataset(spec: DomainSpec, out_dir, n_jobs: int = 1, backend: str | None = None, progress=None) -> dict:
    """Build (or finish building) the dataset of ``spec`` in ``out_dir``.

    ``n_jobs``/``backend`` go to joblib (``backend="dask"`` inside ``joblib.parallel_config``
    with a connected ``dask.distributed.Client`` runs the shards on the cluster).
    ``progress(solved_now, already_done, total)`` (rows) is called as shards finish. Returns counts:
    rows written now, rows found already done, seconds.
    """
    root = Path(out_dir)
    with _locked(root):
        return _build(spec, root, n_jobs, backend, progress)


def _build(spec: DomainSpec, root: Path, n_jobs, backend, progress) -> dict:
    from joblib import Parallel, delayed

    _check_manifest(spec, root)
    for split in SPLITS:
        (root / split).mkdir(exist_ok=True)
        for stale in (root / split).glob(".*.tmp"):
            stale.unlink()
    rounds = plan(spec)
    total = sum(n for _, _, n in rounds)
    done = written = 0
    t0 = time.perf_counter()
    material = get_material(spec.material)
    # rounds that depend on nothing but the spec go first, together; refinement rounds after
    stages = [[r for r in rounds if not (r[0] == "train" and r[1] > 0)]] + \
             [[r] for r in rounds if r[0] == "train" and r[1] > 0]
    for stage in stages:
        tasks = []
        for split, rnd, n in stage:
            designs = _complete(spec.designs(_round_units(spec, root, split, rnd, n)), material, n)
            for k, first in enumerate(range(0, n, spec.shard_rows)):
                path = _shard_path(root, split, rnd, k)
                sl = slice(first, min(first + spec.shard_rows, n))
                if path.exists():
                    done += sl.stop - sl.start
                    continue
                part = {c: (v[sl] if np.ndim(v) else v) for c, v in designs.items()}
                tasks.append((path, split, rnd, first, part))
        if progress:
            progress(written, done, total)
        if not tasks:
            continue
        user = None if is_builtin(material.name) else material
        jobs = (delayed(_tag)(i, solve_shard, t[4], spec.statistics, spec.ionisation, user) for i, t in enumerate(tasks))
        runner = Parallel(n_jobs=n_jobs, backend=backend, return_as="generator_unordered")
        for i, out in runner(jobs):
            path, split, rnd, first, part = tasks[i]
            _write_shard(path, split, rnd, first, part, out)
            written += len(out["status"])
            if progress:
                progress(written, done, total)
    return {"rows_written": written, "rows_already_done": done, "rows_total": total,
            "seconds": time.perf_counter() - t0}


def _tag(i, fn, *args):
    return i, fn(*args)


def _shards(root: Path, splits, max_round=None):
    for split in splits:
        for path in sorted((root / split).glob("r*.csv")):
            if max_round is None or int(path.name[1:3]) <= max_round:
                yield path


def read_rows(root, splits=SPLITS, max_round=None, columns=None) -> dict:
    """Rows of a dataset directory as a dict of numpy arrays (no pandas needed), in shard
    order; numeric columns as float, others as str."""
    root = Path(root)
    data: dict = {}
    for path in _shards(root, splits, max_round):
        with open(path, newline="", encoding="utf-8") as fh:
            reader = csv.reader(fh)
            header = next(reader)
            rows = list(reader)
        cols = columns or header
        for c in cols:
            j = header.index(c)
            data.setdefault(c, []).extend(r[j] for r in rows)
    out = {}
    for c, v in data.items():
        try:
            out[c] = np.array([float(x) if x != "" else np.nan for x in v])
        except ValueError:
            out[c] = np.array(v, dtype=object)
    return out


def load_dataset(root, splits=SPLITS):
    """A dataset directory as one pandas DataFrame (shard order, so deterministic)."""
    import pandas as pd

    root = Path(root)
    paths = list(_shards(root, splits))
    if not paths:
        raise DatasetError(f"{root}: no shards of {', '.join(splits)}")
    return pd.concat([pd.read_csv(p, keep_default_na=True) for p in paths], ignore_index=True)
