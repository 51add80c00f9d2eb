"""The design loop's forward solve: eigenvalues on a fixed mesh from a cached assembly pattern.

On a fixed mesh only the section coefficients c_t(x_q) at the quadrature points change from
one design to the next. With B_t the global (free-dof) matrix of term t's basis values at the
points, every family's matrices are

    K = sum_t B_t^T diag(w c_t) B_t + K_supports,    M = sum_t B_t^T diag(w m_t) B_t + M_supports,

so a pattern keeps B_t (dense, n_q x n_free) and the support springs and point masses, and a
design costs a few matrix products and one eigen-solution.

Mirror symmetry: when the part, its supports and every design are symmetric about the middle
(a symmetric cut), the mirror map R of the dofs (w(x) -> w(L - x), a rotation theta(x) ->
-theta(L - x)) commutes with K and M, so the eigenproblem splits exactly into its symmetric and
antisymmetric halves, P_+^T K P_+ and P_-^T K P_- (P_+-, orthonormal bases of R's +-1
eigenspaces). Two problems of n/2 dofs cost a quarter of one of n in LAPACK. R is found once,
from the basis values at mirrored quadrature points, and kept only if it commutes with K and M
to rounding.

The eigen-solution is the inverted, shifted problem of ``modal.dense_eigh`` (full relative
accuracy for the lowest modes), asked for eigenvalues only where vectors are not needed
(``subset_by_index`` or, for "every mode below f", ``subset_by_value``; ``check_finite=False``).
Nothing else is computed: no node positions, no mode-shape functions, no error estimate (the
mesh's degree is chosen once by the nested estimate; see ``optimizer.objective``).

The result equals ``modal.assemble_family`` + ``modal.lowest_modes`` on the same mesh to
rounding, and ``modal.solve`` to the mesh's accuracy (``tests/test_forward_pattern.py``).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import scipy.linalg
import scipy.linalg.blas
import scipy.linalg.lapack
from tonewright.forward.geometry import Part
from tonewright.forward.modal import (
    _SHIFT,
    Discretisation,
    FamilySystem,
    assemble_family,
    is_flexible,
)

__all__ = ["FamilyPattern", "family_pattern", "pattern_matrices", "pattern_modes"]

_SYRK = scipy.linalg.blas.get_blas_funcs("syrk", dtype=np.float64)
_SYGVD = scipy.linalg.lapack.get_lapack_funcs("sygvd", dtype=np.float64)
_ROTATIONS = ("rhoIy", "rhoIz")  # mass terms of a Timoshenko rotation: odd under the mirror


@dataclass(frozen=True, eq=False)
class _Block:
    """One invariant subspace (all dofs, or a symmetry class) with its basis P (n x m): the
    terms' B P stacked, so that a matrix is one symmetric rank-k product."""

    P: np.ndarray | None  # None: the identity
    K_names: tuple[str, ...]
    K_rows: np.ndarray  # (sum of n_q over the stiffness terms, m)
    M_names: tuple[str, ...]
    M_rows: np.ndarray
    K_supports: np.ndarray
    M_supports: np.ndarray

    @property
    def size(self) -> int:
        return self.K_supports.shape[0]


@dataclass(frozen=True, eq=False)
class FamilyPattern:
    """One family's assembly on a fixed mesh with its supports applied, split by symmetry
    when the part allows.

    ``system`` is the family system of the design the pattern was built from: its terms,
    dofs and weights (which do not depend on the design) are what eigenvalue sensitivities
    need; its K and M are that design's.
    """

    family: str
    system: FamilySystem
    weights: np.ndarray
    blocks: tuple[_Block, ...]

    @property
    def n_rigid(self) -> int:
        return self.system.n_rigid

    @property
    def symmetric(self) -> bool:
        return len(self.blocks) == 2


def _global_rows(system: FamilySystem, B_local: np.ndarray) -> np.ndarray:
    """B of one term as a dense (n_q, n_free) matrix on the reduced dofs."""
    n_q = B_local.shape[0]
    full = np.zeros((n_q, system.n_global))
    rows = np.repeat(np.arange(n_q), B_local.shape[1])
    np.add.at(full, (rows, system.dofs_q.ravel()), B_local.ravel())
    return np.ascontiguousarray(full[:, system.free])


