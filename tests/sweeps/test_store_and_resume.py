"""Storage that loses nothing: interrupted sweeps keep finished points and resume to the same
dataset; save -> load -> equal; netCDF export on request."""

import json
import os
import signal
import subprocess
import sys
import time

import pytest
import xarray as xr
import zarr

from gqsim.studies.surveys import export_netcdf, open_sweep, run_sweep
from gqsim.studies.surveys.storage import DONE, PENDING, SweepStore, chunk_shape

from .helpers import PROTOCOLS, small_sweep

AXES = [{"path": "bodies[*].mass_kg", "logarithmic": {"start": 3e-15, "stop": 3e-14, "count": 6}},
        {"path": "bodies[*].dephasing.rate_per_s", "linear": {"start": 0.0, "stop": 0.2, "count": 5}}]


class Interrupted(Exception):
    """Stands for Ctrl-C arriving after a given number of written blocks."""


def _interrupt_after(limit, seen):
    def hook(k):
        seen.append(k)
        if k == limit:
            raise Interrupted
    return hook


@pytest.mark.parametrize("route", ["batched", "one_by_one"])
def test_interrupted_sweep_resumes_to_the_uninterrupted_dataset(tmp_path, route):
    spec = small_sweep(AXES, execution={"block_points": 4})
    reference = run_sweep(spec, tmp_path / "whole.zarr", executor="serial", route=route)
    n_blocks = len(SweepStore(tmp_path / "whole.zarr").blocks())
    assert n_blocks == 12  # 6 x 5 grid in chunks of (1, 4) and (1, 1): 6 * 2 blocks

    store = tmp_path / "cut.zarr"
    first = []
    with pytest.raises(Interrupted):
        run_sweep(spec, store, executor="serial", route=route, after_block=_interrupt_after(5, first))
    handle = SweepStore(store)
    kept = handle.group["status"][...].copy()
    assert (kept == DONE).sum() > 0 and (kept == PENDING).sum() > 0
    assert len(handle.pending_blocks()) == n_blocks - 5

    second = []
    resumed = run_sweep(spec, store, executor="serial", route=route, after_block=second.append)
    assert len(second) == n_blocks - 5  # only the missing blocks were computed
    xr.testing.assert_identical(resumed, reference)
    # a third call finds nothing to do
    third = []
    run_sweep(spec, store, executor="serial", route=route, after_block=third.append)
    assert third == []


def test_block_written_without_status_is_recomputed(tmp_path):
    """A kill between the figures and the status of a block leaves it pending (status written last)."""
    spec = small_sweep(AXES, execution={"block_points": 5})
    reference = run_sweep(spec, tmp_path / "whole.zarr", executor="serial")
    store = tmp_path / "torn.zarr"
    run_sweep(spec, store, executor="serial")
    group = zarr.open_group(str(store), mode="r+", zarr_format=2)
    group["status"][2:4, :] = PENDING  # as if the process died before writing these statuses
    group["max_log_negativity"][2:4, :] = -123.0  # and half-written figures
    resumed = run_sweep(spec, store, executor="serial")
    xr.testing.assert_identical(resumed, reference)


def test_save_load_equal_and_netcdf_export(tmp_path):
    spec = small_sweep(AXES)
    ds = run_sweep(spec, tmp_path / "s.zarr", executor="serial")
    again = open_sweep(tmp_path / "s.zarr")
    xr.testing.assert_identical(ds, again)
    target = export_netcdf(tmp_path / "s.zarr", tmp_path / "s.nc")
    with xr.open_dataset(target, engine="netcdf4") as nc:
        xr.testing.assert_identical(nc.load(), ds)
    attrs = ds.attrs
    assert json.loads(attrs["sweep_definition"])["axes"][0]["path"] == "bodies[*].mass_kg"
    assert json.loads(attrs["base_protocol"])["family"] == "superposition"
    assert {"gqsim", "numpy", "xarray", "zarr"} <= set(json.loads(attrs["package_versions"]))
    assert ds["mass_kg"].attrs["spacing"] == "logarithmic"


def test_chunk_shape_keeps_trailing_axes_whole():
    assert chunk_shape((41, 51), 512) == (10, 51)
    assert chunk_shape((6, 5), 4) == (1, 4)
    assert chunk_shape((3, 4, 5), 1000) == (3, 4, 5)
    assert chunk_shape((7,), 1) == (1,)


@pytest.mark.slow
def test_sigkill_during_cli_run_then_resume(tmp_path):
    """SIGKILL the command mid-sweep; the same command completes it with the same numbers."""
    sweep = tmp_path / "sweep-kill.toml"
    sweep.write_text(
        f'sweep_version = 1\nbase_protocol = "{PROTOCOLS / "inline-qubits.toml"}"\n'
        '[[axes]]\npath = "bodies[*].mass_kg"\nlogarithmic = { start = 3e-15, stop = 3e-14, count = 12 }\n'
        '[[axes]]\npath = "timing.hold_s"\nlinear = { start = 1.0, stop = 6.0, count = 10 }\n'
        '[execution]\nroute = "one_by_one"\nexecutor = "serial"\nblock_points = 4\n')
    store = tmp_path / "kill.zarr"
    cmd = [sys.executable, "-m", "gqsim.cli", "scan", "run", str(sweep), "--store", str(store), "--quiet"]
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        deadline = time.monotonic() + 120
        while time.monotonic() < deadline:
            time.sleep(0.05)
            if (store / "status" / ".zarray").exists():
                status = zarr.open_group(str(store), mode="r", zarr_format=2)["status"][...]
                if (status == DONE).sum() >= 8:
                    break
        os.kill(proc.pid, signal.SIGKILL)
    finally:
        proc.wait(timeout=30)
    assert proc.returncode == -signal.SIGKILL
    status = zarr.open_group(str(store), mode="r", zarr_format=2)["status"][...]
    assert 0 < (status == DONE).sum() < status.size, "the kill must land mid-sweep"
    done = subprocess.run(cmd, capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    whole = tmp_path / "whole.zarr"
    subprocess.run([*cmd[:5], str(sweep), "--store", str(whole), "--quiet"], check=True, timeout=300,
                   capture_output=True)
    xr.testing.assert_identical(open_sweep(store), open_sweep(whole))
