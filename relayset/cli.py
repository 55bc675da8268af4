"""The command line: a thin layer over the API. Bad input exits with code 2 and one line."""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence

EXIT_INPUT = 2
#: A study whose settings failed a verification check (its outputs are still written).
EXIT_FAILED_CHECKS = 3
#: A fault of relayset's own (one line, nothing written).
EXIT_INTERNAL = 1


def _version() -> str:
    from relayset._version import relayset_version

    return relayset_version()


def _parser() -> argparse.ArgumentParser:
    ap = argparse.ArgumentParser(
        prog="relayset",
        description="Overhead-line parameters, untransposition reach study and distance-zone "
        "settings. Results must be reviewed and approved by a licensed professional engineer.",
    )
    ap.add_argument("--version", action="version", version=f"relayset {_version()}")
    sub = ap.add_subparsers(dest="command", required=True, metavar="COMMAND")

    def study_cmd(name: str, help_: str) -> argparse.ArgumentParser:
        p = sub.add_parser(name, help=help_, description=help_)
        p.add_argument("files", nargs="*", metavar="FILE", help="study files (TOML)")
        p.add_argument("--demo", action="store_true", help="run every shipped demo line")
        p.add_argument("--units", choices=("si", "us"), default=None,
                       help="units of the printed summary (default: those of the study file's "
                       "line length)")
        p.add_argument("--json", metavar="PATH",
                       help="write the results as JSON (keys carry their units)")
        return p

    study_cmd("params", "line parameters from tower geometry")
    study_cmd("reach", "fault study: per-loop reach error of the real (partly transposed) line")
    p = study_cmd("settings", "distance-zone settings under the setting philosophy")
    p.add_argument("--csv", metavar="PATH", help="write the settings table as CSV")
    # --- report (issue 11) ---
    p = sub.add_parser("report", help="calculation report: HTML and archival PDF/A-3b",
                       description="Write <line_id>_rev<revision>.html, .pdf (PDF/A-3b with the "
                       "study, the philosophy and the results embedded) and .json per study.")
    p.add_argument("files", nargs="*", metavar="FILE", help="study files (TOML)")
    p.add_argument("--demo", action="store_true", help="report every shipped demo line")
    p.add_argument("-o", "--output", required=True, metavar="DIR", help="output folder")
    p.add_argument("--paper", choices=("a4", "letter"), default="a4",
                   help="paper size (default: a4)")
    p.add_argument("--units", choices=("si", "us"), default=None,
                   help="units of lengths in the report (default: those of the study file)")
    # --- end report ---
    p = sub.add_parser("export", help="setting files per relay end (on the relay profile's "
                       "steps), test points and test cases",
                       description="Write per study the results JSON and per relay end the "
                       "setting file relayset-settings/1 (JSON and CSV); the study needs "
                       "[relay] profile.")
    p.add_argument("files", nargs="*", metavar="FILE", help="study files (TOML)")
    p.add_argument("--demo", action="store_true", help="export every shipped demo line")
    p.add_argument("-o", "--output", required=True, metavar="DIR", help="output folder")
    p = sub.add_parser("schema", help="print a JSON Schema (draft 2020-12) of a relayset file",
                       description="Print the JSON Schema of a relayset file.")
    p.add_argument("name", choices=("study", "philosophy", "profile", "results", "settings",
                                     "test-points"))
    _fleet_parsers(sub)
    sub.add_parser("conductors", help="list the built-in conductor table")
    sub.add_parser("earth-models", help="list the earth-return models")
    return ap


