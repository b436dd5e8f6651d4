"""Witness construction, decomposition and settings, checked against QuTiP and closed forms."""

from __future__ import annotations

import numpy as np
import pytest
import qutip
from hypothesis import given, settings
from hypothesis import strategies as st

from gqsim.errors import ProtocolError
from gqsim.studies.certification.witness_design import (
    ReadoutModel,
    check_separable_bound,
    decompose,
    group_settings,
    local_operator,
    local_operator_names,
    optimal_ppt_witness,
    parse_witness,
    separable_extremum,
    setting_table,
    spin_correlation_witness,
    witness_from_operator,
)
from tests.statistics.stat_states import branch_phase_state, cz_plus_plus, dephased, random_density, random_separable, werner

#: Tolerance for identities among O(1) matrix elements computed in float64 by eigh / einsum.
ATOL = 1e-10


def _qutip_pt_min_eig(rho: np.ndarray, dims: tuple[int, int]) -> float:
    q = qutip.Qobj(rho, dims=[list(dims), list(dims)])
    return float(qutip.partial_transpose(q, [0, 1]).eigenenergies().min())


def _qutip_expect(op: np.ndarray, rho: np.ndarray, dims: tuple[int, int]) -> float:
    d = [list(dims), list(dims)]
    return float(np.real(qutip.expect(qutip.Qobj(op, dims=d), qutip.Qobj(rho, dims=d))))


# ---- local operators ------------------------------------------------------------------

def test_pauli_names_match_qutip():
    # QuTiP's own Pauli matrices.
    for name, ref in (("X", qutip.sigmax()), ("Y", qutip.sigmay()), ("Z", qutip.sigmaz())):
        np.testing.assert_allclose(local_operator(name, 2), ref.full(), atol=ATOL)


@pytest.mark.parametrize("d", [2, 3, 4])
def test_gell_mann_orthogonality_and_count(d):
    # Bertlmann & Krammer 2008 (Eqs. (3)-(5), from memory): d^2 - 1 traceless Hermitian
    # matrices with Tr(l_a l_b) = 2 delta_ab.
    ops = np.stack([local_operator(n, d) for n in local_operator_names(d)])
    assert len(ops) == d * d - 1
    gram = np.einsum("aij,bji->ab", ops, ops)
    np.testing.assert_allclose(gram, 2 * np.eye(d * d - 1), atol=ATOL)
    np.testing.assert_allclose(np.einsum("aii->a", ops), 0, atol=ATOL)
    np.testing.assert_allclose(ops, ops.conj().transpose(0, 2, 1), atol=ATOL)


def test_qutrit_gell_mann_match_textbook_lambda_matrices():
    # Standard SU(3) Gell-Mann matrices (textbook): lambda_1 = S[0,1], lambda_2 = A[0,1],
    # lambda_3 = D[1], lambda_8 = D[2] = diag(1, 1, -2)/sqrt3.
    np.testing.assert_allclose(local_operator("S[0,1]", 3), [[0, 1, 0], [1, 0, 0], [0, 0, 0]])
    np.testing.assert_allclose(local_operator("A[0,1]", 3), [[0, -1j, 0], [1j, 0, 0], [0, 0, 0]])
    np.testing.assert_allclose(local_operator("D[1]", 3), np.diag([1, -1, 0]))
    np.testing.assert_allclose(local_operator("D[2]", 3), np.diag([1, 1, -2]) / np.sqrt(3), atol=ATOL)


@pytest.mark.parametrize("dims", [(2, 2), (2, 3), (3, 3)])
def test_decomposition_reconstructs_operator(dims):
    # Completeness of {I, l_a} as an operator basis (Bertlmann & Krammer 2008).
    rng = np.random.default_rng(7)
    dim = dims[0] * dims[1]
    h = rng.normal(size=(dim, dim)) + 1j * rng.normal(size=(dim, dim))
    h = h + h.conj().T
    w = witness_from_operator(h, dims, bound=0.0)
    np.testing.assert_allclose(w.operator(), h, atol=ATOL)


# ---- optimal PPT witness ---------------------------------------------------------------

@pytest.mark.parametrize("theta", [0.313934, -0.593819, 0.678626, np.pi / 2, np.pi])
def test_ppt_witness_on_phase_state(theta):
    # physics-references Sec. 1.4: a pure two-qubit state has one negative PT eigenvalue,
    # -C/2 with C = |sin(theta/2)|; the witness value is that eigenvalue (Guhne & Toth 2009).
    rho = cz_plus_plus(theta)
    w = optimal_ppt_witness(rho, (2, 2))
    assert w.value(rho) == pytest.approx(-abs(np.sin(theta / 2)) / 2, abs=ATOL)
    assert w.value(rho) == pytest.approx(_qutip_pt_min_eig(rho, (2, 2)), abs=ATOL)
    assert np.trace(w.operator()).real == pytest.approx(1.0, abs=ATOL)


