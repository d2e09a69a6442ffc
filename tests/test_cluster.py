"""Fits on a Dask distributed cluster (issue 16): the values equal the local run's exactly, only the client
writes the project, and the core loads no Dask unless a scheduler is named."""
from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from data_samples.demo_town import write_project
from helpers import copy_project, query_frame
from reval.errors import UserError
from reval.service.actions import fit, import_data, prepare_sales

VALUES = "SELECT {columns} FROM {table} WHERE run_id = (SELECT max(run_id) FROM runs) ORDER BY ALL"


@pytest.fixture(scope="module")
def prepared(tmp_path_factory: pytest.TempPathFactory) -> Path:
    folder = tmp_path_factory.mktemp("cluster") / "town"
    write_project(folder, n_parcels=2_000, seed=11)
    import_data(folder)
    prepare_sales(folder)
    return folder


def test_fits_on_a_local_dask_cluster_equal_the_local_run_exactly(prepared: Path, tmp_path: Path) -> None:
    from dask.distributed import LocalCluster

    local, remote = copy_project(prepared, tmp_path / "local"), copy_project(prepared, tmp_path / "remote")
    fit(local, jobs=1)
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                      dashboard_address=None) as cluster:
        fit(remote, scheduler=cluster.scheduler_address)
    for table, columns in (("sale_predictions", "sale_id, parcel_id, insample_log, oof_log"),
                           ("parcel_estimates", "parcel_id, log_value")):
        a = query_frame(local, VALUES.format(columns=columns, table=table))
        b = query_frame(remote, VALUES.format(columns=columns, table=table))
        assert len(a) > 0 and a.equals(b), table
    settings = query_frame(remote, "SELECT settings FROM runs")["settings"][0]
    assert "tcp://127.0.0.1" in settings   # the run says where it was fitted
    assert np.isfinite(a["log_value"]).all()


def test_an_unreachable_scheduler_is_a_user_error_and_nothing_is_stored(prepared: Path, tmp_path: Path,
                                                                        monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr("reval.model.workers.CONNECT_SECONDS", 1)
    folder = copy_project(prepared, tmp_path / "p")
    with pytest.raises(UserError, match="Cannot reach the Dask scheduler at tcp://127.0.0.1:9"):
        fit(folder, scheduler="tcp://127.0.0.1:9")
    assert query_frame(folder, "SELECT count(*) AS n FROM runs")["n"][0] == 0


def test_the_core_loads_no_dask_unless_a_scheduler_is_named() -> None:
    code = ("import sys, reval.cli.main, reval.model.run, reval.model.hierarchy, reval.service.actions; "
            "print(sorted(m for m in sys.modules if m.split('.')[0] in ('dask', 'distributed')))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"
