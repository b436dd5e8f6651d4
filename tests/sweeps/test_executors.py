"""Serial, local processes and a Dask cluster give identical datasets; a lost Dask worker
loses nothing."""

import os
import signal

import pytest
import xarray as xr

from gqsim.studies.surveys import run_sweep

from .helpers import small_sweep

AXES = [{"path": "bodies[*].mass_kg", "logarithmic": {"start": 3e-15, "stop": 3e-14, "count": 4}},
        {"path": "timing.hold_s", "values": [2.0, 4.0, 6.0]}]


def _spec():
    return small_sweep(AXES, base_protocol="inline-qubits.toml", execution={"block_points": 1})


@pytest.mark.slow
def test_process_pool_equals_serial(tmp_path):
    spec = _spec()
    serial = run_sweep(spec, tmp_path / "serial.zarr", executor="serial", route="one_by_one")
    pooled = run_sweep(spec, tmp_path / "pool.zarr", executor="processes", workers=2, route="one_by_one")
    xr.testing.assert_identical(serial, pooled)


@pytest.mark.slow
# distributed's LocalCluster start-up/shut-down chatter is not ours: port and resource notices.
@pytest.mark.filterwarnings("ignore::ResourceWarning", "ignore::DeprecationWarning",
                            "ignore::pytest.PytestUnraisableExceptionWarning", "ignore::UserWarning")
def test_dask_cluster_equals_serial_and_survives_a_killed_worker(tmp_path):
    distributed = pytest.importorskip("distributed")
    spec = _spec()
    serial = run_sweep(spec, tmp_path / "serial.zarr", executor="serial", route="one_by_one")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                                  dashboard_address=None) as cluster:
        on_dask = run_sweep(spec, tmp_path / "dask.zarr", executor="dask", route="one_by_one",
                            scheduler_address=cluster.scheduler_address)
        xr.testing.assert_identical(serial, on_dask)

        with distributed.Client(cluster) as client:
            victim = sorted(client.scheduler_info()["workers"])[0]
            pid = client.run(os.getpid, workers=[victim])[victim]

            def kill_once(k):
                if k == 1:  # a worker dies (SIGKILL) with blocks still queued or running on it
                    os.kill(pid, signal.SIGKILL)

            survived = run_sweep(spec, tmp_path / "killed.zarr", executor="dask", route="one_by_one",
                                 scheduler_address=cluster.scheduler_address, after_block=kill_once)
    xr.testing.assert_identical(serial, survived)