# --- fleet: batch and demo (relayset/fleet/) ---------------------------------------------
def _fleet_parsers(sub) -> None:
    p = sub.add_parser("batch", help="compute and report every line of a folder or line register",
                       description="Compute, report and register every study in a folder "
                       "(recursively) or every row of a line register (.csv or .xlsx).")
    p.add_argument("source", metavar="PATH", help="folder of study files, or a line register")
    _fleet_options(p)
    p = sub.add_parser("verify", help="check archived report PDFs against their embedded "
                       "files and a recomputation",
                       description="Check each archived report: embedded files against the "
                       "printed and stored SHA-256, results against a recomputation with the "
                       "installed relayset. Exit 0 only when everything matches.")
    p.add_argument("reports", nargs="+", metavar="REPORT.pdf")
    p.add_argument("--trust", action="append", default=[], metavar="CA.pem",
                   help="certificate of a trust anchor for the signatures (repeatable)")
    p = sub.add_parser("sign", help="sign a report's prepared, checked or approved field",
                       description="Sign one role's signature field of a report PDF (PAdES, an "
                       "incremental update that keeps PDF/A-3b and the embedded files). Uses "
                       "pyHanko.")
    p.add_argument("report", metavar="REPORT.pdf")
    p.add_argument("--role", required=True, choices=("prepared", "checked", "approved"))
    p.add_argument("--key", required=True, metavar="KEY.pem", help="the signer's private key")
    p.add_argument("--cert", required=True, metavar="CERT.pem",
                   help="the signer's certificate")
    p.add_argument("--chain", action="append", default=[], metavar="CA.pem",
                   help="certificates between the signer's and the trust anchor (repeatable)")
    p.add_argument("--passphrase-file", metavar="FILE", default=None,
                   help="a file holding the key's passphrase")
    p.add_argument("-o", "--output", required=True, metavar="SIGNED.pdf")
    p = sub.add_parser("compare", help="what changed between two revisions of a line",
                       description="Changed inputs, results and settings between two study "
                       "files or archived report PDFs, as a table and an HTML and PDF change "
                       "sheet.")
    p.add_argument("old", metavar="OLD", help="study file or archived report PDF")
    p.add_argument("new", metavar="NEW", help="study file or archived report PDF")
    p.add_argument("-o", "--out", metavar="DIR", default=None,
                   help="write the change sheet (HTML and PDF) here")
    p = sub.add_parser("demo", help="run the shipped demo fleet end to end",
                       description="Compute, report and register the shipped demo lines.")
    _fleet_options(p)


def _fleet_options(p) -> None:
    p.add_argument("-o", "--out", required=True, metavar="OUT", help="output folder")
    p.add_argument("--jobs", type=int, default=None, metavar="N",
                   help="local worker processes (default: one per core; 1 = no pool)")
    p.add_argument("--cluster", metavar="ADDRESS", default=None,
                   help="Dask distributed scheduler to send the work to (tcp://host:8786); "
                   "needs relayset[cluster]")
    p.add_argument("--force", action="store_true",
                   help="recompute lines whose outputs match their input hash and version")
    p.add_argument("--no-report", dest="report", action="store_false",
                   help="results JSON and register only, no HTML/PDF reports")


def _run_archive(args) -> int:
    from relayset.errors import InputError

    if args.command == "compare":
        from relayset.archive.compare import compare, format_table, write_change_sheet

        c = compare(args.old, args.new)
        sys.stdout.write(format_table(c))
        if args.out:
            for path in write_change_sheet(c, args.out):
                print(f"  {path}")
        return 0
    if args.command == "sign":
        return _run_sign(args)
    from pathlib import Path

    from relayset.archive.verify import format_verification, verify_report
    from relayset.report.build import PdfHelper

    for t in args.trust:
        if not Path(t).is_file():
            raise InputError("file does not exist", field="--trust", value=t,
                             source="command line")
    code = 0
    with PdfHelper() as helper:  # imports the renderer while the first study recomputes
        for pdf in args.reports:  # one bad file never stops the others
            try:
                v = verify_report(pdf, trust=[Path(t) for t in args.trust], renderer=helper)
            except InputError as exc:
                print(f"relayset: error: {exc}", file=sys.stderr)
                code = max(code, EXIT_INPUT)
                continue
            sys.stdout.write(format_verification(v, all_checks=True))
            if not v.passed:
                code = max(code, 1)
    return code