def _mirror_map(
    system: FamilySystem, x: np.ndarray, length: float, mass: list[tuple[str, np.ndarray]]
) -> np.ndarray | None:
    """The dof map R of the mirror x -> L - x, or None when the mesh is not symmetric."""
    order = np.argsort(x)
    mirrored = np.argsort(length - x)
    if not np.allclose(x[order], length - x[mirrored], rtol=0.0, atol=1e-12 * length):
        return None
    perm = np.empty_like(order)
    perm[order] = mirrored  # point q mirrors onto point perm[q]
    values = np.vstack([B for _, B in mass])
    signs = np.concatenate([np.full(B.shape[0], -1.0 if n in _ROTATIONS else 1.0) for n, B in mass])
    target = np.vstack([B[perm] for _, B in mass]) * signs[:, None]
    # normal equations (n x n): far cheaper than a least-squares factorisation of the tall
    # matrix, and the rounding and the residual check below catch any loss of accuracy
    gram = values.T @ values
    try:
        R = scipy.linalg.solve(gram, values.T @ target, assume_a="pos", check_finite=False)
    except np.linalg.LinAlgError:
        return None
    R = np.round(R, 8)  # a signed permutation on a symmetric hierarchical mesh
    if not np.allclose(values @ R, target, atol=1e-8 * np.abs(target).max()):
        return None
    return R


def _signed_permutation(R: np.ndarray) -> tuple[np.ndarray, np.ndarray] | None:
    """R as (target index, sign) per column, when it is a signed permutation."""
    nz = np.abs(R) > 0.5
    if not (np.all(nz.sum(axis=0) == 1) and np.all(nz.sum(axis=1) == 1)):
        return None
    j = np.argmax(nz, axis=0)
    sign = R[j, np.arange(R.shape[1])]
    if not np.allclose(np.abs(sign), 1.0):
        return None
    return j, np.sign(sign)


def _commutes(j: np.ndarray, sign: np.ndarray, A: np.ndarray) -> bool:
    """R^T A R == A for the signed permutation R (indexing, not products)."""
    mirrored = A[np.ix_(j, j)] * np.outer(sign, sign)
    return bool(np.allclose(mirrored, A, rtol=0.0, atol=1e-10 * np.abs(A).max()))


