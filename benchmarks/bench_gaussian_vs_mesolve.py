"""Benchmark (issue 3): gqsim's exact Gaussian engine against QuTiP mesolve in a Fock basis.

Job: two identical modes coupled by gravity with g = 0.1 omega (lambda = 0.1, frequency shifts
included), energy damping gamma = 0.05 omega into a zero-temperature bath, initial thermal
occupation 1 per mode, E_N at 200 points over three coupling periods (t = 3 x 2 pi / g).

QuTiP route (plain QuTiP, none of gqsim's code): mesolve at the smallest Fock cutoff N whose E_N
is within 1e-3 nats of the exact (Gaussian) series, then E_N = ln ||rho^{T_B}||_1 from
qutip.partial_transpose. (Cutoff-to-cutoff differences shrink faster than the error itself here,
so "N agrees with N + 1" would stop early; the exactness of the Gaussian series is established
independently by tests/oscillators against closed forms and converged Fock runs.)
gqsim route: protocol -> model -> channels -> Van Loan propagation -> log-negativity (median of
repeated runs after one warm-up, so import and compilation time is excluded for both routes:
QuTiP's is paid by the cutoff search before the timed run). BLAS runs single-threaded for both
(the benchmark machine is shared; threading noise otherwise dominates millisecond timings).

Prints the agreement, both times, the time of a 10^4-point series at occupation 10^4 (no Fock
route can hold that state), and as the last line ``gaussian_vs_mesolve_speedup: <ratio>``.
"""

from __future__ import annotations

import os

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import math  # noqa: E402
import statistics  # noqa: E402
import time  # noqa: E402

import numpy as np  # noqa: E402
import qutip  # noqa: E402
from scipy.constants import G  # noqa: E402

from gqsim.oscillators import measures  # noqa: E402
from gqsim.oscillators.channels import build_channels  # noqa: E402
from gqsim.oscillators.solve_moments import evolve_gaussian  # noqa: E402
from gqsim.oscillators.run import build, simulate_model  # noqa: E402
from gqsim.protocol.reader import parse_protocol  # noqa: E402

LAM, GAMMA, N_TH, POINTS = 0.1, 0.05, 1.0, 200
MASS, DIST = 1.0, 0.05
OMEGA = math.sqrt(G * MASS / (LAM * DIST**3))
T_END = 3 * 2 * math.pi / (LAM * OMEGA)
TOLERANCE = 1e-3


def protocol(points: int = POINTS, occupation: float = N_TH, bath: float = 0.0):
    body = lambda label, x: {"label": label, "mass_kg": MASS, "position_m": [x, 0.0, 0.0],  # noqa: E731
                             "trap_hz": OMEGA / (2 * math.pi), "initial": {"occupation": occupation},
                             "channels": {"damping_rate_per_s": GAMMA * OMEGA, "bath_occupation": bath}}
    return parse_protocol({"schema_version": 1, "family": "oscillators", "bodies": [body("A", 0.0), body("B", DIST)],
                           "stages": [{"label": "hold", "duration_s": T_END}], "time_grid": {"points": points}})


def gqsim_job(proto):
    model = build(proto)
    traj = evolve_gaussian(model, build_channels(model))
    return measures.log_negativity(traj.interaction_covariances, [1])


def qutip_job(cutoff: int) -> np.ndarray:
    a = qutip.tensor(qutip.destroy(cutoff), qutip.qeye(cutoff))
    b = qutip.tensor(qutip.qeye(cutoff), qutip.destroy(cutoff))
    x = lambda op: (op + op.dag()) / math.sqrt(2)  # noqa: E731
    p = lambda op: -1j * (op - op.dag()) / math.sqrt(2)  # noqa: E731
    # H / (hbar omega) of shared refs §2.1 in quadratures: shifts -lambda x^2, coupling 2 lambda x1 x2
    h = 0.5 * (p(a) ** 2 + p(b) ** 2) + 0.5 * (1 - 2 * LAM) * (x(a) ** 2 + x(b) ** 2) + 2 * LAM * x(a) * x(b)
    rho0 = qutip.tensor(qutip.thermal_dm(cutoff, N_TH), qutip.thermal_dm(cutoff, N_TH))
    tlist = np.linspace(0.0, T_END * OMEGA, POINTS)
    res = qutip.mesolve(h, rho0, tlist, c_ops=[math.sqrt(GAMMA) * a, math.sqrt(GAMMA) * b],
                        options={"rtol": 1e-7, "atol": 1e-9, "nsteps": 10**6})
    return np.array([math.log(np.sum(np.abs(qutip.partial_transpose(s, [0, 1]).eigenenergies())))
                     for s in res.states])


def main() -> None:
    proto = protocol()
    gqsim_job(proto)  # warm-up: numba compilation, imports
    runs = []
    for _ in range(20):
        start = time.perf_counter()
        en_gqsim = gqsim_job(proto)
        runs.append(time.perf_counter() - start)
    t_gqsim = statistics.median(runs)
    full = []
    for _ in range(5):
        start = time.perf_counter()
        simulate_model(build(proto))
        full.append(time.perf_counter() - start)
    print(f"gqsim gaussian engine (E_N, {POINTS} points): {t_gqsim * 1e3:.3f} ms (median of 20); "
          f"full pipeline with every measure and summary: {statistics.median(full) * 1e3:.3f} ms")

    previous, timings = None, {}
    cutoff = 8
    while True:
        start = time.perf_counter()
        en = qutip_job(cutoff)
        timings[cutoff] = time.perf_counter() - start
        error = float(np.max(np.abs(en - en_gqsim)))
        step = f", change from cutoff {cutoff - 1}: {np.max(np.abs(en - previous)):.2e}" if previous is not None else ""
        print(f"qutip mesolve cutoff {cutoff:2d}: {timings[cutoff]:.2f} s, max |E_N(qutip) - E_N(gqsim)| = "
              f"{error:.2e}{step}")
        if error < TOLERANCE:
            break
        previous, cutoff = en, cutoff + 1
        if cutoff > 24:
            raise SystemExit("qutip route did not reach 1e-3 below cutoff 24")
    t_qutip = timings[cutoff]
    agreement = error
    print(f"smallest cutoff within {TOLERANCE:g} nats: {cutoff} levels per mode ({t_qutip:.2f} s)")
    big = protocol(points=10_000, occupation=1e4, bath=1e4)
    gqsim_job(big)
    start = time.perf_counter()
    gqsim_job(big)
    print(f"gqsim: 10^4-point E_N series at occupation 10^4: {(time.perf_counter() - start) * 1e3:.1f} ms")
    print(f"gaussian_vs_mesolve_speedup: {t_qutip / t_gqsim:.3g}")


if __name__ == "__main__":
    main()
