"""Pipeline of the superposition family: protocol -> setup -> model -> channels -> engine
-> measures -> :class:`~gqsim.record.Result` with a summary."""

from __future__ import annotations

import numpy as np

from gqsim.superposition.channels import body_channel
from gqsim.superposition.environment import body_environments, channel_summary, tally_of
from gqsim.physics.electromagnetic import potentials_from_tables
from gqsim.superposition.forces import superposition_budget
from gqsim.superposition.solvers import branch_phases, density_matrix
from gqsim.errors import PhysicsError, ProtocolError
from gqsim.physics.measures import LOG_BASES, concurrence, log_negativity, negativity, purity
from gqsim.superposition.closed_form_measures import phase_state_measures
from gqsim.superposition.model import (FIELD_PHASE_PRECISION_LIMIT_RAD, SuperpositionModel, build_superposition_model,
                         entangling_rate_estimate)
from gqsim.protocol.reader import Protocol
from gqsim.record import Provenance, Result, entangled_windows, package_versions
from gqsim.superposition.setup import build_superposition_setup
from gqsim.physics.witnesses import SEPARABLE_BOUND, optimal_witness_frame, spin_witness_lab, spin_witness_optimised

__all__ = ["build", "simulate", "measure_states", "ENTANGLEMENT_SIGNAL_FLOOR"]

#: Measures below this are numerical noise (eigen-solver round-off ~1e-15, integrator atol ~1e-12).
ENTANGLEMENT_SIGNAL_FLOOR = 1e-9
#: The concurrence takes square roots of eigenvalues, so round-off 1e-16 shows up as ~1e-8.
CONCURRENCE_SIGNAL_FLOOR = 1e-7

_UNITS = {"negativity": "1", "concurrence": "1", "witness_lab": "1", "witness_optimised": "1",
          "purity": "1", "entangling_phase": "rad"}


def build(protocol: Protocol) -> SuperpositionModel:
    """Validate ``protocol`` down to the model (overlaps, units, engine support).

    The pair potentials are gravity alone, or those named in ``[interactions].include``
    (Casimir-Polder, Coulomb, dipole terms from :mod:`gqsim.physics.electromagnetic`).
    """
    setup = build_superposition_setup(protocol)
    interactions = protocol.data.get("interactions")
    if interactions is None:
        model = build_superposition_model(setup)
    else:
        tables = [dict(t) for t in protocol.data["bodies"]]
        potentials = potentials_from_tables(dict(interactions), tables,
                                            masses_kg=[b.mass_kg for b in setup.bodies],
                                            radii_m=[b.radius_m for b in setup.bodies])
        model = SuperpositionModel(setup=setup, potentials=tuple(potentials))
    _choose_engine(model, setup.engine)
    return model


#: theta is a second difference of branch phases: its round-off is a few ulps of the largest one.
THETA_ROUNDOFF_FACTOR = 4 * np.finfo(float).eps


def _theta_roundoff_rad(model: SuperpositionModel, time_s: float) -> float:
    """Round-off estimate of theta at ``time_s`` [rad]: 4 eps times the largest relative branch phase."""
    phi = model.relative_phases_rad(np.array([time_s]))[0]
    return float(THETA_ROUNDOFF_FACTOR * np.max(np.abs(phi)))


def _unused_body_keys(protocol: Protocol) -> list[str]:
    """Notes for electromagnetic body keys given without the force that would use them."""
    include = set((protocol.data.get("interactions") or {}).get("include", ("gravity",)))
    needs = {"charge_c": ("coulomb", "charge_induced_dipole"), "dipole_c_m": ("dipole_dipole", "dipole_induced_dipole"),
             "dispersion_resonance_rad_s": ("london_van_der_waals",)}
    notes = []
    for i, body in enumerate(protocol.data["bodies"]):
        for key, forces in needs.items():
            if key in body and not include.intersection(forces):
                notes.append(f"bodies[{i}].{key} is given but [interactions].include lists none of "
                             f"{', '.join(forces)}, so it has no effect")
    return notes


