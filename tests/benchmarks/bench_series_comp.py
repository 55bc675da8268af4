"""Speed of a series-compensated line's settings with verification (issue 21, item 6).

The whole ``relayset settings`` process on the invented series-compensated demo
(demo_lines/tarrow_hithe_400kv_series_comp.toml: relays at both ends, one mid-line bank,
three capacitor states as an extra axis of the reach study and the verification). Target:
within 3 s of CPU per whole process (CPU of the child process, user + system: the machine
may be shared). Also the same line without its bank, for the cost of the capacitor axis.
Run on demand, single-threaded BLAS::

    OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1 python tests/benchmarks/bench_series_comp.py
"""

from __future__ import annotations

import os
import resource
import subprocess
import sys
import tempfile
import tomllib
from pathlib import Path

from relayset.resources import demo_lines_dir

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
from tomlwrite import dump_toml

TARGET_PROCESS_S = 3.0
DEMO = "tarrow_hithe_400kv_series_comp.toml"


def _child_cpu(path: Path) -> float:
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    subprocess.run([sys.executable, "-m", "relayset.cli", "settings", str(path)], check=False,
                   stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                   env=dict(os.environ, OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1"))
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def main() -> None:
    demo = demo_lines_dir() / DEMO
    with tempfile.TemporaryDirectory() as tmp:
        d = tomllib.loads(demo.read_text("utf-8"))
        d["study"]["philosophy"] = str(demo_lines_dir() / d["study"]["philosophy"])
        d.pop("series_capacitors")
        plain = Path(tmp) / "no_bank.toml"
        plain.write_text(dump_toml(d), "utf-8")
        for label, path in (("with its bank", demo), ("without the bank", plain)):
            cpu = min(_child_cpu(path) for _ in range(3))
            flag = "" if label != "with its bank" else (
                "  OK" if cpu <= TARGET_PROCESS_S else f"  ABOVE the {TARGET_PROCESS_S} s target")
            print(f"relayset settings, series-compensated demo {label}: {cpu:.2f} s CPU "
                  f"(best of 3){flag}")


if __name__ == "__main__":
    main()
