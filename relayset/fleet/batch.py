"""A fleet batch: find the lines, skip those up to date, compute the rest in parallel, write
each line's outputs atomically as it finishes, and keep the register in step.

Nothing is lost on interruption: every file goes to a temporary name and is renamed into place,
a line's results JSON is written last (so a line counts as done only when all of its files are
there), and the register on disk lists only lines whose outputs are complete.

One line never stops the fleet: whatever goes wrong with it (reading, planning, computing,
rendering, writing its files or its register row) is that line's one-line error, in the
register and the progress, and the batch goes on. One batch at a time writes into an output
folder (:mod:`relayset.fleet.lock`); the register lists every finished line in the folder,
including those an earlier batch computed from another source. Pool workers end with the batch
process, however it ends (:func:`relayset.fleet.worker.init_worker`).
"""

from __future__ import annotations

import json
import re
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, TextIO

from relayset.errors import InputError
from relayset.fleet.jobs import PlannedJob, find_jobs, plan_job
from relayset.fleet.progress import Progress
from relayset.fleet.register import check_rows, failed_row, rows_from_results, write_register

#: The HTML index and .xlsx are rewritten at most this often during a run [s] (the CSV after
#: every line); all three are written at the end.
REGISTER_REFRESH_S = 30.0

#: What write_atomic leaves behind when a process is killed mid-write: ".NAME.XXXXXXXX".
_STALE_TMP = re.compile(r"^\..+\.(json|pdf|html|csv|xlsx|toml|txt)\.[A-Za-z0-9_]{8}$")

#: Beside each line's outputs: every file the line read and its SHA-256 (study, philosophy,
#: adjacent-line studies), so that a later batch finds the line up to date only when none
#: of them changed.
INPUTS_SUFFIX = ".inputs.txt"


@dataclass
class BatchSummary:
    """What a batch did."""

    out_dir: Path
    total: int = 0
    computed: int = 0
    skipped: int = 0
    failures: list[tuple[str, str]] = field(default_factory=list)  #: (line, one-line error)
    rows: list[dict[str, Any]] = field(default_factory=list)
    register: list[Path] = field(default_factory=list)
    seconds: float = 0.0

    @property
    def ok(self) -> bool:
        return not self.failures

    @property
    def failed_checks(self) -> int:
        """Failed checks of the lines in the register (relayset.report.failures)."""
        return sum(int(r.get("failed_checks") or 0) for r in self.rows)

    @property
    def lines_with_failed_checks(self) -> int:
        return len({(r.get("line_id"), r.get("revision")) for r in self.rows
                    if r.get("failed_checks")})


def _clean_stale(out_dir: Path) -> None:
    for folder in (out_dir, out_dir / "studies"):
        if folder.is_dir():
            for f in folder.iterdir():
                if f.is_file() and _STALE_TMP.match(f.name):
                    f.unlink(missing_ok=True)


def input_files(p: PlannedJob) -> str:
    """Every file the line reads, with its SHA-256, one per line: the study (the bytes the
    pipeline parses), its philosophy file and the adjacent-line and line-behind studies it
    names (relative to the study, as the pipeline resolves them). A file that cannot be
    read is listed as missing: the pipeline then says why."""
    import hashlib
    import tomllib

    from relayset.inputs.study_file import read_bytes

    try:
        data = p.effective if p.effective is not None else read_bytes(p.study_path)
        tables = tomllib.loads(data.decode("utf-8-sig"))
    except (InputError, ValueError):
        return f"study {p.sha256}\n"
    base = p.study_path.parent
    named: list[tuple[str, str]] = []
    info = tables.get("study") if isinstance(tables.get("study"), dict) else {}
    phil = info.get("philosophy", "default")
    if isinstance(phil, str) and phil != "default":
        named.append(("philosophy", phil))
    for key in ("adjacent_lines", "lines_behind"):
        for entry in tables.get(key) if isinstance(tables.get(key), list) else []:
            if isinstance(entry, dict) and isinstance(entry.get("study"), str):
                named.append((key, entry["study"]))
    lines = [f"study {p.sha256}"]
    for role, name in named:
        try:
            digest = hashlib.sha256((base / name).read_bytes()).hexdigest()
        except OSError:
            digest = "missing"
        lines.append(f"{role} {digest} {name}")
    return "\n".join(lines) + "\n"


def up_to_date(out_dir: Path, p: PlannedJob, report: bool) -> dict | None:
    """The existing results of a line when every file it reads (:func:`input_files`) and the
    version match, and its results JSON was written after that record, else None.

    With ``report``, the line's report must be there too.
    """
    record = out_dir / f"{p.stem}{INPUTS_SUFFIX}"
    path = out_dir / f"{p.stem}.json"
    try:
        recorded = record.read_text("utf-8")
        # the results were written after the record of what they were computed from
        if path.stat().st_mtime_ns < record.stat().st_mtime_ns:
            return None
    except (OSError, ValueError):
        return None
    if recorded != input_files(p):
        return None
    try:
        d = json.loads(path.read_text("utf-8"))
    except (OSError, ValueError):
        return None
    from relayset._version import relayset_version  # not the pipeline: the workers load it

    if d.get("source_sha256") != p.sha256 or d.get("relayset_version") != relayset_version():
        return None
    if report and not all((out_dir / f"{p.stem}{s}").is_file() for s in (".pdf", ".html")):
        return None
    return d


