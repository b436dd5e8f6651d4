"""The compiled two-oscillator sweep kernel (gqsim.oscillators.batched_kernel) against its numpy
reference (gqsim.oscillators.measures on the numpy-propagated stack, i.e. Cholesky + LAPACK
eigensolvers), against closed forms and against 60-digit mpmath."""

import math

import mpmath
import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from gqsim.errors import ProtocolError
from gqsim.oscillators import measures
from gqsim.oscillators.solve_moments import van_loan
from gqsim.oscillators.model import symplectic_form
from gqsim.oscillators import batched_kernel as gk

EPS = float(np.finfo(float).eps)
#: accuracy promised by the batched route: kernel and numpy reference agree to 1e-12 absolute
ATOL = 1e-12
#: first-order rounding (derived here): relative-eps errors in the entries of sigma move nu~_- by
#: up to ~eps ||sigma||^2 / nu~_- through the symplectic diagonalisation, hence E_N by
#: eps ||sigma||^2 / nu~_-^2; LAPACK's route carries that much (measured <= 1.7x this over 90000
#: random states), so the comparison allows 4x it where it exceeds ATOL (||sigma|| >~ 30)
EN_ROUNDING_FACTOR = 4.0
#: backward-stable Hermitian eigensolvers (LAPACK's and the kernel's) differ by a few
#: eps ||sigma~ + i Omega|| (measured <= 5.2 eps ||sigma||_max over 90000 random states)
LAMBDA_ROUNDING_FACTOR = 16.0


# ------------------------------------------------------------------------------------------------
# symplectic building blocks (x1, p1, x2, p2), vacuum sigma = I; e.g. Sec. 5.1 of [Serafini2017]
# (from memory). Each is checked to be symplectic in test_building_blocks_are_symplectic.

def rot(t):
    return np.array([[math.cos(t), -math.sin(t)], [math.sin(t), math.cos(t)]])


def local(t1, r, t2):
    """Rotation x squeezer x rotation on one mode."""
    return rot(t1) @ np.diag([math.exp(-r), math.exp(r)]) @ rot(t2)


def both(a, b):
    out = np.zeros((4, 4))
    out[:2, :2] = a
    out[2:, 2:] = b
    return out


def beam_splitter(t):
    c, s = math.cos(t), math.sin(t)
    return np.block([[c * np.eye(2), s * np.eye(2)], [-s * np.eye(2), c * np.eye(2)]])


def two_mode_squeezer(r):
    c, s, z = math.cosh(r), math.sinh(r), np.diag([1.0, -1.0])
    return np.block([[c * np.eye(2), s * z], [s * z, c * np.eye(2)]])


def williamson(s, nu1, nu2):
    """S diag(nu1, nu1, nu2, nu2) S^T: every physical covariance has this form (Williamson)."""
    return s @ np.diag([nu1, nu1, nu2, nu2]) @ s.T


def tmsv(r, n=0.0):
    return williamson(two_mode_squeezer(r), 2 * n + 1, 2 * n + 1)


def reference(covs):
    covs = np.asarray(covs)
    return measures.log_negativity(covs, [1]), measures.simon_min_eigenvalue(covs, [1])


def en_tolerance(covs):
    """max(ATOL, EN_ROUNDING_FACTOR eps ||sigma||^2 / nu~_-^2) per covariance (see the constant)."""
    covs = np.asarray(covs).reshape(-1, 4, 4)
    nu = measures.symplectic_eigenvalues(measures.partial_transpose(covs, [1]))[:, 0]
    big = np.abs(covs).max(axis=(1, 2))
    return np.maximum(ATOL, EN_ROUNDING_FACTOR * EPS * big**2 / nu**2)


def lambda_tolerance(covs):
    big = np.abs(np.asarray(covs).reshape(-1, 4, 4)).max(axis=(1, 2))
    return np.maximum(ATOL, LAMBDA_ROUNDING_FACTOR * EPS * (big + 1.0))


