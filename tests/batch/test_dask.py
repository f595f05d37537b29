"""The dask.distributed path: a LocalCluster gives the same bytes as -j 1 and -j 2."""

from __future__ import annotations

import os
import sys

import pytest
from tests.support.survey import data_files, make_survey

from irseg.batch import _dask
from irseg.batch import run_survey
from irseg.errors import ConfigError


@pytest.mark.slow
def test_local_cluster_matches_process_runs(tmp_path):
    survey = tmp_path / "survey"
    make_survey(survey, 3)
    run_survey([survey], tmp_path / "j1", jobs=1)
    run_survey([survey], tmp_path / "j2", jobs=2)
    run_survey([survey], tmp_path / "dask", jobs=1, scheduler="local")  # 1 worker, 1 thread
    reference = data_files(tmp_path / "j1")
    assert data_files(tmp_path / "j2") == reference
    assert data_files(tmp_path / "dask") == reference


@pytest.mark.slow
def test_local_cluster_workers_do_not_inherit_the_tiny_trim_threshold():
    # distributed's default pre-spawn environment sets MALLOC_TRIM_THRESHOLD_=65536
    # (distributed.yaml, key distributed.nanny.pre-spawn-environ); irseg removes it.
    import dask

    assert dask.config.get("distributed.nanny.pre-spawn-environ").get("MALLOC_TRIM_THRESHOLD_") is not None
    with _dask.open_client("local", jobs=1) as client:
        seen = client.run(lambda: os.environ.get("MALLOC_TRIM_THRESHOLD_"))
    assert list(seen.values()) == [os.environ.get("MALLOC_TRIM_THRESHOLD_")]
    assert os.environ.get("MALLOC_TRIM_THRESHOLD_") != "65536"


def test_guard_raises_a_tiny_threshold(monkeypatch):
    monkeypatch.setenv("MALLOC_TRIM_THRESHOLD_", "65536")
    expected = sys.platform.startswith("linux")  # glibc mallopt returns 1 on success
    assert _dask.guard_malloc_trim() is expected
    monkeypatch.delenv("MALLOC_TRIM_THRESHOLD_")
    assert _dask.guard_malloc_trim() is False


def test_unreachable_scheduler_is_a_config_error(tmp_path, monkeypatch):
    monkeypatch.setattr(_dask, "_CONNECT_TIMEOUT_S", 0.5)
    survey = tmp_path / "survey"
    make_survey(survey, 1)
    with pytest.raises(ConfigError, match="cannot reach a dask scheduler"):
        run_survey([survey], tmp_path / "out", scheduler="tcp://127.0.0.1:9")


@pytest.mark.slow
def test_joined_cluster_gets_the_per_task_guard_and_same_bytes(tmp_path):
    # A cluster irseg does not start keeps dask's default MALLOC_TRIM_THRESHOLD_=65536
    # (distributed.yaml); each irseg task raises it in its worker with mallopt.
    import distributed

    survey = tmp_path / "survey"
    make_survey(survey, 2)
    run_survey([survey], tmp_path / "j1", jobs=1)
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, dashboard_address=None,
                                  silence_logs=50) as cluster:
        with distributed.Client(cluster) as client:
            env = client.run(lambda: os.environ.get("MALLOC_TRIM_THRESHOLD_"))
            assert list(env.values()) == ["65536"]
            assert list(client.run(_dask.guard_malloc_trim).values()) == [sys.platform.startswith("linux")]
        run_survey([survey], tmp_path / "joined", scheduler=cluster.scheduler_address)
    assert data_files(tmp_path / "joined") == data_files(tmp_path / "j1")
