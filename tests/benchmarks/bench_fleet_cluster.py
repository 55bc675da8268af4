"""Benchmark: the same fleet on the local process pool and on a local Dask cluster, interleaved.

Run: python tests/benchmarks/bench_fleet_cluster.py [N_LINES] [--workers W] [--rounds R]
         [--report | --both] [--trim KEEP|UNSET|65536] [--variant NAME:VAR=VALUE,...]...

Each run is one fresh child process (a cold start, as a user's batch is, and no state carried
from one run into the next: a Dask nanny writes its pre-spawn environment into the process
that starts it). The child computes the fleet with ``run_batch`` on W local pool workers, or
starts a Dask LocalCluster of W worker processes (one thread each, nannies as ``dask worker``
has them) and sends the fleet to it; only ``run_batch`` is timed, the cluster's start-up is
not (a cluster is already running when a user sends a batch to it). Runs alternate pool and
cluster, the first of each pair swapped every round, so that the machine's changing load
falls on both alike; figures are medians over the rounds with the spread (min-max).

Printed per run: the wall time and lines per second, the CPU time the batch cost (the batch
process with the client and scheduler, and the workers: a pool's whole processes, import
included, or each Dask worker's CPU during the batch), and peak memory: the largest worker
(RUSAGE_CHILDREN maxrss inside the child, i.e. the largest process it started, or each Dask
worker's own VmHWM) and the batch process itself.
``--trim`` sets MALLOC_TRIM_THRESHOLD_ in the environment the cluster's nannies start from:
KEEP (default) leaves it as the user's shell has it, UNSET removes it (a Dask configuration
file giving it null, via DASK_CONFIG), a number sets it.
``--variant`` adds a cluster run with more environment variables, e.g.
``--variant dask-keep:RELAYSET_WORKER_ALLOCATOR=keep`` (Dask's allocator default left as it
is: the cluster as it was before relayset retuned it) or
``--variant dask-noprof:DASK_DISTRIBUTED__WORKER__PROFILE__ENABLED=False``.
"""

from __future__ import annotations

import json
import os
import resource
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve()


def _arg(flag: str, default: str) -> str:
    args = sys.argv[1:]
    return args[args.index(flag) + 1] if flag in args else default


def _vmhwm_mb() -> float:
    """Peak resident memory of this process [MB] (Linux /proc)."""
    with open("/proc/self/status") as f:
        for line in f:
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) / 1024
    return float("nan")


def _cpu_s(who: int = resource.RUSAGE_SELF) -> float:
    """CPU time (user + system) of this process, or of its reaped children [s]."""
    r = resource.getrusage(who)
    return r.ru_utime + r.ru_stime


def child(kind: str, src: str, out: str, workers: int, report: bool) -> None:
    """One timed batch in this (fresh) process; prints one JSON line."""
    from relayset.fleet.batch import run_batch

    per_worker: list[float] = []
    with open(os.devnull, "w") as null:
        if kind == "pool":
            c0 = _cpu_s() + _cpu_s(resource.RUSAGE_CHILDREN)
            t0 = time.perf_counter()
            s = run_batch(src, out, workers=workers, report=report, stream=null)
            wall = time.perf_counter() - t0
            cpu = _cpu_s() + _cpu_s(resource.RUSAGE_CHILDREN) - c0  # the pool is reaped
        else:
            import distributed

            with distributed.LocalCluster(n_workers=workers, threads_per_worker=1,
                                          processes=True, dashboard_address=None) as cl, \
                    distributed.Client(cl) as client:
                client.wait_for_workers(workers)
                w0 = sum(client.run(_cpu_s).values())
                c0 = _cpu_s()  # this process: the batch, the client and the scheduler
                t0 = time.perf_counter()
                s = run_batch(src, out, cluster=cl.scheduler_address, report=report,
                              stream=null)
                wall = time.perf_counter() - t0
                cpu = _cpu_s() - c0 + sum(client.run(_cpu_s).values()) - w0
                per_worker = sorted(client.run(_vmhwm_mb).values())
    assert s.ok and s.computed == s.total, s.failures[:3]
    print(json.dumps({"wall": wall, "cpu": cpu, "lines": s.computed, "per_worker": per_worker,
                      "self_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
                      "children_mb": resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
                      / 1024}))


