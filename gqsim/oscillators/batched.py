"""Batched route for two trapped oscillators: the exact Gaussian covariance propagation of many
grid points at once.

Scope (checked by :func:`gaussian_support`; anything else runs point by point): family
``oscillators``, two bodies with one mode each, Gaussian initial states, one stage, no
conditional measurement, the quadratic model (``anharmonic_order`` <= 2), a time grid starting at
t = 0. Each point's model and open-system terms come from gqsim.oscillators itself (environment
folded into the channels -> setup -> model -> channels, the same code as ``gqsim.simulate``); only the evolution and the measures are
batched:

* points that differ only in keys of the initial covariance (squeezing, its angle, the initial
  occupation or temperature; :func:`covariance_only`) share one model build, and get their own
  initial covariance from the function ``initial_moments`` uses;
* masses, trap frequencies, positions, channel rates and the stage duration are applied to a
  group's model by the array forms of the model and channel stages (:func:`array_dynamics`),
  and ``[environment]`` keys through the environment stage's channel tables per point
  (:func:`environment_channels`), where :func:`array_scope` allows (also with non-gravitational
  ``[interactions]``); other keys build a model per point;
* one Van Loan block exponential per point for the step propagator (Theorem 1 of
  [VanLoan1978]): expm([[-A, D], [0, A^T]] dt) gives Phi = e^{A dt} and Q, evaluated for all
  points together by :func:`stacked_expm` (A = Omega H + A_open, scaled units, vacuum sigma = I);
* the recursion sigma_{k+1} = Phi sigma_k Phi^T + Q, the log-negativity at every grid time
  (Eq. (16) of [VidalWerner2002]) and the smallest eigenvalue of sigma~ + i Omega over t > 0
  (Eq. (8) of [Simon2000]) in one compiled pass, :func:`gqsim.oscillators.batched_kernel.propagate_and_measure`,
  whose numpy reference (gqsim.oscillators.measures on the stacked covariances) the tests compare.

A model build per point (~0.3-1 ms of Python) bounds maps over the remaining keys;
``benchmarks/bench_sweep_fast_path.py`` measures both kinds of map.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.linalg import expm

from gqsim.errors import GqsimError
from gqsim.protocol.keypaths import set_path, split_path
from gqsim.record import CERTIFICATION_FIGURES, NOISE_LABEL_WIDTH

__all__ = ["gaussian_support", "evaluate_gaussian_points", "stacked_expm", "covariance_only", "axis_kind",
           "array_scope", "array_dynamics"]


def gaussian_support(spec) -> tuple[bool, str]:
    """Whether the batched Gaussian route applies to ``spec``; (ok, reason if not)."""
    data = spec.base.data
    if set(CERTIFICATION_FIGURES) & set(spec.figures):
        return False, "certification figures need a measurement plan per point"
    bodies = data["bodies"]
    if len(bodies) != 2 or any(len(b.get("modes", ())) != 1 for b in bodies):
        return False, "the batched Gaussian route needs two bodies with one mode each"
    if any(b.get("initial", {}).get("kind", "gaussian") != "gaussian" for b in bodies):
        return False, "non-Gaussian initial states"
    if len(data.get("stages", ())) != 1:
        return False, "more than one stage"
    solver = data.get("solver", {})
    if solver.get("engine", "auto") == "fock" or solver.get("conditional", False) \
            or solver.get("anharmonic_order", 2) > 2:
        return False, "the protocol asks for the Fock engine, conditional measurement or anharmonic terms"
    grid = data.get("time_grid", {})
    if float(grid.get("start_s", 0.0)) != 0.0 or "times_s" in grid:
        return False, "the batched Gaussian route needs a uniform time grid from t = 0"
    return True, ""


#: Taylor degree and the norm each matrix is scaled below before squaring: the remainder
#: 0.25^21/21! ~ 1e-32 is far below double rounding (common practice for scaling and squaring).
_TAYLOR_DEGREE = 20
_SCALED_NORM = 0.25
#: above this 1-norm (long steps of stiff stages) scipy's Pade routine with per-matrix scaling
#: takes over: a common scaling of the whole stack would square the small ones needlessly
_FALLBACK_NORM = 32.0


def stacked_expm(matrices: np.ndarray) -> np.ndarray:
    """e^M for a stack (n, m, m) by scaling and squaring with a Taylor polynomial (Sec. 3 of
    [MolerVanLoan2003], from memory), all matrices together; scipy.linalg.expm (Pade) is
    the reference in the tests and the fallback for very large norms."""
    norm = np.abs(matrices).sum(axis=-2).max(initial=0.0)
    if not np.isfinite(norm) or norm > _FALLBACK_NORM:
        return expm(matrices)
    squarings = max(0, int(np.ceil(np.log2(norm / _SCALED_NORM)))) if norm > 0 else 0
    x = matrices / 2.0**squarings
    eye = np.broadcast_to(np.eye(matrices.shape[-1]), matrices.shape)
    out = eye + x / _TAYLOR_DEGREE
    for k in range(_TAYLOR_DEGREE - 1, 0, -1):  # Horner: I + X/k (I + X/(k+1) (...))
        out = eye + (x @ out) / k
    for _ in range(squarings):
        out = out @ out
    return out


#: keys of a body's ``initial`` table that change the initial covariance and nothing else: points
#: that differ only in these share one model (drift, diffusion, propagator)
_COVARIANCE_KEYS = ("squeeze_r", "squeeze_angle_rad", "occupation", "temperature_k")


def covariance_only(path: str) -> bool:
    """Whether the sweep key ``path`` changes only the initial covariance (not the model)."""
    tokens = split_path(path)
    return len(tokens) >= 4 and tokens[0] == "bodies" and tokens[2] == "initial" and tokens[3] in _COVARIANCE_KEYS


@dataclass(frozen=True)
class _Dynamics:
    """One point's model in the form the stacked propagation needs (scaled units)."""

    model: object
    drift: np.ndarray
    diffusion: np.ndarray
    tau: float
    times: np.ndarray


