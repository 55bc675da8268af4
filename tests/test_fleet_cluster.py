"""A batch sent to a Dask distributed cluster that the test starts itself (two local worker
processes) gives the same results as a serial run."""

from __future__ import annotations

import os
import shutil

import pytest

from relayset.errors import InputError
from relayset.fleet.batch import run_batch
from relayset.fleet.worker import tune_cluster_allocator
from relayset.resources import demo_lines_dir

distributed = pytest.importorskip("distributed", reason="the cluster extra is not installed")

NAMES = ("kessler_oxbow_115kv.toml", "elsford_fallowby_230kv_double.toml")


@pytest.fixture(autouse=True)
def _own_environment():
    """A nanny writes its pre-spawn environment (MALLOC_TRIM_THRESHOLD_, thread limits) into
    the process that starts it: give the other tests their environment back."""
    saved = dict(os.environ)
    yield
    os.environ.clear()
    os.environ.update(saved)


def test_batch_on_a_local_dask_cluster(tmp_path, monkeypatch):
    src = tmp_path / "lines"
    src.mkdir()
    for n in NAMES:
        shutil.copy(demo_lines_dir() / n, src / n)
    shutil.copytree(demo_lines_dir() / "philosophies", src / "philosophies")
    (src / "broken.toml").write_text('schema = "relayset-study/1"\n[study]\nline_id = 3\n')
    serial = run_batch(src, tmp_path / "serial", workers=1, report=False)
    monkeypatch.delenv("MALLOC_TRIM_THRESHOLD_", raising=False)  # Dask's default applies
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=None) as cluster, \
            distributed.Client(cluster) as client:
        dist = run_batch(src, tmp_path / "dask", cluster=cluster.scheduler_address,
                         report=False)
        # the workers that computed a line prepared themselves (once: a cached answer),
        # found Dask's allocator default and retuned it; none holds a result any more
        state = client.run(lambda dask_worker: (
            tune_cluster_allocator.cache_info().currsize, len(dask_worker.data)))
        tuned = client.run(tune_cluster_allocator)
    worked = [a for a, (prepared, _) in state.items() if prepared]
    assert worked and all(tuned[a] for a in worked)
    assert sum(held for _, held in state.values()) == 0
    assert dist.computed == 2 and len(dist.failures) == 1
    assert "broken.toml" in dist.failures[0][1]
    assert dist.rows == serial.rows
    for n in ("NM-EF-2C_revA.json", "PR-KO-115_rev0.json"):
        assert (tmp_path / "dask" / n).read_bytes() == (tmp_path / "serial" / n).read_bytes()


def test_unreachable_scheduler_is_one_line(tmp_path):
    src = tmp_path / "lines"
    src.mkdir()
    shutil.copy(demo_lines_dir() / NAMES[0], src / NAMES[0])
    with pytest.raises(InputError, match="--cluster"):
        run_batch(src, tmp_path / "out", cluster="tcp://127.0.0.1:9", report=False)
    assert not (tmp_path / "out").exists()