def mp_log_negativity(cov):
    """E_N of the float64 matrix taken as exact, with 60 digits: nu~_-^2 from the invariant form
    (D~ -+ sqrt(D~^2 - 4 det sigma))/2, D~ = det A + det B - 2 det C (Eq. (3) of [Simon2000] and
    shared references §5.1, from memory); the cancellation is harmless at 60 digits (a discriminant
    below its 1e-60 rounding is clipped to 0, an error of 1e-30 in nu~)."""
    with mpmath.workdps(60):
        m = mpmath.matrix([[mpmath.mpf(float(x)) for x in row] for row in cov])
        det_a = m[0, 0] * m[1, 1] - m[0, 1] * m[1, 0]
        det_b = m[2, 2] * m[3, 3] - m[2, 3] * m[3, 2]
        det_c = m[0, 2] * m[1, 3] - m[0, 3] * m[1, 2]
        d_pt = det_a + det_b - 2 * det_c
        root = mpmath.sqrt(max(d_pt**2 - 4 * mpmath.det(m), 0))
        return float(sum(max(0, -mpmath.log((d_pt + sign * root) / 2) / 2) for sign in (-1, 1)))


def test_building_blocks_are_symplectic():
    # S Omega S^T = Omega defines the symplectic group (Serafini 2017, from memory)
    omega = symplectic_form(2)
    for s in (both(local(0.3, 1.7, -1.1), local(2.0, -0.4, 0.5)), beam_splitter(0.8), two_mode_squeezer(1.3)):
        np.testing.assert_allclose(s @ omega @ s.T, omega, atol=1e-13)


# ------------------------------------------------------------------------------------------------
# single covariances: closed forms, product states, near-product states, random physical states


@pytest.mark.parametrize("r", [0.1, 0.5, 1.0, 2.0])
def test_tmsv_log_negativity_is_2r_and_simon_eigenvalue(r):
    # E_N(TMSV) = 2r nats (Vidal & Werner 2002; Adesso & Illuminati 2007; shared references §5.1,
    # from memory). sigma~ + i Omega of the TMSV splits into (mode1 +- mode2)/sqrt2 blocks
    # (cosh 2r -+ sinh 2r) I + i J, so its smallest eigenvalue is e^{-2r} - 1 (derived here).
    cov = tmsv(r)
    en, lam = gk.measure_covariances(cov[None])
    assert en[0] == pytest.approx(2 * r, abs=ATOL)
    assert lam[0] == pytest.approx(math.exp(-2 * r) - 1, abs=lambda_tolerance(cov)[0])


@pytest.mark.parametrize("r, n", [(1.0, 1.0), (0.5, 0.2), (0.2, 1.0), (2.0, 3.0)])
def test_squeezed_thermal_log_negativity(r, n):
    # two-mode squeezed thermal state: E_N = max(0, 2r - ln(2n + 1)) (shared references §5.1, from memory)
    en, _ = gk.measure_covariances(tmsv(r, n)[None])
    assert en[0] == pytest.approx(max(0.0, 2 * r - math.log(2 * n + 1)), abs=ATOL)


def test_product_states_have_zero_log_negativity():
    # product states are separable: E_N = 0 ([Simon2000]); with C = 0 the kernel's nu~ are
    # sqrt(det A), sqrt(det B), exactly 1 for pure states up to the rounding of det (<= 1e-15 here)
    squeezed = local(0.7, 1.0, -0.3) @ local(0.7, 1.0, -0.3).T
    states = [np.eye(4), np.diag([3.0, 3.0, 1.5, 1.5]), np.diag([math.exp(-4), math.exp(4), 2.0, 2.0]),
              both(squeezed, np.eye(2)), both(squeezed, local(-1.2, 0.4, 0.0) @ local(-1.2, 0.4, 0.0).T)]
    en, lam = gk.measure_covariances(np.array(states))
    assert en[1] == 0.0  # thermal factors: nu~ = 1.5, 3 > 1
    assert np.all(en <= 1e-15)
    np.testing.assert_allclose(lam, reference(states)[1], rtol=0, atol=ATOL)
    assert lam[0] == pytest.approx(0.0, abs=4 * EPS)  # vacuum: I + i Omega has eigenvalues 0, 0, 2, 2


