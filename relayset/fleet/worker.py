"""One line of the fleet, computed where the work runs (a local process or a Dask worker).

The worker computes and renders everything in memory first. On a local pool (``out_dir``
given) it then writes the line's files itself, atomically and the results JSON last, and hands
back only the register rows: the parent stays free to collect results, and no report bytes
cross the process boundary. On a cluster (``out_dir`` None: the workers need not see the
output folder) it returns the files as bytes and the batch writes them. A line that fails is
never written; a worker killed mid-write leaves at most hidden temporary files, which the next
batch removes. This module imports nothing heavy at the top, so a process pool can set the
thread limits before numpy loads; :func:`init_worker` then imports the pipeline (and the
report renderer) once per process, and the pool reuses its processes for every line.
"""

from __future__ import annotations

import functools
import os
import sys
import time
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

#: Thread limits for pool workers: one BLAS thread per process, as many processes as cores.
SINGLE_THREAD_ENV = {"OMP_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1", "MKL_NUM_THREADS": "1"}


@dataclass(frozen=True)
class Outcome:
    """What one line gave: its register rows and output files, or its one-line error."""

    index: int  #: position of the job in the batch
    stem: str
    error: str | None = None
    rows: tuple[dict[str, Any], ...] = ()  #: register rows (one per relay end)
    files: dict[str, bytes] = field(default_factory=dict)  #: output name -> bytes (cluster)
    written: tuple[str, ...] = ()  #: output names the worker wrote itself (local pool)
    seconds: float = 0.0  #: compute time in the worker [s]

    @property
    def ok(self) -> bool:
        return self.error is None


#: How often a pool worker checks that the batch process is still there [s].
PARENT_POLL_S = 0.5
#: Linux prctl option: the signal a process gets when its parent ends.
_PR_SET_PDEATHSIG = 1

_parent_pid: int | None = None  # the batch process of this pool worker


def parent_gone() -> bool:
    """Whether this pool worker's batch process has ended (never for the batch itself)."""
    return _parent_pid is not None and os.getppid() != _parent_pid


def _end_with_parent(parent_pid: int) -> None:
    """End this worker when the batch process ends, however it ends (even SIGKILL).

    On Linux the kernel sends SIGKILL when the parent dies (prctl PR_SET_PDEATHSIG); on every
    system a daemon thread also polls the parent process id, which changes when the parent is
    gone (the worker is re-parented). Nothing is then left half-written: a line's files are
    renamed into place whole, and a killed worker leaves at most hidden temporary files.
    """
    global _parent_pid
    import signal
    import threading

    _parent_pid = parent_pid
    if sys.platform.startswith("linux"):
        try:
            import ctypes

            libc = ctypes.CDLL(None, use_errno=True)
            libc.prctl(_PR_SET_PDEATHSIG, int(signal.SIGKILL), 0, 0, 0)
        except (OSError, AttributeError):  # no prctl here: the thread below still watches
            pass
    if parent_gone():  # the parent ended before the kernel was told to watch it
        os._exit(1)

    def watch() -> None:
        while not parent_gone():
            time.sleep(PARENT_POLL_S)
        os._exit(1)

    threading.Thread(target=watch, name="relayset-parent-watch", daemon=True).start()


def init_worker(report: bool = False, parent_pid: int | None = None) -> None:
    """Process-pool initializer: end with the batch, one BLAS thread per process, then the
    imports, once.

    Parameters
    ----------
    report : bool
        Import the report renderer (and WeasyPrint) too.
    parent_pid : int, optional
        Process id of the batch: the worker ends when that process ends.
    """
    if parent_pid is not None:
        _end_with_parent(parent_pid)

    for k, v in SINGLE_THREAD_ENV.items():
        os.environ.setdefault(k, v)
    import_pipeline(report)


def import_pipeline(report: bool) -> None:
    """Import what every line of this process reuses, once, before the first line."""
    import importlib

    modules = ["relayset.studies.pipeline", "relayset.fleet.register", "relayset.io"]
    if report:
        modules += ["relayset.report.build", "weasyprint"]
    for name in modules:
        try:
            importlib.import_module(name)
        except ImportError:  # the line that needs it reports the error
            pass


