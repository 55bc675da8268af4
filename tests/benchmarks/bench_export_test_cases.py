"""Speed of the test points and COMTRADE cases of a line (issue 20).

For every demo line, warm, on one core (CPU time, not wall time: the machine may be shared):

1. forming every COMTRADE case of the line (test shots and governing cases; 4 kHz, 0.5 s
   or longer where a zone's delay needs it): target within 1 s of CPU;
2. the whole ``export_test_cases`` (test points CSV + JSON and every .cfg/.dat written
   atomically into a temporary folder): reported beside it;
3. what ``relayset export`` adds to ``relayset settings`` (the setting files, test points
   and COMTRADE cases formed from the computed results, governing cases solved again):
   target within 1 s of CPU.

Run on demand, single-threaded BLAS::

    OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1 python tests/benchmarks/bench_export_test_cases.py
"""

from __future__ import annotations

import tempfile
import time
from pathlib import Path

from relayset import api
from relayset.export import comtrade, setting_file, testshots
from relayset.resources import demo_lines_dir


def _cpu(fn, rounds: int = 5) -> float:
    best = float("inf")
    for _ in range(rounds):
        t = time.process_time()
        fn()
        best = min(best, time.process_time() - t)
    return best


def main() -> None:
    for path in sorted(demo_lines_dir().glob("*.toml")):
        r = api.study_settings(path)

        def form(r=r):
            n = 0
            for s, b in zip(r.settings, testshots.end_bases(r), strict=True):
                cases = (comtrade.shot_cases(testshots.test_shots(s, b), b)
                         + comtrade.governing_cases(r, s, b))
                files = comtrade.render(cases, b)
                n += len(cases)
                assert len(files) == 2 * len(cases)
            return n

        n_cases = form()
        t_form = _cpu(form)
        with tempfile.TemporaryDirectory() as tmp:
            t_all = _cpu(lambda r=r, tmp=tmp: testshots.export_test_cases(r, Path(tmp)))
        t_beyond = _cpu(lambda r=r: (setting_file.setting_files(r) if r.settings[0].settable
                                     else None,
                                     testshots.shot_and_case_files(r, Path("unused"))))
        print(f"{path.stem:34s} {n_cases:4d} cases  COMTRADE formed {t_form * 1e3:7.1f} ms CPU"
              f"  (target < 1000 ms)   whole export {t_all * 1e3:7.1f} ms CPU   export "
              f"beyond settings {t_beyond * 1e3:7.1f} ms CPU (target < 1000 ms)")


if __name__ == "__main__":
    main()
