"""Output files: written atomically (temporary file in the same folder, then renamed)."""

from __future__ import annotations

import json
import math
import os
import re
import tempfile
from pathlib import Path
from typing import Any


def _clean(obj: Any) -> Any:
    """JSON-safe copy: NaN/inf become null; tuples become lists; dates become ISO text."""
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if isinstance(obj, dict):
        return {str(k): _clean(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [_clean(v) for v in obj]
    if hasattr(obj, "isoformat"):
        return obj.isoformat()
    if hasattr(obj, "item"):  # numpy scalar
        return _clean(obj.item())
    return obj


def _umask() -> int:
    """The process umask (read by setting it and putting it back)."""
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def _check_target(target: Path, label: str) -> None:
    """An InputError (naming the option) if ``target`` cannot become a file."""
    from relayset.errors import InputError

    if target.is_dir():
        raise InputError("is a folder; give a file name", field=label, value=str(target),
                         source="command line")
    for parent in target.parents:
        if parent.exists():
            if not parent.is_dir():
                raise InputError(f"cannot be created: {str(parent)!r} is a file, not a folder",
                                 field=label, value=str(target), source="command line")
            break


def write_all(outputs: list[tuple[str, str | Path, str | bytes]]) -> None:
    """Write every output, or none: all temporary files first, then all renames.

    Parameters
    ----------
    outputs : list of (label, path, data)
        ``label`` names the option that asked for the file (``--json``), for messages.

    Files get the permissions of a new file under the user's umask (not the 0600 of a
    temporary file), so colleagues can read an archive the umask lets them read.
    """
    from relayset.errors import InputError

    targets = [(label, Path(path), data) for label, path, data in outputs]
    for label, target, _ in targets:
        try:
            _check_target(target, label)
        except OSError as exc:  # e.g. a name too long for the file system
            raise InputError(f"cannot be written ({exc.strerror or exc})", field=label,
                             value=str(target), source="command line") from None
    mode = 0o666 & ~_umask()
    temps: list[tuple[str, Path]] = []
    try:
        for label, target, data in targets:
            try:
                target.parent.mkdir(parents=True, exist_ok=True)
                fd, tmp = tempfile.mkstemp(prefix=f".{target.name[:50]}.", dir=target.parent)
                temps.append((tmp, target))
                os.fchmod(fd, mode)
                with os.fdopen(fd, "wb") as fh:
                    fh.write(data.encode("utf-8") if isinstance(data, str) else data)
            except OSError as exc:
                raise InputError(f"cannot be written ({exc.strerror or exc})", field=label,
                                 value=str(target), source="command line") from None
        for tmp, target in temps:
            os.replace(tmp, target)
    except BaseException:
        for tmp, _ in temps:
            Path(tmp).unlink(missing_ok=True)
        raise


def write_atomic(path: str | Path, data: str | bytes) -> None:
    """Write a file so that readers see either the old file or the whole new one."""
    write_all([("output", path, data)])


def to_json(obj: dict) -> str:
    """The JSON text of a results dictionary (strict JSON: no NaN)."""
    return json.dumps(_clean(obj), indent=2, allow_nan=False) + "\n"


def write_json(path: str | Path, obj: dict) -> None:
    write_atomic(path, to_json(obj))


#: Significant digits of numbers in CSV files: enough for any setting, none of the binary
#: noise (29.999999999999996 is written 30).
CSV_DIGITS = 12


def rows_to_csv(rows, header=("setting", "value", "unit"), *,
                columns: dict[str, str] | None = None) -> str:
    """CSV text of rows ending in (name, value, unit), with a header line.

    ``columns`` (like line id and revision) are repeated first on every row, so that tables
    of several lines can be pasted together. Numbers are written with :data:`CSV_DIGITS`
    significant digits; lines end in CR LF (RFC 4180). Write the text with
    :data:`CSV_ENCODING` so a spreadsheet shows the ohm and degree signs.
    """
    import csv
    import io as _io

    columns = columns or {}
    buf = _io.StringIO()
    w = csv.writer(buf, lineterminator="\r\n")
    w.writerow([*columns, *header])
    lead_cells = [spreadsheet_text(str(c)) for c in columns.values()]
    for *lead, value, unit in rows:
        shown = (spreadsheet_text(value) if isinstance(value, str)
                 else format(float(value), f".{CSV_DIGITS}g"))
        w.writerow([*lead_cells, *(spreadsheet_text(str(c)) for c in lead), shown,
                    spreadsheet_text(unit)])
    return buf.getvalue()


#: Characters nobody sees or that change how the rest is shown: C0 and C1 controls and DEL,
#: line and paragraph separators, bidirectional embeddings/overrides/isolates, and lone
#: surrogates (how Python holds the bytes of a file name that is not UTF-8).
_INVISIBLE = re.compile("[\x00-\x1f\x7f-\x9f\u2028\u2029\u202a-\u202e\u2066-\u2069"
                        "\ud800-\udfff]")

#: A cell starting with one of these is read as a formula by spreadsheet programs (OWASP,
#: "CSV Injection"). A leading tab or carriage return, which some programs strip first, is
#: already written out as ``\x09`` / ``\x0d`` by :func:`visible_text`.
FORMULA_START = ("=", "+", "-", "@")


def _escape(m: re.Match) -> str:
    c = ord(m.group(0))
    if 0xDC80 <= c <= 0xDCFF:  # a byte of a non-UTF-8 file name: show that byte
        return f"\\x{c - 0xDC00:02x}"
    return f"\\x{c:02x}" if c < 0x100 else f"\\u{c:04x}"


def visible_text(text: str) -> str:
    """``text`` with every invisible or display-changing character written out.

    Controls (tab, line feed and carriage return included) become ``\\xNN``, separators and
    bidirectional controls ``\\uNNNN``, and a byte of a non-UTF-8 file name ``\\xNN`` (that
    byte). The result is one line of printable text that encodes as UTF-8.
    """
    return _INVISIBLE.sub(_escape, text)


def spreadsheet_text(text: str) -> str:
    """User text for a spreadsheet cell (CSV or .xlsx): visible, and never a formula.

    A leading ``= + - @`` gets a single quote in front, so that a
    spreadsheet program shows the text rather than evaluating it (OWASP CSV-injection
    guidance). Only text goes through here: numbers stay numbers.
    """
    text = visible_text(text)
    return "'" + text if text.startswith(FORMULA_START) else text


#: UTF-8 with a byte-order mark: spreadsheet programs then read it as UTF-8 (Ω, °).
CSV_ENCODING = "utf-8-sig"


def csv_bytes(text: str) -> bytes:
    return text.encode(CSV_ENCODING)
