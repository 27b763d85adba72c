"""Partitions on a Dask cluster for `batch` and `search` (``--scheduler ADDRESS``, as for
`dataset`; the ``cluster`` extra). Dask is imported only here, only when a scheduler is given.
Each partition is answered by the same library call as a local run and the answers come back
in submission order, so the output is identical to a local run; at most ``WINDOW_PER_WORKER``
partitions per worker are in flight, which bounds memory on both sides."""

from __future__ import annotations

import contextlib
import functools

from . import _errors

WINDOW_PER_WORKER = 2  #: partitions submitted ahead per worker


def connect(address: str, console=None):
    """A ``dask.distributed.Client`` on ``address``, or a one-line ``UsageError``."""
    try:
        from dask.distributed import Client
    except ImportError:
        raise _errors.UsageError("--scheduler needs dask.distributed: pip install 'radialpn[cluster]'") from None
    try:
        client = Client(address, timeout="20s")
    except (OSError, TimeoutError, ValueError) as exc:
        raise _errors.UsageError(f"--scheduler {address}: cannot connect ({exc})") from None
    if console is not None:
        console.print(f"[dim]running on the Dask cluster at {address} "
                      f"({len(client.scheduler_info().get('workers', {}))} workers)[/]")
    return client


def ordered_map(address, fn, items, console=None, client=None, **kwargs):
    """``fn(item, **kwargs)`` for each of ``items`` on the cluster at ``address``, yielded in
    order. The items are pulled lazily, a window of them at a time."""
    own = client is None
    if own:
        client = connect(address, console)
    try:
        window = max(2, WINDOW_PER_WORKER * max(1, len(client.scheduler_info().get("workers", {}))))
        pending = []
        call = functools.partial(fn, **kwargs)
        for item in items:
            pending.append(client.submit(call, item, pure=False))
            if len(pending) >= window:
                yield pending.pop(0).result()
        while pending:
            yield pending.pop(0).result()
    finally:
        if own:
            with contextlib.suppress(Exception):
                client.close()


def chunk_mapper(address, console=None):
    """A ``map(fn, chunks)`` replacement running on the cluster at ``address`` (for
    ``radialpn.search(map_chunks=...)``)."""
    client = connect(address, console)

    def mapper(fn, chunks):
        return ordered_map(address, fn, chunks, client=client)

    mapper.close = client.close
    return mapper
