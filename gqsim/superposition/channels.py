"""Stage 4 (superposition family): decoherence channels of the branch degree of freedom.

Branch decoherence
------------------
A coherence between branches i and k of one body, a distance
Delta_ik(t) = sigma(t) |o_i - o_k| apart, decays as

    d rho_ik / dt = -F(Delta_ik(t)) rho_ik        (i != k),

the standard form of spatial decoherence by scattering (Eq. (3.58)-(3.73) of
[Schlosshauer2007]; [JoosZeh1985]; saturated form of [RomeroIsart2011]).
Because the gravitational Hamiltonian is diagonal in the branch basis, this
element-wise decay is exact together with the unitary part. Over a time grid the
engine needs the integrated exponent Gamma_ik(t) = int_0^t F(Delta_ik(t')) dt'.

A channel is any object with ``rate_per_s(separation_m)`` returning F(Delta) [1/s];
it may also provide ``segment_exponent(distance_m, sigma0, sigma1, duration_s)``
in closed form, otherwise the exponent is computed by composite Gauss-Legendre
quadrature with a convergence check. Environment models (gas, blackbody, ...)
produce such objects.

Spin errors
-----------
T2 adds the pure-dephasing rate 1/T2 - 1/(2 T1) to every branch coherence
(element-wise, exact). T1 is amplitude damping toward branch 0 and does not commute
with the Hamiltonian; only the Lindblad engine handles it.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Protocol as TypingProtocol, runtime_checkable

import numpy as np

from gqsim.errors import EngineError, ProtocolError
from gqsim.physics.decoherence import (BranchDecoherence, ConstantDephasing, NoDephasing, SeparationSquaredDephasing,
                                      SumOfDephasing)
from gqsim.superposition.setup import Body, DephasingSpec, Timing

__all__ = [
    "BranchDecoherence",
    "NoDephasing",
    "ConstantDephasing",
    "SeparationSquaredDephasing",
    "SumOfDephasing",
    "channel_from_spec",
    "body_channel",
    "decay_exponents",
]












def channel_from_spec(spec: DephasingSpec) -> BranchDecoherence:
    """Turn a protocol's dephasing table into a channel object."""
    if spec.model == "constant":
        return ConstantDephasing(rate=spec.rate_per_s)
    if spec.model == "separation_squared":
        return SeparationSquaredDephasing(localisation=spec.localisation_per_m2_s, saturation=spec.saturation_per_s)
    return NoDephasing()


def body_channel(body: Body, extra: tuple = ()) -> BranchDecoherence:
    """All element-wise decoherence of one body: its dephasing table, the spin's pure
    dephasing 1/T2 - 1/(2 T1), and any extra channels (e.g. from an environment model)."""
    parts = [channel_from_spec(body.dephasing)]
    if body.spin.pure_dephasing_per_s > 0:
        parts.append(ConstantDephasing(rate=body.spin.pure_dephasing_per_s))
    parts.extend(extra)
    parts = [p for p in parts if not isinstance(p, NoDephasing)]
    if not parts:
        return NoDephasing()
    return parts[0] if len(parts) == 1 else SumOfDephasing(parts=tuple(parts))


_GL_NODES, _GL_WEIGHTS = np.polynomial.legendre.leggauss(24)
_QUADRATURE_RTOL = 1e-10  # relative agreement demanded between 8- and 16-panel rules


def _quadrature_exponent(channel, distance, sigma0, sigma1, duration, panels):
    edges = np.linspace(0.0, 1.0, panels + 1)
    total = np.zeros_like(distance)
    for lo, hi in zip(edges[:-1], edges[1:]):
        u = lo + (hi - lo) * (_GL_NODES + 1) / 2  # fraction of the segment
        sig = sigma0 + (sigma1 - sigma0) * u
        rates = channel.rate_per_s(np.multiply.outer(distance, sig))
        total = total + rates @ _GL_WEIGHTS * (hi - lo) / 2
    return total * duration


def _segment_exponent(channel, distance, sigma0, sigma1, duration):
    if hasattr(channel, "segment_exponent"):
        return channel.segment_exponent(distance, sigma0, sigma1, duration)
    if isinstance(channel, SumOfDephasing):
        return sum(_segment_exponent(p, distance, sigma0, sigma1, duration) for p in channel.parts)
    coarse = _quadrature_exponent(channel, distance, sigma0, sigma1, duration, 8)
    fine = _quadrature_exponent(channel, distance, sigma0, sigma1, duration, 16)
    scale = np.maximum(np.abs(fine), 1e-300)
    if np.any(np.abs(fine - coarse) > _QUADRATURE_RTOL * scale + 1e-14):
        raise EngineError("decoherence exponent quadrature did not converge (rate function not smooth enough); "
                          "give the channel a closed-form segment_exponent")
    return fine


def decay_exponents(channel: BranchDecoherence, body: Body, timing: Timing, times_s: np.ndarray) -> np.ndarray:
    """Gamma_ik(t) = int_0^t F(sigma(t') |o_i - o_k|) dt' for every grid time.

    Returns
    -------
    (n_times, n_branches, n_branches) array, zero on the diagonal.
    """
    times = np.asarray(times_s, dtype=float)
    dist = body.branch_separations_m
    if isinstance(channel, (ConstantDephasing, NoDephasing)):  # F independent of Delta: Gamma = gamma t
        rate = channel.rate if isinstance(channel, ConstantDephasing) else 0.0
        return np.multiply.outer(times, rate * (1.0 - np.eye(dist.shape[0])))
    out = np.zeros((times.size,) + dist.shape)
    for t0, t1, s0, s1 in timing.segments():
        if not np.isfinite(t1):
            t1 = max(float(times.max()), t0)
        if t1 <= t0:
            continue
        full = _segment_exponent(channel, dist, s0, s1, t1 - t0)
        after = times >= t1
        out[after] += full
        inside = np.flatnonzero((times > t0) & (times < t1))
        if s0 == s1:  # static branches: the exponent grows linearly with elapsed time
            out[inside] += np.multiply.outer(times[inside] - t0, full / (t1 - t0))
            continue
        for idx in inside:  # partial segments: sigma goes s0 -> s(t) over t - t0
            frac = (times[idx] - t0) / (t1 - t0)
            out[idx] += _segment_exponent(channel, dist, s0, s0 + (s1 - s0) * frac, times[idx] - t0)
    np.einsum("nii->ni", out)[:] = 0.0
    return out