def _one_line(error: str) -> str:
    """A line's error as the register and progress show it: one line of visible text."""
    from relayset.errors import MESSAGE_LIMIT, shorten
    from relayset.io import visible_text

    return shorten(visible_text(" ".join(error.split())), MESSAGE_LIMIT + 40)


def _internal(label: str, exc: BaseException, what: str = "internal error") -> str:
    return f"{label}: {what} ({type(exc).__name__}: {exc})"


def finished_elsewhere(out_dir: Path, stems: set[str]) -> list[dict[str, Any]]:
    """Register rows of the finished lines in ``out_dir`` that this batch does not handle
    (an earlier batch's, from another source): the register lists the folder's lines.

    A results file counts when it reads as relayset results whose own line ID and revision
    give its file name; anything else in the folder is left out, not trusted.
    """
    from relayset.fleet.jobs import safe_stem

    rows: list[dict[str, Any]] = []
    for f in sorted(out_dir.glob("*.json")):
        stem = f.name[:-5]
        if stem in stems or f.name.startswith("."):
            continue
        try:
            d = json.loads(f.read_text("utf-8"))
            info = d["study"]
            if safe_stem(str(info["line_id"]), str(info["revision"])) != stem:
                continue
            pdf = out_dir / f"{stem}.pdf"
            new = rows_from_results(d, results_file=f.name,
                                    report_file=pdf.name if pdf.is_file() else None)
            check_rows(new)
        except Exception:  # not relayset results: not a line of the register
            continue
        rows += new
    return rows


def run_batch(source: str | Path, out_dir: str | Path, *, workers: int | None = None,
              cluster: str | None = None, force: bool = False, report: bool = True,
              title: str | None = None, stream: TextIO | None = None) -> BatchSummary:
    """Compute every line of a folder or line register into ``out_dir``.

    Every failure of one line (reading, planning, computing, rendering, writing, its register
    row) is that line's one-line error; the other lines go on. The output folder is locked
    for the run (:mod:`relayset.fleet.lock`): a second batch into it is refused.

    Parameters
    ----------
    source : path
        A folder of study files (searched recursively) or a line register (.csv / .xlsx).
    out_dir : path
        Where the results, reports and the register go.
    workers : int, optional
        Local worker processes (default: one per core; 1 computes in this process).
    cluster : str, optional
        Address of a Dask distributed scheduler (``tcp://host:8786``) to send the work to.
    force : bool
        Recompute lines whose outputs are up to date.
    report : bool
        Render each line's calculation report (when the report renderer is installed).

    Raises
    ------
    InputError
        The source as a whole is unusable, or another batch is writing into ``out_dir``
        (one line); nothing is written then.
    """
    from relayset.fleet import cluster as runners
    from relayset.fleet.lock import lock_folder

    t0 = time.monotonic()
    out = Path(out_dir)
    jobs = find_jobs(source)
    if not jobs:
        raise InputError("no study files found (TOML files with schema = "
                         "\"relayset-study/1\")", source=str(source))
    if out.exists() and not out.is_dir():
        raise InputError("the output folder is a file", field="-o", value=str(out),
                         source="command line")
    client = runners.connect(cluster) if cluster else None  # unreachable: nothing written
    try:
        try:
            out.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise InputError(f"cannot create the output folder ({exc.strerror})", field="-o",
                             value=str(out), source="command line") from None
        lock = lock_folder(out)  # before anything in the folder is touched
    except BaseException:
        if client is not None:
            client.close()
        raise
    try:
        return _run_locked(jobs, source, out, lock.note, client, workers=workers,
                           force=force, report=report, title=title, stream=stream, t0=t0)
    finally:
        lock.release()
        if client is not None:
            client.close()