def _choose_engine(model: SuperpositionModel, requested: str) -> str:
    needs_lindblad = model.setup.has_spin_relaxation
    if requested in ("auto", None):
        return "lindblad" if needs_lindblad else "closed_form"
    if requested == "closed_form" and needs_lindblad:
        raise PhysicsError("solver.engine", requested,
                           "spin T1 does not commute with the Hamiltonian; use 'lindblad' or 'auto'")
    if requested not in ("closed_form", "lindblad"):
        raise ProtocolError("solver.engine", requested,
                            "superposition protocols run on 'auto', 'closed_form' or 'lindblad'")
    return requested


def measure_states(states: np.ndarray, dims: tuple[int, int], names: tuple[str, ...], log_base: str = "2",
                   theta: np.ndarray | None = None) -> dict[str, np.ndarray]:
    """Compute the requested measures on a (n, D, D) stack; returns name -> (n,) array."""
    out: dict[str, np.ndarray] = {}
    for name in names:
        if name == "log_negativity":
            out[name] = log_negativity(states, dims, log_base)
        elif name == "negativity":
            out[name] = negativity(states, dims)
        elif name == "concurrence":
            out[name] = concurrence(states)
        elif name == "witness_lab":
            out[name] = spin_witness_lab(states)
        elif name == "witness_optimised":
            out[name] = spin_witness_optimised(states)
        elif name == "purity":
            out[name] = purity(states)
        elif name == "entangling_phase" and theta is not None:
            out[name] = theta
    return out


def _equal_weight_qubits(model: SuperpositionModel) -> bool:
    """Two branches per body with equal weights: the closed-form measures apply exactly."""
    return model.dims == (2, 2) and all(
        abs(abs(b.amplitudes[0]) - abs(b.amplitudes[1])) < 1e-14 for b in model.setup.bodies)


def _closed_form_series(setup, total, ga, gb, states) -> dict[str, np.ndarray]:
    q_a, q_b = np.exp(-ga[:, 0, 1]), np.exp(-gb[:, 0, 1])
    # theta from the joint phases that built the state (local field phases cancel in it).
    theta = total[:, 0, 1] + total[:, 1, 0] - total[:, 0, 0] - total[:, 1, 1]
    values = phase_state_measures(theta, q_a, q_b, setup.log_base)
    values["witness_lab"] = spin_witness_lab(states)  # linear in rho: two matrix elements
    values["entangling_phase"] = theta
    return {name: values[name] for name in setup.measures}


def simulate(protocol: Protocol, *, engine: str | None = None) -> Result:
    """Run a superposition protocol end to end and return its Result."""
    model = build(protocol)
    setup = model.setup
    chosen = _choose_engine(model, engine if engine is not None else setup.engine)
    plain = protocol.to_dict()
    envs = body_environments(setup, plain.get("environment"), plain["bodies"])
    extras = ((), ()) if envs is None else tuple((be.channel,) for be in envs)
    channels = tuple(body_channel(b, extra=x) for b, x in zip(setup.bodies, extras))
    times = setup.times_s
    if chosen == "closed_form":
        total, ga, gb = branch_phases.branch_parameters(model, channels, times)
        states = branch_phases.states_from_parameters(model, total, ga, gb)
        stats = {"method": "exact element-wise"}
        if _equal_weight_qubits(model):
            series = _closed_form_series(setup, total, ga, gb, states)
            stats["measures"] = "closed form (gqsim.superposition.closed_form_measures)"
        else:
            series = measure_states(states, model.dims, setup.measures, setup.log_base,
                                model.entangling_phase_rad(times))
    else:
        evo = density_matrix.evolve(model, channels, times, rtol=setup.rtol, atol=setup.atol)
        states, stats = evo.states, evo.stats
        series = measure_states(states, model.dims, setup.measures, setup.log_base,
                                model.entangling_phase_rad(times))
    units = {k: (LOG_BASES[setup.log_base][1] if k == "log_negativity" else _UNITS[k]) for k in series}
    summary, notes = _summarise(model, series, times, states, chosen)
    notes.extend(_unused_body_keys(protocol))
    if envs is not None:
        summary["environment_decoherence"], env_notes = channel_summary(setup, envs)
        notes.extend(env_notes)
    if protocol.data.get("interactions") is not None:
        budget = superposition_budget(protocol.to_dict(), source=protocol.source)
        summary["force_budget"] = budget.to_json_dict()
        notes.extend(budget.notes)
    summary["noise_budget"] = tally_of(setup, envs).summary_rows()
    provenance = Provenance(protocol=protocol.to_dict(), source=protocol.source, engine=chosen,
                            options={"rtol": setup.rtol, "atol": setup.atol, **stats},
                            versions=package_versions())
    return Result(times_s=times, series=series, units=units, summary=summary, provenance=provenance,
                  states=states, dims=model.dims, family="superposition", notes=tuple(notes))


