"""High-order (p-version) 3-D solid model of an undercut bar, free-free.

The same problem as ``forward.solid`` (orthotropic linear elastodynamics, bar axes x length,
y width, z thickness, flat top face z = t0, bottom face z = t0 - h(x)):

    find u, omega:  int_V eps(v)^T C eps(u) dV = omega^2 int_V rho v . u dV   for all v,

discretised with few, large hexahedra of high degree instead of many small ones.

Discretisation
--------------
- Elements: ``nx`` along the length, with the profile's strongest corners among the element
  ends (``forward.geometry.strongest_corners``) and a geometric mesh toward each re-entrant
  corner (``_length_ends``); ``ny`` across *half* the width (mirror symmetry
  about the mid-width plane, solved twice as in ``forward.solid``); ``nz`` through the thickness.
- Shape functions: tensor products a(xi) b(eta) c(zeta) of the hierarchical integrated-Legendre
  C0 functions of ``forward.basis`` (Szabo & Babuska (1991), *Finite Element Analysis*, ch. 3
  and 13), degrees (px, py, pz): the full tensor-product space Q(px, py, pz). The spaces of
  degree p - 1 are nested in those of degree p, so eigenvalues fall monotonically as the degree
  rises (Rayleigh-Ritz); ``psolid_convergence`` extrapolates the changes over degrees p - 2,
  p - 1, p to the error of degree p (``extrapolated_error``).
- Exact geometry: the element map is x = x(xi), y = y(eta), z = t0 - h(x) (1 - s(zeta)) with
  the true thickness h(x) evaluated at the quadrature points (no interpolation of the
  geometry). With half-lengths Lx, Ly, Ls of an element in x, y and s,

      d/dx = (1/Lx) d/dxi + (h'/h) ((1 - s)/Ls) d/dzeta,
      d/dy = (1/Ly) d/deta,
      d/dz = (1/(h Ls)) d/dzeta,        dV = Lx Ly Ls h dxi deta dzeta.

  Every factor depends on one reference coordinate only (x-factors on xi through h and h',
  z-factors on zeta through s), so every element integral is a sum of products of 1-D
  integrals, and the assembled matrices are sums of Kronecker products X (x) Y (x) Z of
  assembled 1-D matrices: no 3-D quadrature at all. The x-integrals are split at every
  breakpoint of h(x), so piecewise-linear profiles are integrated exactly.
- Stiffness: with C4[a, i, b, j] = C[voigt(a, i), voigt(b, j)] (engineering shear strains),
  K_ab = sum_ij C4[a, i, b, j] S_ij, S_ij = int d_i N_A d_j N_B dV.
- Eigen-solution: unknowns ordered x-layer by x-layer; K - sigma M is factored by condensing
  each x-element's interior functions (dense Cholesky per element) onto the vertex layers,
  whose block-tridiagonal Schur complement gets a block Cholesky factor
  (``_CondensedCholesky``, ``_BlockTridiagonalCholesky``). That solve, applied to blocks of
  vectors at matrix-matrix speed, drives a block shift-invert Krylov iteration
  (``forward.blockeig``) with a small negative shift, as in ``forward.solid``; three rigid-body
  modes per symmetry class are dropped. The two symmetry classes are independent problems,
  solved on two threads where the cores are free (``_in_parallel``).

Modes are sampled at Gauss points (quadrature weights as lumped masses) and named by
``forward.classify``. Gauss points miss the faces, so where asked (``probes``) the vertical
displacement on the top face is evaluated from the basis itself at s = 1 (``_top_face_w``),

    w_k(x, y) = sum_ijk N_i(x) N_j(y) N_k(1) c_k[i, j, k, z],

with the coefficients c_k of mode k mass-normalised over the whole bar (int_V rho |u_k|^2 dV
= 1: the solver's M-normalised vectors of the half width, divided by sqrt(2)); the sound preview
weighs a strike with them.
"""

from __future__ import annotations

import multiprocessing
import os
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, replace
from functools import partial
from itertools import pairwise
from typing import TypeVar

import numpy as np
from scipy.linalg import solve_triangular
from scipy.linalg.lapack import dpotrf
from tonewright.acoustics.pitch import cents
from tonewright.forward.basis import c0_basis, gauss_legendre
from tonewright.forward.blockeig import shift_invert_eigs
from tonewright.forward.classify import ModeSet, classify_modes
from tonewright.forward.geometry import Field, strongest_corners
from tonewright.forward.orthotropic import Orthotropic, bar_axes, stiffness_matrix
from tonewright.forward.solid import _single_threaded_blas, match_modes, negative_shift

__all__ = [
    "EXTRAPOLATION_SAFETY",
    "PMesh",
    "PSolidConvergence",
    "extrapolated_error",
    "psolid_convergence",
    "psolid_modes",
]


@dataclass(frozen=True)
class PMesh:
    """Elements and degrees of the p-version solid model.

    ``nx`` elements along the length (the profile's corners are added as element ends), ``ny``
    across half the width, ``nz`` through the thickness; ``px``, ``py``, ``pz`` the polynomial
    degrees along x, y and z.
    """

    # defaults: every mode up to bending 4 of a smooth 400 x 60 x 22 mm wood arch within
    # 0.06 cent of a degree (10, 8, 7) reference (tests/test_psolid.py)
    nx: int = 4
    ny: int = 1
    nz: int = 1
    px: int = 7
    py: int = 6
    pz: int = 5
    grade_corners: bool = True  # small elements at sharp corners of the profile, nz >= 2
    bottom_layer: float = 0.15  # with nz >= 2: the bottom element's share of the thickness
    # with grade_corners: geometric layers (ratio CORNER_RATIO) on each side of a re-entrant
    # corner, and py, pz raised by corner_raise where the profile has one
    corner_layers: int = 2
    corner_raise: int = 0

    def __post_init__(self) -> None:
        for name in ("nx", "ny", "nz"):
            value = getattr(self, name)
            if not isinstance(value, int | np.integer) or isinstance(value, bool) or value < 1:
                raise ValueError(f"mesh {name} = {value!r}: must be a whole number >= 1")
        for name in ("px", "py", "pz"):
            value = getattr(self, name)
            if not isinstance(value, int | np.integer) or isinstance(value, bool) or value < 2:
                raise ValueError(f"mesh {name} = {value!r}: must be a whole number >= 2")
        for name in ("corner_layers", "corner_raise"):
            value = getattr(self, name)
            if not isinstance(value, int | np.integer) or isinstance(value, bool) or value < 0:
                raise ValueError(f"mesh {name} = {value!r}: must be a whole number >= 0")
        if not 0.0 < self.bottom_layer < 1.0:
            raise ValueError(f"mesh bottom_layer = {self.bottom_layer!r}: allowed 0 < share < 1")

    def lowered(self) -> PMesh:
        """The nested space one degree lower in every direction."""
        return replace(self, px=self.px - 1, py=self.py - 1, pz=self.pz - 1)

    def raised(self) -> PMesh:
        """The space one degree higher in every direction."""
        return replace(self, px=self.px + 1, py=self.py + 1, pz=self.pz + 1)