def _run_sign(args) -> int:
    from pathlib import Path

    from relayset.archive.signatures import sign_report
    from relayset.errors import InputError

    passphrase = None
    if args.passphrase_file:
        try:
            passphrase = Path(args.passphrase_file).read_bytes().rstrip(b"\r\n")
        except OSError as exc:
            raise InputError(f"cannot be read ({exc.strerror})", field="--passphrase-file",
                             value=args.passphrase_file, source="command line") from None
    sign_report(Path(args.report), Path(args.output), role=args.role, key=Path(args.key),
                cert=Path(args.cert), chain=[Path(c) for c in args.chain],
                passphrase=passphrase)
    print(f"signed as {args.role}: {args.output}")
    return 0


def _run_fleet(args) -> int:
    from relayset.errors import InputError
    from relayset.fleet.batch import run_batch, run_demo

    if args.jobs is not None and args.jobs < 1:
        raise InputError("must be 1 or more", field="--jobs", value=args.jobs,
                         source="command line")
    opts = {"workers": args.jobs, "cluster": args.cluster, "force": args.force,
            "report": args.report}
    try:
        if args.command == "demo":
            s = run_demo(args.out, **opts)
        else:
            s = run_batch(args.source, args.out, **opts)
    except KeyboardInterrupt:
        print("relayset: interrupted; the register lists the lines that finished",
              file=sys.stderr)
        return 130
    print(f"{s.total} line(s): {s.computed} computed, {s.skipped} up to date, "
          f"{len(s.failures)} not computed (bad input), in {s.seconds:.1f} s; "
          f"{s.failed_checks} failed check(s) in {s.lines_with_failed_checks} line(s)")
    for p in s.register:
        print(f"  {p}")
    if s.failures:
        print(f"relayset: {len(s.failures)} line(s) failed:", file=sys.stderr)
        for _, err in s.failures:
            print(f"  {err}", file=sys.stderr)
        return EXIT_INPUT
    # like `settings` and `report`: everything written, the exit code says checks failed
    return EXIT_FAILED_CHECKS if s.failed_checks else 0


def _files(args) -> list[str]:
    from relayset.errors import InputError

    files = list(args.files)
    if args.demo:
        from relayset.resources import demo_studies

        files += [str(p) for p in demo_studies()]
    if not files:
        raise InputError("give at least one study FILE or --demo", source="command line")
    if (getattr(args, "json", None) or getattr(args, "csv", None)) and len(files) > 1:
        raise InputError(f"--json and --csv take one study file at a time, not {len(files)} "
                         "(use 'relayset batch' for many)", source="command line")
    return files