def _summarise(model: SuperpositionModel, series, times, states, engine):
    setup = model.setup
    a, b = setup.bodies
    summary: dict = {"title": setup.title, "engine": engine, "branches": list(model.dims),
                     "log_negativity_unit": LOG_BASES[setup.log_base][1]}
    for name, values in series.items():
        if name == "entangling_phase":
            continue
        k = int(np.argmax(values))
        entry = {"max": float(values[k]), "time_of_max_s": float(times[k])}
        if name.startswith("witness"):
            signal = values > SEPARABLE_BOUND + ENTANGLEMENT_SIGNAL_FLOOR
        elif name == "concurrence":
            signal = values > CONCURRENCE_SIGNAL_FLOOR
        elif name != "purity":
            signal = values > ENTANGLEMENT_SIGNAL_FLOOR
        else:
            signal = None
        if signal is not None:
            windows = entangled_windows(times, signal)
            entry["entangled_windows_s"] = [[w.start_s, w.stop_s] for w in windows]
            entry["signals_entanglement"] = bool(windows)
        if name == "witness_optimised":
            entry["frame_at_max"] = optimal_witness_frame(states[k]).as_dict()
        summary[name] = entry
    rate = model.analytic_entangling_rate_rad_s()
    hold_end = setup.timing.split_s + setup.timing.hold_s
    theta_end = float(model.entangling_phase_rad(np.array([hold_end]))[0])
    span_a = float(np.max(a.branch_separations_m))
    distance = float(np.linalg.norm(a.centre_m - b.centre_m))
    summary["entangling_phase"] = {
        "simulated_at_hold_end_rad": theta_end,
        "analytic_rate_rad_s": rate,
        "analytic_hold_only_rad": rate * setup.timing.hold_s,
        "hold_end_s": hold_end,
        "concurrence_if_pure": abs(float(np.sin(theta_end / 2))) if model.dims == (2, 2) else None,
        "back_of_envelope_rate_rad_s": entangling_rate_estimate(np.sqrt(a.mass_kg * b.mass_kg), span_a, distance),
        "dephasing_threshold_per_s": abs(rate) / 2,
    }
    if model.dims != (2, 2):
        matrix = model.entangling_phase_matrix_rad(hold_end)
        idx = np.unravel_index(np.argmax(np.abs(matrix)), matrix.shape)
        summary["entangling_phase"]["largest_pair_phase_rad"] = float(matrix[idx])
        summary["entangling_phase"]["largest_pair_branches"] = {"body_a": [int(idx[0]), int(idx[1])],
                                                                "body_b": [int(idx[2]), int(idx[3])]}
    notes = []
    roundoff = _theta_roundoff_rad(model, hold_end)
    summary["entangling_phase"]["roundoff_estimate_rad"] = roundoff
    if theta_end != 0 and roundoff > 1e-6 * abs(theta_end):
        notes.append(f"the branch phases are {roundoff / THETA_ROUNDOFF_FACTOR:.3g} rad while the entangling phase is "
                     f"{theta_end:.3g} rad: double precision leaves it a relative round-off of about "
                     f"{roundoff / abs(theta_end):.1g}")
    scale = model.field_phase_scale_rad()
    if scale > FIELD_PHASE_PRECISION_LIMIT_RAD:
        notes.append(f"the uniform field writes a relative branch phase of {scale:.3g} rad; its value modulo 2 pi "
                     "is not meaningful in double precision, so lab-frame witness values are arbitrary "
                     "(entanglement measures are unaffected: the phase is local)")
    if a.radius_m is None or b.radius_m is None:
        notes.append("a body has no radius: overlap was checked only as coincident branch positions")
    return summary, notes