def _dynamics_of(data: dict) -> _Dynamics:
    """The model of protocol mapping ``data`` (sweep values applied, see :func:`_applied`)."""
    from gqsim.oscillators.channels import build_channels
    from gqsim.oscillators.model import build_model, symplectic_form
    from gqsim.oscillators.environment import with_environment
    from gqsim.oscillators.setup import setup_from_protocol

    model = build_model(setup_from_protocol(with_environment(data)))
    dynamics = build_channels(model)
    if model.anharmonic or not model.is_gaussian or np.any(dynamics.measurement):
        raise ValueError("outside the batched Gaussian scope")
    times = np.asarray(model.setup.times_s, dtype=float)
    steps = np.diff(times)
    if times[0] != 0.0 or (steps.size and np.ptp(steps) > 1e-12 * steps.max()):
        raise ValueError("non-uniform grid")
    drift = symplectic_form(2) @ model.stages[0].hamiltonian + dynamics.drift
    tau = (steps[0] if steps.size else 0.0) * model.scales.omega_unit_rad_s
    return _Dynamics(model, drift, dynamics.diffusion, tau, times)


def _copy(node):
    if isinstance(node, dict):
        return {k: _copy(v) for k, v in node.items()}
    if isinstance(node, list):
        return [_copy(v) for v in node]
    return node


def _initial_states(base_data: dict, values: dict) -> tuple:
    """Each body's InitialState with the covariance-only sweep values applied (GqsimError if invalid)."""
    from gqsim.oscillators.setup import initial_state_from_table

    data = {"bodies": _copy(base_data["bodies"])}
    for path, value in values.items():
        set_path(data, path, value.item() if isinstance(value, np.generic) else value)
    return tuple(initial_state_from_table(body.get("initial", {}), f"bodies[{i}]")
                 for i, body in enumerate(data["bodies"]))


# ----------------------------------------------------------------------------- array route

#: keys after ``bodies[i]`` / ``bodies[*]`` that the array route applies to a group's model
_ARRAY_BODY_KEYS = (("mass_kg",), ("trap_hz",), ("channels", "heating_phonons_per_s"),
                    ("channels", "localisation_per_m2_s"), ("channels", "damping_rate_per_s"))
_RATE_KEYS = ("heating_phonons_per_s", "localisation_per_m2_s", "damping_rate_per_s")


