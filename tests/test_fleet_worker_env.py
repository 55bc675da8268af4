"""A Dask worker's allocator: Dask's default trim threshold is retuned by relayset, a value
the user set is left alone, and RELAYSET_WORKER_ALLOCATOR=keep turns the retuning off."""

from __future__ import annotations

import os
import subprocess
import sys

import pytest

from relayset.fleet.worker import ALLOCATOR_ENV, allocator_retune

DASK = "65536"  # Dask's nanny default, distributed.yaml: nanny.pre-spawn-environ


@pytest.mark.parametrize(("environ", "dask_value", "retune"), [
    ({"MALLOC_TRIM_THRESHOLD_": DASK}, 65536, True),  # Dask's default: retuned
    ({"MALLOC_TRIM_THRESHOLD_": DASK}, DASK, True),
    ({}, 65536, False),  # not set (glibc adapts its thresholds itself)
    ({"MALLOC_TRIM_THRESHOLD_": "131072"}, 65536, False),  # the user's own value
    ({"MALLOC_TRIM_THRESHOLD_": "0"}, 65536, False),
    ({"MALLOC_TRIM_THRESHOLD_": DASK}, None, False),  # config unset: the shell's value
    ({"MALLOC_TRIM_THRESHOLD_": DASK}, 131072, False),  # env wins over another config value
    ({"MALLOC_TRIM_THRESHOLD_": DASK, ALLOCATOR_ENV: "keep"}, 65536, False),  # opted out
    ({"MALLOC_TRIM_THRESHOLD_": DASK, ALLOCATOR_ENV: " Keep "}, 65536, False),
    ({"MALLOC_TRIM_THRESHOLD_": DASK, ALLOCATOR_ENV: ""}, 65536, True),
])
def test_only_dasks_default_is_retuned(environ, dask_value, retune):
    # Rule of this project (README, cluster section): relayset changes the allocator of a
    # worker only where Dask's nanny put its default there, never a value of the user's.
    assert allocator_retune(environ, dask_value) is retune


# Frees four 1 MiB blocks and allocates them again; prints how many new memory mappings
# that took. glibc mallopt(3): blocks above the mmap threshold are mapped one by one; the
# threshold adapts upwards after such a block is freed, unless M_TRIM_THRESHOLD or
# M_MMAP_THRESHOLD was set (MALLOC_TRIM_THRESHOLD_ in the environment sets it), in which case
# it stays 128 KiB: the cost Dask's default puts on every larger numpy array.
PROBE = r"""
import ctypes, os, re, sys, tempfile
from relayset.fleet.worker import tune_cluster_allocator
tuned = tune_cluster_allocator()
libc = ctypes.CDLL(None)
libc.malloc.restype = ctypes.c_void_p
libc.fopen.restype = ctypes.c_void_p
def mapped():
    fd, path = tempfile.mkstemp(); os.close(fd)
    f = libc.fopen(path.encode(), b"w")
    libc.malloc_info(0, ctypes.c_void_p(f)); libc.fclose(ctypes.c_void_p(f))
    with open(path) as fh:
        xml = fh.read()
    os.unlink(path)
    return int(re.search(r'<total type="mmap" count="(\d+)"', xml).group(1))
blocks = [libc.malloc(1 << 20) for _ in range(4)]
for b in blocks:
    libc.free(ctypes.c_void_p(b))
before = mapped()
blocks = [libc.malloc(1 << 20) for _ in range(4)]
print(tuned, mapped() - before)
"""


def _probe(extra: dict[str, str]) -> tuple[str, int]:
    env = {k: v for k, v in os.environ.items()
           if k not in ("MALLOC_TRIM_THRESHOLD_", ALLOCATOR_ENV)
           and not k.startswith("DASK_DISTRIBUTED__NANNY")}
    out = subprocess.run([sys.executable, "-c", PROBE], env={**env, **extra}, check=True,
                         capture_output=True, text=True).stdout.split()
    return out[0], int(out[1])


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="glibc allocator")
def test_retuned_worker_reuses_freed_memory_instead_of_mapping_it_again():
    pytest.importorskip("distributed", reason="the cluster extra is not installed")
    if "glibc" not in " ".join(os.confstr("CS_GNU_LIBC_VERSION").split()[:1]).lower():
        pytest.skip("not glibc")
    # Dask's default in the environment: mapped again each time, unless retuned.
    assert _probe({"MALLOC_TRIM_THRESHOLD_": DASK}) == ("True", 0)
    assert _probe({"MALLOC_TRIM_THRESHOLD_": DASK, ALLOCATOR_ENV: "keep"}) == ("False", 4)
    # The user's own value is theirs: left as it is (and it maps each block, as it says).
    assert _probe({"MALLOC_TRIM_THRESHOLD_": "65537"}) == ("False", 4)
    # Nothing set: glibc adapts by itself, nothing to do.
    assert _probe({}) == ("False", 0)


def test_a_cluster_line_runs_outside_the_task_thread(monkeypatch):
    # Dask's worker profiler samples only the threads running tasks
    # (distributed/worker.py, Worker.trigger_profile: active_threads), so the line must run
    # in another thread while the task thread waits; its result and errors come back.
    import threading

    from relayset.fleet import worker

    task_thread = threading.get_ident()
    seen = {}

    def fake_line(index, study_path, stem, report, parent):
        seen["thread"] = threading.get_ident()
        if index < 0:
            raise ValueError("bad line")
        return (index, study_path, stem, report)

    monkeypatch.setattr(worker, "compute_line", fake_line)
    monkeypatch.setattr(worker, "_prepare_cluster_worker", lambda report: None)
    assert worker.compute_line_on_cluster(3, "a.toml", "a", False) == (3, "a.toml", "a", False)
    assert seen["thread"] != task_thread
    with pytest.raises(ValueError, match="bad line"):
        worker.compute_line_on_cluster(-1, "a.toml", "a", False)
