"""Witness design for branch (qubit/qudit) states: which operator to measure and how.

Stage: result -> **witness design** -> statistics -> report.

This module turns a density matrix of two bodies with ``dims = (d_a, d_b)`` branches into

* a witness operator: the optimal one read off the partial transpose, the fixed
  spin-correlation witness, or one the user writes as a sum of products of local
  observables (syntax below);
* its decomposition into products of local Pauli (d = 2) or generalised Gell-Mann
  (d > 2) matrices, grouped into *measurement settings* (one local basis per body);
* a readout model (assignment fidelity per outcome, detection efficiency) and, for
  each setting, the single-shot estimator whose mean over shots is the witness
  contribution of that setting.

A witness may carry local *frames* (one unitary per body): its observables are then
rotated, i.e. the experiment applies F^dag to each body before reading out the branch.
The optimal PPT witness is written in the Schmidt frames of its defining vector, which
needs at most d(d-1)+1 settings, and the freedom left in those frames is spent on
minimising the repetitions.

Witness expression syntax (gqsim's own)
---------------------------------------
A sum of terms separated by ``+`` or ``-``. A term is a real number, or an optional
real coefficient followed (optionally with ``*``) by ``A@B``, where ``A`` acts on the
first body and ``B`` on the second. Local observable names:

``I``                identity (any d)
``X``, ``Y``, ``Z``  Pauli matrices (d = 2 only)
``S[j,k]``           generalised Gell-Mann, symmetric:      |j><k| + |k><j|      (0 <= j < k < d)
``A[j,k]``           generalised Gell-Mann, antisymmetric: -i|j><k| + i|k><j|    (0 <= j < k < d)
``D[l]``             generalised Gell-Mann, diagonal:  sqrt(2/(l(l+1))) (sum_{m<l} |m><m| - l |l><l|), 1 <= l < d

Example: ``"1 - X@Z - Y@Y - Z@X"`` or ``"0.5*S[0,1]@S[0,1] - D[2]@I"``. For d = 2,
``S[0,1] = X``, ``A[0,1] = Y`` and ``D[1] = Z``. Levels are 0-based branch indices in the
order the simulation uses.
"""

from __future__ import annotations

import itertools
import re
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

from gqsim.errors import PhysicsError, ProtocolError
from gqsim.physics.measures import partial_transpose

__all__ = [
    "ProductTerm",
    "Witness",
    "ReadoutModel",
    "Setting",
    "SettingTable",
    "local_operator",
    "local_operator_names",
    "measurement_basis",
    "parse_witness",
    "decompose",
    "witness_from_operator",
    "optimal_ppt_witness",
    "spin_correlation_witness",
    "optimised_spin_witness",
    "separable_extremum",
    "check_separable_bound",
    "group_settings",
    "setting_table",
]

#: Coefficients below this (relative to the largest) are dropped from a decomposition:
#: they are round-off of the O(1) matrix elements of a normalised witness (float64 eps ~ 2e-16).
DECOMPOSITION_RTOL = 1e-12

#: Largest condition number of an assignment matrix we agree to invert; beyond it the
#: corrected estimator's variance explodes and the readout is effectively uninformative.
MAX_ASSIGNMENT_CONDITION = 1e6

_HERMITIAN_ATOL = 1e-10  # round-off scale of O(1) matrix elements built in float64


# --------------------------------------------------------------------------------------
# Local observables
# --------------------------------------------------------------------------------------

def local_operator_names(d: int) -> tuple[str, ...]:
    """Canonical names of the d^2 - 1 traceless local basis operators (Pauli names for d = 2)."""
    if d == 2:
        return ("X", "Y", "Z")
    names = []
    for j, k in itertools.combinations(range(d), 2):
        names += [f"S[{j},{k}]", f"A[{j},{k}]"]
    names += [f"D[{l}]" for l in range(1, d)]
    return tuple(names)


_NAME_RE = re.compile(r"^(?:(I|X|Y|Z)|([SA])\[(\d+),(\d+)\]|D\[(\d+)\])$")


def _canonical(name: str, d: int, key: str) -> str:
    """Return the canonical spelling of local observable ``name`` for dimension ``d``."""
    m = _NAME_RE.match(name.replace(" ", ""))
    if m is None:
        raise ProtocolError(key, name, "unknown local observable; use I, X, Y, Z (qubits), S[j,k], A[j,k] or D[l]")
    pauli, kind, j, k, l = m.groups()
    if pauli == "I":
        return "I"
    if pauli is not None:
        if d != 2:
            raise ProtocolError(key, name, f"Pauli names need 2 branches; this body has {d}: use S[j,k], A[j,k], D[l]")
        return pauli
    if kind is not None:
        j, k = int(j), int(k)
        if not 0 <= j < k < d:
            raise ProtocolError(key, name, f"needs 0 <= j < k < {d}")
        if d == 2:
            return "X" if kind == "S" else "Y"
        return f"{kind}[{j},{k}]"
    l = int(l)
    if not 1 <= l < d:
        raise ProtocolError(key, name, f"needs 1 <= l < {d}")
    return "Z" if d == 2 else f"D[{l}]"


@lru_cache(maxsize=None)
def _local_table(d: int) -> dict[str, np.ndarray]:
    ops = {"I": np.eye(d, dtype=complex)}
    for j, k in itertools.combinations(range(d), 2):
        s = np.zeros((d, d), complex)
        s[j, k] = s[k, j] = 1.0
        a = np.zeros((d, d), complex)
        a[j, k], a[k, j] = -1j, 1j
        ops[f"S[{j},{k}]"], ops[f"A[{j},{k}]"] = s, a
    for l in range(1, d):
        diag = np.zeros(d)
        diag[:l] = 1.0
        diag[l] = -l
        ops[f"D[{l}]"] = np.diag(np.sqrt(2.0 / (l * (l + 1))) * diag).astype(complex)
    if d == 2:
        ops["X"], ops["Y"], ops["Z"] = ops.pop("S[0,1]"), ops.pop("A[0,1]"), ops.pop("D[1]")
    for op in ops.values():
        op.setflags(write=False)
    return ops


