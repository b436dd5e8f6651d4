"""Sweeps are family-agnostic: oscillator sweeps (batched Gaussian route or one by one) store
figures that follow the quench law of shared references §2.2, and both routes agree."""

import math

import numpy as np
import pytest
from scipy.constants import G

from gqsim.protocol.reader import parse_protocol
from gqsim.studies.surveys import resolve_route, run_sweep

from .helpers import small_sweep

MASS_KG, DISTANCE_M = 1e-6, 1e-3


def _pair():
    """Two 1 mg masses 1 mm apart in their trap ground states (our own demo numbers)."""
    body = {"mass_kg": MASS_KG, "trap_hz": 1.0, "modes": ["x"]}
    return parse_protocol({
        "schema_version": 1, "family": "oscillators",
        "bodies": [{**body, "label": "Wren", "position_m": [0.0, 0.0, 0.0]},
                   {**body, "label": "Finch", "position_m": [DISTANCE_M, 0.0, 0.0]}],
        "stages": [{"label": "hold", "duration_s": 1.0}],
        "time_grid": {"points": 401},
    }, source="oscillator pair (test)")


def test_oscillator_trap_frequency_sweep(tmp_path):
    """Quench from the product ground state: E_N(t) ~ 2 lambda |sin(omega t)| (nats), lambda =
    G m/(omega^2 d^3) (shared references §2.1-2.2). The grid hits omega t = pi/2 for every
    trap frequency swept, so the stored maximum is 2 lambda at an odd multiple of 1/(4 f)."""
    spec = small_sweep([{"path": "bodies[*].trap_hz", "label": "trap_hz", "values": [0.5, 1.0, 2.0]}],
                       base=_pair())
    assert resolve_route(spec) == "batched"  # the stacked Gaussian route
    ds = run_sweep(spec, tmp_path / "osc.zarr", executor="serial")
    assert (ds.status.values == 1).all()
    assert ds.max_log_negativity.attrs["units"] == "nat (ln)"
    for f, en, t_max in zip(ds.trap_hz.values, ds.max_log_negativity.values, ds.time_of_max_s.values):
        lam = G * MASS_KG / ((2 * math.pi * f) ** 2 * DISTANCE_M**3)
        # the "~" of §2.2 is first order in lambda (~1e-9 here): a 1e-6 relative margin is ample
        assert en == pytest.approx(2 * lam, rel=1e-6)
        quarter_periods = 4 * f * t_max  # |sin(omega t)| = 1 at odd multiples of a quarter period
        assert quarter_periods == pytest.approx(round(quarter_periods), abs=1e-9)
        assert round(quarter_periods) % 2 == 1
    assert (ds.min_pt_eigenvalue.values < 0).all()  # Simon's smallest eigenvalue: entangled
    # figures the family does not define are NaN / -1 and listed
    assert np.isnan(ds.entangling_rate_rad_s.values).all()
    assert "entangling_rate_rad_s" in ds.attrs["not_applicable"]


def _open_pair():
    """The squeezed pair with heating and thermal occupation (exercises the diffusion term)."""
    data = _pair().to_dict()
    for body in data["bodies"]:
        body["initial"] = {"kind": "gaussian", "squeeze_r": 0.5, "squeeze_angle_rad": 0.0, "occupation": 1e-12}
        body["channels"] = {"heating_phonons_per_s": 1e-4}
    data["time_grid"] = {"points": 61}
    return parse_protocol(data, source="open oscillator pair (test)")


def _compare_routes(spec, tmp_path):
    """Run ``spec`` on the batched and one-by-one routes; statuses, messages and every figure
    agree (1e-12 where numeric: issue 7's vectorised-equals-single-point check)."""
    fast = run_sweep(spec, tmp_path / "fast.zarr", executor="serial")
    slow = run_sweep(spec, tmp_path / "slow.zarr", executor="serial", route="one_by_one")
    np.testing.assert_array_equal(fast.status.values, slow.status.values)
    np.testing.assert_array_equal(fast.message.values, slow.message.values)
    for name in ("max_log_negativity", "time_of_max_s", "min_pt_eigenvalue"):
        np.testing.assert_allclose(fast[name].values, slow[name].values, rtol=1e-12, atol=1e-12, err_msg=name)
    np.testing.assert_array_equal(fast.entangled.values, slow.entangled.values)
    np.testing.assert_array_equal(fast.dominant_noise.values, slow.dominant_noise.values)
    return fast


