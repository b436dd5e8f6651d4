"""Stage 3 (superposition family): joint-branch energies and conditional phases.

With body A in branch a and body B in branch b, the pair energy is
E_ab(t) = sum_k U_k(|r_a^A(t) - r_b^B(t)|) over the pair potentials (gravity
-G m_A m_B / r by default; Eq. (1)-(2) of [Bose2017], from memory). The Hamiltonian
is diagonal in the branch basis, so the joint state only picks up phases

    phi_ab(t) = -(1/hbar) int_0^t E_ab(t') dt'                      [rad]

(closed form while the branches are held: phi_ab = G m_A m_B t / (hbar r_ab);
composite Gauss-Legendre quadrature with a convergence check along the straight
split and recombine paths). A uniform acceleration g adds the local potential
-m g.r, i.e. a branch phase (m/hbar) g.o_a int_0^t sigma dt' that is computed in
closed form and kept apart because it never entangles.

Entangling phase (local-unitary invariant; [Bose2017], shared §1.2):
theta = phi_LR + phi_RL - phi_LL - phi_RR with L = branch 0, R = last branch.
For qudits the full matrix theta_{aa',bb'} = phi_ab' + phi_a'b - phi_ab - phi_a'b'
is available; the summary reports the outermost-branch value.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.constants import G, hbar

from gqsim.errors import EngineError
from gqsim.physics.potentials import NewtonianGravity, pair_energy_at
from gqsim.superposition.setup import SuperpositionSetup

__all__ = [
    "SuperpositionModel",
    "build_superposition_model",
    "entangling_rate_estimate",
    "mass_for_entangling_rate",
    "FIELD_PHASE_PRECISION_LIMIT_RAD",
]

# Above ~1e12 rad a double-precision phase has lost its value modulo 2 pi to 1e-4 rad.
FIELD_PHASE_PRECISION_LIMIT_RAD = 1e12

_GL_NODES, _GL_WEIGHTS = np.polynomial.legendre.leggauss(20)
_PHASE_ATOL_RAD = 1e-11  # agreement demanded between the 16- and 32-panel quadrature rules


@dataclass(frozen=True, kw_only=True)
class SuperpositionModel:
    """Branch energies and phases of a two-body superposition.

    Parameters
    ----------
    setup : the frozen physical parameters
    potentials : pair potentials summed into E_ab (gravity first)
    """

    setup: SuperpositionSetup
    potentials: tuple = field(default=())

    @property
    def dims(self) -> tuple[int, int]:
        return self.setup.dims

    def initial_amplitudes(self) -> np.ndarray:
        """(d_A * d_B,) product of the two bodies' normalised branch amplitudes."""
        a, b = self.setup.bodies
        return np.kron(a.amplitudes, b.amplitudes)

    # --------------------------------------------------------------- geometry and energies
    def relative_vectors(self, sigma: np.ndarray) -> np.ndarray:
        """(n, d_A, d_B, 3) vectors r_a^A - r_b^B at split fractions ``sigma`` (n,)."""
        a, b = self.setup.bodies
        base = (a.centre_m - b.centre_m)[None, None, :]
        q = a.offsets_m[:, None, :] - b.offsets_m[None, :, :]
        return base[None] + np.asarray(sigma, float)[:, None, None, None] * q[None]

    def pair_energies_j(self, sigma: np.ndarray) -> np.ndarray:
        """(n, d_A, d_B) E_ab [J] at split fractions ``sigma``; orientation-dependent potentials
        (fixed dipoles) see the separation vector r_a^A - r_b^B."""
        vectors = self.relative_vectors(np.atleast_1d(sigma))
        return sum(pair_energy_at(p, vectors) for p in self.potentials)

    def relative_pair_energies_j(self, sigma: np.ndarray) -> np.ndarray:
        """(n, d_A, d_B) E_ab - E_00 [J], computed without cancellation.

        When the branch span is tiny against the distance, the four E_ab agree in all but their
        last digits and their plain differences are round-off. Here r_ab - r_00 is formed as
        (v_ab - v_00).(v_ab + v_00) / (r_ab + r_00), with v_ab - v_00 = sigma (q_ab - q_00)
        exact, and each potential turns it into U(r_ab) - U(r_00) through
        :func:`energy_difference_j` (exact for gravity, midpoint rule for tiny differences
        otherwise). The global phase -(1/hbar) int E_00 dt is dropped.
        """
        sigma = np.atleast_1d(np.asarray(sigma, dtype=float))
        vectors = self.relative_vectors(sigma)  # (n, dA, dB, 3)
        ref = vectors[:, :1, :1, :]
        a, b = self.setup.bodies
        q = a.offsets_m[:, None, :] - b.offsets_m[None, :, :]
        dv = sigma[:, None, None, None] * (q - q[:1, :1])[None]
        r = np.linalg.norm(vectors, axis=-1)
        r0 = np.broadcast_to(r[:, :1, :1], r.shape)
        delta = np.einsum("nabk,nabk->nab", dv, vectors + ref) / (r + r0)
        return sum(energy_difference_j(p, vectors, ref, r, r0, delta) for p in self.potentials)

    # --------------------------------------------------------------- phases
    def relative_phases_rad(self, times_s: np.ndarray) -> np.ndarray:
        """(n_times, d_A, d_B) phi_ab(t) - phi_00(t) [rad] from :meth:`relative_pair_energies_j`:
        the phases up to a global one, kept exact when the branch span is tiny. Used by the
        engines and by the entangling phase."""
        return self._integrated_phases(times_s, self.relative_pair_energies_j)

    def phases_rad(self, times_s: np.ndarray) -> np.ndarray:
        """(n_times, d_A, d_B) interaction phases phi_ab(t) = -(1/hbar) int_0^t E_ab dt' [rad]
        (absolute; see :meth:`relative_phases_rad` for the form the engines use)."""
        return self._integrated_phases(times_s, self.pair_energies_j)

    def _integrated_phases(self, times_s, energies) -> np.ndarray:
        times = np.asarray(times_s, dtype=float)
        dA, dB = self.dims
        out = np.zeros((times.size, dA, dB))
        for t0, t1, s0, s1 in self.setup.timing.segments():
            if not np.isfinite(t1):
                t1 = max(float(times.max()), t0)
            if t1 <= t0:
                continue
            if s0 == s1:  # static branches: phases grow linearly
                rate = -energies(np.array([s0]))[0] / hbar
                elapsed = np.clip(times - t0, 0.0, t1 - t0)
                out += elapsed[:, None, None] * rate[None]
                continue
            full = self._moving_integral(energies, s0, s1, t1 - t0, np.array([1.0]))[0]
            out[times >= t1] += full
            inside = (times > t0) & (times < t1)
            if np.any(inside):
                frac = (times[inside] - t0) / (t1 - t0)
                out[inside] += self._moving_integral(energies, s0, s1, t1 - t0, frac)
        return out

    def _moving_integral(self, energies_of, s0, s1, duration, fractions):
        """-(1/hbar) int over the first ``fractions`` of a moving segment, (n_frac, d_A, d_B)."""
        def rule(panels):
            total = 0.0
            edges = np.linspace(0.0, 1.0, panels + 1)
            for lo, hi in zip(edges[:-1], edges[1:]):
                u = lo + (hi - lo) * (_GL_NODES + 1) / 2  # (k,) fraction of the partial interval
                sig = s0 + (s1 - s0) * np.multiply.outer(fractions, u)  # (n, k)
                energies = energies_of(sig.ravel()).reshape(sig.shape + self.dims)
                total = total + np.einsum("nkab,k->nab", energies, _GL_WEIGHTS) * (hi - lo) / 2
            return -total * (duration * fractions)[:, None, None] / hbar

        coarse, fine = rule(16), rule(32)
        if np.max(np.abs(fine - coarse), initial=0.0) > _PHASE_ATOL_RAD:
            raise EngineError("phase quadrature along the split/recombine path did not converge to "
                              f"{_PHASE_ATOL_RAD:g} rad; branches pass too close to each other")
        return fine

    def field_phases_rad(self, times_s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Local branch phases from the uniform field, (n_times, d_A) and (n_times, d_B) [rad].

        phi_a(t) = (m/hbar) (g . o_a) S(t), S(t) = int_0^t sigma dt' (exact: sigma is piecewise
        linear). The branch-independent part (m/hbar) g.c t is a global phase and is dropped.
        Returned modulo 2 pi in [-pi, pi).
        """
        times = np.asarray(times_s, dtype=float)
        g = self.setup.acceleration_m_s2
        if not np.any(g):
            return tuple(np.zeros((times.size, b.n_branches)) for b in self.setup.bodies)
        area = np.zeros_like(times)
        for t0, t1, s0, s1 in self.setup.timing.segments():
            if not np.isfinite(t1):
                t1 = max(float(times.max()), t0)
            if t1 <= t0:
                continue
            el = np.clip(times - t0, 0.0, t1 - t0)
            area += s0 * el + 0.5 * (s1 - s0) * el**2 / (t1 - t0)
        out = []
        for body in self.setup.bodies:
            coupling = body.mass_kg * (body.offsets_m @ g) / hbar  # (d,) rad/s at sigma = 1
            # Wrapped to [-pi, pi): local phases only matter modulo 2 pi, and wrapping keeps the
            # small gravitational phases exact when the two are added.
            out.append(np.remainder(np.multiply.outer(area, coupling) + np.pi, 2 * np.pi) - np.pi)
        return out[0], out[1]

    def field_phase_scale_rad(self) -> float:
        """Largest relative field phase over the grid [rad]; above FIELD_PHASE_PRECISION_LIMIT_RAD
        its value modulo 2 pi is not meaningful in double precision."""
        area = self.setup.timing.split_s / 2 + self.setup.timing.hold_s + self.setup.timing.recombine_s / 2
        g = self.setup.acceleration_m_s2
        spans = [body.mass_kg * np.ptp(body.offsets_m @ g) / hbar * area for body in self.setup.bodies]
        return float(max(spans))

    # --------------------------------------------------------------- entangling phase
    def entangling_phase_rad(self, times_s: np.ndarray) -> np.ndarray:
        """(n_times,) theta = phi_LR + phi_RL - phi_LL - phi_RR (L = branch 0, R = last branch),
        from the cancellation-free relative phases."""
        phi = self.relative_phases_rad(times_s)
        return phi[:, 0, -1] + phi[:, -1, 0] - phi[:, 0, 0] - phi[:, -1, -1]

    def entangling_phase_matrix_rad(self, time_s: float) -> np.ndarray:
        """Qudit generalisation at one time: theta[a, a', b, b'] = phi_ab' + phi_a'b - phi_ab - phi_a'b'
        [rad], shape (d_A, d_A, d_B, d_B); every local-unitary-invariant phase combination of the
        branch pairs (a, a') of A and (b, b') of B. For qubits theta[0, 1, 0, 1] is theta."""
        phi = self.relative_phases_rad(np.array([time_s]))[0]
        return (phi[:, None, None, :] + phi[None, :, :, None]
                - phi[:, None, :, None] - phi[None, :, None, :])

    def analytic_entangling_rate_rad_s(self) -> float:
        """d theta/dt while the branches are held apart [rad/s]:
        (G m_A m_B / hbar)(1/r_LR + 1/r_RL - 1/r_LL - 1/r_RR) for gravity alone
        (Eq. (3) of [Bose2017], from memory; shared §1.5-1.6); includes every pair potential."""
        e = self.relative_pair_energies_j(np.array([1.0]))[0]  # e[0, 0] = 0 exactly
        return float(-(e[0, -1] + e[-1, 0] - e[-1, -1]) / hbar)


# Below this relative size, U(r1) - U(r2) is taken as U'(mid) (r1 - r2): midpoint error ~ (delta/r)^2 <= 1e-12.
_MIDPOINT_BELOW = 1e-6


def energy_difference_j(potential, vectors, ref, r, r0, delta) -> np.ndarray:
    """U(r_ab) - U(r_00) [J] with delta = r_ab - r_00 given accurately.

    Uses ``potential.energy_difference_j(r, r0, delta)`` when the potential has it (gravity:
    exact), a midpoint derivative for relative differences below 1e-6 (error <= 1e-12
    relative), and the plain difference otherwise (where round-off is <= 1e-10 relative).
    Orientation-dependent potentials (fixed dipoles) take the plain difference of
    ``pair_energy_at``.
    """
    if hasattr(potential, "energy_from_vector_j"):
        return pair_energy_at(potential, vectors) - pair_energy_at(potential, ref)
    exact = getattr(potential, "energy_difference_j", None)
    if exact is not None:
        return exact(r, r0, delta)
    tiny = np.abs(delta) < _MIDPOINT_BELOW * r0
    plain = potential.energy_j(r) - potential.energy_j(r0)
    mid = np.asarray(potential.radial_derivative(r0 + delta / 2, 1)) * delta
    return np.where(tiny, mid, plain)


def build_superposition_model(setup: SuperpositionSetup, extra_potentials: tuple = ()) -> SuperpositionModel:
    """Gravity between the two bodies plus any extra pair potentials (e.g. confounders)."""
    a, b = setup.bodies
    gravity = NewtonianGravity(mass_a_kg=a.mass_kg, mass_b_kg=b.mass_kg)
    model = SuperpositionModel(setup=setup, potentials=(gravity, *extra_potentials))
    return model


def entangling_rate_estimate(mass_kg: float, branch_span_m: float, distance_m: float) -> float:
    """Back-of-envelope entangling rate G m^2 Delta x^2 / (hbar d^3) [rad/s].

    Common practice (the leading term of the in-line theta rate for Delta x << d,
    up to an O(1) factor); it is how experiments are sized before any simulation.
    """
    return G * mass_kg**2 * branch_span_m**2 / (hbar * distance_m**3)


def mass_for_entangling_rate(rate_rad_s: float, branch_span_m: float, distance_m: float) -> float:
    """Invert :func:`entangling_rate_estimate`: m = sqrt(rate hbar d^3 / (G Delta x^2)) [kg]."""
    return float(np.sqrt(rate_rad_s * hbar * distance_m**3 / (G * branch_span_m**2)))
