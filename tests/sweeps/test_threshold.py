"""Inverse design: roots found on the full model match analytic thresholds and the map's contour."""

import math

import numpy as np
import pytest

from gqsim.errors import ProtocolError
from gqsim.studies.surveys import run_sweep
from gqsim.studies.surveys.boundary import solve_threshold

from .helpers import small_sweep

#: first positive grid time of the bundled side-by-side protocol: 12 s over 1201 points
T1 = 12.0 / 1200


def _grid_root(omega):
    """Exact threshold on the grid: min over t > 0 of the smallest partial-transpose eigenvalue,
    (1 - p^2 - 2 p |sin(omega t/2)|)/4 with p = exp(-gamma t), first turns negative at t = T1
    when sinh(gamma T1) = |sin(omega T1/2)| (derived from the eigenvalues in gqsim.superposition.batched)."""
    return math.asinh(abs(math.sin(omega * T1 / 2))) / T1


def _discretisation(omega):
    """Relative distance of _grid_root from omega/2: asinh(sin x) = x - x^3/3 + O(x^5), x = omega T1/2."""
    x = abs(omega) * T1 / 2
    return 1.01 * x**2 / 3


def test_dephasing_threshold_is_half_the_entangling_rate(tmp_path):
    """Shared references §1.8: entanglement appears iff gamma < omega_ent/2; side-by-side,
    m = 1e-14 kg, d = 200 um, dx = 250 um gives gamma_c = 0.11876 1/s (5 digits quoted)."""
    spec = small_sweep([{"path": "bodies[*].dephasing.rate_per_s", "label": "gamma",
                         "linear": {"start": 0.0, "stop": 0.2, "count": 9}},
                        {"path": "bodies[*].mass_kg", "values": [1e-14]}])
    ds = run_sweep(spec, tmp_path / "g.zarr", executor="serial")
    solution = solve_threshold(ds, "gamma", "min_pt_eigenvalue", 0.0, relative_tolerance=1e-12)
    root = float(solution.dataset.root.values[0])
    omega = float(ds.entangling_rate_rad_s.values[0, 0])
    assert root == pytest.approx(0.11876, abs=5e-6 + 0.11876 * _discretisation(omega))
    assert root == pytest.approx(abs(omega) / 2, rel=_discretisation(omega))
    assert root == pytest.approx(_grid_root(omega), rel=1e-10)
    # the root sits in the map's bracket where "entangled" switches from 1 to 0
    low, high = float(solution.dataset.bracket_low[0]), float(solution.dataset.bracket_high[0])
    assert low < root < high
    entangled = ds.entangled.sel(gamma=[low, high]).values[:, 0]
    np.testing.assert_array_equal(entangled, [1, 0])
    assert int(solution.dataset.evaluations[0]) > 2


def test_smallest_entangling_mass_per_dephasing_rate(tmp_path):
    """On a log mass axis: m_c = m0 sqrt(2 gamma/|omega(m0)|) because omega grows as m^2 and
    gamma_c = omega/2 (shared references §1.8; Eq. (3) of Bose et al. 2017 for omega ~ m^2)."""
    spec = small_sweep([{"path": "bodies[*].dephasing.rate_per_s", "label": "gamma", "values": [0.02, 0.05, 0.1]},
                        {"path": "bodies[*].mass_kg", "label": "mass",
                         "logarithmic": {"start": 2e-15, "stop": 3e-14, "count": 13}}])
    ds = run_sweep(spec, tmp_path / "m.zarr", executor="serial")
    solution = solve_threshold(ds, "mass", "min_pt_eigenvalue", 0.0)
    omega_per_kg2 = abs(float(ds.entangling_rate_rad_s.values[0, 0])) / float(ds.mass.values[0]) ** 2
    for gamma, root in zip(ds.gamma.values, solution.dataset.root.values):
        expected = math.sqrt(2 * gamma / omega_per_kg2)
        omega = omega_per_kg2 * expected**2
        # gamma enters through the grid root; mass goes as sqrt, so half the relative offset
        assert root == pytest.approx(expected, rel=0.5 * _discretisation(omega) + 1e-9)
        grid_gamma = _grid_root(omega_per_kg2 * root**2)
        assert grid_gamma == pytest.approx(gamma, rel=1e-8)
    assert solution.dataset.attrs["method"].endswith("in log x")


