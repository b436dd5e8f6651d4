"""Per-time witness design (gqsim.studies.certification.statistics.plan_ppt_scan) vs a plain QuTiP loop, same run.

Two dephased side-by-side qubits (physics-references Sec. 1.8 model, omega = 0.237527 rad/s,
gamma = 0.05 1/s) on 1000 grid times. gqsim designs the optimal PPT witness at every time
(partial transpose, Schmidt frames, phase choice, settings, repetitions); the reference only
computes the quantity the witness value must equal, the smallest eigenvalue of the partial
transpose, with qutip.partial_transpose + eigenenergies state by state. Both must agree to 1e-10.

Last line: ``certify_scan_cost_vs_qutip_pt: <factor>`` (gqsim time / QuTiP time; it does far
more work per state, so a factor of tens is expected; the point is to keep it bounded).
"""

from __future__ import annotations

import time

import numpy as np
import qutip

from gqsim.studies.certification.statistics import plan_ppt_scan

N_POINTS = 1000
OMEGA, GAMMA = 0.237527, 0.05


def states(times: np.ndarray) -> np.ndarray:
    out = np.empty((times.size, 4, 4), complex)
    i, j, k, l = np.ogrid[:2, :2, :2, :2]
    mask = ((i != k).astype(float) + (j != l).astype(float))
    for n, t in enumerate(times):
        psi = np.array([1, 1, 1, np.exp(1j * OMEGA * t)]) / 2
        rho = np.outer(psi, psi.conj()).reshape(2, 2, 2, 2) * np.exp(-GAMMA * t * mask)
        out[n] = rho.reshape(4, 4)
    return out


def main() -> None:
    times = np.linspace(0.05, 12.0, N_POINTS)
    rho = states(times)

    start = time.perf_counter()
    plan = plan_ppt_scan(rho, (2, 2), times, sigmas=3.0, overhead_s=20.0)
    t_gqsim = time.perf_counter() - start

    start = time.perf_counter()
    ref = np.array([qutip.partial_transpose(qutip.Qobj(r, dims=[[2, 2], [2, 2]]), [0, 1]).eigenenergies().min()
                    for r in rho])
    t_qutip = time.perf_counter() - start

    err = float(np.max(np.abs(plan.values - ref)))
    print(f"states: {N_POINTS}; gqsim plan_ppt_scan {t_gqsim:.3f} s; QuTiP PT eigenvalues {t_qutip:.3f} s")
    print(f"max |witness value - lambda_min(PT)|: {err:.2e}")
    if err > 1e-10:
        raise SystemExit("witness values disagree with QuTiP's partial transpose")
    print(f"certify_scan_cost_vs_qutip_pt: {t_gqsim / t_qutip:.2f}")


if __name__ == "__main__":
    main()
