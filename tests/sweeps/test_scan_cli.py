"""The ``gqsim scan`` command: run (with the bundled sweep and its threshold table), status,
export, map, and one-line errors with exit status 2."""

import json

import pytest
import xarray as xr
from click.testing import CliRunner

from gqsim.cli import COMMAND_MODULES, cli

from .helpers import PROTOCOLS

BUNDLED = PROTOCOLS / "sweep-hollowmere-mass-dephasing.toml"


def test_scan_is_registered():
    assert "gqsim.cli.survey:scan_group" in COMMAND_MODULES
    assert {"run", "status", "export", "threshold", "map"} <= set(cli.commands["scan"].commands)


def test_bundled_sweep_end_to_end(tmp_path):
    runner = CliRunner()
    store = tmp_path / "map.zarr"
    out = runner.invoke(cli, ["scan", "run", str(BUNDLED), "--store", str(store), "--executor", "serial",
                              "--quiet", "--netcdf", str(tmp_path / "map.nc")])
    assert out.exit_code == 0, out.output
    assert "done 2091, failed 0, pending 0" in out.output
    assert "route batched" in out.output
    assert "mass_kg where min_pt_eigenvalue = 0" in out.output
    assert "netCDF written" in out.output
    with xr.open_dataset(tmp_path / "map.nc", engine="netcdf4") as nc:
        assert dict(nc.sizes) == {"mass_kg": 41, "dephasing_per_s": 51}
    again = runner.invoke(cli, ["scan", "run", str(BUNDLED), "--store", str(store), "--executor", "serial",
                                "--quiet"])
    assert again.exit_code == 0 and "done 2091" in again.output
    status = runner.invoke(cli, ["scan", "status", str(store)])
    assert status.exit_code == 0 and "pending 0" in status.output
    solved = runner.invoke(cli, ["scan", "threshold", str(store), "--axis", "mass_kg", "--json"])
    assert solved.exit_code == 0, solved.output
    roots = json.loads(solved.output)
    assert roots["attrs"]["figure"] == "min_pt_eigenvalue"
    drawn = runner.invoke(cli, ["scan", "map", str(store), "--out", str(tmp_path / "map.png"),
                                "--x", "dephasing_per_s", "--y", "mass_kg"])
    assert drawn.exit_code == 0, drawn.output
    assert (tmp_path / "map.png").stat().st_size > 1000


def test_user_mistakes_are_one_line_exit_2(tmp_path):
    runner = CliRunner()
    bad = tmp_path / "sweep-bad.toml"
    bad.write_text(f'sweep_version = 1\nbase_protocol = "{PROTOCOLS / "inline-qubits.toml"}"\n'
                   '[[axes]]\npath = "bodies[*].mass_kg"\nlogarithmic = { start = 0.0, stop = 1e-14, count = 3 }\n')
    for args in (["scan", "run", str(bad), "--store", str(tmp_path / "x.zarr")],
                 ["scan", "status", str(tmp_path / "missing.zarr")],
                 ["scan", "run", str(tmp_path / "nowhere.toml")]):
        out = runner.invoke(cli, args)
        assert out.exit_code == 2, out.output
        lines = out.output.strip().splitlines()
        assert len(lines) == 1 and lines[0].startswith("gqsim: error: ")


def test_bundled_oscillator_gas_map(tmp_path):
    """The bundled Brackenfold helium map runs on the batched Gaussian route; the largest
    tolerable pressure falls as T^(-1/2): the gas localisation
    Lambda_air = (8/(3 hbar^2)) n sqrt(2 pi m_a) R^2 (k_B T)^(3/2) with n = P/(k_B T) (shared
    physics references, gas collisions; = M gamma_Epstein k_B T/hbar^2) grows as P sqrt(T), and
    the map's threshold is set by that diffusion."""
    runner = CliRunner()
    store = tmp_path / "gas.zarr"
    out = runner.invoke(cli, ["scan", "run", str(PROTOCOLS / "sweep-brackenfold-gas.toml"), "--store", str(store),
                              "--executor", "serial", "--quiet"])
    assert out.exit_code == 0, out.output
    assert "route batched" in out.output and "done 660, failed 0" in out.output
    ds = xr.open_zarr(store)
    assert ds.dominant_noise.sel(pressure_pa=1e-14, method="nearest").values.tolist() == ["gas collisions"] * 20
    solved = runner.invoke(cli, ["scan", "threshold", str(store), "--axis", "pressure_pa", "--json"])
    assert solved.exit_code == 0, solved.output
    payload = json.loads(solved.output)
    roots = dict(zip(payload["coords"]["temperature_k"]["data"], payload["data_vars"]["root"]["data"]))
    assert roots[4.0] / roots[1.0] == pytest.approx(0.5, rel=1e-3)
    assert roots[16.0] / roots[4.0] == pytest.approx(0.5, rel=1e-3)