#: MALLOC_TRIM_THRESHOLD_ as Dask's nanny sets it for every worker unless told otherwise (its
#: configuration ``distributed.nanny.pre-spawn-environ``) [bytes].
DASK_TRIM_DEFAULT = "65536"
#: Environment variable of a worker: ``keep`` leaves its allocator as it was started.
ALLOCATOR_ENV = "RELAYSET_WORKER_ALLOCATOR"
#: What relayset sets instead in a cluster worker [bytes]: glibc's largest mmap threshold,
#: and twice that as the trim threshold (glibc's own ratio when it adapts the threshold).
MMAP_THRESHOLD = 32 * 1024 * 1024
TRIM_THRESHOLD = 2 * MMAP_THRESHOLD
_M_TRIM_THRESHOLD, _M_MMAP_THRESHOLD = -1, -3  # glibc mallopt parameters (malloc.h)


def allocator_retune(environ: Mapping[str, str], dask_default: object) -> bool:
    """Whether a cluster worker's allocator setting is Dask's default, which relayset retunes.

    Dask's nanny starts every worker with ``MALLOC_TRIM_THRESHOLD_=65536`` (its pre-spawn
    environment), unless the environment it was started from or its configuration says
    otherwise. Setting the trim threshold also fixes glibc's mmap threshold at 128 KiB
    (glibc adapts it only while neither is set), so every numpy array above 128 KiB is
    mapped and unmapped afresh: a relayset line then costs some 35 % more CPU without a
    report and 10 % more with one. relayset retunes only that default: not a value of the
    user's own (any other value), not when the worker's Dask configuration no longer gives
    65536 (the value came from the environment the worker was started from, which wins over
    the configuration), and never when ``RELAYSET_WORKER_ALLOCATOR=keep`` is set.

    Parameters
    ----------
    environ : mapping
        The worker's environment.
    dask_default : object
        The worker's ``distributed.nanny.pre-spawn-environ.MALLOC_TRIM_THRESHOLD_`` (None
        when unset).
    """
    if environ.get(ALLOCATOR_ENV, "").strip().lower() == "keep":
        return False
    value = environ.get("MALLOC_TRIM_THRESHOLD_")
    return (value is not None and value.strip() == DASK_TRIM_DEFAULT
            and str(dask_default).strip() == DASK_TRIM_DEFAULT)


@functools.cache
def tune_cluster_allocator() -> bool:
    """In a Dask worker, replace Dask's default allocator setting (see
    :func:`allocator_retune`) by mmap and trim thresholds of the size glibc itself adapts
    to (:data:`MMAP_THRESHOLD`, :data:`TRIM_THRESHOLD`); once per process. True when done.
    """
    if not sys.platform.startswith("linux"):
        return False
    try:
        import dask
        import distributed  # noqa: F401  (its configuration defaults; loaded in a worker)

        dask_default = dask.config.get(
            "distributed.nanny.pre-spawn-environ.MALLOC_TRIM_THRESHOLD_", None)
    except ImportError:
        dask_default = None
    if not allocator_retune(os.environ, dask_default):
        return False
    try:
        import ctypes

        libc = ctypes.CDLL(None)
        return bool(libc.mallopt(_M_MMAP_THRESHOLD, MMAP_THRESHOLD)
                    and libc.mallopt(_M_TRIM_THRESHOLD, TRIM_THRESHOLD))
    except (OSError, AttributeError):  # not glibc: the variable means nothing there either
        return False


@functools.cache
def _prepare_cluster_worker(report: bool) -> None:
    """Once per Dask worker process (and per kind of batch): the allocator, then the imports
    every later line reuses (as :func:`init_worker` does for a pool; the worker's thread
    limits are Dask's to set, before numpy loads)."""
    tune_cluster_allocator()
    import_pipeline(report)


