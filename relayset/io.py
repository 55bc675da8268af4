"""Output files: written atomically (temporary file in the same folder, then renamed)."""

from __future__ import annotations

import json
import math
import os
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


def write_atomic(path: str | Path, data: str | bytes) -> None:
    """Write a file so that readers see either the old file or the whole new one."""
    target = Path(path)
    target.parent.mkdir(parents=True, exist_ok=True)
    mode = "wb" if isinstance(data, bytes) else "w"
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", dir=target.parent)
    try:
        with os.fdopen(fd, mode, **({} if mode == "wb" else {"encoding": "utf-8"})) as fh:
            fh.write(data)
        os.replace(tmp, target)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def to_json(obj: dict) -> str:
    """The JSON text of a results dictionary (strict JSON: no NaN)."""
    return json.dumps(_clean(obj), indent=2, allow_nan=False) + "\n"


def write_json(path: str | Path, obj: dict) -> None:
    write_atomic(path, to_json(obj))


def rows_to_csv(rows, header=("setting", "value", "unit")) -> str:
    """CSV text of rows ending in (name, value, unit), with a header line."""
    import csv
    import io as _io

    buf = _io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(list(header))
    for *lead, value, unit in rows:
        w.writerow([*lead, value if isinstance(value, str) else repr(float(value)), unit])
    return buf.getvalue()
