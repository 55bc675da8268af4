"""Make the calculation reports of study files: compute, render, then write atomically.

Nothing is written until every requested report has been rendered, so a bad input leaves
no report behind (not even for the good files given with it).
"""

from __future__ import annotations

import hashlib
import os
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

from relayset.errors import InputError


@dataclass(frozen=True)
class ReportFiles:
    """One study's report, rendered in memory."""

    stem: str  #: ``<line_id>_rev<revision>``
    html: str
    pdf: bytes
    json: str  #: the results JSON (also embedded in the PDF)
    source: str  #: the study file
    n_failed: int = 0  #: failed checks (relayset.report.failures), as the report prints them


def philosophy_path(results) -> Path:
    """The philosophy file the study named ("default" is the shipped file)."""
    name = results.study.get("philosophy", "default")
    if name == "default":
        from relayset.inputs.philosophy import DEFAULT_FILE

        return Path(__file__).resolve().parent.parent / "data" / DEFAULT_FILE
    path = Path(name)
    if not path.is_absolute():
        path = Path(results.source_file).parent / path
    return path


def make_report(results, *, units: str | None = None, paper: str = "a4",
                environ: dict[str, str] | None = None, pdf_renderer=None) -> ReportFiles:
    """Render one study's report (HTML, PDF/A-3b and results JSON) from its results.

    ``units`` None means the units the study file is written in. ``pdf_renderer`` (same
    call as :func:`relayset.report.pdf.html_to_pdf`) defaults to rendering here.
    """
    from relayset import io
    from relayset.inputs.unit_system import study_unit_system

    src = Path(results.source_file)
    try:
        study_bytes = src.read_bytes()
    except OSError as exc:
        raise InputError(f"cannot be read ({exc.strerror})", source=str(src)) from None
    if hashlib.sha256(study_bytes).hexdigest() != results.source_sha256:
        raise InputError("changed after it was read; run the report again", source=str(src))
    philosophy = None
    if results.philosophy is not None:  # settings computed (two-ended or teed)
        ph = philosophy_path(results)
        try:
            ph_bytes = ph.read_bytes()
        except OSError as exc:
            raise InputError(f"philosophy file cannot be read ({exc.strerror})",
                             field="study.philosophy", value=str(ph),
                             source=str(src)) from None
        name = ph.name if ph.name != src.name else f"philosophy_{ph.name}"
        philosophy = (name, ph_bytes)
    from relayset.export.setting_file import profile_attachment

    return render_report(results, src.name, study_bytes, philosophy,
                         results_json=io.to_json(results.to_dict()),
                         units=units or study_unit_system(results.input), paper=paper,
                         environ=dict(os.environ if environ is None else environ),
                         pdf_renderer=pdf_renderer, profile=profile_attachment(results))


#: What each embedded file is (its PDF description); verify re-creates the same.
DESCRIPTIONS = {"study": "The study file (input)",
                "results": "The results (JSON, keys carry their units)",
                "philosophy": "The setting philosophy (input)",
                "profile": "The relay profile: ranges and steps of the settings (input)",
                "settings": "The setting file of one relay end (relayset-settings/1)"}


def render_report(results, study_name: str, study_bytes: bytes,
                  philosophy: tuple[str, bytes] | None, *, results_json: str, units: str,
                  paper: str, environ: dict[str, str], pdf_renderer=None,
                  profile: tuple[str, bytes] | None = None) -> ReportFiles:
    """The report of ``results`` from its input files, named and given as bytes.

    The one rendering path: ``relayset report`` calls it with the files it read, and
    ``relayset verify`` with the files an archived report embeds (to re-create its pages).
    With a relay profile (``profile``: its embedded name and bytes) the profile and each
    relay end's setting file (relayset-settings/1) are embedded beside the results.
    """
    from relayset.report.context import build_context
    from relayset.report.html import render_html
    from relayset.report.pdf import EmbeddedFile, html_to_pdf

    ctx = build_context(results, units=units, paper=paper, environ=environ,
                        results_json=results_json)
    extra = []  # the relay profile and the setting files: their SHA-256 printed, verified
    if profile is not None:
        from relayset.export.setting_file import embedded_setting_files

        extra.append(EmbeddedFile(profile[0], profile[1], DESCRIPTIONS["profile"], "Source"))
        extra += [EmbeddedFile(name, data, DESCRIPTIONS["settings"], "Data")
                  for name, data in embedded_setting_files(results, results_json,
                                                           ctx["doc_id"])]
    ctx["embedded_hashes"] = [
        {"kind": "profile" if f is extra[0] else "settings", "name": f.name,
         "sha256": hashlib.sha256(f.data).hexdigest()} for f in extra]
    ctx["keywords"] += "".join(f", {h['name']} SHA-256 {h['sha256']}"
                               for h in ctx["embedded_hashes"])
    html = render_html(ctx, study_bytes.decode("utf-8"))
    files = [
        EmbeddedFile(study_name, study_bytes, DESCRIPTIONS["study"], "Source"),
        EmbeddedFile(f"{ctx['doc_id']}.results.json", results_json.encode("utf-8"),
                     DESCRIPTIONS["results"], "Data"),
    ]
    if philosophy is not None:
        files.append(EmbeddedFile(philosophy[0], philosophy[1], DESCRIPTIONS["philosophy"],
                                  "Source"))
    files += extra
    when = ctx["when"]  # the generation time the pages print, also the PDF's dates
    pdf = (pdf_renderer or html_to_pdf)(html, files, when)
    return ReportFiles(ctx["doc_id"], html, pdf, results_json, str(results.source_file),
                       n_failed=ctx["n_failed"])