@pytest.mark.parametrize("p", [1.0, 0.75, 0.5, 1 / 3, 0.2])
def test_ppt_witness_on_werner_state(p):
    # physics-references Sec. 5.4: ||rho^T||_1 = (3p+1)/2, so the one negative PT eigenvalue
    # is (1 - 3p)/4 for p > 1/3 (entangled); for p <= 1/3 the witness value is >= 0.
    rho = werner(p)
    value = optimal_ppt_witness(rho, (2, 2)).value(rho)
    assert value == pytest.approx(min((1 - 3 * p) / 4, _qutip_pt_min_eig(rho, (2, 2))), abs=ATOL)
    assert (value < -ATOL) == (p > 1 / 3 + ATOL)


def test_ppt_witness_on_dephased_qutrits_matches_qutip():
    # Three-branch phase state (physics-references Sec. 1.7 layout) with dephasing (Sec. 1.8);
    # reference value: QuTiP partial_transpose.
    phases = np.array([[0.0, 0.3, 1.1], [0.2, 0.0, 0.4], [0.9, 0.1, 0.0]])
    rho = dephased(branch_phase_state(phases), (3, 3), 0.05)
    w = optimal_ppt_witness(rho, (3, 3))
    assert w.value(rho) == pytest.approx(_qutip_pt_min_eig(rho, (3, 3)), abs=ATOL)
    assert w.value(rho) == pytest.approx(_qutip_expect(w.operator(), rho, (3, 3)), abs=ATOL)


@settings(derandomize=True, max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), dims=st.sampled_from([(2, 2), (2, 3), (3, 3)]),
       rank=st.integers(1, 4))
def test_ppt_witness_sign_iff_npt_and_nonnegative_on_separable(seed, dims, rank):
    # Peres 1996 / Guhne & Toth 2009: Tr(W rho) < 0 exactly when rho^{T_B} has a negative
    # eigenvalue; Tr(W sigma) >= 0 for every separable sigma (here random product mixtures).
    rng = np.random.default_rng(seed)
    rho = random_density(rng, dims[0] * dims[1], rank)
    w = optimal_ppt_witness(rho, dims)
    lam_min = _qutip_pt_min_eig(rho, dims)
    value = float(w.value(rho))
    assert value == pytest.approx(lam_min, abs=ATOL)
    assert (value < 0) == (lam_min < 0)
    sigma = random_separable(rng, dims)
    assert w.value(sigma) >= -ATOL


@pytest.mark.parametrize("dims", [(2, 2), (2, 3), (3, 3), (3, 2)])
def test_schmidt_frame_gives_same_operator_with_few_settings(dims):
    # Schmidt decomposition (Nielsen & Chuang Thm 2.7): in the frames of |e>'s Schmidt bases
    # W = sum_kl s_k s_l |k><l| (x) |l><k|, i.e. one diagonal setting plus S@S and A@A per pair
    # k < l: at most d(d-1) + 1 settings, d = min(d_a, d_b); same operator as the branch frame.
    rng = np.random.default_rng(sum(dims))
    d = min(dims)
    for _ in range(5):
        rho = random_density(rng, dims[0] * dims[1], 2)
        branch = optimal_ppt_witness(rho, dims, frame="branch")
        schmidt = optimal_ppt_witness(rho, dims)
        np.testing.assert_allclose(schmidt.operator(), branch.operator(), atol=ATOL)
        assert len(group_settings(schmidt)[1]) <= d * (d - 1) + 1
        table = setting_table(schmidt, rho)
        assert table.expected_values[0] == pytest.approx(_qutip_expect(branch.operator(), rho, dims), abs=ATOL)


# ---- fixed and user witnesses ----------------------------------------------------------

def test_spin_witness_on_phase_state_frames():
    # physics-references Sec. 1.5: in the CZ(theta)|++> frame W = 1 - cos(theta).
    for theta in (0.5, 2.0, 3.0):
        assert spin_correlation_witness().value(cz_plus_plus(theta)) == pytest.approx(1 - np.cos(theta), abs=ATOL)
    # Raw branch frame, Bose parameters with m = 1e-14 kg (Sec. 1.3 table):
    # |<XZ> + <YY>| = 0.121310 (6 digits quoted).
    phases = np.array([[0.351607, 0.226033], [0.791115, 0.351607]])  # rows: body-1 L, R; cols: body-2 L, R
    value = spin_correlation_witness(sign=-1).value(branch_phase_state(phases))
    assert value == pytest.approx(0.121310, abs=2e-6)  # 6 quoted digits of phases propagate to ~1e-6