@pytest.mark.parametrize("r", [5e-11, 3e-9, 1e-6])
@pytest.mark.parametrize("local_r", [0.0, 0.5, 1.0])
def test_near_product_states_keep_full_precision(r, local_r):
    # A weakly squeezed TMSV behind local squeezers: E_N = 2r exactly (local symplectic invariance,
    # [VidalWerner2002]). The invariant formula's cancelling discriminant would err by ~sqrt(eps)
    # ~ 1e-8, far above 2r = 1e-10; the kernel must stay at the rounding level eps ||sigma||^2.
    s = both(local(0.4, local_r, 1.1), local(-0.9, local_r, 0.2))
    cov = s @ tmsv(r) @ s.T
    en, lam = gk.measure_covariances(cov[None])
    rounding = EN_ROUNDING_FACTOR * EPS * np.abs(cov).max() ** 2
    assert en[0] == pytest.approx(2 * r, abs=rounding)
    ref_en, ref_lam = reference(cov[None])
    assert en[0] == pytest.approx(ref_en[0], abs=ATOL)
    assert lam[0] == pytest.approx(ref_lam[0], abs=ATOL)
    assert lam[0] < 0  # NPT, Simon's criterion (Eq. (8) of [Simon2000])


def test_simon_eigenvalue_in_the_vacuum_degeneracy():
    # I + i Omega has the double eigenvalue 0: tiny perturbations split it by ~1e-9..1e-12; a
    # backward-stable solver matches LAPACK to a few eps, a quartic formula would lose half the digits
    covs = [williamson(two_mode_squeezer(x) @ beam_splitter(0.3), 1 + y, 1 + z)
            for x, y, z in [(1e-9, 0.0, 0.0), (1e-12, 1e-10, 0.0), (0.0, 1e-11, 2e-11), (3e-10, 1e-10, 1e-10)]]
    _, lam = gk.measure_covariances(np.array(covs))
    np.testing.assert_allclose(lam, reference(covs)[1], rtol=0, atol=8 * EPS)


@pytest.mark.parametrize("tiny", [1e-150, 1e-160, 1e-300, 5e-320])
def test_correlations_near_underflow(tiny):
    # correlations whose squares underflow (a hypothesis find: kappa ~ 1e-154 once gave inf):
    # both measures must still match LAPACK, which scales internally
    cov = williamson(both(local(0.3, 0.8, 0.0), local(-1.0, 0.3, 0.4)), 1.0, 1.2)
    cov[:2, 2:] = tiny * np.array([[1.0, -2.0], [0.5, 3.0]])
    cov[2:, :2] = cov[:2, 2:].T
    en, lam = gk.measure_covariances(cov[None])
    ref_en, ref_lam = reference(cov[None])
    assert en[0] <= 1e-15 and ref_en[0] <= 1e-15  # mode 1 is pure: nu~_- = 1 up to rounding
    assert lam[0] == pytest.approx(ref_lam[0], abs=lambda_tolerance(cov)[0])


_angle = st.floats(0.0, 2 * math.pi)


@st.composite
def physical_states(draw, local_r=2.0, mixing_r=0.5, inner_r=0.3):
    """S diag(nu1, nu1, nu2, nu2) S^T with S = locals(r <= local_r) x beam splitter x
    two-mode squeezer(|r| <= mixing_r) x locals(r <= inner_r), nu in [1, 3]."""
    def locals_(rmax):
        return both(local(draw(_angle), draw(st.floats(0, rmax)), draw(_angle)),
                    local(draw(_angle), draw(st.floats(0, rmax)), draw(_angle)))
    s = (locals_(local_r) @ beam_splitter(draw(_angle)) @ two_mode_squeezer(draw(st.floats(-mixing_r, mixing_r)))
         @ locals_(inner_r))
    nu1, nu2 = draw(st.sampled_from([1.0, 1.0 + 1e-9])), draw(st.floats(1.0, 3.0))
    if draw(st.booleans()):
        nu1, nu2 = nu2, nu1
    return williamson(s, nu1, nu2)


@settings(derandomize=True, max_examples=40, deadline=None)
@given(states=st.lists(physical_states(), min_size=1, max_size=8))
def test_measures_equal_numpy_reference_on_random_states(states):
    covs = np.array(states)
    en, lam = gk.measure_covariances(covs)
    ref_en, ref_lam = reference(covs)
    assert np.all(np.abs(en - ref_en) <= en_tolerance(covs))
    assert np.all(np.abs(lam - ref_lam) <= lambda_tolerance(covs))