def report_for_study(path: str | Path, units: str | None = None,
                     paper: str = "a4", pdf_renderer=None) -> ReportFiles:
    """Compute a study (parameters, reach study, settings) and render its report."""
    from relayset.api import study_settings

    return make_report(study_settings(path), units=units, paper=paper,
                       pdf_renderer=pdf_renderer)


class PdfHelper:
    """A forked process that imports the PDF renderer while this one computes the study.

    Importing WeasyPrint takes about as long as computing a study; on two cores the two
    overlap. The helper renders the PDF from the finished HTML and sends the bytes back.
    Without ``fork`` (not on every platform) the PDF is rendered in this process.
    """

    def __init__(self) -> None:
        import multiprocessing as mp

        self._conn = self._proc = None
        if "fork" not in mp.get_all_start_methods():
            return
        ctx = mp.get_context("fork")
        self._conn, child = ctx.Pipe()
        self._proc = ctx.Process(target=_pdf_server, args=(child,), daemon=True)
        self._proc.start()
        child.close()

    def __call__(self, html, files, when) -> bytes:
        if self._conn is None:
            from relayset.report.pdf import html_to_pdf

            return html_to_pdf(html, files, when)
        self._conn.send((html, list(files), when))
        kind, payload = self._conn.recv()
        if kind != "ok":
            raise RuntimeError(f"PDF rendering failed: {payload}")
        return payload

    def close(self) -> None:
        if self._conn is not None:
            try:
                self._conn.send(None)
            except OSError:
                pass
            self._conn.close()
            self._proc.join(timeout=5)
            if self._proc.is_alive():
                self._proc.kill()
            self._conn = self._proc = None

    def __enter__(self) -> PdfHelper:
        return self

    def __exit__(self, *exc) -> None:
        self.close()


def _pdf_server(conn) -> None:
    """The helper's loop: import the renderer at once, then render each job sent."""
    from relayset.report.pdf import html_to_pdf, import_weasyprint, warm_up

    import_weasyprint()  # the slow import, overlapped with the study

    warm_up()

    while True:
        try:
            job = conn.recv()
        except EOFError:
            return
        if job is None:
            return
        try:
            conn.send(("ok", html_to_pdf(*job)))
        except Exception as exc:  # reported to the parent, which raises
            conn.send(("error", f"{type(exc).__name__}: {exc}"))


def _worker(args: tuple[str, str | None, str]):
    path, units, paper = args
    try:
        return report_for_study(path, units, paper)
    except InputError as exc:  # exceptions with keyword-only fields do not pickle
        return ("error", exc.rule, exc.field, exc.value, exc.source)


def check_output_dir(out_dir: str | Path) -> Path:
    """Create the output folder if needed and make sure a file can be written there."""
    import tempfile

    out = Path(out_dir)
    try:
        out.mkdir(parents=True, exist_ok=True)
        fd, probe = tempfile.mkstemp(prefix=".relayset-probe-", dir=out)
        os.close(fd)
        os.unlink(probe)
    except OSError as exc:
        raise InputError(f"cannot write the output folder {out_dir} ({exc.strerror})",
                         field="-o", source="command line") from None
    return out


def render_reports(paths: Sequence[str | Path], *, units: str | None = None, paper: str = "a4",
                   jobs: int | None = None) -> list[ReportFiles]:
    """Render every study's report in memory; the first bad input raises InputError.

    Several studies are rendered in parallel processes (at most ``jobs``, default the CPU
    count), each computing and rendering one study.
    """
    paths = [str(p) for p in paths]
    jobs = max(1, min(jobs or os.cpu_count() or 1, len(paths)))
    if jobs == 1:
        with PdfHelper() as helper:
            reports = [report_for_study(p, units, paper, pdf_renderer=helper) for p in paths]
    else:
        import multiprocessing as mp
        from concurrent.futures import ProcessPoolExecutor

        # Import the renderer and the study's modules once and warm the fonts up; the
        # forked workers inherit all of it instead of each doing it again.
        import relayset.api  # noqa: F401
        from relayset.report.pdf import import_weasyprint, warm_up

        import_weasyprint()

        warm_up()

        with ProcessPoolExecutor(jobs, mp_context=mp.get_context("fork")) as pool:
            out = list(pool.map(_worker, [(p, units, paper) for p in paths]))
        for item in out:
            if isinstance(item, tuple):
                _, rule, field, value, source = item
                raise InputError(rule, field=field, value=value, source=source)
        reports = out
    seen: dict[str, str] = {}
    for r in reports:
        if r.stem in seen:
            raise InputError(f"gives the same report name {r.stem!r} as {seen[r.stem]}",
                             field="study.line_id", source=r.source)
        seen[r.stem] = r.source
    return reports


def write_reports(reports: Sequence[ReportFiles], out_dir: str | Path) -> list[Path]:
    """Write each report's HTML, PDF and results JSON atomically; return the PDF paths."""
    from relayset import io

    out = check_output_dir(out_dir)
    written = []
    try:
        for r in reports:
            io.write_atomic(out / f"{r.stem}.html", r.html)
            io.write_atomic(out / f"{r.stem}.json", r.json)
            io.write_atomic(out / f"{r.stem}.pdf", r.pdf)
            written.append(out / f"{r.stem}.pdf")
    except OSError as exc:
        raise InputError(f"cannot write the output folder {out_dir} ({exc.strerror})",
                         field="-o", source="command line") from None
    return written