def local_operator(name: str, d: int) -> np.ndarray:
    """The (d, d) matrix of local observable ``name`` (generalised Gell-Mann / Pauli).

    Normalisation Tr(l_a l_b) = 2 delta_ab, as for the Pauli matrices; the generalised
    Gell-Mann construction follows Eqs. (3)-(5) of [Bertlmann2008].
    """
    return _local_table(d)[_canonical(name, d, "observable")]


def measurement_basis(name: str, d: int) -> tuple[str, np.ndarray]:
    """Label and (d, d) unitary (columns = basis vectors) of the local basis that measures ``name``.

    Diagonal observables (D[l], Z) share the branch basis, labelled ``"Z"`` for d = 2 and
    ``"D"`` otherwise; S[j,k] and A[j,k] are measured in (|j> +- |k>)/sqrt2 and
    (|j> +- i|k>)/sqrt2 (the other levels stay in the branch basis), labelled by their name.
    """
    canon = _canonical(name, d, "observable")
    if canon in ("I", "Z") or canon.startswith("D"):
        return ("Z" if d == 2 else "D"), np.eye(d, dtype=complex)
    u = np.eye(d, dtype=complex)
    if d == 2:
        j, k, kind = 0, 1, ("S" if canon == "X" else "A")
    else:
        kind = canon[0]
        j, k = (int(v) for v in canon[2:-1].split(","))
    phase = 1.0 if kind == "S" else 1j
    u[:, j] = 0
    u[:, k] = 0
    u[j, j], u[k, j] = 1 / np.sqrt(2), phase / np.sqrt(2)
    u[j, k], u[k, k] = 1 / np.sqrt(2), -phase / np.sqrt(2)
    return canon, u


def _eigenvalues_in(basis: np.ndarray, op: np.ndarray) -> np.ndarray:
    rotated = basis.conj().T @ op @ basis
    if not np.allclose(rotated, np.diag(np.diag(rotated)), atol=_HERMITIAN_ATOL):
        raise AssertionError("observable is not diagonal in its measurement basis")  # internal invariant
    return np.real(np.diag(rotated))


# --------------------------------------------------------------------------------------
# Witness objects
# --------------------------------------------------------------------------------------

@dataclass(frozen=True, kw_only=True)
class ProductTerm:
    """``coefficient * A (x) B``; names are canonical local observable names."""

    coefficient: float
    factor_a: str
    factor_b: str

    def __post_init__(self):
        if not np.isfinite(self.coefficient):
            raise ProtocolError("witness coefficient", self.coefficient, "must be a finite real number")

    @property
    def label(self) -> str:
        return f"{self.factor_a}@{self.factor_b}"


@dataclass(frozen=True, kw_only=True)
class Witness:
    """A bipartite witness: ``sum_t c_t A_t (x) B_t`` with a separable bound.

    The state is certified entangled when its expectation value lies strictly below
    (``entangled_if = "below"``) or above (``"above"``) ``bound``; every separable
    state lies on the other side.

    ``frame_a``/``frame_b`` are optional local unitaries (columns = the frame's basis
    vectors in the branch basis): the local observables are then F l F^dag, i.e. each
    body is rotated by F^dag before a branch-basis readout. Local unitaries map separable
    states to separable states, so the bound is unchanged. ``None`` means the branch frame.
    """

    name: str
    dims: tuple[int, int]
    terms: tuple[ProductTerm, ...]
    bound: float
    entangled_if: str = "below"
    source: str = ""
    frame_a: np.ndarray | None = field(default=None, compare=False, repr=False)
    frame_b: np.ndarray | None = field(default=None, compare=False, repr=False)

    def __post_init__(self):
        if len(self.dims) != 2 or any(int(d) < 2 for d in self.dims):
            raise ProtocolError("witness dims", self.dims, "must be two branch counts, each at least 2")
        object.__setattr__(self, "dims", tuple(int(d) for d in self.dims))
        if self.entangled_if not in ("below", "above"):
            raise ProtocolError("entangled_if", self.entangled_if, "must be 'below' or 'above'")
        if not np.isfinite(self.bound):
            raise ProtocolError("separable bound", self.bound, "must be a finite real number")
        object.__setattr__(self, "terms", tuple(self.terms))
        for side, d in zip(("a", "b"), self.dims):
            key = f"frame_{side}"
            frame = getattr(self, key)
            if frame is None:
                continue
            frame = np.array(frame, dtype=complex)
            if frame.shape != (d, d) or not np.allclose(frame.conj().T @ frame, np.eye(d), atol=_HERMITIAN_ATOL):
                raise ProtocolError(key, frame.shape, f"must be a ({d}, {d}) unitary matrix")
            frame.setflags(write=False)
            object.__setattr__(self, key, frame)

    def frame(self, side: str) -> np.ndarray:
        """The (d, d) frame unitary of body ``side`` ("a" or "b"); identity for the branch frame."""
        d = self.dims[0 if side == "a" else 1]
        f = getattr(self, f"frame_{side}")
        return np.eye(d, dtype=complex) if f is None else f

    def operator(self) -> np.ndarray:
        """The (d_a d_b, d_a d_b) Hermitian matrix of the witness (frames applied)."""
        da, db = self.dims
        out = np.zeros((da * db, da * db), complex)
        for t in self.terms:
            out += t.coefficient * np.kron(local_operator(t.factor_a, da), local_operator(t.factor_b, db))
        if self.frame_a is None and self.frame_b is None:
            return out
        f = np.kron(self.frame("a"), self.frame("b"))
        return f @ out @ f.conj().T

    def value(self, states: np.ndarray) -> np.ndarray:
        """Tr(W rho) for one (D, D) state or a stack (n, D, D); real."""
        return np.real(np.einsum("ij,...ji->...", self.operator(), np.asarray(states)))

    def margin(self, values: np.ndarray) -> np.ndarray:
        """Distance from the separable bound, positive on the entangled side."""
        values = np.asarray(values, dtype=float)
        return self.bound - values if self.entangled_if == "below" else values - self.bound

    @property
    def expression(self) -> str:
        parts = []
        for t in self.terms:
            body = "" if (t.factor_a, t.factor_b) == ("I", "I") else f"*{t.label}"
            parts.append(f"{t.coefficient:+.6g}{body}")
        return " ".join(parts) if parts else "0"


