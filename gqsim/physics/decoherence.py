"""Spatial decoherence of a branch coherence: channels F(Delta) [1/s] as functions of the
branch separation Delta.

A coherence between branches a distance Delta apart decays as d rho_ik/dt = -F(Delta) rho_ik,
the standard form of spatial decoherence by scattering (Eq. (3.58)-(3.73) of [Schlosshauer2007];
[JoosZeh1985]; saturated form of [RomeroIsart2011]). A channel is any object with
``rate_per_s(separation_m)``; it may also give ``segment_exponent(distance_m, sigma0, sigma1,
duration_s)`` in closed form. The model families integrate them along their branch paths.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Protocol as TypingProtocol, runtime_checkable

import numpy as np

from gqsim.errors import ProtocolError

__all__ = ["BranchDecoherence", "NoDephasing", "ConstantDephasing", "SeparationSquaredDephasing", "SumOfDephasing"]


@runtime_checkable
class BranchDecoherence(TypingProtocol):
    """Interface of a branch-decoherence channel: F(Delta) [1/s] for separations Delta [m]."""

    def rate_per_s(self, separation_m: np.ndarray) -> np.ndarray: ...


@dataclass(frozen=True, kw_only=True)
class NoDephasing:
    """F(Delta) = 0."""

    def rate_per_s(self, separation_m):
        return np.zeros_like(np.asarray(separation_m, dtype=float))

    def segment_exponent(self, distance_m, sigma0, sigma1, duration_s):
        return np.zeros_like(np.asarray(distance_m, dtype=float))


@dataclass(frozen=True, kw_only=True)
class ConstantDephasing:
    """F(Delta) = gamma for every pair of distinct branches, whatever their separation.

    The usual phenomenological dephasing of a which-path qubit (e.g. the model of
    shared §1.8 and of [Schut2022]); ``rate_per_s`` = gamma [1/s].
    """

    rate: float

    def __post_init__(self):
        if not (np.isfinite(self.rate) and self.rate >= 0):
            raise ProtocolError("dephasing.rate_per_s", self.rate, "must be a finite number >= 0")

    def rate_per_s(self, separation_m):
        return np.full_like(np.asarray(separation_m, dtype=float), self.rate)

    def segment_exponent(self, distance_m, sigma0, sigma1, duration_s):
        return np.full_like(np.asarray(distance_m, dtype=float), self.rate * duration_s)


@dataclass(frozen=True, kw_only=True)
class SeparationSquaredDephasing:
    """F(Delta) = min(Lambda Delta^2, gamma): long-wavelength localisation saturating at gamma.

    Long-wavelength limit Eq. (3.58)/(3.73) of [Schlosshauer2007] (from memory);
    saturation at the total scattering rate as in [RomeroIsart2011].

    Parameters
    ----------
    localisation : Lambda [1/(m^2 s)]
    saturation : gamma [1/s], or None for no saturation
    """

    localisation: float
    saturation: float | None = None

    def __post_init__(self):
        if not (np.isfinite(self.localisation) and self.localisation >= 0):
            raise ProtocolError("dephasing.localisation_per_m2_s", self.localisation, "must be a finite number >= 0")
        if self.saturation is not None and not (np.isfinite(self.saturation) and self.saturation > 0):
            raise ProtocolError("dephasing.saturation_per_s", self.saturation, "must be a finite number > 0")

    def rate_per_s(self, separation_m):
        rate = self.localisation * np.asarray(separation_m, dtype=float) ** 2
        return rate if self.saturation is None else np.minimum(rate, self.saturation)

    def segment_exponent(self, distance_m, sigma0, sigma1, duration_s):
        """Exact int F(sigma(t) D) dt over a segment where sigma goes linearly sigma0 -> sigma1."""
        d = np.asarray(distance_m, dtype=float)
        if sigma0 == sigma1:
            return self.rate_per_s(sigma0 * d) * duration_s
        k = self.localisation * d**2

        def antiderivative(s):  # int_0^s min(k u^2, gamma) du
            if self.saturation is None:
                return k * s**3 / 3
            with np.errstate(divide="ignore", invalid="ignore"):
                s_star = np.where(k > 0, np.sqrt(self.saturation / np.where(k > 0, k, 1.0)), np.inf)
            below = k * np.minimum(s, s_star) ** 3 / 3
            above = np.where(s > s_star, self.saturation * (s - s_star), 0.0)
            return below + above

        return duration_s * (antiderivative(sigma1) - antiderivative(sigma0)) / (sigma1 - sigma0)


@dataclass(frozen=True, kw_only=True)
class SumOfDephasing:
    """Independent decoherence sources add their rates: F = sum_k F_k."""

    parts: tuple

    def rate_per_s(self, separation_m):
        return sum(p.rate_per_s(separation_m) for p in self.parts)