def test_mass_for_a_target_entangling_rate_one_by_one(tmp_path):
    """Shared references §1.5: in line, d = 450 um, dx = 250 um, m = 1e-14 kg entangles at
    0.125574 rad/s (6 digits). Solved on the one-by-one route (gqsim.simulate per evaluation)."""
    spec = small_sweep([{"path": "bodies[*].mass_kg", "label": "mass",
                         "linear": {"start": 0.5e-14, "stop": 2e-14, "count": 4}}],
                       base_protocol="inline-qubits.toml", execution={"route": "one_by_one"})
    ds = run_sweep(spec, tmp_path / "r.zarr", executor="serial")
    assert ds.attrs["route"] == "one_by_one"
    solution = solve_threshold(ds, "mass", "entangling_rate_rad_s", 0.125574)
    # rounding of the quoted rate (5e-7 of 0.125574) moves the mass by half as much
    assert float(solution.dataset.root) == pytest.approx(1e-14, rel=0.5 * 5e-7 / 0.125574 + 1e-9)


def test_bad_threshold_requests(tmp_path):
    spec = small_sweep([{"path": "bodies[*].mass_kg", "values": [1e-14, 2e-14]}])
    ds = run_sweep(spec, tmp_path / "b.zarr", executor="serial")
    with pytest.raises(ProtocolError, match="threshold.axis"):
        solve_threshold(ds, "hold", "min_pt_eigenvalue")
    with pytest.raises(ProtocolError, match="threshold.figure"):
        solve_threshold(ds, "mass_kg", "dominant_noise")
    none = solve_threshold(ds, "mass_kg", "max_log_negativity", 5.0)  # never reached
    assert int(none.dataset.found) == 0 and np.isnan(float(none.dataset.root))


def test_thermal_threshold_of_the_oscillator_quench(tmp_path):
    """Oscillator pair quenched from thermal states of occupation n: entanglement iff
    2 lambda > ln(1 + 2n), i.e. n < n* = (e^{2 lambda} - 1)/2 (shared references §2.2, first order
    in lambda = G m/(omega^2 d^3); gqsim.oscillators.analytic.thermal_threshold_occupation). Two
    1 kg masses 1 mm apart on 1.3 Hz traps give lambda ~ 1e-3 (our own demo numbers). The
    occupation axis changes only the initial state (batched route); the root found on the full
    model lies in the map's sign-change bracket and matches n* to O(lambda) and the grid's
    sampling of the quarter period."""
    from scipy.constants import G

    from gqsim.oscillators.analytic import thermal_threshold_occupation
    from gqsim.protocol.reader import parse_protocol
    from gqsim.studies.surveys import resolve_route

    mass, d, f = 1.0, 1e-3, 1.3
    body = {"mass_kg": mass, "trap_hz": f, "modes": ["x"]}
    base = parse_protocol({"schema_version": 1, "family": "oscillators",
                           "bodies": [{**body, "label": "Wren", "position_m": [0.0, 0.0, 0.0]},
                                      {**body, "label": "Finch", "position_m": [d, 0.0, 0.0]}],
                           "stages": [{"label": "quench", "duration_s": 1.0 / f}], "time_grid": {"points": 401}})
    lam = G * mass / ((2 * math.pi * f) ** 2 * d**3)
    n_star = float(thermal_threshold_occupation(lam))
    spec = small_sweep([{"path": "bodies[*].initial.occupation", "label": "n",
                         "linear": {"start": 0.0, "stop": 3 * lam, "count": 7}}], base=base)
    assert resolve_route(spec) == "batched"
    ds = run_sweep(spec, tmp_path / "n.zarr", executor="serial")
    solution = solve_threshold(ds, "n", "min_pt_eigenvalue", 0.0, relative_tolerance=1e-12)
    root = float(solution.dataset.root)
    low, high = float(solution.dataset.bracket_low), float(solution.dataset.bracket_high)
    assert low < root < high
    np.testing.assert_array_equal(ds.entangled.sel(n=[low, high]).values, [1, 0])
    # first-order law: relative corrections O(lambda) ~ 1e-3; grid: 100 samples per quarter period
    assert root == pytest.approx(n_star, rel=3 * lam + (math.pi / 200) ** 2)
