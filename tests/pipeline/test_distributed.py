"""The demo recipe on a real dask.distributed LocalCluster of two worker processes gives exactly
the threaded run's outputs (reads and writes happen on the workers)."""

from __future__ import annotations

import numpy as np
import pytest
import rasterio
from click.testing import CliRunner

from rasterbudget.cli import main
from tests.conftest import DEMO_RECIPE

distributed = pytest.importorskip("distributed")


def test_two_worker_processes_write_what_the_threaded_run_writes(tmp_path, demo_run):
    out = tmp_path / "out"
    with distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None
    ) as cluster:
        result = CliRunner().invoke(
            main,
            [
                "run",
                str(DEMO_RECIPE),
                "--out",
                str(out),
                "--quiet",
                "--scheduler",
                cluster.scheduler_address,
            ],
        )
    assert result.exit_code == 0, result.output
    threaded = sorted(demo_run.glob("*/*.tif"))
    assert len(threaded) >= 16
    for path in threaded:
        other = out / path.relative_to(demo_run)
        with rasterio.open(path) as a, rasterio.open(other) as b:
            assert {k: repr(v) for k, v in a.profile.items()} == {
                k: repr(v) for k, v in b.profile.items()
            }, path.name
            np.testing.assert_array_equal(a.read(), b.read(), err_msg=str(path))
    assert not list(out.rglob("*.partial"))


def test_scheduler_and_workers_exclude_each_other(tmp_path):
    result = CliRunner().invoke(
        main, ["run", str(DEMO_RECIPE), "--scheduler", "tcp://x:1", "--workers", "2"]
    )
    assert result.exit_code != 0 and "not both" in result.output


def test_unreachable_scheduler_is_named(tmp_path):
    import dask

    with dask.config.set({"distributed.comm.timeouts.connect": "1s"}):
        result = CliRunner().invoke(
            main,
            ["run", str(DEMO_RECIPE), "--out", str(tmp_path), "--scheduler", "tcp://127.0.0.1:9"],
        )
    assert result.exit_code != 0
    assert "tcp://127.0.0.1:9" in result.output and "scheduler" in result.output