def run_one(kind: str, src: Path, out: Path, workers: int, report: bool, trim: str,
            extra: dict[str, str]) -> dict:
    env = dict(os.environ)
    env.update(extra)
    for k in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        env.setdefault(k, "1")
    if kind.startswith("dask") and trim == "UNSET":
        # a configuration file: a DASK_... variable cannot remove this upper-case key
        env.pop("MALLOC_TRIM_THRESHOLD_", None)
        conf = out.parent / "dask-config"
        conf.mkdir(exist_ok=True)
        (conf / "unset-trim.yaml").write_text(
            "distributed:\n  nanny:\n    pre-spawn-environ:\n"
            "      MALLOC_TRIM_THRESHOLD_: null\n", "utf-8")
        env["DASK_CONFIG"] = str(conf)
    elif kind.startswith("dask") and trim != "KEEP":
        env["MALLOC_TRIM_THRESHOLD_"] = trim
    r = subprocess.run([sys.executable, str(HERE), "--child", kind[:4], str(src), str(out),
                        str(workers), "1" if report else "0"],
                       capture_output=True, text=True, env=env, check=False)
    shutil.rmtree(out, ignore_errors=True)
    if r.returncode != 0:
        raise SystemExit(f"{kind} run failed:\n{r.stderr[-3000:]}")
    return json.loads(r.stdout.strip().splitlines()[-1])


def _stat(xs: list[float], fmt: str = ".2f") -> str:
    return f"{statistics.median(xs):{fmt}} ({min(xs):{fmt}}-{max(xs):{fmt}})"


def main() -> None:
    args = sys.argv[1:]
    if args and args[0] == "--child":
        kind, src, out, workers, report = args[1:6]
        child(kind, src, out, int(workers), report == "1")
        return
    sys.path.insert(0, str(HERE.parent))
    from bench_fleet import make_fleet

    n = int(args[0]) if args and args[0].isdigit() else 32
    workers, rounds = int(_arg("--workers", "2")), int(_arg("--rounds", "3"))
    trim = _arg("--trim", "KEEP")
    modes = [False, True] if "--both" in args else ["--report" in args]
    variants: dict[str, dict[str, str]] = {"pool": {}, "dask": {}}
    for k, a in enumerate(args):
        if a == "--variant":
            name, _, assigns = args[k + 1].partition(":")
            if not name.startswith("dask"):
                raise SystemExit("a variant's name starts with dask (it runs on the cluster)")
            variants[name] = dict(x.split("=", 1) for x in assigns.split(",") if x)
    print(f"{n} lines, {workers} workers, {rounds} rounds, {os.cpu_count()} cores, "
          f"cluster MALLOC_TRIM_THRESHOLD_: {trim}; load average {os.getloadavg()[0]:.2f}")
    with tempfile.TemporaryDirectory() as tmp:
        src = Path(tmp) / "lines"
        src.mkdir()
        make_fleet(src, n)
        for report in modes:
            res: dict[str, list[dict]] = {kind: [] for kind in variants}
            kinds = list(variants)
            for k in range(rounds):
                order = kinds[k % len(kinds):] + kinds[:k % len(kinds)]  # rotate the start
                if k % 2:
                    order.reverse()
                for kind in order:
                    d = run_one(kind, src, Path(tmp) / "out", workers, report, trim,
                                variants[kind])
                    res[kind].append(d)
                    worker_mb = max(d["per_worker"] or [d["children_mb"]])
                    print(f"  {'reports' if report else 'no reports'} round {k + 1} {kind}: "
                          f"{d['wall']:.1f} s, {d['lines'] / d['wall']:.2f} lines/s, CPU "
                          f"{d['cpu']:.1f} s, peak worker {worker_mb:.0f} MB, batch "
                          f"process {d['self_mb']:.0f} MB; load {os.getloadavg()[0]:.2f}")
            tput = {k: [d["lines"] / d["wall"] for d in v] for k, v in res.items()}
            print(f"{'with' if report else 'without'} reports, median (min-max) of {rounds}:")
            for kind in kinds:
                ds = res[kind]
                print(f"  {kind}: {_stat(tput[kind])} lines/s, CPU "
                      f"{_stat([d['cpu'] for d in ds], '.1f')} s, peak worker "
                      f"{_stat([max(d['per_worker'] or [d['children_mb']]) for d in ds], '.0f')}"
                      f" MB, batch process {_stat([d['self_mb'] for d in ds], '.0f')} MB")
            for kind in kinds[1:]:
                ratio = [d / p for p, d in zip(tput["pool"], tput[kind], strict=True)]
                cpu = [p["cpu"] / d["cpu"] for p, d in zip(res["pool"], res[kind],
                                                           strict=True)]
                print(f"  {kind}/pool, per round: throughput {_stat(ratio)}, "
                      f"pool CPU / {kind} CPU {_stat(cpu)}")


if __name__ == "__main__":
    main()