def _run_locked(jobs: list, source: str | Path, out: Path, note: str | None, client, *,
                workers: int | None, force: bool, report: bool, title: str | None,
                stream: TextIO | None, t0: float) -> BatchSummary:
    """:func:`run_batch` once the output folder is this batch's."""
    from relayset.fleet import cluster as runners
    from relayset.fleet.worker import write_line
    from relayset.io import write_atomic

    _clean_stale(out)
    title = title or f"relayset register: {source}"
    summary = BatchSummary(out, total=len(jobs))
    progress = Progress(len(jobs), stream=stream)
    if note:
        progress.message(note)
    rows_by_job: dict[int, list[dict[str, Any]]] = {}

    def fail(i: int, label: str, error: str, study: str | None = None) -> None:
        error = _one_line(error)
        summary.failures.append((label, error))
        rows_by_job[i] = [failed_row(label, error, study)]
        progress.finished(label, error)

    def accept(i: int, rows: list[dict[str, Any]]) -> None:
        check_rows(rows)  # a row that cannot be written is this line's error, found here
        rows_by_job[i] = rows

    # plan: read each study once, apply register overrides, name outputs, skip what is done
    planned: dict[int, PlannedJob] = {}
    stems: dict[str, str] = {}
    for i, job in enumerate(jobs):
        try:
            p = plan_job(job, out)
        except InputError as exc:
            fail(i, job.label, str(exc), str(job.path))
            continue
        except Exception as exc:  # one line's surprise must not stop the fleet
            fail(i, job.label, _internal(job.label, exc), str(job.path))
            continue
        if p.stem in stems:
            err = (f"{job.label}: study.line_id and study.revision give the same output name "
                   f"{p.stem!r} as {stems[p.stem]}")
            fail(i, job.label, err, str(job.path))
            continue
        stems[p.stem] = job.label
        done = None if force else up_to_date(out, p, report)
        if done is not None:
            try:
                accept(i, rows_from_results(
                    done, results_file=f"{p.stem}.json",
                    report_file=f"{p.stem}.pdf" if (out / f"{p.stem}.pdf").is_file() else None))
            except Exception:  # results that do not give rows: compute the line again
                pass
            else:
                summary.skipped += 1
                progress.skip(1)
                continue
        planned[i] = p
    if summary.skipped:
        progress.message(f"relayset: {summary.skipped} line(s) up to date (the same input files "
                         f"and version), skipped; --force recomputes them")
    others = finished_elsewhere(out, set(stems))
    if others:
        n = len({r.get("results_file") for r in others})
        progress.message(f"relayset: the register also lists {n} finished line(s) already "
                         f"in {out} from other sources")

    last_full = [time.monotonic()]

    def refresh(final: bool = False) -> None:
        rows = [r for k in sorted(rows_by_job) for r in rows_by_job[k]]
        due = final or time.monotonic() - last_full[0] >= REGISTER_REFRESH_S
        summary.register = write_register(out, rows + others, title=title,
                                          formats=("csv", "xlsx", "html") if due else ("csv",))
        if due:
            last_full[0] = time.monotonic()
        summary.rows = rows

    written_inputs: set[int] = set()
    try:
        for i, p in list(planned.items()):  # effective study files the pipeline reads
            if p.effective is not None:
                try:
                    write_atomic(p.study_path, p.effective)
                except Exception as exc:
                    del planned[i]
                    fail(i, p.job.label, str(exc) if isinstance(exc, InputError)
                         else _internal(p.job.label, exc), str(p.job.path))
                    continue
                written_inputs.add(i)
        for p in planned.values():
            # What the line reads, recorded before it is computed: its results JSON, written
            # last, is then newer than the record only when the line finished from these
            # files (a batch killed before that leaves an older JSON: computed again).
            try:
                write_atomic(out / f"{p.stem}{INPUTS_SUFFIX}", input_files(p))
            except OSError:
                (out / f"{p.stem}{INPUTS_SUFFIX}").unlink(missing_ok=True)
        tasks = [(i, str(p.study_path), p.stem, report, str(out)) for i, p in planned.items()]
        if client is not None:
            results = runners.run_dask(tasks, client)
        else:
            n = workers or runners.default_workers()
            n = min(n, max(1, len(tasks)))
            results = runners.run_serial(tasks) if n == 1 else runners.run_pool(tasks, n)
        for res in results:
            p = planned[res.index]
            error = res.error
            if res.ok:
                try:
                    if res.files:  # from a cluster: written here, the JSON last
                        write_line(out, res.files)
                    accept(res.index, list(res.rows))
                except Exception as exc:
                    error = (str(exc) if isinstance(exc, InputError)
                             else _internal(p.job.label, exc, "its outputs cannot be written"))
            if error is None:
                summary.computed += 1
                progress.finished(p.job.label)
            else:
                if res.index in written_inputs:
                    p.study_path.unlink(missing_ok=True)
                (out / f"{p.stem}{INPUTS_SUFFIX}").unlink(missing_ok=True)  # nothing of it
                fail(res.index, p.job.label, error, str(p.job.path))
            refresh()
    finally:
        # interrupted or not: the register lists exactly the lines that finished
        refresh(final=True)
        progress.close()
        summary.seconds = time.monotonic() - t0
    return summary


def run_demo(out_dir: str | Path, **kwargs: Any) -> BatchSummary:
    """The shipped demo fleet, end to end: results, reports, register and index."""
    from relayset.resources import demo_lines_dir

    kwargs.setdefault("title", "relayset demo fleet (invented lines)")
    return run_batch(demo_lines_dir(), out_dir, **kwargs)