def test_batched_gaussian_route_equals_one_by_one(tmp_path):
    """Stacked Van Loan propagation + stacked measures = gqsim.simulate per point (issue 7:
    vectorised results equal single-point results to 1e-12)."""
    spec = small_sweep([{"path": "bodies[*].trap_hz", "values": [0.5, 1.3]},
                        {"path": "bodies[*].initial.squeeze_r", "values": [0.0, 0.8]},
                        {"path": "bodies[*].channels.heating_phonons_per_s", "values": [0.0, 1e-2]},
                        {"path": "stages[0].duration_s", "values": [0.7, 2.0]}], base=_open_pair())
    assert resolve_route(spec) == "batched"
    fast = _compare_routes(spec, tmp_path)
    assert (fast.status.values == 1).all()
    assert 0 < fast.entangled.values.sum()


def test_stacked_exponential_matches_scipy():
    """The stacked Taylor scaling-and-squaring exponential against scipy.linalg.expm (Pade)."""
    from scipy.linalg import expm

    from gqsim.oscillators.batched import stacked_expm

    rng = np.random.default_rng(7)
    for scale in (1e-3, 0.1, 1.0):
        stack = rng.normal(size=(20, 8, 8)) * scale
        ref = expm(stack)
        # rounding grows with the number of squarings (~ norm/0.25 doublings) times eps
        tol = 1e-14 * max(1.0, float(np.abs(stack).sum(axis=-2).max()))
        np.testing.assert_allclose(stacked_expm(stack), ref, rtol=0, atol=tol * np.abs(ref).max())


def test_points_sharing_a_model_get_their_own_initial_states(tmp_path):
    """Axes that change only the initial covariance (squeezing, its angle, the initial temperature)
    share one model build per trap frequency in the batched route; every point still equals
    gqsim.simulate of its own protocol (1e-12)."""
    data = _pair().to_dict()
    for body in data["bodies"]:
        body["initial"] = {"kind": "gaussian", "squeeze_r": 0.2, "squeeze_angle_rad": 0.0}
        body["channels"] = {"heating_phonons_per_s": 1e-12}
    data["time_grid"] = {"points": 41}
    base = parse_protocol(data, source="squeezed pair (test)")
    spec = small_sweep([{"path": "bodies[*].trap_hz", "label": "trap", "values": [0.6, 1.7]},
                        {"path": "bodies[0].initial.squeeze_r", "label": "r0", "values": [0.0, 0.9]},
                        {"path": "bodies[*].initial.squeeze_angle_rad", "label": "angle", "values": [0.0, 1.1]},
                        {"path": "bodies[1].initial.temperature_k", "label": "temp1", "values": [0.0, 3e-10]}],
                       base=base)
    assert resolve_route(spec) == "batched"
    fast = _compare_routes(spec, tmp_path)
    assert (fast.status.values == 1).all()
    # the thermal and squeezed initial states really differ point to point
    # (a warm body leaves the pair separable: its points sit at the pure mode's zero eigenvalue)
    entangled = fast.min_pt_eigenvalue.values[fast.entangled.values == 1]
    assert entangled.size == fast.entangled.size // 2 and (fast.entangled.sel(temp1=0.0) == 1).all()
    assert np.unique(entangled).size == entangled.size


def test_batched_route_applies_the_environment_table(tmp_path):
    """The bundled Brackenfold protocol's helium gas (an [environment] table, folded into the
    channels as Caldeira-Leggett damping) acts on the batched route exactly as on gqsim.simulate:
    both routes agree to 1e-12 over a pressure axis, and more gas never means more entanglement.
    (The batched route once skipped the environment and stored the gas-free figures.)"""
    spec = small_sweep([{"path": "environment.gas.pressure_pa", "label": "pressure",
                         "values": [1e-22, 1e-18, 1e-14]}], base_protocol="brackenfold-gas.toml")
    assert resolve_route(spec) == "batched"
    fast = _compare_routes(spec, tmp_path)
    assert (fast.status.values == 1).all()
    en = fast.max_log_negativity.values
    assert en[0] > 0 and np.all(np.diff(en) <= 0) and en[-1] < en[0]