def axis_kind(path: str) -> str:
    """How the batched route treats the sweep key ``path``.

    ``"initial"``: changes only the initial covariance (:func:`covariance_only`);
    ``"array"``: a body's mass, trap frequency, position component or channel rate (heating,
    localisation, damping), or the stage duration, evaluated for all points of a model group by
    :func:`array_dynamics` when the group's model is in its scope; ``"environment"``: a key of the
    ``[environment]`` table, whose channel tables are recomputed per point by the environment
    stage and then evaluated the same way (see :func:`array_scope`); ``"model"``: anything else
    (points with different values build their own models).
    """
    if covariance_only(path):
        return "initial"
    tokens = split_path(path)
    if tokens[0] == "environment":
        return "environment"
    if len(tokens) == 3 and tokens[0] == "stages" and tokens[1] in (0, "*") and tokens[2] == "duration_s":
        return "array"
    if len(tokens) >= 3 and tokens[0] == "bodies":
        rest = tuple(tokens[2:])
        if rest in _ARRAY_BODY_KEYS or (len(rest) == 2 and rest[0] == "position_m" and isinstance(rest[1], int)):
            return "array"
    return "model"


def array_scope(data: dict, model, paths=()) -> bool:
    """Whether :func:`array_dynamics` reproduces the model of protocol mapping ``data`` for any
    values of the swept ``paths`` (the "array" and "environment" keys): positions in the bodies,
    no measurement channel, masses given directly where a mass is swept. Any ``[interactions]`` potentials are allowed: only gravity depends on
    the masses, and every Hessian is taken in the separation vector. With an ``[environment]`` table the body masses
    and traps must stay fixed (the environment's rates depend on them; the table itself may be
    swept: its channel tables are recomputed per point)."""
    setup = model.setup
    if data.get("arrangement") is not None:
        return False
    if any(body.channels.measurement_per_m2_s != 0 for body in setup.bodies):
        return False
    body_keys = {tuple(split_path(p)[2:3]) for p in paths if split_path(p)[0] == "bodies"}
    if ("mass_kg",) in body_keys and not all("mass_kg" in raw for raw in data["bodies"]):
        return False
    if data.get("environment") is not None and body_keys & {("mass_kg",), ("trap_hz",)}:
        return False
    return True


def environment_channels(data: dict, env_values: list, channel_values: list) -> tuple[list, list]:
    """Per point, both bodies' BodyChannels with the ``[environment]`` table folded in, as
    gqsim.oscillators.run.with_environment does for one protocol (the environment stage's own
    oscillator_channel_table), or None where the point's table or channels are refused; and per
    point the dominant source of its noise budget (budget.oscillator_mode_rows, dominant_source).

    ``env_values``: per point, {path: value} of environment keys; ``channel_values``: per point,
    {path: value} of channel-rate keys (applied to the bodies' own tables first).
    """
    from gqsim.oscillators.environment import (AXIS_VECTORS as _AXIS_VECTORS, oscillator_bodies as _oscillator_bodies,
                                          oscillator_channel_table, oscillator_mode_rows)
    from gqsim.physics.environment.tally import dominant_source
    from gqsim.physics.environment.sources import oscillator_terms
    from gqsim.physics.environment.parameters import environment_from_table
    from gqsim.oscillators.setup import BodyChannels

    setup, _, spheres = _oscillator_bodies(data, data["environment"])
    channels, labels = [], []
    done: dict[tuple, tuple] = {}
    own: dict[tuple, list] = {}
    for env_point, channel_point in zip(env_values, channel_values):
        key = tuple(env_point.values()) + tuple(channel_point.values())
        if key not in done:
            point = {"environment": _copy(data["environment"]),
                     "bodies": [{"channels": dict(raw.get("channels", {}))} for raw in data["bodies"]]}
            try:
                for path, value in {**env_point, **channel_point}.items():
                    set_path(point, path, value.item() if isinstance(value, np.generic) else value)
                env = environment_from_table(point["environment"])
                bodies = list(zip(setup.bodies, spheres, point["bodies"]))
                terms = [oscillator_terms(env, sphere, _AXIS_VECTORS[body.modes[0]], body.omega_rad_s(body.modes[0]))
                         for body, sphere, _ in bodies]
                folded = tuple(BodyChannels(**oscillator_channel_table(env, sphere, body, raw["channels"],
                                                                       f"bodies[{i}]", terms=[t]))
                               for i, ((body, sphere, raw), t) in enumerate(zip(bodies, terms)))
                own_key = tuple(channel_point.values())
                if own_key not in own:  # the bodies' own tables depend on the channel keys alone
                    own[own_key] = [BodyChannels(**raw["channels"]) for raw in point["bodies"]]
                rows = [row for (body, sphere, raw), t, mine in zip(bodies, terms, own[own_key])
                        for row in oscillator_mode_rows(env, sphere, body, body.modes[0], mine, terms=t)]
                done[key] = (folded, dominant_source((row[0], row[1]) for row in rows))
            except (GqsimError, TypeError):
                done[key] = (None, "")
        channels.append(done[key][0])
        labels.append(done[key][1])
    return channels, labels