_NUMBER = r"(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?"
_FACTOR = r"(?:[IXYZ]|[SA]\[\s*\d+\s*,\s*\d+\s*\]|D\[\s*\d+\s*\])"
_TERM_RE = re.compile(
    rf"\s*([+-])?\s*(?:({_NUMBER})\s*(\*)?\s*)?(?:([A-Za-z]\w*(?:\[[^\]]*\])?)\s*@\s*([A-Za-z]\w*(?:\[[^\]]*\])?))?\s*")


def parse_witness(text: str, dims: tuple[int, int], *, bound: float, entangled_if: str = "below",
                  name: str = "user", key: str = "witness") -> Witness:
    """Read a witness written in gqsim's expression syntax (see the module docstring).

    Complex coefficients are not part of the syntax, so a parsed witness is Hermitian by
    construction; a term written with ``j`` or ``i`` is refused as not Hermitian.

    Raises
    ------
    ProtocolError
        naming ``key``, the offending text and what is allowed.
    """
    if not isinstance(text, str) or not text.strip():
        raise ProtocolError(key, text, "must be a non-empty expression such as '1 - X@Z - Y@Y'")
    if re.search(r"\d\s*[ij]\b|\b1j\b|\bi\s*\*", text):
        raise ProtocolError(key, text, "witness must be Hermitian: coefficients must be real (no i or j)")
    da, db = (int(d) for d in dims)
    terms: dict[tuple[str, str], float] = {}
    pos, first = 0, True
    while pos < len(text):
        m = _TERM_RE.match(text, pos)
        sign, number, star, fa, fb = m.groups()
        if m.end() == pos or (number is None and fa is None) or (not first and sign is None) \
                or (star and fa is None):
            bad = text[pos:].strip() or text
            raise ProtocolError(key, bad, "expected a term like '0.5*X@Z', 'S[0,1]@D[1]' or a number, "
                                          "joined by + or -")
        coef = float(number) if number is not None else 1.0
        coef = -coef if sign == "-" else coef
        pair = ("I", "I") if fa is None else (_canonical(fa, da, f"{key} (first body)"),
                                               _canonical(fb, db, f"{key} (second body)"))
        terms[pair] = terms.get(pair, 0.0) + coef
        pos, first = m.end(), False
    return Witness(name=name, dims=(da, db), bound=float(bound), entangled_if=entangled_if,
                   terms=tuple(ProductTerm(coefficient=c, factor_a=a, factor_b=b)
                               for (a, b), c in terms.items() if c != 0.0),
                   source="user expression")


def decompose(operator: np.ndarray, dims: tuple[int, int]) -> tuple[ProductTerm, ...]:
    """Expand a Hermitian operator in products of local Pauli / generalised Gell-Mann matrices.

    With l_0 = I and Tr(l_a l_b) = 2 delta_ab (a, b >= 1), the coefficient of l_a (x) l_b is
    Tr(W l_a (x) l_b) / (Tr(l_a^2) Tr(l_b^2)) (orthogonality, Eq. (9) of [Bertlmann2008]
    for one body, applied to each factor). Coefficients below DECOMPOSITION_RTOL times
    the largest are dropped.
    """
    da, db = (int(d) for d in dims)
    op = np.asarray(operator, dtype=complex)
    if op.shape != (da * db, da * db):
        raise ProtocolError("witness operator shape", op.shape, f"must be ({da * db}, {da * db}) for dims {dims}")
    if not np.allclose(op, op.conj().T, atol=_HERMITIAN_ATOL * max(1.0, np.abs(op).max())):
        raise ProtocolError("witness operator", "non-Hermitian matrix", "a witness must equal its conjugate transpose")
    names_a = ("I",) + local_operator_names(da)
    names_b = ("I",) + local_operator_names(db)
    basis_a = np.stack([local_operator(n, da) for n in names_a])
    basis_b = np.stack([local_operator(n, db) for n in names_b])
    # Tr(W (A (x) B)) = sum W[(i,k),(j,l)] A[j,i] B[l,k]
    w = op.reshape(da, db, da, db)
    raw = np.einsum("ikjl,aji,blk->ab", w, basis_a, basis_b).real
    norm_a = np.array([da] + [2.0] * (len(names_a) - 1))
    norm_b = np.array([db] + [2.0] * (len(names_b) - 1))
    coef = raw / np.outer(norm_a, norm_b)
    cut = DECOMPOSITION_RTOL * max(np.abs(coef).max(), 1e-300)
    return tuple(ProductTerm(coefficient=float(coef[a, b]), factor_a=names_a[a], factor_b=names_b[b])
                 for a in range(len(names_a)) for b in range(len(names_b)) if abs(coef[a, b]) > cut)