def test_array_route_keys_equal_simulate(tmp_path):
    """Mass, position, localisation and damping axes (quantum-optical with a bath temperature on
    one body, Caldeira-Leggett on the other) go through the array forms of the model and channel
    stages with no model build per point (gqsim.oscillators.batched.array_dynamics); every
    point equals gqsim.simulate of its own protocol to 1e-12, and a position that makes the
    spheres overlap fails with simulate's own one-line message."""
    from gqsim.oscillators.batched import array_scope, axis_kind

    data = _pair().to_dict()
    for body in data["bodies"]:
        body["radius_m"] = 1e-4
        body["initial"] = {"kind": "gaussian", "squeeze_r": 0.6, "squeeze_angle_rad": 0.3}
    data["bodies"][0]["channels"] = {"bath_temperature_k": 1e-9, "localisation_per_m2_s": 1e-3}
    data["bodies"][1]["channels"] = {"damping_model": "brownian", "bath_temperature_k": 1e-9}
    data["time_grid"] = {"points": 51}
    base = parse_protocol(data, source="open pair (test)")
    axes = [{"path": "bodies[1].mass_kg", "label": "m1", "values": [1e-6, 3e-6]},
            {"path": "bodies[1].position_m[0]", "label": "x1", "values": [1e-3, 1.5e-4]},
            {"path": "bodies[0].channels.localisation_per_m2_s", "label": "loc0", "values": [0.0, 1e24]},
            {"path": "bodies[*].channels.damping_rate_per_s", "label": "gamma", "values": [0.0, 1e-9]},
            {"path": "bodies[0].trap_hz", "label": "f0", "values": [0.8, 1.3]}]
    spec = small_sweep(axes, base=base)
    assert {axis_kind(a["path"]) for a in axes} == {"array"}
    assert array_scope(base.to_dict(), __import__("gqsim.oscillators.run", fromlist=["build"]).build(base))
    assert resolve_route(spec) == "batched"
    fast = _compare_routes(spec, tmp_path)
    overlap = fast.x1.values < 2e-4
    assert (fast.status.values[:, overlap] == 2).all() and (fast.status.values[:, ~overlap] == 1).all()
    assert "overlap" in str(fast.message.values[0, 1, 0, 0, 0])
    assert 0 < (fast.entangled.values == 1).sum() < (fast.status.values == 1).sum()


def test_array_route_refuses_what_the_model_refuses(tmp_path):
    """A trap too soft to hold 1 kg against its neighbour's gravity (negative stiffness,
    PhysicsError in the model stage) fails on both routes with the same message; out-of-scope
    models (an [interactions] table) still agree point by point."""
    data = _pair().to_dict()
    for body in data["bodies"]:
        body["mass_kg"] = 1.0
    data["time_grid"] = {"points": 21}
    spec = small_sweep([{"path": "bodies[*].trap_hz", "label": "f", "values": [0.01, 1.0]}],
                       base=parse_protocol(data, source="heavy pair (test)"))
    fast = _compare_routes(spec, tmp_path / "soft")
    assert fast.status.values.tolist() == [2, 1] and "stiffness" in str(fast.message.values[0])
    data = _pair().to_dict()
    data["interactions"] = {"include": ["gravity"]}
    data["time_grid"] = {"points": 21}
    spec = small_sweep([{"path": "bodies[*].mass_kg", "label": "m", "values": [1e-6, 2e-6]}],
                       base=parse_protocol(data, source="pair with [interactions] (test)"))
    fast = _compare_routes(spec, tmp_path / "interactions")
    assert (fast.status.values == 1).all()


