"""Gaussian entanglement measures against closed forms and against QuTiP in a Fock basis."""

import math

import numpy as np
import pytest
import qutip
from hypothesis import given, settings, strategies as st

from gqsim.oscillators import measures

# float64 rounding of O(1) covariance algebra (eigh of 4x4 matrices)
ROUNDING = 1e-12


def tmsv(r, n=0.0):
    """Two-mode squeezed thermal covariance (vacuum = I): sigma = (2n+1) [[c I, s Z], [s Z, c I]]."""
    c, s = math.cosh(2 * r), math.sinh(2 * r)
    z = np.diag([1.0, -1.0])
    return (2 * n + 1) * np.block([[c * np.eye(2), s * z], [s * z, c * np.eye(2)]])


def local_symplectic(a, b, c, d):
    """Direct sum of two single-mode symplectic maps (rotation x squeezing x rotation)."""
    def one(t1, r, t2):
        rot = lambda t: np.array([[math.cos(t), -math.sin(t)], [math.sin(t), math.cos(t)]])  # noqa: E731
        return rot(t1) @ np.diag([math.exp(-r), math.exp(r)]) @ rot(t2)
    s = np.zeros((4, 4))
    s[:2, :2] = one(a, b, 0.3)
    s[2:, 2:] = one(c, d, -0.7)
    return s


@pytest.mark.parametrize("r", [0.5, 1.0])
def test_tmsv_log_negativity_is_2r(r):
    # Vidal & Werner, PRA 65, 032314 (2002): E_N of the TMSV is 2r nats (shared refs §5.1: 1.0 and 2.0)
    assert measures.log_negativity(tmsv(r), [1]) == pytest.approx(2 * r, abs=ROUNDING)


@pytest.mark.parametrize("r, expected", [(0.5, -0.345275), (1.0, -3.288529)])
def test_tmsv_simon_value(r, expected):
    # Simon, PRL 84, 2726 (2000), Eq. (17) (from memory): LHS - RHS = -sinh^2(2r)/4 (shared §5.2)
    value = measures.simon_invariant(tmsv(r))
    assert value == pytest.approx(-math.sinh(2 * r) ** 2 / 4, abs=ROUNDING)
    # the table is quoted to 6 decimals (its -0.345275 rounds -0.3452745 up): allow one unit in the last place
    assert value == pytest.approx(expected, abs=1.01e-6)


def test_simon_of_a_subnormal_correlation():
    # TMSV with r = 5e-324 (a hypothesis example): -sinh^2(2r)/4 underflows to 0 (Simon 2000), with
    # no floating-point warning from a determinant's pivot division (warnings are errors here)
    s = local_symplectic(0.0, 0.0, 2.0, 0.0)  # rotates the correlation block off the diagonal
    assert measures.simon_invariant(s @ tmsv(5e-324) @ s.T) == pytest.approx(0.0, abs=ROUNDING)


def test_vacuum_saturates_simon():
    # Simon 2000: pure product states give exactly 0 (shared §5.2 vacuum check)
    assert measures.simon_invariant(np.eye(4)) == pytest.approx(0.0, abs=ROUNDING)


@pytest.mark.parametrize("r, expected", [(0.5, 0.735759), (1.0, 0.270671)])
def test_tmsv_duan_sum(r, expected):
    # Duan, Giedke, Cirac, Zoller, PRL 84, 2722 (2000): Var(x1-x2)+Var(p1+p2) = 2 e^{-2r}, bound 2 (shared §5.3)
    duan = measures.duan_optimised(tmsv(r))
    assert duan["value"] == pytest.approx(2 * math.exp(-2 * r), abs=ROUNDING)
    assert duan["value"] == pytest.approx(expected, abs=5e-7)
    assert duan["bound"] == pytest.approx(2.0, abs=ROUNDING)
    assert duan["scaling"] == pytest.approx(1.0, abs=ROUNDING)


def test_duan_finds_the_wrong_sign_pair_by_rotation():
    # Duan 2000 with a0 = +1 on the mirrored TMSV (x1+x2, p1-p2 squeezed) gives the same 2 e^{-2r}
    mirror = np.diag([1.0, 1.0, -1.0, -1.0])  # local rotation by pi of mode 2
    duan = measures.duan_optimised(mirror @ tmsv(0.5) @ mirror)
    assert duan["value"] == pytest.approx(2 * math.exp(-1.0), abs=ROUNDING)


@pytest.mark.parametrize("coupling", [1e-9, 1e-4, 0.3])
def test_duan_scaling_is_the_true_minimum_for_unequal_modes(coupling):
    """Duan 2000 Eq. (4) ratio (a^2 s1 + s2/a^2 - K)/(a^2 + 1/a^2) minimised over a by scipy's
    bounded scalar minimiser equals the closed form; unequal local squeezing and a weak coupling
    once made the textbook a^2 formula cancel to 0 (division by zero)."""
    from scipy.optimize import minimize_scalar

    sigma = np.diag([math.exp(-1.8), math.exp(1.8), 1.0, 1.0])  # mode 1 squeezed, mode 2 vacuum
    sigma[0, 2] = sigma[2, 0] = coupling
    duan = measures.duan_optimised(sigma)
    s1, s2 = 0.5 * (sigma[0, 0] + sigma[1, 1]), 0.5 * (sigma[2, 2] + sigma[3, 3])
    k = coupling  # |(M11 + M22, M12 - M21)| with M = Z C, C = [[coupling, 0], [0, 0]]

    def ratio(log_a2):
        a2 = math.exp(log_a2)
        return (a2 * s1 + s2 / a2 - k) / (a2 + 1 / a2)

    best = minimize_scalar(ratio, bounds=(-60.0, 60.0), method="bounded", options={"xatol": 1e-12})
    assert np.isfinite(duan["value"]) and duan["scaling"] > 0
    assert duan["value"] / duan["bound"] == pytest.approx(best.fun, rel=1e-9)
    assert duan["value"] == pytest.approx(duan["scaling"] ** 2 * s1 + s2 / duan["scaling"] ** 2 - k, rel=1e-12)


