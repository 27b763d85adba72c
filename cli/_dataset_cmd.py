"""`radialpn dataset SPEC -o DIR`: build a training set with the reference solver."""

from __future__ import annotations

import contextlib
import time

from . import _errors


def register(sub) -> None:
    ds = sub.add_parser("dataset", help="build a training set from a domain spec with the reference solver")
    ds.add_argument("spec", metavar="SPEC.toml", help="domain spec (see models/specs/)")
    ds.add_argument("-o", "--output", metavar="DIR", required=True, help="dataset directory (resumable)")
    ds.add_argument("--jobs", type=int, default=-1, help="worker processes (default: all cores)")
    ds.add_argument("--scheduler", metavar="ADDRESS", help="run on a Dask cluster, e.g. tcp://10.0.0.5:8786")
    ds.set_defaults(handler=cmd_dataset)


def cmd_dataset(args, console, out) -> int:
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

    from radialpn.training import build_dataset, load_spec, read_rows

    if args.jobs == 0 or args.jobs < -1:
        raise _errors.UsageError(f"--jobs: a number of workers >= 1, or -1 for all cores (got {args.jobs})")
    spec = load_spec(args.spec)
    cluster = contextlib.nullcontext()
    if args.scheduler:
        try:
            import joblib
            from dask.distributed import Client
        except ImportError:
            raise _errors.UsageError("--scheduler needs dask.distributed: pip install 'radialpn[cluster]'") from None
        try:
            client = Client(args.scheduler, timeout="20s")
        except (OSError, TimeoutError, ValueError) as exc:
            raise _errors.UsageError(f"--scheduler {args.scheduler}: cannot connect ({exc})") from None
        cluster = joblib.parallel_config(backend="dask")
        console.print(f"[dim]running on the Dask cluster at {args.scheduler} "
                      f"({len(client.scheduler_info().get('workers', {}))} workers)[/]")
    t0 = time.perf_counter()
    columns = [TextColumn("[#5b8def]{task.description}"), BarColumn(), MofNCompleteColumn(),
               TextColumn("{task.fields[rate]}"), TimeRemainingColumn()]
    with Progress(*columns, console=console, transient=False) as bar:
        task = bar.add_task(f"{spec.name}", total=None, rate="")
        def progress(solved, already, total):
            elapsed = time.perf_counter() - t0
            rate = solved / elapsed if solved and elapsed > 0 else 0.0
            bar.update(task, completed=solved + already, total=total, rate=f"{rate:,.0f} rows/s" if rate else "")

        try:
            with cluster:
                res = build_dataset(spec, args.output, n_jobs=args.jobs, progress=progress)
        except KeyboardInterrupt:
            console.print("[bold]interrupted[/]: finished shards are kept; run the same command again to resume.")
            return _errors.INTERRUPTED
    rows = read_rows(args.output, columns=["regime", "status"])
    ok = rows["status"] == "ok"
    counts = ", ".join(f"{r} {int((rows['regime'] == r).sum())}" for r in
                       ("both-neutral", "core-depleted", "shell-depleted", "all-depleted"))
    elapsed = time.perf_counter() - t0
    console.print(f"{args.output}: {res['rows_total']:,} rows ({res['rows_written']:,} solved now"
                  f"{', ' + format(res['rows_already_done'], ',') + ' already done' if res['rows_already_done'] else ''})"
                  f" in {elapsed:.1f} s · {int(ok.sum()):,} answered, {int((~ok).sum())} with a reason in status"
                  f" · {counts}")
    return _errors.OK