def test_user_witness_matches_reference_ppt_type_value():
    # physics-references Sec. 1.5: Tr[(I - XZ - YY - ZX) rho] = 1 - 3(1 - cos theta)/2 on CZ(theta)|++>.
    w = parse_witness("1 - X@Z - Y@Y - Z@X", (2, 2), bound=0.0)
    for theta in (0.3, 1.2310, 2.5):
        assert w.value(cz_plus_plus(theta)) == pytest.approx(1 - 1.5 * (1 - np.cos(theta)), abs=ATOL)


def test_user_witness_qudit_syntax_against_qutip():
    w = parse_witness("0.5*S[0,1]@S[0,1] - D[2]@I + 2 A[1,2]@D[1] - 0.25", (3, 3), bound=0.0)
    lam = {n: local_operator(n, 3) for n in ("S[0,1]", "D[2]", "A[1,2]", "D[1]")}
    expected = (0.5 * np.kron(lam["S[0,1]"], lam["S[0,1]"]) - np.kron(lam["D[2]"], np.eye(3))
                + 2 * np.kron(lam["A[1,2]"], lam["D[1]"]) - 0.25 * np.eye(9))
    np.testing.assert_allclose(w.operator(), expected, atol=ATOL)
    rho = random_density(np.random.default_rng(3), 9)
    assert w.value(rho) == pytest.approx(_qutip_expect(expected, rho, (3, 3)), abs=ATOL)


@pytest.mark.parametrize("text, fragment", [
    ("1j*X@Z", "Hermitian"),
    ("2i*X@Z", "Hermitian"),
    ("X@Q", "unknown local observable"),
    ("X@", "expected a term"),
    ("X@Z Y@Y", "expected a term"),
    ("", "non-empty"),
])
def test_bad_user_witness_is_one_line_error(text, fragment):
    with pytest.raises(ProtocolError) as info:
        parse_witness(text, (2, 2), bound=1.0, entangled_if="above")
    assert fragment in str(info.value) and "\n" not in str(info.value)


def test_pauli_name_on_qutrit_and_out_of_range_level_are_refused():
    with pytest.raises(ProtocolError, match="Pauli names need 2 branches"):
        parse_witness("X@D[1]", (3, 3), bound=0.0)
    with pytest.raises(ProtocolError, match="0 <= j < k < 3"):
        parse_witness("S[1,3]@I", (3, 3), bound=0.0)


def test_non_hermitian_matrix_is_refused():
    with pytest.raises(ProtocolError, match="conjugate transpose"):
        decompose(np.kron([[0, 1], [0, 0]], np.eye(2)), (2, 2))


# ---- settings and readout --------------------------------------------------------------

@pytest.mark.parametrize("dims", [(2, 2), (2, 3), (3, 3)])
def test_setting_means_sum_to_expectation_value(dims):
    # Born rule per setting; total must equal QuTiP's expect(W, rho), also with corrected
    # readout errors (unbiased inverse-assignment estimator, common practice).
    rng = np.random.default_rng(11)
    rho = random_density(rng, dims[0] * dims[1])
    w = optimal_ppt_witness(random_density(rng, dims[0] * dims[1], 1), dims, frame="branch")
    ref = _qutip_expect(w.operator(), rho, dims)
    readout = ReadoutModel(assignment_fidelity_a=0.93, assignment_fidelity_b=[0.9] * dims[1],
                           detection_efficiency_a=0.6)
    for model in (None, readout):
        table = setting_table(w, rho, model)
        assert table.expected_values[0] == pytest.approx(ref, abs=ATOL)
        np.testing.assert_allclose(table.probabilities.sum(axis=-1), 1.0, atol=ATOL)


def test_uncorrected_symmetric_flips_shrink_correlators():
    # Symmetric bit flips with fidelity F map <sigma> -> (2F - 1)<sigma> on each body
    # (common practice; follows from the 2x2 assignment matrix).
    rho = cz_plus_plus(2.0)
    fa, fb = 0.9, 0.8
    model = ReadoutModel(assignment_fidelity_a=fa, assignment_fidelity_b=fb, correct_assignment=False)
    table = setting_table(spin_correlation_witness(), rho, model)
    ideal = spin_correlation_witness().value(rho)
    assert table.expected_values[0] == pytest.approx((2 * fa - 1) * (2 * fb - 1) * ideal, abs=ATOL)


def test_corrected_single_shot_variance_for_symmetric_flips():
    # Corrected per-shot value of a +-1 correlator is +-1/((2Fa-1)(2Fb-1)), so its variance is
    # 1/((2Fa-1)^2 (2Fb-1)^2) - <AB>^2 (derived from the assignment matrix inverse).
    rho = cz_plus_plus(2.0)
    fa, fb = 0.95, 0.85
    table = setting_table(parse_witness("X@Z", (2, 2), bound=1.0, entangled_if="above"), rho,
                          ReadoutModel(assignment_fidelity_a=fa, assignment_fidelity_b=fb))
    corr = (1 - np.cos(2.0)) / 2
    expected = 1 / ((2 * fa - 1) ** 2 * (2 * fb - 1) ** 2) - corr ** 2
    assert table.setting_variances[0, 0] == pytest.approx(expected, rel=1e-12)