def test_squeezed_thermal_log_negativity():
    # Two-mode squeezed thermal: E_N = max(0, 2r - ln(2n+1)); r = 1, n = 1 -> 0.901388 (shared §5.1)
    assert measures.log_negativity(tmsv(1.0, 1.0), [1]) == pytest.approx(0.901388, abs=5e-7)
    assert measures.log_negativity(tmsv(0.2, 1.0), [1]) == 0.0


def test_thermal_state_purity_and_entropy():
    # Single-mode thermal state: purity 1/(2n+1), entropy (n+1)ln(n+1) - n ln n (textbook, from memory)
    n = 2.5
    cov = (2 * n + 1) * np.eye(2)
    assert measures.purity(cov) == pytest.approx(1 / (2 * n + 1), rel=ROUNDING)
    assert measures.von_neumann_entropy(cov) == pytest.approx((n + 1) * math.log(n + 1) - n * math.log(n), rel=1e-12)


def test_tmsv_mutual_information_is_twice_local_entropy():
    # Pure bipartite states: I(A:B) = 2 S(A) (Araki-Lieb equality, textbook); S(A) of a thermal state with
    # n = sinh^2 r
    r = 0.7
    n = math.sinh(r) ** 2
    s_local = (n + 1) * math.log(n + 1) - n * math.log(n)
    assert measures.mutual_information(tmsv(r), [0], [1]) == pytest.approx(2 * s_local, rel=1e-10)


def test_log_negativity_matches_qutip_partial_transpose():
    # QuTiP's own partial_transpose on a Fock-basis two-mode squeezed vacuum (cutoff large enough that
    # the truncated tail tanh^(2N) r ~ 1e-24 is negligible)
    r, cutoff = 0.4, 28
    psi = sum(math.tanh(r) ** k / math.cosh(r) * qutip.tensor(qutip.basis(cutoff, k), qutip.basis(cutoff, k))
              for k in range(cutoff))
    rho = qutip.ket2dm(psi)
    pt = qutip.partial_transpose(rho, [0, 1])
    qutip_value = math.log(sum(abs(e) for e in pt.eigenenergies()))
    assert measures.log_negativity(tmsv(r), [1]) == pytest.approx(qutip_value, abs=1e-10)


def test_symplectic_eigenvalues_of_a_product_thermal_state():
    # Williamson normal form of a product thermal state: nu_k = 2 n_k + 1 (Serafini 2017, from memory)
    cov = np.diag([3.0, 3.0, 7.0, 7.0])
    assert np.allclose(measures.symplectic_eigenvalues(cov), [3.0, 7.0], atol=ROUNDING)


@settings(derandomize=True, max_examples=40, deadline=None)
@given(r=st.floats(0.0, 1.5), n=st.floats(0.0, 3.0), angles=st.tuples(*[st.floats(-3, 3)] * 2),
       squeeze=st.tuples(*[st.floats(-1, 1)] * 2))
def test_measures_invariant_under_local_symplectic_maps(r, n, angles, squeeze):
    # Entanglement measures are invariant under local unitaries (Vidal & Werner 2002; Simon 2000)
    cov = tmsv(r, n)
    s = local_symplectic(angles[0], squeeze[0], angles[1], squeeze[1])
    moved = s @ cov @ s.T
    assert measures.log_negativity(moved, [1]) == pytest.approx(measures.log_negativity(cov, [1]), abs=1e-9)
    simon = measures.simon_invariant(cov)
    assert measures.simon_invariant(moved) == pytest.approx(simon, abs=1e-8 * (1 + abs(simon)))
    assert measures.purity(moved) == pytest.approx(measures.purity(cov), rel=1e-9)
    info = measures.mutual_information(cov, [0], [1])
    assert measures.mutual_information(moved, [0], [1]) == pytest.approx(info, abs=1e-8)


@settings(derandomize=True, max_examples=40, deadline=None)
@given(n1=st.floats(0.0, 5.0), n2=st.floats(0.0, 5.0), r1=st.floats(-1, 1), r2=st.floats(-1, 1),
       t=st.floats(-3, 3))
def test_product_states_are_never_entangled(n1, n2, r1, r2, t):
    # Product states are separable: E_N = 0, Simon >= 0, Duan >= bound, simon_min_eigenvalue >= 0 (Simon 2000)
    cov = np.diag([2 * n1 + 1, 2 * n1 + 1, 2 * n2 + 1, 2 * n2 + 1])
    s = local_symplectic(t, r1, -t, r2)
    cov = s @ cov @ s.T
    assert measures.log_negativity(cov, [1]) <= ROUNDING  # 0 up to eigensolver rounding
    assert measures.simon_invariant(cov) >= -1e-9 * np.max(cov) ** 4
    assert measures.simon_min_eigenvalue(cov, [1]) >= -1e-9 * np.max(cov)
    duan = measures.duan_optimised(cov)
    assert duan["value"] >= duan["bound"] * (1 - 1e-12)
