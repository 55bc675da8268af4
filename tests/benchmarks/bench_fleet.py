"""Benchmark: a batch of 200 generated line variations, serial against a 2-process pool.

Run: python tests/benchmarks/bench_fleet.py [N_LINES] [--report] [--repeat K] [--quiet S]
Without --report each line is computed (parameters, reach study, settings, verification) and
its results JSON and register row written; with --report the HTML/PDF report is rendered too.

Both runs use one BLAS thread per process (set here before numpy loads), so the serial run is
the honest single-core baseline of the pool's processes. Other processes on the machine steal
time from both runs, so each figure is printed with the load average and with the CPU that
other processes used during it (from /proc/stat, minus this benchmark's own processes); the
speed-up means something only when that was near zero. ``--quiet S`` waits up to S seconds
before each run for a moment when other processes use less than 0.2 of a core. The parent's
CPU time in the pool run shows the serial work left in the process that collects the results
and writes the register; the CPU of all its processes, against the serial run's, the work the
pool adds (start-up of the workers, messages), whatever the machine's load.
"""

from __future__ import annotations

import os

for _k in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_k, "1")

import shutil  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
import tomllib  # noqa: E402
from pathlib import Path  # noqa: E402

from relayset.fleet.batch import run_batch  # noqa: E402
from relayset.resources import demo_lines_dir  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
from tomlwrite import dump_toml  # noqa: E402


def make_fleet(folder: Path, n: int) -> None:
    """n variations of a demo line: line ID and earth resistivity changed."""
    base = tomllib.loads((demo_lines_dir() / "kessler_oxbow_115kv.toml").read_text("utf-8"))
    for k in range(n):
        d = tomllib.loads(dump_toml(base))
        d["study"]["line_id"] = f"GEN-{k:03d}"
        d["system"]["earth_resistivity"] = f"{50 + 5 * (k % 40)} ohm*m"
        (folder / f"gen_{k:03d}.toml").write_text(dump_toml(d), "utf-8")


def _load() -> str:
    return f"{os.getloadavg()[0]:.2f}"


def _busy_s() -> float:
    """CPU time the whole machine has spent busy since boot [s] (Linux /proc/stat)."""
    with open("/proc/stat") as f:
        user, nice, system, _idle, _iowait, irq, softirq, steal = (
            int(x) for x in f.readline().split()[1:9])
    return (user + nice + system + irq + softirq + steal) / os.sysconf("SC_CLK_TCK")


def _own_s() -> float:
    """CPU time of this process and its reaped children [s]."""
    import multiprocessing

    multiprocessing.active_children()  # reap finished pool workers so their time counts
    t = os.times()
    return t.user + t.system + t.children_user + t.children_system


def wait_quiet(limit_s: float, cores: float = 0.2, window_s: float = 3.0) -> None:
    """Wait (at most ``limit_s``) until other processes use less than ``cores``."""
    end = time.monotonic() + limit_s
    while time.monotonic() < end:
        b0, o0 = _busy_s(), _own_s()
        time.sleep(window_s)
        if (_busy_s() - b0 - (_own_s() - o0)) / window_s < cores:
            return
    print(f"  (other processes kept using the machine for {limit_s:.0f} s; running anyway)")


def _arg(flag: str, default: float) -> float:
    args = sys.argv[1:]
    return float(args[args.index(flag) + 1]) if flag in args else default


def main() -> None:
    args = sys.argv[1:]
    n = int(args[0]) if args and args[0].isdigit() else 200
    report = "--report" in args
    repeat, quiet = int(_arg("--repeat", 1)), _arg("--quiet", 0.0)
    print(f"{n} lines, {'with' if report else 'without'} reports, {os.cpu_count()} cores")
    with tempfile.TemporaryDirectory() as tmp:
        src = Path(tmp) / "lines"
        src.mkdir()
        make_fleet(src, n)
        for k in range(repeat):
            times = {}
            for workers in (1, 2):
                if quiet:
                    wait_quiet(quiet)
                out = Path(tmp) / f"out{workers}_{k}"
                load0, b0, own0 = _load(), _busy_s(), _own_s()
                c0, t0 = time.process_time(), time.perf_counter()
                with open(os.devnull, "w") as null:
                    s = run_batch(src, out, workers=workers, report=report, stream=null)
                times[workers] = wall = time.perf_counter() - t0
                cpu = time.process_time() - c0
                own = _own_s() - own0
                others = (_busy_s() - b0) - own
                assert s.ok and s.computed == n, s.failures[:3]
                print(f"{workers} worker(s): {wall:.1f} s ({wall / n * 1e3:.0f} ms per line), "
                      f"CPU of this process {cpu:.1f} s, of all its processes {own:.1f} s; "
                      f"load average {load0} before, "
                      f"{_load()} after; other processes used {max(others, 0) / wall:.2f} "
                      f"core(s) meanwhile")
                shutil.rmtree(out)
            print(f"speed-up on 2 cores: {times[1] / times[2]:.2f}")


if __name__ == "__main__":
    main()