# ----------------------------------------------------------------------------------------------
# One-dimensional pieces
@dataclass(frozen=True)
class _Axis:
    """Hierarchical C0 basis on a 1-D mesh: element ends, degree, quadrature samples.

    Global numbering runs left to right: vertex e is function e p, the interior functions of
    element e are e p + 1 .. e p + p - 1, so neighbouring functions have neighbouring numbers.
    """

    ends: np.ndarray  # (n + 1,)
    p: int

    @property
    def size(self) -> int:
        return (self.ends.size - 1) * self.p + 1

    def local_to_global(self, e: int) -> np.ndarray:
        base = e * self.p
        return np.concatenate([[base, base + self.p], base + np.arange(1, self.p)])


def _element_rule(a: float, b: float, cuts: np.ndarray, q: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss points (as xi in [-1, 1]) and weights (in xi) on [a, b], split at ``cuts``."""
    inner = cuts[(cuts > a + 1e-12 * (b - a)) & (cuts < b - 1e-12 * (b - a))]
    edges = np.concatenate([[a], inner, [b]])
    g, w = gauss_legendre(q)
    lo, hi = edges[:-1, None], edges[1:, None]
    x = 0.5 * (lo + hi) + 0.5 * (hi - lo) * g[None, :]
    weight = (hi - lo) / (b - a) * w[None, :]  # d xi = 2 dx / (b - a); sum of weights is 2
    return (2.0 * (x - a) / (b - a) - 1.0).ravel(), weight.ravel()


def _slope(thickness: Field, x: np.ndarray, step: np.ndarray) -> np.ndarray:
    """h'(x) by central differences inside a smooth piece (step well inside the piece)."""
    return (thickness(x + step) - thickness(x - step)) / (2.0 * step)


@dataclass(frozen=True)
class _XSamples:
    """Per x-element quadrature: xi, weights, x, h, h' and the half-length."""

    xi: tuple[np.ndarray, ...]
    w: tuple[np.ndarray, ...]
    x: tuple[np.ndarray, ...]
    h: tuple[np.ndarray, ...]
    dh: tuple[np.ndarray, ...]
    half: np.ndarray


def _x_samples(axis: _Axis, thickness: Field, q: int) -> _XSamples:
    cuts = np.asarray(thickness.breakpoints, dtype=float)
    xis, ws, xs, hs, dhs = [], [], [], [], []
    for a, b in zip(axis.ends[:-1], axis.ends[1:], strict=True):
        xi, w = _element_rule(a, b, cuts, q)
        x = a + 0.5 * (xi + 1.0) * (b - a)
        # the step stays inside the piece: Gauss points lie at least 0.01 piece-widths inside
        inner = np.concatenate([[a], cuts[(cuts > a) & (cuts < b)], [b]])
        piece = np.diff(inner)[np.clip(np.searchsorted(inner, x) - 1, 0, inner.size - 2)]
        step = 1e-4 * piece
        xis.append(xi)
        ws.append(w)
        xs.append(x)
        hs.append(np.asarray(thickness(x), dtype=float))
        dhs.append(_slope(thickness, x, step))
    half = 0.5 * np.diff(axis.ends)
    return _XSamples(tuple(xis), tuple(ws), tuple(xs), tuple(hs), tuple(dhs), half)


def _assemble_1d(axis: _Axis, local: list[np.ndarray]) -> np.ndarray:
    """Dense global 1-D matrix from per-element local matrices (p + 1, p + 1)."""
    A = np.zeros((axis.size, axis.size))
    for e, Ae in enumerate(local):
        idx = axis.local_to_global(e)
        A[np.ix_(idx, idx)] += Ae
    return A


# The physical derivatives as sums of separable terms (see the module docstring). A term is
# (x-factor, d/dxi order, y-factor, d/deta order, z-factor, d/dzeta order); factor names:
#   x: "1", "1/Lx", "h'/h", "1/h"      y: "1", "1/Ly"      z: "1", "(1-s)/Ls", "1/Ls"
_DERIVATIVE_TERMS: tuple[tuple[tuple[str, int, str, int, str, int], ...], ...] = (
    (("1/Lx", 1, "1", 0, "1", 0), ("h'/h", 0, "1", 0, "(1-s)/Ls", 1)),  # d/dx
    (("1", 0, "1/Ly", 1, "1", 0),),  # d/dy
    (("1/h", 0, "1", 0, "1/Ls", 1),),  # d/dz
)


def _x_factor(name: str, h: np.ndarray, dh: np.ndarray, half: float) -> np.ndarray:
    if name == "1":
        return np.ones_like(h)
    if name == "1/Lx":
        return np.full_like(h, 1.0 / half)
    if name == "h'/h":
        return dh / h
    return 1.0 / h  # "1/h"


def _x_matrix(axis: _Axis, xs: _XSamples, pair: tuple[tuple[str, int], tuple[str, int]]):
    """Global X for a pair of x-terms, measure Lx h dxi included."""
    (fa, da), (fb, db) = pair
    local = []
    for e in range(axis.ends.size - 1):
        B = c0_basis(axis.p, xs.xi[e], 1)
        h, dh, L = xs.h[e], xs.dh[e], xs.half[e]
        weight = _x_factor(fa, h, dh, L) * _x_factor(fb, h, dh, L) * L * h * xs.w[e]
        local.append(B[da].T @ (weight[:, None] * B[db]))
    return _assemble_1d(axis, local)


def _y_matrix(axis: _Axis, pair: tuple[tuple[str, int], tuple[str, int]]) -> np.ndarray:
    (fa, da), (fb, db) = pair
    g, w = gauss_legendre(axis.p + 1)
    B = c0_basis(axis.p, g, 1)
    local = []
    for L in 0.5 * np.diff(axis.ends):
        scale = L * (1.0 / L if fa == "1/Ly" else 1.0) * (1.0 / L if fb == "1/Ly" else 1.0)
        local.append(scale * (B[da].T @ (w[:, None] * B[db])))
    return _assemble_1d(axis, local)


def _z_matrix(axis: _Axis, pair: tuple[tuple[str, int], tuple[str, int]]) -> np.ndarray:
    (fa, da), (fb, db) = pair
    g, w = gauss_legendre(axis.p + 2)  # integrand degree <= 2 p + 2
    B = c0_basis(axis.p, g, 1)
    local = []
    for a, b in zip(axis.ends[:-1], axis.ends[1:], strict=True):
        L = 0.5 * (b - a)
        s = a + (g + 1.0) * L

        def factor(name: str, s: np.ndarray = s, L: float = L) -> np.ndarray:
            if name == "1":
                return np.ones_like(s)
            if name == "1/Ls":
                return np.full_like(s, 1.0 / L)
            return (1.0 - s) / L  # "(1-s)/Ls"

        weight = factor(fa) * factor(fb) * L * w
        local.append(B[da].T @ (weight[:, None] * B[db]))
    return _assemble_1d(axis, local)


# ----------------------------------------------------------------------------------------------
# Assembly as sums of Kronecker products
_VOIGT = np.array([[0, 5, 4], [5, 1, 3], [4, 3, 2]])  # voigt(a, i) for the strain d_i u_a


@dataclass(frozen=True)
class _KroneckerPencil:
    """K = sum_t X[t] (x) S[t] and M = M_x (x) M_s: 1-D matrices along x (Nx, Nx) times
    cross-section matrices (m, m), unknowns ordered (x function, cross-section unknown)."""

    X: np.ndarray  # (T, Nx, Nx)
    S: np.ndarray  # (T, m, m)
    M_x: np.ndarray  # (Nx, Nx)
    M_s: np.ndarray  # (m, m)

    def restricted(self, keep: np.ndarray) -> _KroneckerPencil:
        """The pencil with only the cross-section unknowns ``keep`` (supports)."""
        return _KroneckerPencil(
            self.X, self.S[:, keep][:, :, keep], self.M_x, self.M_s[np.ix_(keep, keep)]
        )

    def shifted(self, sigma: float) -> tuple[np.ndarray, np.ndarray]:
        """Terms of K - sigma M."""
        return (
            np.concatenate([self.X, -sigma * self.M_x[None]]),
            np.concatenate([self.S, self.M_s[None]]),
        )


def _assemble(
    x: _Axis, y: _Axis, z: _Axis, xs: _XSamples, C: np.ndarray, rho: float
) -> _KroneckerPencil:
    G = C[_VOIGT[:, :, None, None], _VOIGT[None, None, :, :]]  # C4[a, i, b, j]
    X_terms, S_terms = [], []
    for i, terms_i in enumerate(_DERIVATIVE_TERMS):
        for j, terms_j in enumerate(_DERIVATIVE_TERMS):
            G_ij = G[:, i, :, j]  # (a, b)
            if not np.any(G_ij):
                continue
            for fxa, dxa, fya, dya, fza, dza in terms_i:
                for fxb, dxb, fyb, dyb, fzb, dzb in terms_j:
                    X_terms.append(_x_matrix(x, xs, ((fxa, dxa), (fxb, dxb))))
                    Ym = _y_matrix(y, ((fya, dya), (fyb, dyb)))
                    Zm = _z_matrix(z, ((fza, dza), (fzb, dzb)))
                    S_terms.append(np.kron(np.kron(Ym, Zm), G_ij))
    M_x = _x_matrix(x, xs, (("1", 0), ("1", 0)))
    Ym = _y_matrix(y, (("1", 0), ("1", 0)))
    Zm = _z_matrix(z, (("1", 0), ("1", 0)))
    M_s = rho * np.kron(np.kron(Ym, Zm), np.eye(3))
    return _KroneckerPencil(np.stack(X_terms), np.stack(S_terms), M_x, M_s)


def _kron_block(X: np.ndarray, S: np.ndarray, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
    """Dense block sum_t X[t][rows, cols] (x) S[t]."""
    Xb = X[:, rows][:, :, cols]  # (T, r, c)
    m = S.shape[1]
    B = np.tensordot(Xb, S, axes=(0, 0))  # (r, c, m, m)
    return B.transpose(0, 2, 1, 3).reshape(rows.size * m, cols.size * m)


class _BlockTridiagonalCholesky:
    """Cholesky factor of a symmetric positive definite block-tridiagonal matrix (the Schur
    complement on the vertex layers, blocks m x m, given as its diagonal blocks D_k and the
    blocks B_k below them): L_k L_k^T = D_k - C_k C_k^T with C_k = B_k L_(k-1)^-T. Costs
    n m^3 instead of the (n m)^3 / 3 of a dense factor (Golub & Van Loan, Matrix
    Computations, 4th ed. 2013, sec. 4.5, block tridiagonal systems)."""

    def __init__(self, diagonal: list[np.ndarray], below: list[np.ndarray]) -> None:
        self.m, self.n = diagonal[0].shape[0], len(diagonal)
        self.L, self.C = [], [None]
        for k, D in enumerate(diagonal):
            if k:
                C = solve_triangular(self.L[-1], below[k - 1].T, lower=True, check_finite=False).T
                D = D - C @ C.T
                self.C.append(C)
            self.L.append(_cholesky(D))

    def solve(self, b: np.ndarray) -> np.ndarray:
        """(A^-1 b) for b of shape (n m, r)."""
        m, n = self.m, self.n
        y = b.reshape(n, m, -1).copy()
        for k in range(n):
            if k:
                y[k] -= self.C[k] @ y[k - 1]
            y[k] = solve_triangular(self.L[k], y[k], lower=True, check_finite=False)
        for k in range(n - 1, -1, -1):
            if k < n - 1:
                y[k] -= self.C[k + 1].T @ y[k + 1]
            y[k] = solve_triangular(self.L[k], y[k], lower=True, trans="T", check_finite=False)
        return y.reshape(n * m, -1)


def _cholesky(A: np.ndarray) -> np.ndarray:
    L, info = dpotrf(A, lower=1, clean=1, overwrite_a=1)
    if info:
        raise np.linalg.LinAlgError("shifted stiffness is not positive definite")
    return L


@dataclass(frozen=True)
class _Pivot:
    """One eliminated set P of an element's local unknowns: L L^T = A_PP (updated), and
    W = L^-1 A_PC on the later unknowns C it couples to."""

    rows: np.ndarray
    L: np.ndarray
    cols: np.ndarray
    W: np.ndarray


def _eliminate(
    A_ii: np.ndarray, A_iv: np.ndarray, order: list[np.ndarray]
) -> tuple[list[_Pivot], np.ndarray]:
    """Block Gaussian elimination of an element's interior unknowns, set by set in ``order``
    (index sets of A_ii), each coupled only to the few later unknowns it touches. Returns the
    pivots and the update - A_vi A_ii^-1 A_iv it leaves on the vertex unknowns."""
    q, v = A_iv.shape
    local = np.zeros((q + v, q + v))
    local[:q, :q] = A_ii
    local[:q, q:] = A_iv
    local[q:, :q] = A_iv.T
    done = np.zeros(q + v, dtype=bool)
    pivots = []
    for rows in order:
        done[rows] = True
        later = np.flatnonzero(~done)
        coupled = local[np.ix_(rows, later)]
        touched = np.any(coupled != 0.0, axis=0)  # disjoint supports give exact zeros
        cols = later[touched]
        L = _cholesky(local[np.ix_(rows, rows)])
        W = solve_triangular(L, coupled[:, touched], lower=True, check_finite=False)
        local[np.ix_(cols, cols)] -= W.T @ W
        pivots.append(_Pivot(rows, L, cols, W))
    return pivots, local[q:, q:]


def _cross_section_bubbles(y: _Axis, z: _Axis) -> np.ndarray:
    """Per cross-section unknown (y function, z function, component): the cross-section
    element it is a bubble of (interior in both y and z), or -1."""
    iy, iz = np.arange(y.size), np.arange(z.size)
    inside = (iy[:, None] % y.p != 0) & (iz[None, :] % z.p != 0)
    element = (iy[:, None] // y.p) * (z.size // z.p) + iz[None, :] // z.p
    return np.repeat(np.where(inside, element, -1).ravel(), 3)


class _CondensedCholesky:
    """Direct solver for sum_t X[t] (x) S[t] (symmetric positive definite) by condensation.

    The interior functions of an x-element couple only to each other and to the element's two
    vertex functions, so eliminating them element by element leaves the Schur complement on
    the vertex layers, a small block-tridiagonal matrix factored by blocks. Inside an element
    the interior unknowns go in ``groups`` of the cross-section functions (``groups[j]`` >= 0:
    a bubble of cross-section element ``groups[j]``; -1: the rest, eliminated last): the
    bubbles of different cross-section elements share no support, so each group is factored
    on its own (dense Cholesky L L^T, W = L^-1 A_PC onto the few unknowns it touches) before
    the rest. This is exact Gaussian elimination in a nested-dissection order; it costs about
    n_e ((p - 1) m)^3 / 3 with one group, and a fraction of that when the bubbles are most
    of the cross-section. Solves take blocks of right-hand sides: triangular solves and
    products with many columns run at matrix-matrix speed.
    """

    def __init__(self, X: np.ndarray, S: np.ndarray, p: int, groups: np.ndarray | None = None):
        m = S.shape[1]
        self.p, self.m = p, m
        self.n_el = (X.shape[1] - 1) // p
        groups = np.full(m, -1) if groups is None else np.asarray(groups)
        if np.unique(groups[groups >= 0]).size < 2:
            groups = np.full(m, -1)  # one bubble group saves less than its bookkeeping costs
        inner_groups = np.tile(groups, p - 1)  # (p - 1) m interior unknowns, x-layer by layer
        order = [np.flatnonzero(inner_groups == g) for g in np.unique(groups[groups >= 0])]
        order.append(np.flatnonzero(inner_groups < 0))
        order = [rows for rows in order if rows.size]
        q = (p - 1) * m
        vertices = np.arange(self.n_el + 1) * p
        layers = [vertices[k : k + 1] for k in range(self.n_el + 1)]
        diagonal = [_kron_block(X, S, v, v) for v in layers]
        below = [_kron_block(X, S, v, u) for u, v in pairwise(layers)]
        self.pivots: list[list[_Pivot]] = []
        for e in range(self.n_el):
            inner = e * p + np.arange(1, p)
            A_ii = _kron_block(X, S, inner, inner)
            A_iv = _kron_block(X, S, inner, vertices[e : e + 2])
            if len(order) == 1:
                L = _cholesky(A_ii)
                W = solve_triangular(L, A_iv, lower=True, check_finite=False)
                pivots, vv = [_Pivot(order[0], L, q + np.arange(2 * m), W)], -(W.T @ W)
            else:
                pivots, vv = _eliminate(A_ii, A_iv, order)
            self.pivots.append(pivots)
            # what the element's interior left on its two vertex layers
            diagonal[e] += vv[:m, :m]
            diagonal[e + 1] += vv[m:, m:]
            below[e] += vv[m:, :m]
        self.schur = _BlockTridiagonalCholesky(diagonal, below)

    def solve(self, b: np.ndarray) -> np.ndarray:
        """(A^-1 b) for b of shape (n,) or (n, r)."""
        p, m, n_el = self.p, self.m, self.n_el
        B = b.reshape(-1, m, b.shape[1] if b.ndim == 2 else 1)
        r = B.shape[2]
        q = (p - 1) * m
        rhs_v = B[::p].reshape(-1, r).copy()
        locals_ = []
        for e in range(n_el):
            y = np.zeros((q + 2 * m, r))
            y[:q] = B[e * p + 1 : (e + 1) * p].reshape(-1, r)
            for piv in self.pivots[e]:
                z = solve_triangular(piv.L, y[piv.rows], lower=True, check_finite=False)
                y[piv.rows] = z
                y[piv.cols] -= piv.W.T @ z
            rhs_v[e * m : (e + 2) * m] += y[q:]
            locals_.append(y)
        x_v = self.schur.solve(rhs_v)
        x = np.empty_like(B)
        x[::p] = x_v.reshape(-1, m, r)
        for e, y in enumerate(locals_):
            y[q:] = x_v[e * m : (e + 2) * m]
            for piv in reversed(self.pivots[e]):
                y[piv.rows] = solve_triangular(
                    piv.L,
                    y[piv.rows] - piv.W @ y[piv.cols],
                    lower=True,
                    trans="T",
                    check_finite=False,
                )
            x[e * p + 1 : (e + 1) * p] = y[:q].reshape(p - 1, m, r)
        return x.reshape(b.shape)


def _free_modes(
    pencil: _KroneckerPencil,
    p: int,
    count: int,
    sigma: float,
    fmax_hz: float | None = None,
    groups: np.ndarray | None = None,
) -> tuple[np.ndarray, np.ndarray, str]:
    """Lowest ``count`` flexible modes of a free problem with three rigid-body modes; with
    ``fmax_hz`` every mode up to it (the count doubles until one lies above; the factor of
    K - sigma M is reused). ``groups``: the cross-section bubbles, as ``_CondensedCholesky``."""
    n_x, m = pencil.M_x.shape[0], pencil.M_s.shape[0]
    n = n_x * m
    M_x, M_s = pencil.M_x, pencil.M_s

    def mass(V: np.ndarray) -> np.ndarray:
        r = V.shape[1]
        along = (M_x @ V.reshape(n_x, m * r)).reshape(n_x, m, r)
        return np.matmul(M_s, along).reshape(n, r)

    k = min(count + 3, n - 2)
    message = "converged"
    solver = _CondensedCholesky(*pencil.shifted(sigma), p, groups)
    while True:
        lam, vec, converged = shift_invert_eigs(solver.solve, mass, n, k, sigma)
        if not converged:
            message = "the eigen-solver did not converge; results are approximate"
        if fmax_hz is None or np.sqrt(max(lam[-1], 0.0)) / (2.0 * np.pi) > fmax_hz:
            break
        if k >= min(_MAX_MODES, n - 2):
            message = f"stopped at {k - 3} modes, all below fmax_hz = {fmax_hz:g}"
            break
        k = min(2 * k, _MAX_MODES, n - 2)
    # a rigid rotation lies exactly in the space only where h(x) is a polynomial of degree
    # <= px inside each element; a profile given as stations (piecewise linear, many kinks
    # per element) leaves it a little stiff, e.g. 4e-5 of the first flexible eigenvalue (a
    # "rigid" mode at 0.6 % of its frequency), harmless to the flexible modes
    if lam[2] > 1e-3 * lam[3]:
        message = "rigid-body modes not separated from the flexible ones; check the model"
    f_hz = np.sqrt(np.clip(lam[3:], 0.0, None)) / (2.0 * np.pi)
    vec = vec[:, 3:]
    if fmax_hz is not None:
        keep = f_hz <= fmax_hz
        f_hz, vec = f_hz[keep], vec[:, keep]
    return f_hz, vec, message


_MAX_MODES = 120
T = TypeVar("T")


def _in_parallel(tasks: list[Callable[[], T]]) -> list[T]:
    """Run independent eigen-solves (the symmetry classes) on threads, one BLAS thread each:
    the factor's and the solver's matrix products release the GIL, so two classes overlap
    on two cores. Inside a worker process of a pool (the cores are already in use) they run
    one after the other."""
    with _single_threaded_blas():
        if len(tasks) < 2 or (os.cpu_count() or 1) < 2 or multiprocessing.parent_process():
            return [task() for task in tasks]
        with ThreadPoolExecutor(max_workers=min(len(tasks), os.cpu_count() or 1)) as pool:
            return list(pool.map(lambda task: task(), tasks))


# ----------------------------------------------------------------------------------------------
# Sampling for classification
def _sample_matrix(axis: _Axis, q: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Values of every global function at q Gauss points per element: (points, weights in the
    physical coordinate, E (points, size))."""
    g, w = gauss_legendre(q)
    B = c0_basis(axis.p, g, 0)[0]
    n_el = axis.ends.size - 1
    E = np.zeros((n_el * q, axis.size))
    pts, wts = [], []
    for e, (a, b) in enumerate(zip(axis.ends[:-1], axis.ends[1:], strict=True)):
        E[e * q : (e + 1) * q, axis.local_to_global(e)] = B
        pts.append(a + 0.5 * (g + 1.0) * (b - a))
        wts.append(0.5 * (b - a) * w)
    return np.concatenate(pts), np.concatenate(wts), E


def _point_matrix(axis: _Axis, points: np.ndarray) -> np.ndarray:
    """Values of every global function at physical ``points`` of the axis: (points, size).
    A point on an element end belongs to the element on its left (both give the same value:
    the basis is C0, and only the vertex function is nonzero there)."""
    n_el = axis.ends.size - 1
    e = np.clip(np.searchsorted(axis.ends, points, side="left") - 1, 0, n_el - 1)
    a, b = axis.ends[e], axis.ends[e + 1]
    B = c0_basis(axis.p, 2.0 * (points - a) / (b - a) - 1.0, 0)[0]  # (points, p + 1)
    local = np.concatenate([[0, axis.p], np.arange(1, axis.p)])
    E = np.zeros((points.size, axis.size))
    np.put_along_axis(E, e[:, None] * axis.p + local[None, :], B, axis=1)
    return E


def _top_face_w(
    x_axis: _Axis,
    y_axis: _Axis,
    z_axis: _Axis,
    coef: np.ndarray,
    parity: np.ndarray,
    width: float,
    points: np.ndarray,
) -> np.ndarray:
    """Vertical displacement w of every mode at ``points`` (n, 2) = (x, y) on the top face.

    ``coef`` (modes, Nx, Ny, Nz, 3) holds one symmetry class's coefficients on the half
    width 0 <= y <= width / 2 (the mid-width plane at its last y vertex). At s = 1 the map
    z = t0 - h (1 - s) puts every point on the flat top face, so

        w(x, y) = sum_ijk N_i(x) N_j(y') N_k(s = 1) c_ijk,z  * (1, or the class's parity of w
                  where y > width / 2 and y' = width - y is its mirror image).
    """
    y = points[:, 1]
    far = y > 0.5 * width
    Ex = _point_matrix(x_axis, points[:, 0])
    Ey = _point_matrix(y_axis, np.where(far, width - y, y))
    Ez = _point_matrix(z_axis, np.array([1.0]))[0]
    w = np.einsum("pi,pj,k,mijk->mp", Ex, Ey, Ez, coef[..., 2], optimize=True)
    return w * np.where(far, parity[2], 1.0)


_SYMMETRY = (
    ("symmetric", (1,), np.array([1.0, -1.0, 1.0])),
    ("antisymmetric", (0, 2), np.array([-1.0, 1.0, -1.0])),
)


CORNER_RATIO = 0.15  # geometric grading toward a re-entrant corner (Szabo & Babuska 1991, ch. 14)


@dataclass(frozen=True)
class _LengthEnds:
    """Element ends along x; whether the profile has sharp corners, and re-entrant ones."""

    ends: np.ndarray
    sharp: bool
    reentrant: bool


def _length_ends(
    length: float, thickness: Field, nx: int, extra: np.ndarray | None, layers: int
) -> _LengthEnds:
    """Element ends along x: ``nx`` equal elements, the profile's corners, ``extra``, and
    ``layers`` geometric layers on each side of every re-entrant corner.

    A sharp corner is a change of slope over 0.05 (about 3 degrees). Where the thickness's
    slope rises (the cut's bottom turns toward the flat: a re-entrant corner of the solid)
    the stress is singular (Williams 1952, J. Appl. Mech. 19, 526-528), and ends at
    c +- D r^j, j = 1 .. ``layers``, r = ``CORNER_RATIO``, D the equal element size or the
    distance to the next corner, whichever is less, let the degree resolve it instead of
    slowing the whole bar to an algebraic rate (geometric mesh, Szabo & Babuska 1991,
    *Finite Element Analysis*, ch. 14). Convex corners are element ends only: their solution
    is smoother, and on the straight-taper bar of benchmarks/solid.py a layer on each side of
    them moved no wanted mode by more than 0.02 cent, for four more elements; a third layer
    at the re-entrant corners moved none by 0.002. An equal or ``extra`` end closer than D / 2
    to a graded corner is dropped (it would cut a sliver beside the graded layers); the
    corners and their layers are never dropped."""
    points = np.asarray(thickness.breakpoints, dtype=float)
    corners = strongest_corners((thickness,), points, length, 16)
    eps = 1e-6 * length
    slope_left = (thickness(corners) - thickness(corners - eps)) / eps
    slope_right = (thickness(corners + eps) - thickness(corners)) / eps
    inside = (corners > eps) & (corners < length - eps)
    jump = slope_right - slope_left
    sharp = inside & (np.abs(jump) > 0.05)
    graded = corners[sharp & (jump > 0)] if layers else np.zeros(0)
    size = length / nx
    others = np.concatenate([[0.0], corners[inside], [length]])
    gap = np.array([np.min(np.abs(others[np.abs(others - c) > eps] - c)) for c in graded])
    reach = np.minimum(size, gap)  # D per graded corner
    steps = CORNER_RATIO ** np.arange(1, layers + 1)
    offsets = (reach[:, None] * steps[None, :]).ravel()
    centres = np.repeat(graded, layers)
    fixed = np.concatenate([[0.0, length], corners[inside], centres - offsets, centres + offsets])
    fixed = np.unique(fixed[(fixed >= 0.0) & (fixed <= length)])
    fixed = fixed[np.concatenate([[True], np.diff(fixed) > eps])]
    added = np.asarray(extra if extra is not None else [], dtype=float)
    plain = np.concatenate([np.linspace(0.0, length, nx + 1), added])
    plain = plain[(plain > 0.0) & (plain < length)]
    if graded.size:
        distance = np.abs(plain[:, None] - graded[None, :])
        plain = plain[np.all(distance >= 0.5 * reach[None, :], axis=1)]
    near = np.min(np.abs(plain[:, None] - fixed[None, :]), axis=1) if plain.size else plain
    plain = np.unique(plain[near > 1e-3 * size])
    plain = plain[np.concatenate([[True], np.diff(plain) > 1e-3 * size])] if plain.size else plain
    ends = np.unique(np.concatenate([fixed, plain]))
    return _LengthEnds(ends, bool(np.any(sharp)), bool(graded.size))


def _depth_ends(nz: int, ratio: float = 0.15) -> np.ndarray:
    """Element ends through the thickness (s = 0 bottom face, 1 top): geometric toward the
    bottom, where the corners of a cut lie (their stress singularity needs small elements
    next to it for the p-version to converge fast, Szabo & Babuska 1991, ch. 14)."""
    return np.concatenate([[0.0], ratio ** np.arange(nz - 1, 0, -1), [1.0]])


def _checked_probes(probes: np.ndarray, length: float, width: float) -> np.ndarray:
    points = np.asarray(probes, dtype=float)
    if points.ndim != 2 or points.shape[1] != 2 or not np.all(np.isfinite(points)):
        raise ValueError(f"probes of shape {points.shape}: give finite (x, y) pairs, shape (n, 2)")
    slack = 1e-9 * max(length, width)
    x, y = points[:, 0], points[:, 1]
    if np.any((x < -slack) | (x > length + slack) | (y < -slack) | (y > width + slack)):
        raise ValueError(
            f"probes: every point must lie on the top face, 0 <= x <= {length!r} m and "
            f"0 <= y <= {width!r} m"
        )
    return np.column_stack([np.clip(x, 0.0, length), np.clip(y, 0.0, width)])


def _check(length: float, width: float, blank_thickness: float, h: np.ndarray) -> None:
    for name, value in (("length", length), ("width", width), ("blank_thickness", blank_thickness)):
        if not (np.isfinite(value) and value > 0):
            raise ValueError(f"{name} = {value!r} m: must be a positive number")
    if not np.all(np.isfinite(h)) or h.min() <= 0:
        raise ValueError(f"thickness = {np.nanmin(h)!r} m somewhere along the bar: must be > 0")
    if h.max() > blank_thickness * (1.0 + 1e-9):
        raise ValueError(f"thickness = {h.max()!r} m exceeds blank_thickness = {blank_thickness!r}")


def psolid_modes(
    length: float,
    width: float,
    blank_thickness: float,
    thickness: Field,
    material: Orthotropic,
    count: int = 12,
    mesh: PMesh | None = None,
    element_ends: np.ndarray | None = None,
    fmax_hz: float | None = None,
    probes: np.ndarray | None = None,
) -> ModeSet:
    """Lowest ``count`` free-free flexible modes of an undercut bar, p-version hexahedra.

    ``thickness`` is the local thickness h(x) (m) below the flat top face at z =
    ``blank_thickness``; ``count`` modes are computed in each symmetry class and the lowest
    ``count`` of both returned, classified by family; with ``fmax_hz`` every mode up to that
    frequency (``count`` is then the first batch per class). With ``mesh.grade_corners`` a profile
    with sharp corners gets two graded elements through the thickness, and its re-entrant
    corners ``mesh.corner_layers`` geometric layers of elements on each side and
    ``mesh.corner_raise`` more degrees in y and z (``_length_ends``). ``element_ends`` (m) adds
    element ends
    where the profile is less smooth than its corners show (e.g. where a cut's curvature
    jumps): p-convergence is exponential only where the solution is smooth inside elements.
    ``probes`` (n, 2): points (x, y) on the top face (m, y across the width from 0 to
    ``width``, as in ``coords``) where each mode's vertical displacement is evaluated exactly
    from the basis, mass-normalised as ``shapes`` (``ModeSet.probe_w``, (modes, n)).
    """
    if not isinstance(material, Orthotropic):
        raise ValueError(f"material = {type(material).__name__}: must be an Orthotropic")
    if not isinstance(count, int | np.integer) or count < 1:
        raise ValueError(f"count = {count!r}: must be a whole number >= 1")
    if fmax_hz is not None and not (np.isfinite(fmax_hz) and fmax_hz > 0):
        raise ValueError(f"fmax_hz = {fmax_hz!r}: must be a positive frequency or None")
    mesh = mesh or PMesh()
    _check(length, width, blank_thickness, np.asarray(thickness(np.linspace(0, length, 201))))
    if probes is not None:
        probes = _checked_probes(probes, length, width)
    layers = mesh.corner_layers if mesh.grade_corners else 0
    along = _length_ends(length, thickness, mesh.nx, element_ends, layers)
    ends = along.ends
    if along.sharp and mesh.grade_corners:
        mesh = replace(mesh, nz=max(mesh.nz, 2))
    if along.reentrant and mesh.corner_raise:
        raise_by = mesh.corner_raise
        mesh = replace(mesh, py=mesh.py + raise_by, pz=mesh.pz + raise_by, corner_raise=0)
    x_axis = _Axis(ends, mesh.px)
    y_axis = _Axis(np.linspace(0.0, 0.5 * width, mesh.ny + 1), mesh.py)
    z_axis = _Axis(_depth_ends(mesh.nz, mesh.bottom_layer), mesh.pz)
    xs = _x_samples(x_axis, thickness, mesh.px + 3)
    _check(length, width, blank_thickness, np.concatenate(xs.h))
    pencil = _assemble(x_axis, y_axis, z_axis, xs, stiffness_matrix(material), material.rho)
    h_min = float(min(h.min() for h in xs.h))
    sigma = negative_shift(length, h_min, bar_axes(material).E_x, material.rho)

    Ny, Nz = y_axis.size, z_axis.size
    layer = np.arange(Ny * Nz * 3).reshape(Ny, Nz, 3)
    bubbles = _cross_section_bubbles(y_axis, z_axis)
    # samples for classification: Gauss points, quadrature weights as lumped masses
    qx, qy, qz = mesh.px + 1, mesh.py + 1, mesh.pz + 1
    sx, wx, Ex = _sample_matrix(x_axis, qx)
    sy, wy, Ey = _sample_matrix(y_axis, qy)
    ss, ws, Ez = _sample_matrix(z_axis, qz)
    h_s = np.asarray(thickness(sx), dtype=float)
    coords = np.empty((sx.size, sy.size, ss.size, 3))
    coords[..., 0] = sx[:, None, None]
    coords[..., 1] = sy[None, :, None]
    coords[..., 2] = (blank_thickness - h_s[:, None] * (1.0 - ss[None, :]))[:, None, :]
    masses = material.rho * (wx * h_s)[:, None, None] * wy[None, :, None] * ws[None, None, :]

    f_parts, shape_parts, probe_parts, messages, n_dof = [], [], [], [], 0
    keeps = []
    for _, fixed, _ in _SYMMETRY:
        held = np.zeros((Ny, Nz, 3), dtype=bool)
        held[-1, :, list(fixed)] = True  # the mid-width plane is the last y vertex
        keeps.append(layer[~held])
    solved = _in_parallel(
        [
            partial(
                _free_modes, pencil.restricted(keep), mesh.px, count, sigma, fmax_hz, bubbles[keep]
            )
            for keep in keeps
        ]
    )
    for (_, _, parity), keep, (f_hz, vec, message) in zip(_SYMMETRY, keeps, solved, strict=True):
        n_dof += x_axis.size * keep.size
        coef = np.zeros((f_hz.size, x_axis.size, Ny * Nz * 3))
        coef[:, :, keep] = vec.T.reshape(f_hz.size, x_axis.size, keep.size)
        coef = coef.reshape(f_hz.size, x_axis.size, Ny, Nz, 3) / np.sqrt(2.0)
        half = np.einsum("ai,bj,ck,mijkd->mabcd", Ex, Ey, Ez, coef, optimize=True)
        mirrored = half[:, :, ::-1] * parity
        shape_parts.append(np.concatenate([half, mirrored], axis=2))
        if probes is not None:
            probe_parts.append(_top_face_w(x_axis, y_axis, z_axis, coef, parity, width, probes))
        f_parts.append(f_hz)
        messages.append(message)
    f_all = np.concatenate(f_parts)
    order = np.argsort(f_all, kind="stable")
    order = order if fmax_hz is not None else order[:count]
    shapes = np.concatenate(shape_parts)[order]
    probe_w = np.concatenate(probe_parts)[order] if probes is not None else None
    mirror = coords[:, ::-1].copy()
    mirror[..., 1] = width - mirror[..., 1]
    coords_full = np.concatenate([coords, mirror], axis=1)
    masses_full = np.concatenate([masses, masses[:, ::-1]], axis=1)
    modes = classify_modes(f_all[order], coords_full, shapes, masses_full)
    problems = [m for m in messages if m != "converged"]
    return ModeSet(
        f_hz=f_all[order],
        modes=modes,
        mesh=mesh,
        n_dof=n_dof,
        coords=coords_full,
        shapes=shapes,
        status=1 if problems else 0,
        message="; ".join(problems) or "converged",
        probe_w=probe_w,
    )


@dataclass(frozen=True)
class PSolidConvergence:
    """A result, the same model one degree lower in every direction (a nested space) and the
    error estimate per mode of ``result`` in cents (NaN where the lower run has no mode of that
    family and order).

    ``nested_cents`` = cents(lower, result), the lower space's error and an upper bound of the
    result's own error for converging modes; ``error_cents`` the sharper extrapolated estimate
    (``extrapolated_error``) where a third, two degrees lower run is given, else the nested
    change."""

    result: ModeSet
    lower: ModeSet
    error_cents: np.ndarray
    nested_cents: np.ndarray | None = None

    @property
    def max_error_cents(self) -> float:
        return float(np.nanmax(np.abs(self.error_cents)))


# margin over the extrapolated error; measured on the benchmark bars (benchmarks/solid.py)
EXTRAPOLATION_SAFETY = 1.25


def extrapolated_error(
    change_low: np.ndarray, change: np.ndarray, safety: float = EXTRAPOLATION_SAFETY
) -> np.ndarray:
    """Error of degree p from the changes p-2 -> p-1 (``change_low``) and p-1 -> p (``change``).

    Exponential convergence, e_p = C q^p (Szabo & Babuska 1991, *Finite Element Analysis*,
    ch. 13), makes each change (1 - q) / q times the error left after it (Aitken's delta-squared
    extrapolation), so e_p = change q / (1 - q). One rate for the whole bar, the slowest of its
    modes (a single mode's ratio is noisy where both changes are small), times ``safety``; never
    more than the nested change, which bounds the error by itself."""
    d1, d2 = np.abs(np.asarray(change_low, float)), np.abs(np.asarray(change, float))
    usable = np.isfinite(d1) & np.isfinite(d2) & (d1 > 1e-3)
    if not np.any(usable):
        return d2
    q = float(np.max(np.minimum(d2[usable] / d1[usable], 1.0)))
    factor = 1.0 if q >= 0.5 else min(1.0, safety * q / (1.0 - q))
    return factor * d2


def psolid_convergence(
    length: float,
    width: float,
    blank_thickness: float,
    thickness: Field,
    material: Orthotropic,
    count: int = 12,
    mesh: PMesh | None = None,
    element_ends: np.ndarray | None = None,
    fmax_hz: float | None = None,
    extrapolate: bool = True,
    probes: np.ndarray | None = None,
) -> PSolidConvergence:
    """``psolid_modes`` on ``mesh`` and on ``mesh.lowered()``; the change per mode in cents.
    With ``fmax_hz`` every mode of ``mesh`` up to it (the lower spaces' up to 5 % above, their
    modes lying higher). With ``extrapolate`` (every degree >= 4, a profile without sharp
    corners) a third run two degrees lower gives the sharper ``extrapolated_error``.
    ``probes``: top-face points for ``result.probe_w`` (``psolid_modes``)."""
    mesh = mesh or PMesh()
    bar = (length, width, blank_thickness, thickness, material)
    result = psolid_modes(*bar, count, mesh, element_ends, fmax_hz, probes)
    top = None if fmax_hz is None else 1.05 * fmax_hz
    lower = psolid_modes(*bar, count + 4, mesh.lowered(), element_ends, top)
    f_low = match_modes(result.modes, lower.modes)
    nested = cents(f_low, result.f_hz)
    error = nested
    # at sharp corners of the cut the rate is algebraic, not exponential, and the
    # extrapolation measured half the true error (tests/test_psolid.py): keep the nested bound
    sharp = _length_ends(length, thickness, mesh.nx, element_ends, 0).sharp
    if extrapolate and not sharp and min(mesh.px, mesh.py, mesh.pz) >= 4:
        top2 = None if fmax_hz is None else 1.1 * fmax_hz
        lowest = psolid_modes(*bar, count + 6, mesh.lowered().lowered(), element_ends, top2)
        f_lowest = match_modes(result.modes, lowest.modes)
        error = extrapolated_error(cents(f_lowest, f_low), nested)
    return PSolidConvergence(result, lower, error, nested)
