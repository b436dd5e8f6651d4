"""Channels stage for trapped oscillators: open-system terms in the model's scaled units.

Every channel is linear in the quadratures, so Gaussian states stay Gaussian. The master
equation (in scaled units, hbar = 1, time tau = omega_unit t) is

    d rho/dtau = -i [H, rho] + sum_k D[L_k] rho - i (gamma_v/2) [x_i, {p_i, rho}]   (brownian only),
    D[L] rho = L rho L^dag - 1/2 {L^dag L, rho},   L_k = c_k . r  (c_k complex row vectors),

with, per active mode i of a body (a = (x + i p)/sqrt2 the preparation-trap ladder operator):

``quantum_optical`` damping (Eq. (5.x) of [BreuerPetruccione2002], the quantum-optical master
    equation): L = sqrt(gamma (n+1)) a and L = sqrt(gamma n) a^dag. The steady state is the
    thermal state with occupation n of the preparation trap.
``brownian`` damping (Caldeira-Leggett, Eq. (3.x) of [CaldeiraLeggett1983]): the non-Lindblad
    term -i (gamma_v/2)[x, {p, rho}] (velocity damping dp/dt = -gamma_v p) plus
    Lambda_th = m gamma_v k_B T / hbar^2 localisation (Sec. 3.4 of [Schlosshauer2007]).
localisation: d rho/dt = -Lambda [X, [X, rho]] (SI X), i.e. L = sqrt(2 Lambda) X: momentum
    diffusion d<P^2>/dt = 2 Lambda hbar^2, heating at Lambda hbar/(m omega) phonons/s
    (Eq. (3.58) of [Schlosshauer2007]; equation number from memory).
heating: L = sqrt(Gamma) a and sqrt(Gamma) a^dag: d<n>/dt = Gamma, no damping (phase-insensitive
    heating, common practice).
continuous position measurement: backaction identical to localisation with strength k; with
    efficiency eta and ``conditional = True`` the covariance follows the conditional Riccati
    equation (Eq. (47) of [Genoni2016], equation number from memory).

Moments (Eq. (4.x) of [Serafini2017]; [Genoni2016]): with sigma_jk = <{dr_j, dr_k}> (vacuum I),
    d rbar/dtau = A rbar - Omega h,   d sigma/dtau = A sigma + sigma A^T + D,
    A = Omega (H + Im(C^dag C)) + A_brownian,   D = 2 Omega Re(C^dag C) Omega^T.

Equation numbers cited in this module are recalled, not checked against the papers (from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.constants import hbar, k as k_B

from gqsim.oscillators.model import OscillatorModel, symplectic_form

__all__ = ["OpenDynamics", "build_channels", "lindblad_moments"]


@dataclass(frozen=True, kw_only=True)
class OpenDynamics:
    """Open-system terms of a model, in scaled units.

    Attributes
    ----------
    jumps : (n_jumps, 2n) complex rows c_k with L_k = c_k . r (rates folded in)
    brownian_rate : (n,) gamma_v / omega_unit of the Caldeira-Leggett term per mode (0 if none)
    drift : (2n, 2n) A_open = Omega Im(C^dag C) + A_brownian (added to Omega H)
    diffusion : (2n, 2n) D = 2 Omega Re(C^dag C) Omega^T
    measurement : (2n, 2n) M of the conditional Riccati term - sigma M sigma (zero unless
        conditional position measurement is on)
    labels : one line per channel for the report
    """

    jumps: np.ndarray
    brownian_rate: np.ndarray
    drift: np.ndarray
    diffusion: np.ndarray
    measurement: np.ndarray
    labels: tuple[str, ...]

    @property
    def is_closed(self) -> bool:
        return not self.jumps.size and not np.any(self.brownian_rate)


def lindblad_moments(jumps: np.ndarray, n_modes: int) -> tuple[np.ndarray, np.ndarray]:
    """Drift addition Omega Im(C^dag C) and diffusion 2 Omega Re(C^dag C) Omega^T of linear jumps.

    Eq. (4.x) of [Serafini2017] / Eq. (14) of [Genoni2016] (equation numbers from memory), in
    the convention sigma_jk = <{dr_j, dr_k}>. ``jumps`` is (n_jumps, 2n), or a stack
    (..., n_jumps, 2n) giving stacked results (the batched sweep route).
    """
    omega = symplectic_form(n_modes)
    if jumps.shape[-2] == 0:
        z = np.zeros(jumps.shape[:-2] + (2 * n_modes, 2 * n_modes))
        return z, z.copy()
    gram = np.swapaxes(jumps.conj(), -1, -2) @ jumps
    return omega @ gram.imag, 2.0 * omega @ gram.real @ omega.T


def build_channels(model: OscillatorModel) -> OpenDynamics:
    """Collect every body's channels into one :class:`OpenDynamics` (scaled units)."""
    n = model.n_modes
    scales = model.scales
    rows: list[np.ndarray] = []
    brownian = np.zeros(n)
    meas = np.zeros((2 * n, 2 * n))
    labels: list[str] = []

    def unit_row(i: int, cx: complex, cp: complex) -> np.ndarray:
        row = np.zeros(2 * n, dtype=complex)
        row[2 * i], row[2 * i + 1] = cx, cp
        return row

    for body in model.setup.bodies:
        ch = body.channels
        for i in model.body_modes(body.label):
            name = model.mode_names[i]
            omega = scales.omega_ref_rad_s[i]
            ell = scales.length_m[i]
            gamma = scales.rate_to_unit(ch.damping_rate_per_s)
            if gamma > 0 and ch.damping_model == "quantum_optical":
                nb = ch.bath_occupation_at(omega)
                rows.append(unit_row(i, 1, 1j) * math.sqrt(gamma * (nb + 1) / 2))
                if nb > 0:
                    rows.append(unit_row(i, 1, -1j) * math.sqrt(gamma * nb / 2))
                labels.append(f"{name}: quantum-optical damping gamma = {ch.damping_rate_per_s:.4g} /s, "
                              f"bath occupation {nb:.4g}")
            elif gamma > 0:
                brownian[i] = gamma
                lam = body.mass_kg * ch.damping_rate_per_s * k_B * ch.bath_temperature_k / hbar**2
                if lam > 0:
                    rows.append(unit_row(i, math.sqrt(2 * lam * ell**2 / scales.omega_unit_rad_s), 0))
                labels.append(f"{name}: Caldeira-Leggett damping gamma_v = {ch.damping_rate_per_s:.4g} /s, "
                              f"T = {ch.bath_temperature_k:.4g} K (Lambda = {lam:.4g} /m^2/s)")
            if ch.localisation_per_m2_s > 0:
                rate = 2 * ch.localisation_per_m2_s * ell**2 / scales.omega_unit_rad_s
                rows.append(unit_row(i, math.sqrt(rate), 0))
                labels.append(f"{name}: localisation Lambda = {ch.localisation_per_m2_s:.4g} /m^2/s "
                              f"(heats {ch.localisation_per_m2_s * hbar / (body.mass_kg * omega):.4g} phonons/s)")
            if ch.heating_phonons_per_s > 0:
                rate = scales.rate_to_unit(ch.heating_phonons_per_s)
                rows.append(unit_row(i, 1, 1j) * math.sqrt(rate / 2))
                rows.append(unit_row(i, 1, -1j) * math.sqrt(rate / 2))
                labels.append(f"{name}: heating {ch.heating_phonons_per_s:.4g} phonons/s")
            if ch.measurement_per_m2_s > 0:
                kappa = 2 * ch.measurement_per_m2_s * ell**2 / scales.omega_unit_rad_s
                rows.append(unit_row(i, math.sqrt(kappa), 0))
                if model.setup.solver.conditional:
                    # Riccati term for homodyne monitoring of L = sqrt(kappa) x with efficiency eta.
                    meas[2 * i, 2 * i] = 2 * kappa * ch.measurement_efficiency
                labels.append(f"{name}: position measurement k = {ch.measurement_per_m2_s:.4g} /m^2/s, "
                              f"efficiency {ch.measurement_efficiency:.3g}"
                              + (" (conditional)" if model.setup.solver.conditional else " (unconditional)"))
    jumps = np.array(rows) if rows else np.zeros((0, 2 * n), dtype=complex)
    drift, diffusion = lindblad_moments(jumps, n)
    drift = drift + np.diag(np.ravel(np.column_stack([np.zeros(n), -brownian])))
    return OpenDynamics(jumps=jumps, brownian_rate=brownian, drift=drift, diffusion=diffusion,
                        measurement=meas, labels=tuple(labels))