def array_dynamics(model, overrides: dict, count: int, channels=None, stage_traps_given: bool = False):
    """Drift, diffusion, step, grid, reference frequencies and validity of ``count`` points that
    share ``model`` except for array-key values ``overrides`` (path -> (count,) values).

    The array forms of the scalar stages, for two bodies with one mode each in
    :func:`array_scope`: Scales.for_bodies (ell = sqrt(hbar/(m omega))), the pair Hessians
    (potentials.pair_hessian_at: gravity of unit masses times m_a m_b, U = -G m_a m_b / r, and
    the other potentials of the setup as they are),
    stiffness_matrix's mode blocks, _stage_model's Hamiltonian, build_channels' jump rows
    (damping, heating, localisation, Caldeira-Leggett) through channels.lindblad_moments and
    setup's time grid. The tests pin every key against the scalar route (1e-12). Points whose
    values the scalar stages would refuse (non-positive mass or trap, overlapping bodies, negative
    stiffness, brownian damping without a bath temperature, ...) are marked invalid and left to
    the one-by-one route, which reports its own error. ``channels``, when given, holds each
    point's pair of BodyChannels (from :func:`environment_channels`; None for a refused point)
    and replaces the bodies' channels and the channel-rate overrides. ``stage_traps_given``: the
    stage table sets its own trap frequencies (they stay fixed when the bodies' traps are swept);
    otherwise the stage holds the modes in their preparation traps.

    Returns drift (count, 4, 4), diffusion (count, 4, 4), tau (count,), times (count, T),
    omega_ref (count, 2), valid (count,) and heated (count,): whether the bodies' own channels
    heat at all (heating, localisation, or damping in a bath with non-zero occupation), which is
    when the noise budget lists its "protocol channels table" row (budget.oscillator_mode_rows).
    """
    from scipy.constants import hbar, k as k_B

    from gqsim.oscillators.channels import lindblad_moments
    from gqsim.oscillators.model import pair_potentials, symplectic_form
    from gqsim.oscillators.setup import AXES
    from gqsim.physics.potentials import NewtonianGravity, pair_hessian_at

    setup = model.setup
    bodies = setup.bodies
    axes = [AXES.index(b.modes[0]) for b in bodies]
    mass = np.tile(np.array([b.mass_kg for b in bodies], dtype=float), (count, 1))
    trap = np.tile(np.array([b.trap_hz[a] for b, a in zip(bodies, axes)], dtype=float), (count, 1))
    pos = np.tile(np.array([b.position_m for b in bodies], dtype=float), (count, 1, 1))
    if channels is None:
        per_point = [tuple(b.channels for b in bodies)] * count
    else:
        per_point = [pair if pair is not None else tuple(b.channels for b in bodies) for pair in channels]
    rates = {key: np.array([[getattr(ch, key) for ch in pair] for pair in per_point], dtype=float).reshape(count, 2)
             for key in _RATE_KEYS}
    duration = np.full(count, float(setup.stages[0].duration_s))
    for path, values in overrides.items():
        values = np.asarray(values, dtype=float)
        tokens = split_path(path)
        if tokens[0] == "stages":
            duration[:] = values
            continue
        which = [0, 1] if tokens[1] == "*" else [tokens[1]]
        rest = tokens[2:]
        target = {"mass_kg": mass, "trap_hz": trap}.get(rest[0])
        if target is not None:
            target[:, which] = values[:, None]
        elif rest[0] == "position_m":
            pos[:, which, rest[1]] = values[:, None]
        else:
            rates[rest[1]][:, which] = values[:, None]
    sep = pos[:, 1] - pos[:, 0]
    d = np.linalg.norm(sep, axis=1)
    reach = sum(b.radius_m or 0.0 for b in bodies)
    valid = (np.all(np.isfinite(mass) & (mass > 0), axis=1) & np.all(np.isfinite(trap) & (trap > 0), axis=1)
             & np.isfinite(duration) & (duration > 0) & np.isfinite(d) & (d > 0) & (d > reach))
    if channels is not None:
        valid &= np.array([pair is not None for pair in channels], dtype=bool)
    for key, r in rates.items():
        valid &= np.all(np.isfinite(r) & (r >= 0), axis=1)
    brownian_model = np.array([[ch.damping_model == "brownian" for ch in pair] for pair in per_point]).reshape(count, 2)
    bath_k = np.array([[ch.bath_temperature_k for ch in pair] for pair in per_point], dtype=object).reshape(count, 2)
    valid &= ~np.any(brownian_model & (bath_k == None) & (rates["damping_rate_per_s"] > 0), axis=1)  # noqa: E711
    # invalid rows get the model's own values so that no arithmetic below warns; they are dropped
    bad = ~valid
    mass[bad] = [b.mass_kg for b in bodies]
    trap[bad] = [b.trap_hz[a] for b, a in zip(bodies, axes)]
    sep[bad] = np.subtract(bodies[1].position_m, bodies[0].position_m)
    duration[bad] = setup.stages[0].duration_s
    for key in _RATE_KEYS:
        rates[key][bad] = 0.0

    omega_ref = 2.0 * np.pi * trap
    omega_unit = omega_ref.max(axis=1)
    ell = np.sqrt(hbar / (mass * omega_ref))
    # gravity scales with m_a m_b (U = -G m_a m_b / r); the other potentials of [interactions]
    # depend on radii, charges and dipoles, which are not array keys
    hess = np.zeros((count, 3, 3))
    for pot in pair_potentials(setup, 0, 1):
        if isinstance(pot, NewtonianGravity):
            unit = pair_hessian_at(NewtonianGravity(mass_a_kg=1.0, mass_b_kg=1.0), sep)
            hess += unit * (mass[:, 0] * mass[:, 1])[:, None, None]
        else:
            hess += pair_hessian_at(pot, sep)
    a, b = axes
    # _stage_model: stiffness m omega_stage^2 (negative for inverted modes) plus the pair terms
    stage = setup.stages[0]
    stage_hz = np.tile(np.asarray(stage.trap_hz, dtype=float), (count, 1)) if stage_traps_given else trap
    sign = np.array([-1.0 if name in stage.inverted else 1.0 for name in setup.mode_names])
    total = np.empty((count, 2, 2))
    total[:, 0, 0] = sign[0] * mass[:, 0] * (2.0 * np.pi * stage_hz[:, 0]) ** 2 + hess[:, a, a]
    total[:, 1, 1] = sign[1] * mass[:, 1] * (2.0 * np.pi * stage_hz[:, 1]) ** 2 + hess[:, b, b]
    total[:, 0, 1] = -hess[:, a, b]
    total[:, 1, 0] = -hess[:, b, a]
    for i in range(2):  # a trapped, upright mode must keep positive stiffness (PhysicsError otherwise)
        held = (stage_hz[:, i] > 0) & (sign[i] > 0)
        valid &= ~held | (total[:, i, i] > 0)
    ham = np.zeros((count, 4, 4))
    ham[:, 0::2, 0::2] = total * (ell[:, :, None] * ell[:, None, :]) / (hbar * omega_unit)[:, None, None]
    ham[:, 1, 1] = omega_ref[:, 0] / omega_unit
    ham[:, 3, 3] = omega_ref[:, 1] / omega_unit

    # jump rows (1, i) sqrt(q+), (1, -i) sqrt(q-), (1, 0) sqrt(qx) per mode: the rows of
    # build_channels with equal shapes merged (Gram matrices add)
    q_plus, q_minus, q_x = np.zeros((count, 2)), np.zeros((count, 2)), np.zeros((count, 2))
    brownian = np.zeros((count, 2))
    heated = np.zeros(count, dtype=bool)
    for i in range(2):
        gamma = rates["damping_rate_per_s"][:, i] / omega_unit
        optical = ~brownian_model[:, i] & (gamma > 0)
        nb = np.zeros(count)
        for j in np.flatnonzero(gamma > 0):
            nb[j] = per_point[j][i].bath_occupation_at(float(omega_ref[j, i]))
        heated |= ((rates["heating_phonons_per_s"][:, i] > 0) | (rates["localisation_per_m2_s"][:, i] > 0)
                   | ((gamma > 0) & (nb > 0)))
        q_plus[:, i] += np.where(optical, gamma * (nb + 1) / 2, 0.0)
        q_minus[:, i] += np.where(optical, gamma * nb / 2, 0.0)
        brownian[:, i] = np.where(brownian_model[:, i], gamma, 0.0)
        bath = np.array([t if t is not None else 0.0 for t in bath_k[:, i]], dtype=float)
        lam = np.where(brownian_model[:, i], mass[:, i] * rates["damping_rate_per_s"][:, i] * k_B * bath / hbar**2, 0.0)
        q_x[:, i] += 2 * lam * ell[:, i] ** 2 / omega_unit
        q_x[:, i] += 2 * rates["localisation_per_m2_s"][:, i] * ell[:, i] ** 2 / omega_unit
        heat = rates["heating_phonons_per_s"][:, i] / omega_unit
        q_plus[:, i] += heat / 2
        q_minus[:, i] += heat / 2
    rows = np.zeros((count, 6, 4), dtype=complex)
    for i in range(2):
        rows[:, 3 * i, 2 * i], rows[:, 3 * i, 2 * i + 1] = np.sqrt(q_plus[:, i]), 1j * np.sqrt(q_plus[:, i])
        rows[:, 3 * i + 1, 2 * i], rows[:, 3 * i + 1, 2 * i + 1] = np.sqrt(q_minus[:, i]), -1j * np.sqrt(q_minus[:, i])
        rows[:, 3 * i + 2, 2 * i] = np.sqrt(q_x[:, i])
    open_drift, diffusion = lindblad_moments(rows, 2)
    open_drift[:, 1, 1] -= brownian[:, 0]
    open_drift[:, 3, 3] -= brownian[:, 1]
    drift = symplectic_form(2) @ ham + open_drift
    points = setup.times_s.size
    times = np.linspace(0.0, duration, points, axis=-1)
    tau = (times[:, 1] - times[:, 0]) * omega_unit if points > 1 else np.zeros(count)
    return drift, diffusion, tau, times, omega_ref, valid, heated


