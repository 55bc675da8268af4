"""Where the per-line work runs: in this process, a local process pool, or a Dask cluster.

Each runner takes the tasks ``(index, study_path, stem, report, out_dir)`` and yields
:class:`~relayset.fleet.worker.Outcome` objects as lines finish, in any order. With
``out_dir`` set the worker writes the line's files itself (this machine, or a local pool);
Dask tasks carry ``None`` and return the bytes, since a cluster worker need not see the
output folder.
"""

from __future__ import annotations

import os
from collections.abc import Iterator, Sequence

from relayset.errors import InputError
from relayset.fleet.worker import Outcome, compute_line, compute_line_on_cluster, init_worker

Task = tuple[int, str, str, bool, str | None]


def run_serial(tasks: Sequence[Task]) -> Iterator[Outcome]:
    """Compute the lines one after the other in this process."""
    for t in tasks:
        yield compute_line(*t)


def default_workers() -> int:
    """One worker per core this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)


def run_pool(tasks: Sequence[Task], workers: int) -> Iterator[Outcome]:
    """Compute the lines on a local process pool of ``workers`` processes.

    The processes live for the whole batch (one import of the pipeline each, in
    :func:`~relayset.fleet.worker.init_worker`); each task sends a path and gets back the
    register rows, the worker having written the line's files.
    """
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor, as_completed

    report = any(t[3] for t in tasks)
    # spawn: fresh interpreters, so the thread limits apply before numpy loads
    ctx = multiprocessing.get_context("spawn")
    pool = ProcessPoolExecutor(max_workers=workers, mp_context=ctx, initializer=init_worker,
                               initargs=(report, os.getpid()))  # workers end with this process
    finished = False
    try:
        futures = {pool.submit(compute_line, *t): t for t in tasks}
        for f in as_completed(futures):
            yield _result(f, futures[f])
        finished = True
    finally:
        # all done: join the idle workers; interrupted: do not wait for running lines
        pool.shutdown(wait=finished, cancel_futures=not finished)


def connect(address: str):
    """A client of the Dask distributed scheduler at ``address`` (``tcp://host:8786``).

    The workers must see the study files at the same paths (a shared file system) and have
    the same relayset installed; they return the outputs, which this process writes.
    """
    try:
        from distributed import Client
    except ImportError:
        raise InputError("--cluster needs the optional extra: pip install 'relayset[cluster]'",
                         field="--cluster", value=address, source="command line") from None
    try:
        return Client(address, timeout="10s")
    except (OSError, TimeoutError, ValueError) as exc:
        raise InputError(f"cannot reach the Dask scheduler ({exc})".replace("\n", " "),
                         field="--cluster", value=address, source="command line") from None


def run_dask(tasks: Sequence[Task], client) -> Iterator[Outcome]:
    """Compute the lines on the Dask cluster of ``client``.

    Each worker prepares itself once (:func:`~relayset.fleet.worker.compute_line_on_cluster`:
    allocator, imports); a line's result is released on the cluster as soon as it is here,
    so a worker holds only the lines not yet collected, whatever the size of the fleet.
    """
    from distributed import as_completed

    tasks = [(*t[:4], None) for t in tasks]  # the parent writes: bytes come back
    pending = {}
    for t in tasks:
        f = client.submit(compute_line_on_cluster, *t[:4], pure=False,
                          key=f"relayset-line-{t[0]}-{os.getpid()}")
        pending[f.key] = (f, t)
    try:
        for f in as_completed([f for f, _ in pending.values()]):
            _, t = pending.pop(f.key)
            outcome = _result(f, t)
            f.release()
            yield outcome
    finally:
        client.cancel([f for f, _ in pending.values()])


def _result(future, task: Task) -> Outcome:
    """The outcome of a finished future; a lost worker is that line's error, not the fleet's."""
    try:
        return future.result()
    except Exception as exc:
        index, path, stem = task[:3]
        return Outcome(index, stem, error=f"{path}: the worker computing this line failed "
                       f"({type(exc).__name__}: {exc})".replace("\n", " "))