def witness_from_operator(operator: np.ndarray, dims: tuple[int, int], *, bound: float,
                          entangled_if: str = "below", name: str = "user", source: str = "") -> Witness:
    """Wrap a Hermitian matrix as a :class:`Witness` via :func:`decompose`."""
    return Witness(name=name, dims=tuple(dims), terms=decompose(operator, dims), bound=bound,
                   entangled_if=entangled_if, source=source)


def _check_state(rho: np.ndarray, dims: tuple[int, int]) -> np.ndarray:
    rho = np.asarray(rho, dtype=complex)
    dim = int(np.prod(dims))
    if rho.shape[-2:] != (dim, dim):
        raise ProtocolError("state shape", rho.shape, f"must end in ({dim}, {dim}) for dims {tuple(dims)}")
    if not np.all(np.isfinite(rho)):
        raise PhysicsError("state", "non-finite entries", "density matrices must be finite")
    return rho


def optimal_ppt_witness(rho: np.ndarray, dims: tuple[int, int], frame: str = "schmidt") -> Witness:
    """The witness W = (|e><e|)^{T_B} built from the partial transpose of ``rho``.

    |e> is the eigenvector of rho^{T_B} with the most negative eigenvalue lambda_min. Then
    Tr(W rho) = <e|rho^{T_B}|e> = lambda_min < 0, while Tr(W sigma) = <e|sigma^{T_B}|e> >= 0 for
    every separable sigma (Peres criterion [Peres1996]); this is the construction of witnesses
    from the PPT criterion in Sec. 3.3 of [Guhne2009] (section number from memory). Tr W = 1.
    Bound 0, entangled below. If rho^{T_B} has no negative eigenvalue the returned witness
    still has the smallest achievable value but cannot detect ``rho`` (value >= 0).

    ``frame = "schmidt"`` (default) writes W in the local frames of the Schmidt decomposition
    |e> = sum_k s_k |a_k> |b_k> (singular value decomposition of the coefficient matrix
    [NielsenChuang2010, Theorem 2.7]). There W = sum_kl s_k s_l |k><l| (x) |l><k| with frames
    F_a = (a_k) and F_b = (conj b_k), which expands into s_k^2 |kk><kk| terms (one setting) and
    (s_k s_l / 2)(S[k,l] (x) S[k,l] + A[k,l] (x) A[k,l]) for k < l (two settings each): at most
    d(d - 1) + 1 settings (3 for qubits, 7 for qutrits) instead of up to (d^2 - 1)^2 in the
    branch frame (``frame = "branch"``). Both give the same operator.
    """
    dims = tuple(int(d) for d in dims)
    rho = _check_state(rho, dims)
    if rho.ndim != 2:
        raise ProtocolError("state shape", rho.shape, "optimal_ppt_witness takes one (D, D) density matrix")
    if frame not in ("schmidt", "branch"):
        raise ProtocolError("frame", frame, "must be 'schmidt' or 'branch'")
    pt = partial_transpose(0.5 * (rho + rho.conj().T), dims, subsystem=1)
    _, vecs = np.linalg.eigh(pt)
    e = vecs[:, 0]
    w = partial_transpose(np.outer(e, e.conj()), dims, subsystem=1)
    if frame == "branch":
        return witness_from_operator(w, dims, bound=0.0, entangled_if="below", name="optimal_ppt",
                                     source="[Guhne2009] PPT witness")
    # e_ij = sum_k u_ik s_k vh_kj: a_k = u[:, k], b_k = vh[k, :]; body B's frame is conj(b_k).
    u, schmidt, vh = np.linalg.svd(e.reshape(dims))
    fa, fb = u, vh.conj().T
    f = np.kron(fa, fb)
    local = f.conj().T @ w @ f
    witness = Witness(name="optimal_ppt", dims=dims, terms=decompose(local, dims), bound=0.0, entangled_if="below",
                      source="[Guhne2009] PPT witness, Schmidt frames", frame_a=fa, frame_b=fb)
    return _best_schmidt_phases(witness, rho, schmidt)


#: Grid of Schmidt-vector phases tried per level (the objective is periodic in each), and how many
#: of the grid's lowest local minima are refined (sharp V-shaped minima can rank below shallow ones).
PHASE_GRID_POINTS = 24
REFINED_MINIMA = 3


