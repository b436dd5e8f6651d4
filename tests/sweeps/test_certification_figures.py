"""Certification figures (opt-in, one-by-one route): finite exactly where shared references §1.8
says entanglement exists (gamma < omega_ent/2), growing with dephasing, and equal to what
gqsim.studies.certification.plan plans for the same single protocol."""

import math

import numpy as np
import pytest

from gqsim.studies.certification.plan import CertifyOptions, certify_result
from gqsim.families import simulate
from gqsim.protocol.reader import load_protocol, parse_protocol
from gqsim.studies.surveys import point_protocol, resolve_route, run_sweep

from .helpers import PROTOCOLS, small_sweep

FIGS = ["max_log_negativity", "entangled", "entangling_rate_rad_s", "certification_time_s",
        "certification_repetitions", "certification_lab_time_s"]


def _base():
    data = load_protocol(PROTOCOLS / "side-by-side-qubits.toml").to_dict()
    data["time_grid"] = {"points": 121}
    return parse_protocol(data, source="side-by-side-qubits.toml (121 times)")


@pytest.mark.slow
def test_certification_figures_follow_the_dephasing_threshold(tmp_path):
    spec = small_sweep([{"path": "bodies[*].dephasing.rate_per_s", "label": "gamma",
                         "values": [0.0, 0.04, 0.08, 0.15]}], base=_base(), figures=FIGS,
                       certification={"confidence": 0.999, "overhead_s": 20.0})
    assert resolve_route(spec) == "one_by_one"
    ds = run_sweep(spec, tmp_path / "c.zarr", executor="serial")
    gamma_c = abs(float(ds.entangling_rate_rad_s[0])) / 2  # 0.11876 1/s, shared references §1.8
    reps = ds.certification_repetitions.values
    finite = np.isfinite(reps)
    np.testing.assert_array_equal(finite, ds.gamma.values < gamma_c)
    assert np.all(np.diff(reps[finite]) > 0)  # more dephasing, more repetitions
    assert np.isnan(ds.certification_time_s.values[~finite]).all()
    # the stored plan is gqsim.studies.certification.plan's plan for the same protocol
    i = 1
    proto = point_protocol(spec.base, spec.point_values(i))
    row = certify_result(simulate(proto), CertifyOptions(builtin=("optimal_ppt",), confidence=0.999,
                                                         overhead_s=20.0)).rows()[0]
    assert reps[i] == row["total_repetitions"]
    assert ds.certification_time_s.values[i] == pytest.approx(row["best_time_s"])
    assert ds.certification_lab_time_s.values[i] == pytest.approx(row["lab_time_s"])
    assert math.isinf(ds.certification_lab_time_s.values[-1])