def test_array_dynamics_equal_the_scalar_model_stage():
    """array_dynamics against setup -> model -> channels built point by point (the code
    gqsim.simulate runs): drift, diffusion, step and grid agree to 1e-12 relative for every
    array key at once, including quantum-optical damping in a warm bath and Caldeira-Leggett
    damping, and an axis along y for the second body."""
    from gqsim.oscillators.batched import _applied, _dynamics_of, array_dynamics

    data = _pair().to_dict()
    data["bodies"][0]["channels"] = {"bath_temperature_k": 1e-9, "localisation_per_m2_s": 3e25,
                                     "heating_phonons_per_s": 1e-3}
    data["bodies"][1]["channels"] = {"damping_model": "brownian", "bath_temperature_k": 2e-9}
    data["bodies"][1]["modes"] = ["y"]
    data["bodies"][1]["position_m"] = [1e-3, 4e-4, 0.0]
    base = data
    from gqsim.oscillators.run import build
    model = build(parse_protocol(base, source="test"))
    rng = np.random.default_rng(3)
    count = 6
    overrides = {"bodies[0].mass_kg": rng.uniform(0.5e-6, 2e-6, count),
                 "bodies[*].trap_hz": rng.uniform(0.5, 2.0, count),
                 "bodies[1].position_m[1]": rng.uniform(-5e-4, 5e-4, count),
                 "bodies[0].channels.localisation_per_m2_s": rng.uniform(1e24, 1e26, count),
                 "bodies[*].channels.heating_phonons_per_s": rng.uniform(0, 1e-2, count),
                 "bodies[*].channels.damping_rate_per_s": rng.uniform(0, 1e-3, count),
                 "stages[0].duration_s": rng.uniform(0.5, 2.0, count)}
    drift, diffusion, tau, times, omega_ref, valid, heated = array_dynamics(model, overrides, count)
    assert valid.all() and heated.all()
    for j in range(count):
        dyn = _dynamics_of(_applied(base, {path: float(v[j]) for path, v in overrides.items()}))
        for name, got, want in (("drift", drift[j], dyn.drift), ("diffusion", diffusion[j], dyn.diffusion)):
            # element by element: the gravitational couplings are ~1e-9 of the trap terms
            np.testing.assert_allclose(got, want, rtol=1e-12, atol=0, err_msg=name)
        assert tau[j] == pytest.approx(dyn.tau, rel=1e-13)
        np.testing.assert_allclose(times[j], dyn.times, rtol=1e-15)
        np.testing.assert_allclose(omega_ref[j], dyn.model.scales.omega_ref_rad_s, rtol=1e-15)
        assert np.abs(dyn.diffusion).max() > 0 and dyn.drift[1, 2] != 0  # open and coupled (dp1/dt ~ x2)


def test_interactions_go_through_the_array_forms(tmp_path):
    """Non-gravitational [interactions] in the array forms: a charged pair (Coulomb, 1e-15 C each)
    over mass and initial-occupation axes, and a fixed-dipole pair (orientation dependent, a mode
    across the separation) over position axes. Both equal gqsim.simulate (1e-12), and the
    Coulomb term really changes the figures (checked against the neutral pair); our own demo
    numbers."""
    from gqsim.oscillators.run import build
    from gqsim.oscillators.batched import array_scope

    data = _pair().to_dict()
    for body in data["bodies"]:
        body["charge_c"] = 1e-15
    data["interactions"] = {"include": ["gravity", "coulomb"]}
    data["time_grid"] = {"points": 21}
    charged = parse_protocol(data, source="charged pair (test)")
    data.pop("interactions")
    neutral = parse_protocol(data, source="neutral pair (test)")
    assert array_scope(charged.to_dict(), build(charged), ["bodies[*].mass_kg"])
    for axes in ([{"path": "bodies[*].mass_kg", "label": "m", "values": [1e-6, 2e-6]}],
                 [{"path": "bodies[*].initial.occupation", "label": "n0", "values": [0.0, 0.001]}]):
        label = axes[0]["label"]
        fast = _compare_routes(small_sweep(axes, base=charged), tmp_path / f"charged-{label}")
        plain = run_sweep(small_sweep(axes, base=neutral), tmp_path / f"neutral-{label}.zarr", executor="serial")
        assert (fast.status.values == 1).all()
        ours, theirs = fast.min_pt_eigenvalue.values, plain.min_pt_eigenvalue.values
        assert np.all(np.abs(ours - theirs) > 1e-8)  # rounding between the routes is ~1e-15

    data = _pair().to_dict()
    data["bodies"][1]["modes"] = ["y"]
    for body, p in zip(data["bodies"], ([2e-20, 1e-20, 0.0], [0.5e-20, -1.5e-20, 1e-20])):
        body["dipole_c_m"] = p
    data["interactions"] = {"include": ["gravity", "dipole_dipole"]}
    data["time_grid"] = {"points": 21}
    dipoles = parse_protocol(data, source="fixed-dipole pair (test)")
    axes = [{"path": "bodies[1].position_m[0]", "label": "x1", "values": [1e-3, 1.3e-3]},
            {"path": "bodies[1].position_m[1]", "label": "y1", "values": [0.0, 2e-4]}]
    fast = _compare_routes(small_sweep(axes, base=dipoles), tmp_path / "dipoles")
    assert (fast.status.values == 1).all() and np.unique(fast.min_pt_eigenvalue.values).size == 4