def _best_schmidt_phases(witness: Witness, rho: np.ndarray, schmidt: np.ndarray | None = None) -> Witness:
    """Use the freedom left in the Schmidt frames to minimise the shots the witness needs.

    a_k -> e^{i phi_k} a_k with b_k -> e^{-i phi_k} b_k leaves |e> and W unchanged but rotates the
    S[k,l]/A[k,l] measurement bases, so the single-shot spreads sigma_s change; when two Schmidt
    coefficients are equal (always so for the PPT witness of a pure two-qubit state) any unitary R
    on that pair, applied to both frames, leaves W unchanged as well. The optimal-split total is
    proportional to (sum_s sigma_s)^2 (see gqsim.studies.certification.statistics), so sum_s sigma_s is minimised: over
    R in SU(2) for a degenerate pair (closed form for two qubits, :func:`_qubit_swap_frame`;
    Nelder-Mead from three fixed starts for a pair inside a qudit), then by coordinate search over
    phi_1..phi_{d-1} (phi_0 = 0; a grid, then a bounded scalar refinement around the three lowest
    local minima of the grid; two sweeps for qudits, one for qubits). Without this the SVD's
    arbitrary choices make the repetition count jump between neighbouring times and depend on
    local rotations of the state. Ideal readout is assumed here.
    """
    from scipy.optimize import minimize, minimize_scalar

    da, db = witness.dims
    d = min(da, db)
    if d < 2:
        return witness
    table = setting_table(witness, rho[None])
    f = np.kron(witness.frame("a"), witness.frame("b"))
    rho_local = f.conj().T @ rho @ f
    units = np.stack([np.kron(_basis_unitary(st.basis_a, da), _basis_unitary(st.basis_b, db))
                      for st in table.settings])
    values = table.values

    def spread(mult: np.ndarray) -> np.ndarray:
        """sum_s sigma_s for a stack (G, d, d) of frame multipliers acting on the Schmidt columns."""
        ma = np.tile(np.eye(da, dtype=complex), (mult.shape[0], 1, 1))
        mb = np.tile(np.eye(db, dtype=complex), (mult.shape[0], 1, 1))
        ma[:, :d, :d] = mult
        mb[:, :d, :d] = mult
        k = np.einsum("gij,gkl->gikjl", ma, mb).reshape(mult.shape[0], da * db, da * db)
        rr = np.einsum("gxa,xy,gyb->gab", k.conj(), rho_local, k)
        p = np.real(np.einsum("skx,gkl,slx->gsx", units.conj(), rr, units))
        mean = np.einsum("gsx,sx->gs", p, values)
        var = np.maximum(np.einsum("gsx,sx->gs", p, values ** 2) - mean ** 2, 0.0)
        return np.sqrt(var).sum(axis=1)

    current = np.eye(d, dtype=complex)
    if schmidt is not None:
        for k in range(d - 1):
            if abs(schmidt[k] - schmidt[k + 1]) <= DEGENERATE_SCHMIDT_ATOL:
                if (da, db) == (2, 2):
                    current = _qubit_swap_frame(rho_local)
                else:
                    current = _best_pair_rotation(spread, current, k, minimize)
                break
    phases = np.zeros(d)
    grid = np.linspace(0.0, 2 * np.pi, PHASE_GRID_POINTS, endpoint=False)
    step = grid[1]

    def with_phases(ph: np.ndarray) -> np.ndarray:
        return current[None] * np.exp(1j * ph)[:, None, :]

    for _ in range(1 if d == 2 else 2):  # one phase for qubits: a single sweep is exact
        for k in range(1, d):
            trial = np.repeat(phases[None], grid.size, axis=0)
            trial[:, k] = grid
            costs = spread(with_phases(trial))

            def one(x, k=k):
                t = phases.copy()
                t[k] = x
                return float(spread(with_phases(t[None]))[0])

            # refine every local minimum of the (periodic) grid: sqrt(variance) has sharp V-shaped
            # minima that a coarse grid can rank below a shallow one
            local = np.flatnonzero((costs <= np.roll(costs, 1)) & (costs <= np.roll(costs, -1)))
            local = local[np.argsort(costs[local])][:REFINED_MINIMA]
            best_x, best_cost = grid[int(np.argmin(costs))], float(costs.min())
            for j in local:
                res = minimize_scalar(one, bounds=(grid[j] - step, grid[j] + step), method="bounded",
                                      options={"xatol": 1e-6})
                if res.fun < best_cost:
                    best_x, best_cost = float(res.x), float(res.fun)
            phases[k] = best_x
    return _with_multiplier(witness, with_phases(phases[None])[0])


#: Schmidt coefficients closer than this are treated as equal (round-off of an SVD of O(1) entries).
DEGENERATE_SCHMIDT_ATOL = 1e-9
_PAIR_STARTS = np.random.default_rng(20240601).normal(size=(2, 3))  # fixed, so the design is deterministic


def _qubit_swap_frame(rho_local: np.ndarray) -> np.ndarray:
    """Best common rotation R for the swap-like witness (equal Schmidt coefficients, two qubits).

    There W = (1/4)(I + XX + YY + ZZ) in the frames, each setting k has single-shot variance
    (1 - c_k^2)/16 with c = diag(O^T T O), T the correlation matrix in the frames and O the
    rotation of R. diag(O^T T O) = diag(O^T S O), S = (T + T^T)/2, ranges over the convex hull of
    the permutations of S's eigenvalues (Schur-Horn theorem); sum_k sqrt(1 - c_k^2) is concave,
    so its minimum sits at a vertex: O = eigenvectors of S (derived here).
    """
    paulis = [local_operator(n, 2) for n in ("X", "Y", "Z")]
    t = np.array([[np.real(np.trace(rho_local @ np.kron(a, b))) for b in paulis] for a in paulis])
    _, o = np.linalg.eigh(0.5 * (t + t.T))
    if np.linalg.det(o) < 0:
        o[:, 2] = -o[:, 2]  # a proper rotation; the sign of an axis does not change c_k
    return _su2_from_axes(o[:, 0], o[:, 1])


def _best_pair_rotation(spread, current: np.ndarray, k: int, minimize) -> np.ndarray:
    """Best SU(2) rotation of Schmidt columns (k, k+1), applied on top of ``current``."""
    paulis = np.stack([local_operator(n, 2) for n in ("X", "Y", "Z")])
    d = current.shape[0]

    def mult(x: np.ndarray) -> np.ndarray:
        theta = np.linalg.norm(x)
        block = np.eye(2, dtype=complex) if theta == 0 else (
            np.cos(theta) * np.eye(2) + 1j * np.sin(theta) * np.einsum("i,ijk->jk", x / theta, paulis))
        m = np.eye(d, dtype=complex)
        m[k:k + 2, k:k + 2] = block
        return current @ m

    cost = lambda x: float(spread(mult(x)[None])[0])  # noqa: E731
    best_x, best = np.zeros(3), cost(np.zeros(3))
    for start in np.vstack([np.zeros(3), _PAIR_STARTS]):
        res = minimize(cost, start, method="Nelder-Mead", options={"xatol": 1e-6, "fatol": 1e-10, "maxiter": 600})
        if res.fun < best - 1e-12:
            best_x, best = res.x, float(res.fun)
    return mult(best_x)


