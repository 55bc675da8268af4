"""Benchmark: the calculation report, whole process (start-up, compute, HTML, PDF/A, write).

Run: OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1 python tests/benchmarks/bench_report.py [RUNS]
Targets (issue 11): one report < 2 s; a 10-line batch < 12 s. Timings vary with the
machine's load: compare figures taken in one run (best of RUNS, default 3).

Also prints where one report's time goes, each step in a fresh process: importing the study
modules, computing the study, the presentation context with the figures and the HTML,
importing WeasyPrint, and the PDF rendering. In the command the WeasyPrint import runs in a
forked helper while the study computes, so the whole process takes less than the sum.

Figures (2 cores, load about 1, best / median of 5-7 whole processes):

=====================================  ===========  ===========  ===========  ===========
one report                             132 kV       230 kV 2-c   400 kV       115 kV
=====================================  ===========  ===========  ===========  ===========
before (the previous release)          2.02 / 2.08  2.19 / 2.30  2.07 / 2.08  2.00 / 2.06
WeasyPrint imported via loader cache   1.58 / 1.63  2.03 / 2.22  1.74 / 1.82  1.61 / 1.72
+ repeats folded, comparisons values   1.46 / 1.56  1.88 / 1.91  1.66 / 1.74  1.40 / 1.46
+ input layer without pydantic, fonts  1.50 / 1.65  1.97 / 2.04  1.57 / 1.63  1.47 / 1.57
=====================================  ===========  ===========  ===========  ===========

(the last row's machine was slower: its WeasyPrint import step took 0.32-0.45 s against
0.35-0.41 s in the row above). 10-line batch: 12.6 s before, 8.2-8.7 s after. Where the time
goes now (230 kV): start-up and imports 0.1 s, the study 0.3 s (verification of the double
circuit), HTML 0.05 s, then the PDF 1.3 s (layout about two thirds, painting and fonts the
rest); the helper has WeasyPrint imported (0.3 s with the loader-cache lookup instead of
0.55-0.65 s) before the HTML is ready. Instruction counts (cachegrind, WeasyPrint alone on the
saved HTML, load-independent): 132 kV 10.20e9 -> 9.74e9, 230 kV 11.38e9 -> 11.06e9.
"""

from __future__ import annotations

import subprocess
import sys
import tempfile
import time
import tomllib
from pathlib import Path

from relayset.resources import demo_lines_dir, demo_studies

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from tomlwrite import dump_toml

STEPS = r"""
import sys, time, datetime as dt
t0 = time.perf_counter()
from relayset.api import study_settings
t1 = time.perf_counter()
res = study_settings(sys.argv[1])
t2 = time.perf_counter()
from relayset import io
from relayset.report import context, html
rj = io.to_json(res.to_dict())
ctx = context.build_context(res, units="si", paper="a4", environ={}, results_json=rj)
doc = html.render_html(ctx, open(sys.argv[1], encoding="utf-8").read())
t3 = time.perf_counter()
import weasyprint
from relayset.report import pdf
t4 = time.perf_counter()
pdf.html_to_pdf(doc, [], dt.datetime(2026, 1, 1, tzinfo=dt.UTC))
t5 = time.perf_counter()
print(t1 - t0, t2 - t1, t3 - t2, t4 - t3, t5 - t4)
"""


def _run(args: list[str]) -> float:
    t0 = time.perf_counter()
    subprocess.run([sys.executable, "-m", "relayset.cli", "report", *args], check=True,
                   capture_output=True)
    return time.perf_counter() - t0


def _steps(path: Path, runs: int) -> list[float]:
    best = None
    for _ in range(runs):
        out = subprocess.run([sys.executable, "-c", STEPS, str(path)], check=True,
                             capture_output=True, text=True).stdout.split()
        t = [float(x) for x in out]
        best = t if best is None or sum(t) < sum(best) else best
    return best


def _ten_lines(folder: Path) -> list[str]:
    """Ten studies: the demo lines under new line IDs (same physics, distinct reports)."""
    paths = []
    demos = demo_studies()
    for k in range(10):
        src = demos[k % len(demos)]
        data = tomllib.loads(src.read_text("utf-8"))
        data["study"]["line_id"] += f"-{k}"
        phil = data["study"].get("philosophy", "default")
        if phil != "default":
            data["study"]["philosophy"] = str(demo_lines_dir() / phil)
        out = folder / f"line{k}.toml"
        out.write_text(dump_toml(data), "utf-8")
        paths.append(str(out))
    return paths


def main() -> None:
    runs = int(sys.argv[1]) if len(sys.argv) > 1 else 3
    with tempfile.TemporaryDirectory() as tmp:
        tmp_p = Path(tmp)
        for src in demo_studies():
            t = sorted(_run([str(src), "-o", str(tmp_p / "one")]) for _ in range(runs))
            print(f"{src.name:40s} one report: best {t[0]:5.2f} s, "
                  f"median {t[len(t) // 2]:5.2f} s (whole process)")
        print("steps (s): import study modules, compute, context+figures+HTML, "
              "import WeasyPrint, PDF")
        for src in demo_studies():
            s = _steps(src, runs)
            print(f"  {src.name:38s} " + "  ".join(f"{x:5.2f}" for x in s))
        batch = _ten_lines(tmp_p)
        t = [_run([*batch, "-o", str(tmp_p / "batch")]) for _ in range(max(2, runs - 1))]
        print(f"10-line batch: best {min(t):5.2f} s (whole process, "
              f"{len(list((tmp_p / 'batch').glob('*.pdf')))} PDFs)")


if __name__ == "__main__":
    main()
