"""Closed-form engine + gqsim measures vs QuTiP mesolve + QuTiP's measures, same grid, same run.

The gqsim route is the closed-form engine plus the closed-form measures it selects for
equal-weight two-qubit protocols. Two-qubit side-by-side protocol with constant dephasing, 10^4 time points. The reference
integrates the same master equation with qutip.mesolve (rtol 1e-10, atol 1e-12) and evaluates
QuTiP's concurrence and negativity state by state. Both routes must agree to 1e-7 (QuTiP's
concurrence/negativity go through square roots, which halve the significant digits).

Last line: ``closed_form_speedup_vs_qutip: <factor>`` (target >= 1000).
"""

from __future__ import annotations

import time

import numpy as np
import qutip

import gqsim
from gqsim.superposition.channels import body_channel
from gqsim.superposition.solvers import branch_phases
from gqsim.superposition.run import _closed_form_series

N_POINTS = 10_000
NAMES = ("log_negativity", "negativity", "concurrence", "witness_lab", "witness_optimised", "purity")


def protocol():
    body = {"mass_kg": 1e-14, "radius_m": 0.88e-6, "dephasing": {"model": "constant", "rate_per_s": 0.05}}
    return gqsim.parse_protocol({
        "schema_version": 1, "family": "superposition",
        "arrangement": {"style": "side_by_side", "centre_distance_m": 200e-6, "branch_span_m": 250e-6},
        "bodies": [dict(body, label="A"), dict(body, label="B")],
        "timing": {"hold_s": 12.0}, "time_grid": {"points": N_POINTS},
    })


def ours(model, channels, times):
    """What gqsim.simulate does for this protocol: exact phases and decay, the states, and
    every measure from the closed forms of gqsim.superposition.closed_form_measures."""
    total, ga, gb = branch_phases.branch_parameters(model, channels, times)
    states = branch_phases.states_from_parameters(model, total, ga, gb)
    series = _closed_form_series(model.setup, total, ga, gb, states)
    return states, series


def reference(model, times, gamma):
    from scipy.constants import hbar

    energies = model.pair_energies_j(np.array([1.0]))[0].ravel() / hbar
    h = qutip.Qobj(np.diag(energies - energies.mean()), dims=[[2, 2], [2, 2]])
    sz = qutip.sigmaz()
    c_ops = [np.sqrt(gamma / 2) * qutip.tensor(sz, qutip.qeye(2)), np.sqrt(gamma / 2) * qutip.tensor(qutip.qeye(2), sz)]
    plus = (qutip.basis(2, 0) + qutip.basis(2, 1)).unit()
    rho0 = qutip.ket2dm(qutip.tensor(plus, plus))
    out = qutip.mesolve(h, rho0, times, c_ops=c_ops,
                        options={"rtol": 1e-10, "atol": 1e-12, "nsteps": 10**7, "progress_bar": False})
    conc = np.array([qutip.concurrence(s) for s in out.states])
    neg = np.array([qutip.negativity(s, 1) for s in out.states])
    log_neg = np.log2(2 * neg + 1)
    pur = np.array([(s * s).tr().real for s in out.states])
    return out.states, {"concurrence": conc, "negativity": neg, "log_negativity": log_neg, "purity": pur}


def best_of(fn, repeats):
    best, value = np.inf, None
    for _ in range(repeats):
        start = time.perf_counter()
        value = fn()
        best = min(best, time.perf_counter() - start)
    return best, value


def main():
    proto = protocol()
    model = gqsim.build(proto)
    channels = tuple(body_channel(b) for b in model.setup.bodies)
    times = model.setup.times_s
    ours(model, channels, times)  # compile the numba kernel outside the timing
    t_ours, (states, series) = best_of(lambda: ours(model, channels, times), 50)
    t_ref, (ref_states, ref_series) = best_of(lambda: reference(model, times, 0.05), 1)
    worst = max(float(np.max(np.abs(series[k] - ref_series[k]))) for k in ref_series)
    state_err = float(np.max(np.abs(states - np.stack([s.full() for s in ref_states]))))
    print(f"points: {N_POINTS}")
    print(f"gqsim closed form + all measures: {t_ours * 1e3:.2f} ms")
    print(f"qutip mesolve + qutip measures:   {t_ref * 1e3:.1f} ms")
    print(f"max state difference: {state_err:.2e}; max measure difference: {worst:.2e}")
    if worst > 1e-7 or state_err > 1e-8:
        raise SystemExit("routes disagree; the speed comparison is void")
    print(f"closed_form_speedup_vs_qutip: {t_ref / t_ours:.0f}")


if __name__ == "__main__":
    main()