@settings(derandomize=True, max_examples=12, deadline=None)
@given(cov=physical_states(local_r=1.0, mixing_r=2.0, inner_r=0.0))
def test_strong_entanglement_against_mpmath(cov):
    # E_N up to 4: LAPACK's route (eigenvalues of K^T K) loses eps (nu~_+/nu~_-)^2 ~ 1e-9 there,
    # so the outside reference is 60-digit arithmetic on the same float64 entries
    en, _ = gk.measure_covariances(cov[None])
    assert en[0] == pytest.approx(mp_log_negativity(cov), abs=max(ATOL, 64 * EPS * np.abs(cov).max()))


# ------------------------------------------------------------------------------------------------
# propagation + measures over a grid of times


def coupled_pair(w1, w2, kappa, gamma, n_th, dt):
    """Phi, Q of two oscillators (scaled units) with H = (w1 (x1^2 + p1^2) + w2 (x2^2 + p2^2))/2
    + kappa x1 x2, damped at rate gamma towards occupation n_th (A_open = -gamma/2 I,
    D = gamma (2 n_th + 1) I), over the step dt (Van Loan's block exponential)."""
    h = np.diag([w1, w1, w2, w2])
    h[0, 2] = h[2, 0] = kappa
    drift = symplectic_form(2) @ h - 0.5 * gamma * np.eye(4)
    return van_loan(drift, gamma * (2 * n_th + 1) * np.eye(4), dt)


_pair = st.tuples(st.floats(0.5, 2.0), st.floats(0.5, 2.0), st.floats(-0.3, 0.3), st.floats(0.0, 0.05),
                  st.floats(0.0, 0.5), st.floats(0.0, 1.0), _angle)


@settings(derandomize=True, max_examples=15, deadline=None)
@given(points=st.lists(_pair, min_size=1, max_size=4), n_times=st.integers(1, 60))
def test_propagation_and_measures_equal_numpy_reference(points, n_times):
    phi, q, cov0 = [], [], []
    for w1, w2, kappa, gamma, n_th, r, angle in points:
        p, qq = coupled_pair(w1, w2, kappa, gamma, n_th, 0.15)
        phi.append(p)
        q.append(qq)
        cov0.append(williamson(both(local(angle, r, 0.0), local(-angle, r / 2, 0.0)), 1.0, 1.0 + n_th))
    covs = gk.propagate_covariances(phi, q, cov0, n_times)
    plain = gk.propagate_covariances_numpy(phi, q, cov0, n_times)
    # the same 4x4 products summed in another order: relative rounding ~ eps per step
    scale = np.abs(plain).max(axis=(2, 3), keepdims=True)
    assert np.all(np.abs(covs - plain) <= 4 * EPS * n_times * scale)
    for want in (True, False):
        en, lam = gk.propagate_and_measure(phi, q, cov0, n_times, want)
        ref_en, ref_lam = gk.propagate_and_measure_numpy(phi, q, cov0, n_times, want)
        assert en.shape == (len(points), n_times)
        assert np.all(np.abs(en - ref_en) <= en_tolerance(plain).reshape(en.shape))
        if want:
            np.testing.assert_allclose(lam, ref_lam, rtol=0, atol=ATOL)
            # the minimum skips times it cannot lower: same as measuring every time exactly
            exact = gk.measure_covariances(covs.reshape(-1, 4, 4))[1].reshape(en.shape)[:, 1:]
            np.testing.assert_allclose(lam, exact.min(axis=1, initial=np.inf), rtol=0, atol=ATOL)
        else:
            assert np.all(np.isnan(lam))