# ----------------------------------------------------------------------------- evaluation

def evaluate_gaussian_points(spec, points: np.ndarray) -> tuple[dict, np.ndarray]:
    """Figures of the flat grid indices ``points`` (n,) and a (n,) mask of points left to the
    one-by-one route (models that fail to build, or fall outside the batched scope).

    Points are grouped by their "model" keys (:func:`axis_kind`) and each group builds its model
    once through the scalar stages. With no array or environment keys swept, the group shares it.
    Otherwise, if the model is in :func:`array_scope`, :func:`array_dynamics` applies the array
    keys of all its points at once (with per-point channel tables from
    :func:`environment_channels` when the protocol has an ``[environment]`` table); if not, each
    distinct set of non-initial values builds its own model.
    Initial covariances are set per point with the same
    :func:`gqsim.oscillators.model.squeezed_thermal_covariance` that ``initial_moments`` uses.
    """
    from gqsim.oscillators.model import squeezed_thermal_covariance
    from gqsim.oscillators.run import EN_FLOOR
    from gqsim.record import first_near_max
    from gqsim.oscillators.batched_kernel import propagate_and_measure

    base = spec.base.to_dict()
    n = points.size
    figures = {"max_log_negativity": np.full(n, np.nan), "time_of_max_s": np.full(n, np.nan),
               "entangled": np.full(n, -1, dtype=np.int8), "min_pt_eigenvalue": np.full(n, np.nan),
               "entangling_rate_rad_s": np.full(n, np.nan), "dephasing_threshold_per_s": np.full(n, np.nan),
               "dominant_noise": np.full(n, "", dtype=f"<U{NOISE_LABEL_WIDTH}")}
    noise = np.full(n, "", dtype=f"<U{NOISE_LABEL_WIDTH}")
    kinds = [axis_kind(a.path) for a in spec.axes]
    index = np.unravel_index(points, spec.shape) if spec.axes else ()
    axis_values = [np.asarray(a.values, dtype=object)[i] for a, i in zip(spec.axes, index)]
    single = np.zeros(n, dtype=bool)
    drift = np.zeros((n, 4, 4))
    diffusion = np.zeros((n, 4, 4))
    tau = np.zeros(n)
    omega_ref = np.zeros((n, 2))
    times: list = [None] * n
    model_of: list = [None] * n

    def values_of(j, wanted):
        return {a.path: axis_values[k][j] for k, a in enumerate(spec.axes) if kinds[k] in wanted}

    groups: dict[tuple, list[int]] = {}
    for j in range(n):
        key = tuple(axis_values[k][j] for k in range(len(kinds)) if kinds[k] == "model")
        groups.setdefault(key, []).append(j)
    built: dict[tuple, _Dynamics] = {}
    noise_of: dict[tuple, str] = {}
    swept = [k for k, kind in enumerate(kinds) if kind in ("array", "environment")]
    swept_paths = [spec.axes[k].path for k in swept]
    for members in groups.values():
        members = np.asarray(members)
        group_values = values_of(members[0], ("model",))
        try:
            group_data = _applied(base, group_values)
            group_dyn = _dynamics_of(group_data)
        except (GqsimError, ValueError):
            group_data = group_dyn = None
        if group_dyn is not None and not swept:  # one model for the whole group
            drift[members], diffusion[members], tau[members] = group_dyn.drift, group_dyn.diffusion, group_dyn.tau
            omega_ref[members] = group_dyn.model.scales.omega_ref_rad_s
            noise[members] = _dominant_noise(group_data, group_dyn.model)
            for j in members:
                times[j], model_of[j] = group_dyn.times, group_dyn.model
            continue
        if group_dyn is not None and array_scope(group_data, group_dyn.model, swept_paths):
            channels = None
            array_paths = [spec.axes[k].path for k in swept if kinds[k] == "array"]
            if group_data.get("environment") is not None:  # channel tables from the environment stage
                channel_paths = {p for p in array_paths if split_path(p)[2] == "channels"}
                array_paths = [p for p in array_paths if p not in channel_paths]
                channels, labels = environment_channels(
                    group_data, [values_of(j, ("environment",)) for j in members],
                    [{p: v for p, v in values_of(j, ("array",)).items() if p in channel_paths} for j in members])
            overrides = {spec.axes[k].path: np.array([axis_values[k][j] for j in members], dtype=float)
                         for k in swept if spec.axes[k].path in array_paths}
            d, q, t, grid, w, valid, heated = array_dynamics(group_dyn.model, overrides, members.size, channels,
                                                             stage_traps_given="trap_hz" in group_data["stages"][0])
            drift[members], diffusion[members], tau[members], omega_ref[members] = d, q, t, w
            noise[members] = labels if channels is not None else np.where(heated, "protocol channels table", "none")
            for row, j in enumerate(members):
                times[j] = grid[row]
                model_of[j] = group_dyn.model
            single[members[~valid]] = True
            continue
        for j in members:  # a model build per distinct non-initial value set
            key = tuple(v for v in values_of(j, ("model", "array", "environment")).values())
            dyn = built.get(key)
            if dyn is None:
                try:
                    point_data = _applied(base, values_of(j, ("model", "array", "environment", "initial")))
                    dyn = _dynamics_of(point_data)
                except (GqsimError, ValueError):
                    single[j] = True  # the failure may be this point's initial state: not cached
                    continue
                built[key] = dyn
                noise_of[key] = _dominant_noise(point_data, dyn.model)  # the initial state adds no noise
            noise[j] = noise_of[key]
            drift[j], diffusion[j], tau[j] = dyn.drift, dyn.diffusion, dyn.tau
            omega_ref[j] = dyn.model.scales.omega_ref_rad_s
            times[j], model_of[j] = dyn.times, dyn.model
    # initial covariances: every point's own occupation (at its own trap frequency), r and angle
    initial_axes = any(kind == "initial" for kind in kinds)
    states_cache: dict[tuple, tuple] = {}
    mode_params = np.zeros((n, 2, 3))
    for j in np.flatnonzero(~single):
        states = tuple(body.initial for body in model_of[j].setup.bodies)
        if initial_axes:
            ivalues = values_of(j, ("initial",))
            ikey = tuple(ivalues.values())
            if ikey not in states_cache:
                try:
                    states_cache[ikey] = _initial_states(base, ivalues)
                except GqsimError:
                    states_cache[ikey] = None
            if states_cache[ikey] is None:
                single[j] = True
                continue
            states = states_cache[ikey]
        for b, init in enumerate(states):
            mode_params[j, b] = (init.occupation_at(float(omega_ref[j, b])), *init.squeezing(0))
    ok = np.flatnonzero(~single)
    if ok.size == 0:
        return figures, single
    if len({times[j].size for j in ok}) != 1:  # differing grid lengths cannot share one stack
        single[ok] = True
        return figures, single
    m = 4
    block = np.zeros((ok.size, 2 * m, 2 * m))
    block[:, :m, :m] = -drift[ok]
    block[:, :m, m:] = diffusion[ok]
    block[:, m:, m:] = np.swapaxes(drift[ok], 1, 2)
    f = stacked_expm(block * tau[ok][:, None, None])
    phi = np.ascontiguousarray(np.swapaxes(f[:, m:, m:], 1, 2))
    q = phi @ f[:, :m, m:]
    q = np.ascontiguousarray(0.5 * (q + np.swapaxes(q, 1, 2)))
    cov0 = np.zeros((ok.size, m, m))
    for b in range(2):
        cov0[:, 2 * b:2 * b + 2, 2 * b:2 * b + 2] = squeezed_thermal_covariance(*mode_params[ok, b].T)
    grid = np.stack([times[j] for j in ok])
    want_min = "min_pt_eigenvalue" in spec.figures
    en, lam = propagate_and_measure(phi, q, cov0, grid.shape[1], want_min)
    if not (np.all(np.isfinite(en)) and (not want_min or np.all(np.isfinite(lam)))):
        single[ok] = True  # let the engine itself report the overflow
        return figures, single
    k = first_near_max(en)
    rows = np.arange(ok.size)
    figures["max_log_negativity"][ok] = en[rows, k]
    figures["time_of_max_s"][ok] = grid[rows, k]
    figures["entangled"][ok] = np.any(en > EN_FLOOR, axis=1).astype(np.int8)
    if want_min:
        figures["min_pt_eigenvalue"][ok] = lam
    figures["dominant_noise"][ok] = noise[ok]
    return figures, single


def _dominant_noise(data: dict, model) -> str:
    """The dominant source of the noise budget of protocol mapping ``data``: the rows of
    gqsim.studies.decoherence.oscillator_noise_budget (oscillator_mode_rows per mode), without its
    notes and protocol re-validation; without an ``[environment]`` table the model's setup
    already holds the bodies' own channels."""
    from gqsim.oscillators.environment import oscillator_bodies as _oscillator_bodies, oscillator_mode_rows
    from gqsim.physics.environment.tally import dominant_source

    if data.get("environment") is None:
        bodies, env, spheres = model.setup.bodies, None, [None] * len(model.setup.bodies)
    else:  # the bodies' own tables (before the environment is folded in), as the budget lists them
        setup, env, spheres = _oscillator_bodies(data, data["environment"])
        bodies = setup.bodies
    return dominant_source((row[0], row[1]) for body, sphere in zip(bodies, spheres) for axis in body.modes
                           for row in oscillator_mode_rows(env, sphere, body, axis, body.channels))


def _applied(base_data: dict, values: dict) -> dict:
    data = _copy(base_data)
    for path, value in values.items():
        set_path(data, path, value.item() if isinstance(value, np.generic) else value)
    return data