def _with_multiplier(witness: Witness, mult: np.ndarray) -> Witness:
    da, db = witness.dims
    d = mult.shape[0]
    ma, mb = np.eye(da, dtype=complex), np.eye(db, dtype=complex)
    ma[:d, :d] = mult
    mb[:d, :d] = mult
    return Witness(name=witness.name, dims=witness.dims, terms=witness.terms, bound=witness.bound,
                   entangled_if=witness.entangled_if, source=witness.source,
                   frame_a=witness.frame("a") @ ma, frame_b=witness.frame("b") @ mb)


def spin_correlation_witness(sign: int = 1) -> Witness:
    """The fixed two-qubit witness sign * (<X (x) Z> + <Y (x) Y>), entangled above 1.

    Separable states obey |<X(x)Z> + <Y(x)Y>| <= 1 (Cauchy-Schwarz on the Bloch vectors,
    physics-references Sec. 1.5; the witness form is that of [Bose2017], sign convention
    from memory). ``sign`` (+1 or -1) selects which side of |.| the experiment targets;
    pick it from the expected sign of the correlation sum.
    """
    if sign not in (1, -1):
        raise ProtocolError("sign", sign, "must be +1 or -1")
    return Witness(name="spin_correlation", dims=(2, 2), bound=1.0, entangled_if="above",
                   terms=(ProductTerm(coefficient=float(sign), factor_a="X", factor_b="Z"),
                          ProductTerm(coefficient=float(sign), factor_a="Y", factor_b="Y")),
                   source="[Bose2017] correlation witness")


def separable_extremum(witness: Witness, *, restarts: int = 24, iterations: int = 200,
                       seed: int = 0) -> float:
    """Best value of Tr(W sigma) over product states found by alternating optimisation.

    For a witness entangled "below" this is the smallest value found (the true separable
    minimum is at most this: the search is a local method, a check rather than a proof);
    for "above" the largest. The extremum over separable states is reached on pure product
    states (linearity and convexity), and for fixed |b> the best |a> is an extreme
    eigenvector of <b|W|b> ("see-saw" iteration, common practice in witness optimisation).
    """
    da, db = witness.dims
    sign = 1.0 if witness.entangled_if == "below" else -1.0
    w = sign * witness.operator().reshape(da, db, da, db)
    rng = np.random.default_rng(seed)
    b = rng.normal(size=(restarts, db)) + 1j * rng.normal(size=(restarts, db))
    b /= np.linalg.norm(b, axis=1, keepdims=True)
    value = np.full(restarts, np.inf)
    for _ in range(iterations):
        wa = np.einsum("rk,ikjl,rl->rij", b.conj(), w, b)
        _, va = np.linalg.eigh(wa)
        a = va[:, :, 0]
        wb = np.einsum("ri,ikjl,rj->rkl", a.conj(), w, a)
        eb, vb = np.linalg.eigh(wb)
        b = vb[:, :, 0]
        new = eb[:, 0]
        if np.all(np.abs(value - new) <= 1e-13 * max(1.0, np.abs(new).max())):
            value = new
            break
        value = new
    return float(sign * value.min())


def check_separable_bound(witness: Witness, *, key: str = "separable_bound", **search) -> float:
    """Refuse a stated bound that a product state violates; return the extremum found.

    Tolerance: 1e-9 times the witness scale sum |c_t| (the see-saw converges to ~1e-13).
    """
    found = separable_extremum(witness, **search)
    scale = max(1.0, sum(abs(t.coefficient) for t in witness.terms))
    beyond = found < witness.bound - 1e-9 * scale if witness.entangled_if == "below" \
        else found > witness.bound + 1e-9 * scale
    if beyond:
        side = "below" if witness.entangled_if == "below" else "above"
        raise ProtocolError(key, witness.bound, f"a product (separable) state gives {found:.6g}, {side} this bound; "
                                                 f"the bound must not be crossed by any separable state")
    return found


def _su2_from_axes(first: np.ndarray, second: np.ndarray) -> np.ndarray:
    """Unitary F with F X F^dag = first . sigma and F Y F^dag = second . sigma (orthonormal axes)."""
    from scipy.spatial.transform import Rotation

    rot = np.column_stack([first, second, np.cross(first, second)])
    vec = Rotation.from_matrix(rot).as_rotvec()
    angle = np.linalg.norm(vec)
    if angle == 0.0:
        return np.eye(2, dtype=complex)
    n = vec / angle
    sigma_n = sum(c * local_operator(name, 2) for c, name in zip(n, ("X", "Y", "Z")))
    return np.cos(angle / 2) * np.eye(2) - 1j * np.sin(angle / 2) * sigma_n