def in_own_thread(fn, *args):
    """``fn(*args)`` run in a new thread of relayset's own while the calling thread waits.

    A Dask worker samples the stack of every thread running a task every 10 ms for its
    profile (``distributed.worker.profile``); the report renderer's stacks are deep, and
    walking them cost 5-7 % of a line with a report (tests/benchmarks/README.md). Dask
    samples only its task threads, so the line runs in a thread of its own and the task
    thread merely waits (a stack a few frames deep). The user's profiling setting is left
    as it is; the dashboard's profile then shows relayset's tasks waiting.
    """
    import threading

    box: dict[str, Any] = {}

    def run() -> None:
        try:
            box["value"] = fn(*args)
        except BaseException as exc:  # handed to the task thread, raised there
            box["error"] = exc

    t = threading.Thread(target=run, name="relayset-line", daemon=True)
    t.start()
    t.join()
    if "error" in box:
        raise box["error"]
    return box["value"]


def compute_line_on_cluster(index: int, study_path: str, stem: str,
                            report: bool = True) -> Outcome:
    """:func:`compute_line` as a Dask task: the worker prepared once, the line computed in
    a thread Dask's profiler does not sample (:func:`in_own_thread`), the files returned."""
    _prepare_cluster_worker(report)
    return in_own_thread(compute_line, index, study_path, stem, report, None)


def write_line(out_dir: Path, files: dict[str, bytes]) -> tuple[str, ...]:
    """Write a line's files atomically, the results JSON last [-].

    A line counts as done only when its JSON is in place, so the JSON is renamed last.
    """
    from relayset.io import write_all

    names = sorted(files, key=lambda n: n.endswith(".json"))
    write_all([("output", out_dir / n, files[n]) for n in names])
    return tuple(names)


def render_report(results) -> dict[str, bytes]:
    """The calculation report of a study as files by suffix (``.html``, ``.pdf``, ``.json``)."""
    from relayset.report.build import make_report

    r = make_report(results)
    return {".html": r.html.encode("utf-8"), ".pdf": r.pdf, ".json": r.json.encode("utf-8")}


def compute_line(index: int, study_path: str, stem: str, report: bool = True,
                 out_dir: str | None = None) -> Outcome:
    """Compute one study end to end; write its outputs into ``out_dir``, or return them.

    Parameters
    ----------
    index : int
        Position of the job in the batch [-].
    study_path : str
        The study file to compute (the original or its effective copy).
    stem : str
        Output file stem ``<line_id>_rev<revision>``.
    report : bool
        Render the calculation report too.
    out_dir : str, optional
        Write the files here (atomically, JSON last) instead of returning their bytes.
    """
    from relayset.errors import InputError
    from relayset.fleet.register import rows_from_results
    from relayset.io import to_json
    from relayset.studies import pipeline

    if parent_gone():  # nobody to hand the line to: start nothing new
        os._exit(1)
    t0 = time.perf_counter()
    try:
        results = pipeline.run(Path(study_path), reach=True, settings=True)
        d = results.to_dict()
        rendered = render_report(results) if report else {".json": to_json(d).encode()}
        files = {f"{stem}{suffix}": data for suffix, data in rendered.items()}
        report_file = f"{stem}.pdf" if report else None
        rows = tuple(rows_from_results(d, results_file=f"{stem}.json", report_file=report_file))
        if out_dir is not None:
            written = write_line(Path(out_dir), files)
            return Outcome(index, stem, rows=rows, written=written,
                           seconds=time.perf_counter() - t0)
    except InputError as exc:
        return Outcome(index, stem, error=str(exc), seconds=time.perf_counter() - t0)
    except Exception as exc:  # one line's bug must not stop the fleet; it is still reported
        msg = f"{study_path}: internal error ({type(exc).__name__}: {exc})".replace("\n", " ")
        return Outcome(index, stem, error=msg, seconds=time.perf_counter() - t0)
    return Outcome(index, stem, rows=rows, files=files, seconds=time.perf_counter() - t0)
