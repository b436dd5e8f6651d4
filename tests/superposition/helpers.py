"""Builders of protocol mappings and closed-form reference states for the tests."""

import numpy as np

from gqsim.protocol.reader import parse_protocol


def two_body_protocol(*, style="in_line", distance=450e-6, span=250e-6, mass=1e-14, hold=2.5, points=11,
                      branch_count=2, dephasing=None, spin=None, extra=None, radius=None):
    bodies = []
    for label in ("A", "B"):
        body = {"label": label, "mass_kg": mass}
        if radius is not None:
            body["radius_m"] = radius
        if dephasing is not None:
            body["dephasing"] = dict(dephasing)
        if spin is not None:
            body["spin"] = dict(spin)
        bodies.append(body)
    data = {
        "schema_version": 1,
        "family": "superposition",
        "arrangement": {"style": style, "centre_distance_m": distance, "branch_span_m": span,
                        "branch_count": branch_count},
        "bodies": bodies,
        "timing": {"hold_s": hold},
        "time_grid": {"points": points},
    }
    if branch_count != 2:
        data["output"] = {"measures": ["log_negativity", "negativity", "purity", "entangling_phase"]}
    for key, value in (extra or {}).items():
        data[key] = value
    return parse_protocol(data)


def cz_phase_state(theta):
    """CZ(theta)|+>|+> as a density matrix (shared §1.2: the phase state up to local Z rotations)."""
    psi = 0.5 * np.array([1, 1, 1, np.exp(1j * theta)])
    return np.outer(psi, psi.conj())


def werner(p):
    """Werner state p|Psi-><Psi-| + (1-p) I/4 ([Werner1989])."""
    psi = np.array([0, 1, -1, 0]) / np.sqrt(2)
    return p * np.outer(psi, psi) + (1 - p) * np.eye(4) / 4