def _run(args) -> int:
    if args.command in ("batch", "demo"):
        return _run_fleet(args)
    if args.command in ("verify", "compare", "sign"):
        return _run_archive(args)
    if args.command == "conductors":
        from relayset.inputs.conductors import builtin_table

        for key, e in builtin_table().items():
            aliases = ", ".join(e.get("aliases", []))
            print(f"{key:22s} {aliases:26s} d = {e['outside_diameter_m'] * 1e3:6.2f} mm")
        return 0
    if args.command == "earth-models":
        from relayset.physics.earth_models import EARTH_MODELS

        for name, desc in EARTH_MODELS.items():
            print(f"{name:18s} {desc}")
        return 0

    if args.command == "schema":
        import json

        from relayset.export.schemas import SCHEMAS

        print(json.dumps(SCHEMAS[args.name](), indent=2))
        return 0
    if args.command == "export":
        from relayset.export.setting_file import export

        written, n_failed = export(_files(args), args.output)
        for path in written:
            print(f"export: {path}")
        # like `settings` and `report`: the files are written, the exit code says checks failed
        return EXIT_FAILED_CHECKS if n_failed else 0
    if args.command == "report":
        import contextlib
        from pathlib import Path

        from relayset.errors import InputError
        from relayset.report import build

        files = _files(args)
        out = Path(args.output)
        made = [p for p in (out, *out.parents) if not p.exists()]  # deepest first
        build.check_output_dir(args.output)
        try:
            reports = build.render_reports(files, units=args.units, paper=args.paper)
        except InputError:
            # bad input writes nothing: not even the folders made to probe the output
            with contextlib.suppress(OSError):
                for p in made:
                    p.rmdir()
            raise
        for r, path in zip(reports, build.write_reports(reports, args.output), strict=True):
            print(f"report: {path.with_suffix('.html')} and {path.name}"
                  + (f" ({r.n_failed} failed check(s))" if r.n_failed else ""))
        # like `settings`: the reports are written, and the exit code says checks failed
        return EXIT_FAILED_CHECKS if any(r.n_failed for r in reports) else 0
    from relayset.inputs.unit_system import study_unit_system
    from relayset.report import text
    from relayset.studies import pipeline

    flags = {"params": {}, "reach": {"reach": True}, "settings": {"settings": True}}
    show = getattr(text, f"{args.command}_summary")
    # Compute everything first so that bad input leaves no partial output behind.
    results = [pipeline.run(f, **flags[args.command]) for f in _files(args)]
    for res in results:
        units = args.units or study_unit_system(res.input)
        if getattr(res, "teed_reach", None) is not None:  # a three-terminal line's reach
            from relayset.report.teed_reach import teed_reach_summary

            sys.stdout.write(teed_reach_summary(res, units))
            continue
        sys.stdout.write(show(res, units))
    # Every output file is rendered first, then all are written or none.
    if args.json or getattr(args, "csv", None):
        from relayset import io

        outputs = []
        if args.json:
            outputs.append(("--json", args.json, io.to_json(results[0].to_dict())))
        if getattr(args, "csv", None):
            outputs.append(("--csv", args.csv, io.csv_bytes(_settings_csv(results[0]))))
        io.write_all(outputs)
    from relayset.report.failures import failed_checks

    # the one count of failed checks (setting rules and verification), as the report's
    failed = any(r.verification is not None and r.verification.verdict == "failed checks"
                 for r in results) or (args.command == "settings" and any(
                     failed_checks(r.to_dict()) for r in results))
    return EXIT_FAILED_CHECKS if failed else 0


def _settings_csv(res) -> str:
    from relayset import io
    from relayset.report.tables import settings_rows

    if res.teed is not None:  # a three-terminal line: its zones per relay end
        from relayset.report.tables import teed_rows

        rows = [(e.end, *row) for e in res.teed.ends for row in teed_rows(e)]
    else:
        rows = [(t.end, *row) for t in res.settings for row in settings_rows(t)]
    ident = res.study
    return io.rows_to_csv(rows, header=("end", "setting", "value", "unit"),
                          columns={"line_id": ident["line_id"], "revision": ident["revision"]})


#: BLAS thread pools, one thread each unless the user says otherwise (see main).
_BLAS_THREADS = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


def _one_blas_thread() -> None:
    """relayset's linear algebra is batched small matrices (at most 18 x 18), which BLAS
    threads cannot speed up, while a thread pool started with numpy keeps a second core
    busy: on a loaded two-core machine that cost `relayset reach` 0.24-0.35 s against
    0.17-0.21 s. Parallel work (fleet batches) uses processes. Only before numpy is
    imported, and only where the user has not chosen."""
    import os

    if "numpy" not in sys.modules:
        for name in _BLAS_THREADS:
            os.environ.setdefault(name, "1")


def _tolerant_console() -> None:
    """A console that cannot show a character (a cp1252 or ASCII redirect) gets a
    replacement mark instead of stopping the command before it writes its files. Files are
    written as UTF-8 bytes and are not affected."""
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.reconfigure(errors="replace")  # type: ignore[union-attr]
        except (AttributeError, ValueError, OSError):  # not a text wrapper: leave it
            pass


def main(argv: Sequence[str] | None = None) -> int:
    _one_blas_thread()
    _tolerant_console()
    args = _parser().parse_args(argv)
    from relayset.errors import InputError, InternalError

    try:
        return _run(args)
    except InputError as exc:
        print(f"relayset: error: {exc}", file=sys.stderr)
        return EXIT_INPUT
    except InternalError as exc:  # a fault of relayset's, not of the input
        print(f"relayset: internal error (please report it; nothing was written): {exc}",
              file=sys.stderr)
        return EXIT_INTERNAL
    except BrokenPipeError:
        return 0


if __name__ == "__main__":
    sys.exit(main())