def optimised_spin_witness(rho: np.ndarray) -> Witness:
    """The two-term spin-correlation witness in its best local frames for ``rho`` (two qubits).

    Measuring body A along u_1, u_2 and body B along v_1, v_2 (top singular vectors of the
    correlation matrix T_ij = <s_i (x) s_j>) gives <u_1 s (x) v_1 s> + <u_2 s (x) v_2 s> = t_1 + t_2,
    the largest value the two-term witness reaches over local unitaries; separable states stay
    <= 1 (physics-references Sec. 1.5; frames from :func:`gqsim.physics.witnesses.optimal_witness_frame`).
    Written as X@X + Y@Y with frames F (F X F^dag = u_1 . s, F Y F^dag = u_2 . s), bound 1, above.
    """
    from gqsim.physics.witnesses import optimal_witness_frame

    rho = _check_state(rho, (2, 2))
    frame = optimal_witness_frame(rho)
    fa = _su2_from_axes(*frame.a_axes)
    fb = _su2_from_axes(*frame.b_axes)
    return Witness(name="spin_correlation_optimised", dims=(2, 2), bound=1.0, entangled_if="above",
                   terms=(ProductTerm(coefficient=1.0, factor_a="X", factor_b="X"),
                          ProductTerm(coefficient=1.0, factor_a="Y", factor_b="Y")),
                   source="[Bose2017] correlation witness, optimised local frames", frame_a=fa, frame_b=fb)


# --------------------------------------------------------------------------------------
# Readout model
# --------------------------------------------------------------------------------------

def _as_fidelities(value, key: str) -> tuple[float, ...] | float:
    if isinstance(value, (int, float, np.floating)) and not isinstance(value, bool):
        vals = (float(value),)
    else:
        try:
            vals = tuple(float(v) for v in value)
        except (TypeError, ValueError):
            raise ProtocolError(key, value, "must be a number in [0, 1] or a list of them (one per outcome)") from None
    for v in vals:
        if not (np.isfinite(v) and 0.0 <= v <= 1.0):
            raise ProtocolError(key, value, "assignment fidelities must lie in [0, 1]")
    return vals


@dataclass(frozen=True, kw_only=True)
class ReadoutModel:
    """Imperfect readout of each body's branch.

    Parameters
    ----------
    assignment_fidelity_a, assignment_fidelity_b : P(report i | branch i) for each
        outcome i of body A/B, or one number for all outcomes. A wrong report is spread
        evenly over the other d - 1 outcomes (common practice for symmetric error models).
    detection_efficiency_a, detection_efficiency_b : probability that a shot of body
        A/B yields any outcome; undetected shots are discarded, so the repetitions needed
        grow by 1 / (eta_a eta_b) (discarding is unbiased when detection does not depend
        on the branch, which this model assumes).
    correct_assignment : if True (default) each outcome is weighted with the inverse of
        the assignment matrix, so the estimator is unbiased (common practice in
        "readout-error mitigation"); if False the raw outcomes are used and the witness
        value itself is degraded.
    """

    assignment_fidelity_a: tuple[float, ...] | float = 1.0
    assignment_fidelity_b: tuple[float, ...] | float = 1.0
    detection_efficiency_a: float = 1.0
    detection_efficiency_b: float = 1.0
    correct_assignment: bool = True

    def __post_init__(self):
        for side in ("a", "b"):
            key = f"assignment_fidelity_{side}"
            object.__setattr__(self, key, _as_fidelities(getattr(self, key), key))
            key = f"detection_efficiency_{side}"
            eta = getattr(self, key)
            if isinstance(eta, bool) or not isinstance(eta, (int, float, np.floating)) \
                    or not (np.isfinite(eta) and 0.0 < eta <= 1.0):
                raise ProtocolError(key, eta, "must be a number in (0, 1]")
            object.__setattr__(self, key, float(eta))
        if not isinstance(self.correct_assignment, bool):
            raise ProtocolError("correct_assignment", self.correct_assignment, "must be true or false")

    @property
    def detection_efficiency(self) -> float:
        """Probability that a repetition is kept (both bodies detected)."""
        return self.detection_efficiency_a * self.detection_efficiency_b

    def assignment_matrix(self, side: str, d: int) -> np.ndarray:
        """(d, d) matrix M[reported, true] of body ``side`` ("a" or "b"); columns sum to 1."""
        fid = getattr(self, f"assignment_fidelity_{side}")
        if len(fid) == 1:
            fid = fid * d
        if len(fid) != d:
            raise ProtocolError(f"assignment_fidelity_{side}", fid, f"needs 1 or {d} values (one per outcome)")
        f = np.asarray(fid)
        m = np.tile((1.0 - f) / (d - 1), (d, 1))
        np.fill_diagonal(m, f)
        return m

    def estimator_weights(self, side: str, d: int) -> np.ndarray:
        """(d, d) matrix G with G[true, reported]: a per-shot value of eigenvalue vector lam is lam @ G.

        G = M^{-1} when correcting (so that E[lam @ G] over reported outcomes is the ideal
        mean), else the identity.
        """
        if not self.correct_assignment:
            return np.eye(d)
        m = self.assignment_matrix(side, d)
        if np.linalg.cond(m) > MAX_ASSIGNMENT_CONDITION:
            fid = getattr(self, f"assignment_fidelity_{side}")
            raise ProtocolError(f"assignment_fidelity_{side}", fid,
                                "too low to correct (the assignment matrix is singular; for a qubit "
                                "F0 + F1 must exceed 1); raise it or set correct_assignment = false")
        return np.linalg.inv(m)


# --------------------------------------------------------------------------------------
# Settings
# --------------------------------------------------------------------------------------

@dataclass(frozen=True, kw_only=True)
class Setting:
    """One measurement configuration: a local basis per body and the terms it estimates."""

    basis_a: str
    basis_b: str
    terms: tuple[ProductTerm, ...]

    @property
    def label(self) -> str:
        return f"{self.basis_a}@{self.basis_b}"