def _symmetry_bases(j: np.ndarray, sign: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Orthonormal bases of R's +1 and -1 eigenspaces: a dof mapped onto itself goes to the
    class of its sign; a pair (i, j) gives (e_i +- s e_j) / sqrt 2."""
    n = j.size
    plus, minus = [], []
    for i in range(n):
        k = int(j[i])
        if k < i:
            continue
        if k == i:
            (plus if sign[i] > 0 else minus).append({i: 1.0})
        else:
            r = 1.0 / np.sqrt(2.0)
            plus.append({i: r, k: sign[i] * r})
            minus.append({i: r, k: -sign[i] * r})

    def basis(columns):
        P = np.zeros((n, len(columns)))
        for c, entries in enumerate(columns):
            for row, v in entries.items():
                P[row, c] = v
        return P

    return basis(plus), basis(minus)


def _block(P, stiffness, mass, K_s, M_s) -> _Block:
    def rows(terms):
        stacked = np.vstack([B for _, B in terms])
        return np.asfortranarray(stacked if P is None else stacked @ P)

    if P is not None:
        K_s, M_s = P.T @ K_s @ P, P.T @ M_s @ P
    return _Block(
        P,
        tuple(n for n, _ in stiffness),
        rows(stiffness),
        tuple(n for n, _ in mass),
        rows(mass),
        np.asfortranarray(K_s),
        np.asfortranarray(M_s),
    )


def family_pattern(
    part: Part,
    disc: Discretisation,
    family: str,
    coefficients: Mapping[str, np.ndarray],
    symmetric: bool = False,
) -> FamilyPattern:
    """The pattern of ``family`` on ``disc`` (supports taken from ``part``). ``symmetric``:
    every design the pattern will see is mirror-symmetric, so split it if the part allows."""
    flexible = is_flexible(family, coefficients)
    system = assemble_family(part, disc, family, coefficients, flexible)
    zeros = {k: np.zeros_like(v) for k, v in coefficients.items()}
    # springs and point masses only, on the same elements (a stiff string stays C1)
    bare = assemble_family(part, disc, family, zeros, flexible)
    stiffness = [(t.coefficient, _global_rows(system, t.B)) for t in system.stiffness]
    mass = [(t.coefficient, _global_rows(system, t.B)) for t in system.mass]
    blocks = (_block(None, stiffness, mass, bare.K, bare.M),)
    if symmetric:
        R = _mirror_map(system, disc.quad.x, part.length, mass)
        signed = _signed_permutation(R) if R is not None else None
        matrices = (system.K, system.M, bare.K, bare.M)
        if signed is not None and all(_commutes(*signed, A) for A in matrices):
            n = R.shape[0]
            P_plus, P_minus = _symmetry_bases(*signed)
            if P_plus.shape[1] + P_minus.shape[1] == n:
                blocks = tuple(
                    _block(P, stiffness, mass, bare.K, bare.M) for P in (P_plus, P_minus)
                )
    return FamilyPattern(family, system, system.weights, blocks)


def _gram(names, rows: np.ndarray, w: np.ndarray, coefficients, base: np.ndarray):
    """base + sum_t (B_t P)^T diag(w c_t) (B_t P), upper triangle only (BLAS syrk: every
    coefficient is positive, so diag(w c) = D^2 with D real)."""
    scale = np.sqrt(np.concatenate([w * coefficients[n] for n in names]))
    return _SYRK(1.0, rows * scale[:, None], beta=1.0, c=base, trans=1, lower=0)


def _block_matrices(block: _Block, w: np.ndarray, coefficients) -> tuple[np.ndarray, np.ndarray]:
    """Upper triangles of the block's K and M."""
    K = _gram(block.K_names, block.K_rows, w, coefficients, block.K_supports)
    M = _gram(block.M_names, block.M_rows, w, coefficients, block.M_supports)
    return K, M


def _full(A: np.ndarray) -> np.ndarray:
    return np.triu(A) + np.triu(A, 1).T


def pattern_matrices(
    pattern: FamilyPattern, coefficients: Mapping[str, np.ndarray]
) -> tuple[np.ndarray, np.ndarray]:
    """K and M on all free dofs (symmetric, not split) for coefficients at the points."""
    n = pattern.system.K.shape[0]
    K, M = np.zeros((n, n)), np.zeros((n, n))
    for block in pattern.blocks:
        Kb, Mb = (_full(A) for A in _block_matrices(block, pattern.weights, coefficients))
        P = np.eye(n) if block.P is None else block.P
        K += P @ Kb @ P.T
        M += P @ Mb @ P.T
    return K, M


def _lowest(K, M, want: int, below_lam: float | None, vectors: bool):
    """Lowest ``want`` eigenpairs of one block (and all below ``below_lam``), inverted:
    M x = mu (K + s M) x, lam = 1 / mu - s; only the upper triangles are read. Every
    eigenvalue by divide and conquer (LAPACK sygvd): at these sizes (tens of dofs) it is
    faster than asking for a subset."""
    n = K.shape[0]
    S = K + _SHIFT * M
    mu, vec, info = _SYGVD(M, S, itype=1, jobz="V" if vectors else "N", uplo="U")
    if info != 0:
        raise np.linalg.LinAlgError(f"LAPACK sygvd failed (info {info})")
    mu = mu[::-1]
    lam = 1.0 / mu - _SHIFT
    want = min(want, n)
    if below_lam is not None:
        want = min(max(want, int(np.count_nonzero(lam < below_lam))), n)
    if not vectors:
        return lam[:want], None
    # sygvd normalises x^T S x = 1, so x^T M x = mu: rescale to M-normalised vectors
    return lam[:want], vec[:, ::-1][:, :want] / np.sqrt(mu[:want])


def pattern_modes(
    pattern: FamilyPattern,
    coefficients: Mapping[str, np.ndarray],
    count: int,
    *,
    vectors: bool = False,
    below_lam: float | None = None,
    max_count: int = 12,
) -> tuple[np.ndarray, np.ndarray | None]:
    """The lowest elastic eigenvalues (lambda = omega^2) and, if asked, M-normalised vectors
    on the free dofs.

    ``count`` modes at least; with ``below_lam`` also every mode below it (``max_count`` at
    most). The ``n_rigid`` rigid-body or bounce modes at the bottom are dropped, as in
    ``modal.lowest_modes``.
    """
    rigid = pattern.n_rigid
    w = pattern.weights
    lams, vecs = [], []
    for block in pattern.blocks:
        K, M = _block_matrices(block, w, coefficients)
        lam, vec = _lowest(K, M, count + rigid, below_lam, vectors)
        lams.append(lam)
        if vectors:
            vecs.append(vec if block.P is None else block.P @ vec)
    lam = np.concatenate(lams)
    order = np.argsort(lam)
    keep = count
    if below_lam is not None:
        keep = max(count, int(np.count_nonzero(lam[order[rigid:]] < below_lam)))
    keep = min(keep, max_count if below_lam is not None else keep, lam.size - rigid)
    chosen = order[rigid : rigid + keep]
    if not vectors:
        return lam[chosen], None
    return lam[chosen], np.hstack(vecs)[:, chosen]