def test_local_terms_ride_along_with_correlation_settings():
    # I@Z and Z@I are read from the Z@Z setting, not from settings of their own.
    w = parse_witness("Z@Z + Z@I + I@Z + X@X", (2, 2), bound=0.0)
    table = setting_table(w, cz_plus_plus(1.0))
    assert sorted(s.label for s in table.settings) == ["X@X", "Z@Z"]


@pytest.mark.parametrize("kwargs, key", [
    ({"assignment_fidelity_a": 1.2}, "assignment_fidelity_a"),
    ({"assignment_fidelity_b": [0.9, -0.1]}, "assignment_fidelity_b"),
    ({"detection_efficiency_a": 0.0}, "detection_efficiency_a"),
    ({"detection_efficiency_b": 1.5}, "detection_efficiency_b"),
])
def test_bad_readout_values_are_one_line_errors(kwargs, key):
    with pytest.raises(ProtocolError) as info:
        ReadoutModel(**kwargs)
    assert str(info.value).startswith(key) and "\n" not in str(info.value)


def test_uncorrectable_assignment_is_refused():
    # F0 + F1 = 1 makes the qubit assignment matrix singular.
    model = ReadoutModel(assignment_fidelity_a=[0.5, 0.5])
    with pytest.raises(ProtocolError, match="too low to correct"):
        setting_table(spin_correlation_witness(), cz_plus_plus(1.0), model)


# ---- separable bound check -------------------------------------------------------------

@pytest.mark.parametrize("text, bound, side, extremum", [
    # Cauchy-Schwarz on Bloch vectors (physics-references Sec. 1.5): x1 z2 + y1 y2 <= 1 on products.
    ("X@Z + Y@Y", 1.0, "above", 1.0),
    # 1 - (x1 z2 + y1 y2 + z1 x2) >= 0 on products (largest singular value of the correlation map is 1).
    ("1 - X@Z - Y@Y - Z@X", 0.0, "below", 0.0),
    # <XX + YY + ZZ> >= -1 on products (a . b >= -1), while the singlet reaches -3 (textbook).
    ("X@X + Y@Y + Z@Z", -1.0, "below", -1.0),
])
def test_separable_extremum_matches_product_state_analytics(text, bound, side, extremum):
    w = parse_witness(text, (2, 2), bound=bound, entangled_if=side)
    assert separable_extremum(w) == pytest.approx(extremum, abs=1e-9)
    assert check_separable_bound(w) == pytest.approx(extremum, abs=1e-9)


def test_ppt_witness_is_nonnegative_on_product_states():
    # Guhne & Toth 2009: Tr(W sigma) >= 0 on separable states; the search must not go below 0.
    rng = np.random.default_rng(5)
    for dims in [(2, 2), (3, 3), (2, 4)]:
        w = optimal_ppt_witness(random_density(rng, dims[0] * dims[1], 1), dims)
        assert separable_extremum(w) >= -ATOL


def test_wrong_user_bound_is_refused():
    w = parse_witness("X@Z + Y@Y", (2, 2), bound=0.8, entangled_if="above")
    with pytest.raises(ProtocolError, match="product .separable. state gives 1"):
        check_separable_bound(w, key="witnesses.custom[w].separable_bound")


@settings(derandomize=True, max_examples=25, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), dims=st.sampled_from([(2, 2), (2, 3), (3, 3)]), rank=st.integers(1, 3))
def test_witness_design_is_covariant_under_local_unitaries(seed, dims, rank):
    # (U_A (x) U_B) rho (U_A (x) U_B)^dag has the same partial-transpose spectrum (U_B^T is unitary;
    # Peres 1996), and the Schmidt frames rotate along, so the witness value and the repetition
    # count must not change (up to rounding each setting's count up: at most one per setting).
    from scipy.stats import unitary_group

    from gqsim.studies.certification.statistics import plan_repetitions

    rng = np.random.default_rng(seed)
    rho = random_density(rng, dims[0] * dims[1], rank)
    u = np.kron(unitary_group.rvs(dims[0], random_state=rng), unitary_group.rvs(dims[1], random_state=rng))
    moved = u @ rho @ u.conj().T
    a = plan_repetitions(setting_table(optimal_ppt_witness(rho, dims), rho), sigmas=3.0)
    b = plan_repetitions(setting_table(optimal_ppt_witness(moved, dims), moved), sigmas=3.0)
    assert a.values[0] == pytest.approx(b.values[0], abs=ATOL)
    if np.isfinite(a.total[0]):
        assert abs(a.total[0] - b.total[0]) <= max(len(a.settings), len(b.settings))
