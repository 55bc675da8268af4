"""One line of the fleet, computed where the work runs (a local process or a Dask worker).

The worker computes and renders everything in memory and returns the output files as bytes;
the batch writes them atomically. A worker never writes, so a line that fails or a worker that
dies leaves nothing behind. This module imports nothing heavy at the top, so a process pool
can set the thread limits before numpy loads.
"""

from __future__ import annotations

import os
import time
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
    files: dict[str, bytes] = field(default_factory=dict)  #: output name -> bytes
    seconds: float = 0.0  #: compute time in the worker [s]

    @property
    def ok(self) -> bool:
        return self.error is None


def init_worker() -> None:
    """Process-pool initializer: one BLAS thread per worker process."""
    for k, v in SINGLE_THREAD_ENV.items():
        os.environ.setdefault(k, v)


def render_report(results) -> dict[str, bytes]:
    """The calculation report of a study as files by suffix (``.html``, ``.pdf``, ``.json``)."""
    from relayset.report.build import make_report

    r = make_report(results)
    return {".html": r.html.encode("utf-8"), ".pdf": r.pdf, ".json": r.json.encode("utf-8")}


def compute_line(index: int, study_path: str, stem: str, report: bool = True) -> Outcome:
    """Compute one study end to end and return its outputs (nothing is written here).

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
    """
    from relayset.errors import InputError
    from relayset.fleet.register import rows_from_results
    from relayset.io import to_json
    from relayset.studies import pipeline

    t0 = time.perf_counter()
    try:
        results = pipeline.run(Path(study_path), reach=True, settings=True)
        d = results.to_dict()
        rendered = render_report(results) if report else {".json": to_json(d).encode()}
        files = {f"{stem}{suffix}": data for suffix, data in rendered.items()}
        report_file = f"{stem}.pdf" if report else None
        rows = tuple(rows_from_results(d, results_file=f"{stem}.json", report_file=report_file))
    except InputError as exc:
        return Outcome(index, stem, error=str(exc), seconds=time.perf_counter() - t0)
    except Exception as exc:  # one line's bug must not stop the fleet; it is still reported
        msg = f"{study_path}: internal error ({type(exc).__name__}: {exc})".replace("\n", " ")
        return Outcome(index, stem, error=msg, seconds=time.perf_counter() - t0)
    return Outcome(index, stem, rows=rows, files=files, seconds=time.perf_counter() - t0)
