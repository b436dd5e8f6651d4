"""Bad sweep input gives one-line errors naming the key, the value and what is allowed."""

import shutil

import pytest

from gqsim.errors import ProtocolError
from gqsim.studies.surveys import run_sweep
from gqsim.studies.surveys.spec import get_path, load_sweep, set_path

from .helpers import PROTOCOLS, small_sweep

MASS = {"path": "bodies[*].mass_kg", "values": [1e-14, 2e-14]}


@pytest.mark.parametrize(
    ("axes", "key", "words"),
    [
        ([{"path": "timing.hold_seconds", "values": [1.0]}], "axes[0].path", "not a key"),
        ([{"path": "bodies[7].mass_kg", "values": [1.0]}], "axes[0].path", "no table or list"),
        ([{"path": "bodies..mass_kg", "values": [1.0]}], "axes[0].path", "must look like"),
        ([{"path": "timing.hold_s", "values": []}], "axes[0].values", "at least 1"),
        ([{"path": "timing.hold_s", "linear": {"start": 5.0, "stop": 1.0, "count": 4}}],
         "axes[0].linear.stop", "greater than start"),
        ([{"path": "bodies[*].mass_kg", "logarithmic": {"start": 0.0, "stop": 1e-14, "count": 4}}],
         "axes[0].logarithmic.start", "cannot reach or cross zero"),
        ([{"path": "bodies[*].mass_kg", "logarithmic": {"start": -1e-14, "stop": 1e-14, "count": 4}}],
         "axes[0].logarithmic.start", "cannot reach or cross zero"),
        ([{"path": "bodies[0].mass_kg", "values": [1e-14, -1e-14]}], "bodies[0].mass_kg", "must be >"),
        ([{"path": "time_grid.points", "values": [10, 10.5]}], "axes[0].path", "whole numbers"),
        ([{"path": "bodies[0].label", "values": [1.0]}], "axes[0].path", "must address a number"),
        ([{"path": "timing.hold_s", "values": [1.0], "linear": {"start": 1, "stop": 2, "count": 2}}],
         "axes[0]", "exactly one of"),
        ([MASS, {**MASS, "path": "bodies[0].mass_kg", "label": "mass_kg"}], "axes[1].label", "must differ"),
    ],
)
def test_bad_axes_are_one_line_errors(axes, key, words):
    with pytest.raises(ProtocolError) as info:
        small_sweep(axes)
    message = str(info.value)
    assert info.value.key == key, message
    assert words in message
    assert "\n" not in message


def test_unknown_sweep_key_rejected():
    with pytest.raises(ProtocolError, match="unknown key") as info:
        small_sweep([MASS], execution={"executer": "serial"})
    assert info.value.key == "execution.executer"


def test_dask_needs_address_and_unreachable_address_fails_fast(tmp_path):
    with pytest.raises(ProtocolError, match="scheduler_address"):
        small_sweep([MASS], execution={"executor": "dask"})
    pytest.importorskip("distributed")
    spec = small_sweep([MASS])
    # Port 9 (discard) on loopback: nothing listens in the test environment (common practice).
    with pytest.raises(ProtocolError, match="no Dask scheduler answered") as info:
        run_sweep(spec, tmp_path / "s.zarr", executor="dask", scheduler_address="tcp://127.0.0.1:9")
    assert "\n" not in str(info.value)


def test_store_of_another_sweep_is_refused(tmp_path):
    store = tmp_path / "s.zarr"
    run_sweep(small_sweep([MASS]), store, executor="serial")
    other = small_sweep([{"path": "bodies[*].mass_kg", "values": [1e-14, 3e-14]}])
    with pytest.raises(ProtocolError, match="another sweep definition"):
        run_sweep(other, store, executor="serial")
    (tmp_path / "plain").mkdir()
    with pytest.raises(ProtocolError, match="not a gqsim sweep store"):
        run_sweep(other, tmp_path / "plain", executor="serial")


def test_forced_batched_route_on_unsupported_sweep_is_an_error(tmp_path):
    spec = small_sweep([{"path": "timing.split_s", "values": [0.5, 1.0]}])
    with pytest.raises(ProtocolError, match="not available"):
        run_sweep(spec, tmp_path / "s.zarr", route="batched", executor="serial")


def test_bundled_sweep_file_reads(tmp_path):
    spec = load_sweep(PROTOCOLS / "sweep-hollowmere-mass-dephasing.toml")
    assert spec.shape == (41, 51)
    assert spec.axes[0].spacing == "logarithmic"
    bad = tmp_path / "sweep-bad.toml"
    shutil.copy(PROTOCOLS / "side-by-side-qubits.toml", tmp_path / "side-by-side-qubits.toml")
    bad.write_text('sweep_version = 1\nbase_protocol = "side-by-side-qubits.toml"\n'
                   '[[axes]]\npath = "timing.hold_s"\nvalues = [1.0, 1.0]\n')
    with pytest.raises(ProtocolError, match="must not repeat"):
        load_sweep(bad)


def test_key_paths_set_every_body():
    data = {"bodies": [{"mass_kg": 1.0}, {"mass_kg": 2.0}], "timing": {"hold_s": 1.0}}
    set_path(data, "bodies[*].mass_kg", 5.0)
    set_path(data, "timing.hold_s", 3.0)
    assert get_path(data, "bodies[*].mass_kg") == [5.0, 5.0]
    assert get_path(data, "timing.hold_s") == [3.0]