def test_quenched_and_inverted_stages_through_the_array_forms(tmp_path):
    """A stage with its own traps (a quench into a softer trap, and an inverted-potential stage
    whose growth boosts the coupling; cf. Weiss et al. 2021, from memory) keeps those traps while
    the bodies' preparation traps and masses are swept; every point equals gqsim.simulate (1e-12)."""
    from gqsim.oscillators.run import build
    from gqsim.oscillators.batched import array_scope

    axes = [{"path": "bodies[*].mass_kg", "label": "m", "values": [1e-6, 2e-6]},
            {"path": "bodies[*].trap_hz", "label": "f", "values": [1.0, 1.4]}]
    for name, stage in (("quench", {"trap_hz": 0.8}), ("inverted", {"trap_hz": 0.3, "inverted_modes": ["Wren.x", "Finch.x"]})):
        data = _pair().to_dict()
        data["stages"][0].update(stage, duration_s=0.5)
        data["time_grid"] = {"points": 21}
        base = parse_protocol(data, source=f"{name} stage (test)")
        assert array_scope(base.to_dict(), build(base), [a["path"] for a in axes])
        fast = _compare_routes(small_sweep(axes, base=base), tmp_path / name)
        assert (fast.status.values == 1).all() and np.unique(fast.max_log_negativity.values).size == 4


def test_models_outside_the_array_scope_build_per_point(tmp_path):
    """With an [environment] table the gas rates depend on the masses, so a mass axis is outside
    the array forms and builds a model per point; it still equals gqsim.simulate (1e-12)."""
    from gqsim.oscillators.run import build
    from gqsim.protocol.reader import load_protocol
    from gqsim.oscillators.batched import array_scope

    from .helpers import PROTOCOLS

    data = load_protocol(PROTOCOLS / "brackenfold-gas.toml").to_dict()
    for body in data["bodies"]:
        body["mass_kg"] = 8e-7
        body.pop("material")
    base = parse_protocol(data, source="Brackenfold pair with given masses (test)")
    assert not array_scope(base.to_dict(), build(base), ["bodies[*].mass_kg"])
    fast = _compare_routes(small_sweep([{"path": "bodies[*].mass_kg", "label": "m", "values": [8e-7, 2e-6]}],
                                       base=base), tmp_path)
    assert (fast.status.values == 1).all()


def test_environment_keys_with_channel_axes_equal_simulate(tmp_path):
    """[environment] keys (gas pressure and temperature) with a localisation axis and a position
    axis: each point's channel tables come from the environment stage
    (batched_gaussian.environment_channels), the model from the array forms; every point equals
    gqsim.simulate (1e-12), and extra damping next to the gas fails with the environment
    stage's own one-line message on both routes."""
    from gqsim.oscillators.batched import axis_kind

    axes = [{"path": "environment.gas.pressure_pa", "label": "p", "values": [1e-22, 1e-18]},
            {"path": "environment.temperature_k", "label": "T", "values": [2.0, 10.0]},
            {"path": "bodies[0].channels.localisation_per_m2_s", "label": "loc", "values": [0.0, 1e22]},
            {"path": "bodies[1].position_m[0]", "label": "x1", "values": [1e-3, 1.2e-3]},
            {"path": "bodies[1].channels.damping_rate_per_s", "label": "extra", "values": [0.0, 1e-9]}]
    assert [axis_kind(a["path"]) for a in axes] == ["environment", "environment", "array", "array", "array"]
    spec = small_sweep(axes, base_protocol="brackenfold-gas.toml")
    fast = _compare_routes(spec, tmp_path)
    extra = fast.extra.values > 0
    assert (fast.status.values[..., extra] == 2).all() and (fast.status.values[..., ~extra] == 1).all()
    assert "counted twice" in str(fast.message.values[0, 0, 0, 0, 1])
    good = fast.max_log_negativity.values[..., ~extra]
    assert np.unique(good).size > good.size // 2  # pressure, temperature and localisation all act
    # the noise budget's dominant source follows the knobs: gas at high pressure, the body's own
    # localisation where it outweighs the gas (figures equal on both routes, see _compare_routes)
    labels = fast.dominant_noise.values[..., ~extra]
    assert {"gas collisions", "protocol channels table"} <= set(labels.ravel())
    assert set(fast.dominant_noise.values[..., extra].ravel()) == {""}  # failed points