def group_settings(witness: Witness) -> tuple[float, tuple[Setting, ...]]:
    """Group the witness terms into measurement settings.

    Returns ``(constant, settings)``: the identity term needs no measurement. A term
    A@B with both factors non-trivial needs the setting (basis(A), basis(B)); a term A@I
    (or I@B) rides along with the first setting that already measures basis(A) on body A
    (or B), otherwise it opens a setting measuring body B in its branch basis. Terms in
    one setting are estimated from the same shots (their covariance is in the
    per-shot variance).
    """
    da, db = witness.dims
    constant = 0.0
    groups: dict[tuple[str, str], list[ProductTerm]] = {}
    singles: list[ProductTerm] = []
    for t in witness.terms:
        if (t.factor_a, t.factor_b) == ("I", "I"):
            constant += t.coefficient
        elif "I" in (t.factor_a, t.factor_b):
            singles.append(t)
        else:
            key = (measurement_basis(t.factor_a, da)[0], measurement_basis(t.factor_b, db)[0])
            groups.setdefault(key, []).append(t)
    default_a = "Z" if da == 2 else "D"
    default_b = "Z" if db == 2 else "D"
    for t in singles:
        if t.factor_b == "I":
            ba = measurement_basis(t.factor_a, da)[0]
            key = next((k for k in groups if k[0] == ba), (ba, default_b))
        else:
            bb = measurement_basis(t.factor_b, db)[0]
            key = next((k for k in groups if k[1] == bb), (default_a, bb))
        groups.setdefault(key, []).append(t)
    return constant, tuple(Setting(basis_a=a, basis_b=b, terms=tuple(ts)) for (a, b), ts in groups.items())


@dataclass(frozen=True, kw_only=True)
class SettingTable:
    """Everything the statistics stage needs about one witness on a stack of states.

    Attributes
    ----------
    witness : the :class:`Witness`
    constant : identity coefficient (no measurement needed)
    settings : the :class:`Setting` list, length S
    probabilities : (n, S, d_a d_b) probabilities of the *reported* joint outcomes of
        each setting (after the assignment matrices), outcome index i_a * d_b + i_b
    values : (S, d_a d_b) per-shot estimator value of each reported outcome
    detection_efficiency : fraction of repetitions kept
    """

    witness: Witness
    constant: float
    settings: tuple[Setting, ...]
    probabilities: np.ndarray
    values: np.ndarray
    detection_efficiency: float = 1.0
    extra: dict = field(default_factory=dict)

    @property
    def setting_means(self) -> np.ndarray:
        """(n, S) expected per-shot value of each setting."""
        return np.einsum("nsk,sk->ns", self.probabilities, self.values)

    @property
    def setting_variances(self) -> np.ndarray:
        """(n, S) single-shot variance of each setting's estimator (kept shots)."""
        second = np.einsum("nsk,sk->ns", self.probabilities, self.values ** 2)
        return np.maximum(second - self.setting_means ** 2, 0.0)

    @property
    def expected_values(self) -> np.ndarray:
        """(n,) expected witness estimate: constant + sum of setting means."""
        return self.constant + self.setting_means.sum(axis=1)


def setting_table(witness: Witness, states: np.ndarray, readout: ReadoutModel | None = None) -> SettingTable:
    """Outcome probabilities and per-shot estimator values of each setting of ``witness``.

    For setting (U_a, U_b) the ideal joint probabilities are p(i, j) = <i j|(U_a (x) U_b)^dag
    rho (U_a (x) U_b)|i j> (Born rule); reported outcomes follow q = (M_a (x) M_b) p with the
    assignment matrices of ``readout``. The per-shot value of reported outcome (i, j) is
    sum_t c_t g_a^t(i) g_b^t(j), g = lam @ G, lam the eigenvalues of the term's factor in the
    setting basis and G the readout weights; its mean is the setting's share of Tr(W rho)
    (exactly, when correcting) [NielsenChuang2010, Sec. 2.2.5 on projective measurements].
    With witness frames F_a, F_b the setting basis is (F_a U_a) (x) (F_b U_b).
    """
    readout = readout or ReadoutModel()
    da, db = witness.dims
    states = _check_state(states, (da, db))
    stack = states.reshape(-1, da * db, da * db)
    constant, settings = group_settings(witness)
    m_a, m_b = readout.assignment_matrix("a", da), readout.assignment_matrix("b", db)
    g_a, g_b = readout.estimator_weights("a", da), readout.estimator_weights("b", db)
    probs, values = [], []
    frame_a, frame_b = witness.frame("a"), witness.frame("b")
    for s in settings:
        u_a = _basis_unitary(s.basis_a, da)
        u_b = _basis_unitary(s.basis_b, db)
        u = np.kron(frame_a @ u_a, frame_b @ u_b)
        p = np.real(np.einsum("ki,nkl,li->ni", u.conj(), stack, u))
        p = np.clip(p, 0.0, None)
        p /= p.sum(axis=1, keepdims=True)
        q = np.einsum("ai,bj,nij->nab", m_a, m_b, p.reshape(-1, da, db)).reshape(-1, da * db)
        v = np.zeros((da, db))
        for t in s.terms:
            lam_a = _eigenvalues_in(u_a, local_operator(t.factor_a, da)) @ g_a
            lam_b = _eigenvalues_in(u_b, local_operator(t.factor_b, db)) @ g_b
            v += t.coefficient * np.outer(lam_a, lam_b)
        probs.append(q)
        values.append(v.reshape(-1))
    n = stack.shape[0]
    probabilities = np.stack(probs, axis=1) if probs else np.zeros((n, 0, da * db))
    values_arr = np.stack(values) if values else np.zeros((0, da * db))
    return SettingTable(witness=witness, constant=constant, settings=settings, probabilities=probabilities,
                        values=values_arr, detection_efficiency=readout.detection_efficiency)


def _basis_unitary(label: str, d: int) -> np.ndarray:
    if label in ("Z", "D"):
        return np.eye(d, dtype=complex)
    return measurement_basis(label, d)[1]