def test_weak_coupling_quench_follows_first_order_law():
    # Product vacuum, then H = (x1^2 + p1^2 + x2^2 + p2^2)/2 + kappa x1 x2. First-order perturbation
    # theory (derived here): kappa x1 x2 holds (a1^dag a2^dag e^{2it} + h.c.)/2, which puts amplitude
    # kappa |sin t|/2 on |1, 1>, i.e. a TMSV with r = kappa |sin t|/2, so E_N(t) = kappa |sin t| + O(kappa^2)
    # (compare shared references §2.2). At kappa = 1e-10 a sqrt(eps) ~ 1e-8 error would swamp it;
    # what remains is the rounding of sigma ~ I, ~eps per step of the recursion (and O(kappa^2)).
    kappa, dt, n_times = 1e-10, 0.1, 120
    phi, q = coupled_pair(1.0, 1.0, kappa, 0.0, 0.0, dt)
    en, lam = gk.propagate_and_measure(phi[None], q[None], np.eye(4)[None], n_times)
    t = dt * np.arange(n_times)
    np.testing.assert_allclose(en[0], kappa * np.abs(np.sin(t)), rtol=0, atol=4 * EPS * n_times)
    ref_en, ref_lam = gk.propagate_and_measure_numpy(phi[None], q[None], np.eye(4)[None], n_times)
    np.testing.assert_allclose(en, ref_en, rtol=0, atol=ATOL)
    assert lam[0] == pytest.approx(ref_lam[0], abs=ATOL) and lam[0] < 0


def test_stationary_and_single_time_grids():
    # Phi = I, Q = 0: the state never changes, so the minimum over k >= 1 is the eigenvalue of
    # cov0 (LAPACK), also when every time ties with the running minimum; one time: no k >= 1
    cov0 = np.array([np.diag([1.5, 1.5, 1.0, 1.0]), tmsv(0.3), tmsv(0.2, 0.1)])
    phi = np.broadcast_to(np.eye(4), (3, 4, 4))
    q = np.zeros((3, 4, 4))
    en, lam = gk.propagate_and_measure(phi, q, cov0, 50)
    ref_en, ref_lam = reference(cov0)
    np.testing.assert_allclose(en, np.repeat(ref_en[:, None], 50, axis=1), rtol=0, atol=ATOL)
    np.testing.assert_allclose(lam, ref_lam, rtol=0, atol=ATOL)
    en1, lam1 = gk.propagate_and_measure(phi, q, cov0, 1)
    assert en1.shape == (3, 1) and np.all(lam1 == np.inf)
    np.testing.assert_allclose(en1[:, 0], ref_en, rtol=0, atol=ATOL)


def test_unphysical_and_non_finite_covariances_give_nan():
    # not positive definite (the numpy reference raises there) or not finite: NaN, for the caller
    # to hand the point to the one-by-one route
    bad = [np.diag([1.0, 1.0, -1.0, 1.0]), np.full((4, 4), np.nan), np.diag([np.inf, 1.0, 1.0, 1.0]),
           np.block([[np.eye(2), 2 * np.eye(2)], [2 * np.eye(2), np.eye(2)]])]
    en, lam = gk.measure_covariances(np.array(bad))
    assert np.all(np.isnan(en))
    assert np.isnan(lam[1]) and np.isnan(lam[2])
    phi = np.array([2.0 * np.eye(4)])  # sigma grows 4x per step: overflows after ~512 steps
    en, lam = gk.propagate_and_measure(phi, np.zeros((1, 4, 4)), np.eye(4)[None], 1200)
    assert np.isnan(en[0, -1]) and np.isfinite(en[0, 0]) and np.isnan(lam[0])


@pytest.mark.parametrize("field, kwargs", [
    ("phi.shape", {"phi": np.zeros((2, 3, 3))}),
    ("q.shape", {"q": np.zeros((3, 4, 4))}),
    ("cov0.shape", {"cov0": np.zeros((4, 4))}),
    ("n_times", {"n_times": 0}),
    ("n_times", {"n_times": 2.5}),
])
def test_bad_input_names_the_field(field, kwargs):
    args = {"phi": np.zeros((2, 4, 4)), "q": np.zeros((2, 4, 4)), "cov0": np.zeros((2, 4, 4)), "n_times": 3}
    args.update(kwargs)
    with pytest.raises(ProtocolError, match=field.replace(".", r"\.")):
        gk.propagate_and_measure(**args)


def test_every_cited_key_resolves_in_the_reference_registry():
    import re

    from gqsim.references import REFERENCES

    text = " ".join(obj.__doc__ or "" for obj in vars(gk).values() if callable(obj)) + (gk.__doc__ or "")
    keys = set(re.findall(r"\[([A-Z][A-Za-z]+\d{4})\]", text))
    assert {"Simon2000", "VidalWerner2002"} <= keys
    assert keys <= set(REFERENCES), keys - set(REFERENCES)
