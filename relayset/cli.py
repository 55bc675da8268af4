"""The command line: a thin layer over the API. Bad input exits with code 2 and one line."""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence

EXIT_INPUT = 2
#: A study whose settings failed a verification check (its outputs are still written).
EXIT_FAILED_CHECKS = 3


def _version() -> str:
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("relayset")
    except PackageNotFoundError:
        return "0+unknown"


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
    sub.add_parser("conductors", help="list the built-in conductor table")
    sub.add_parser("earth-models", help="list the earth-return models")
    return ap


def _files(args) -> list[str]:
    from relayset.errors import InputError

    files = list(args.files)
    if args.demo:
        from relayset.resources import demo_studies

        files += [str(p) for p in demo_studies()]
    if not files:
        raise InputError("give at least one study FILE or --demo", source="command line")
    if (getattr(args, "json", None) or getattr(args, "csv", None)) and len(files) > 1:
        raise InputError("--json/--csv take one study file at a time",
                         source="command line", field="FILE", value=len(files))
    return files


def _run(args) -> int:
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

    from relayset import io
    from relayset.inputs.unit_system import study_unit_system
    from relayset.report import text
    from relayset.studies import pipeline

    flags = {"params": {}, "reach": {"reach": True}, "settings": {"settings": True}}
    show = getattr(text, f"{args.command}_summary")
    # Compute everything first so that bad input leaves no partial output behind.
    results = [pipeline.run(f, **flags[args.command]) for f in _files(args)]
    for res in results:
        units = args.units or study_unit_system(res.study_input)
        sys.stdout.write(show(res, units))
    # Every output file is rendered first, then all are written or none.
    outputs = []
    if args.json:
        outputs.append(("--json", args.json, io.to_json(results[0].to_dict())))
    if getattr(args, "csv", None):
        outputs.append(("--csv", args.csv, io.csv_bytes(_settings_csv(results[0]))))
    io.write_all(outputs)
    failed = any(r.verification is not None and r.verification.verdict == "failed checks"
                 for r in results)
    return EXIT_FAILED_CHECKS if failed else 0


def _settings_csv(res) -> str:
    from relayset import io
    from relayset.report.tables import settings_rows

    rows = [(t.end, *row) for t in res.settings for row in settings_rows(t)]
    ident = res.identity
    return io.rows_to_csv(rows, header=("end", "setting", "value", "unit"),
                          columns={"line_id": ident["line_id"], "revision": ident["revision"]})


def main(argv: Sequence[str] | None = None) -> int:
    args = _parser().parse_args(argv)
    from relayset.errors import InputError

    try:
        return _run(args)
    except InputError as exc:
        print(f"relayset: error: {exc}", file=sys.stderr)
        return EXIT_INPUT
    except BrokenPipeError:
        return 0


if __name__ == "__main__":
    sys.exit(main())
