"""A batch sent to a Dask distributed cluster that the test starts itself (two local worker
processes) gives the same results as a serial run."""

from __future__ import annotations

import shutil

import pytest

from relayset.errors import InputError
from relayset.fleet.batch import run_batch
from relayset.resources import demo_lines_dir

distributed = pytest.importorskip("distributed", reason="the cluster extra is not installed")

NAMES = ("kessler_oxbow_115kv.toml", "elsford_fallowby_230kv_double.toml")


def test_batch_on_a_local_dask_cluster(tmp_path):
    src = tmp_path / "lines"
    src.mkdir()
    for n in NAMES:
        shutil.copy(demo_lines_dir() / n, src / n)
    shutil.copytree(demo_lines_dir() / "philosophies", src / "philosophies")
    (src / "broken.toml").write_text('schema = "relayset-study/1"\n[study]\nline_id = 3\n')
    serial = run_batch(src, tmp_path / "serial", workers=1, report=False)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=None) as cluster:
        dist = run_batch(src, tmp_path / "dask", cluster=cluster.scheduler_address,
                         report=False)
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
