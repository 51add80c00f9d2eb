"""3-D solid finite-element model of an undercut bar, free-free.

Linear elastodynamics of an orthotropic solid (bar axes: x length, y width, z thickness):

    find u, omega:  int_V eps(v)^T C eps(u) dV = omega^2 int_V rho v . u dV   for all v,

with the 6x6 stiffness C of ``forward.orthotropic.stiffness_matrix`` and engineering shear
strains in Voigt order (xx, yy, zz, yz, xz, xy). No supports: six rigid-body modes at omega = 0
are dropped. Discretisation (Zienkiewicz, Taylor & Zhu, *The Finite Element Method*, 7th ed.,
vol. 1, ch. 6 and 8; Bathe, *Finite Element Procedures*, 1996, sec. 5.3):

- geometry: top face z = t0 (blank thickness), bottom face z = t0 - h(x). By the mirror
  symmetry about the mid-width plane y = b/2 only half the width is meshed and solved twice:
  symmetric modes (vertical bending, axial; v = 0 on the plane) and antisymmetric ones
  (lateral, torsion; u = w = 0 on the plane), three rigid modes each; shapes are mirrored back.
  The half is a structured mapped mesh of nx x ny x nz 27-node triquadratic Lagrange
  hexahedra (Lagrange rather than 20-node serendipity: it keeps its order on the non-affine
  elements of a taper, Arnold, Boffi & Falk (2002), Math. Comp. 71, 909-922). Element ends
  along x include the profile's breakpoints (a piecewise-linear profile is meshed exactly),
  with element density ~ h^-1/2 (local bending wavenumber of a beam, k^4 ~ rho A / EI ~ h^-2)
  and power-law crowding toward re-entrant kinks, where the stress is singular; each node
  column is mapped z = t0 - h(x) (1 - s), s in [0, 1], crowded toward the bottom face; y is
  crowded toward the side face (edge layer of torsion);
- isoparametric element matrices with 3 x 3 x 3 Gauss quadrature,
  K_e = sum_g B^T C B det J w_g,  M_e = sum_g rho N^T N det J w_g, vectorised over all elements
  (Python loops run over the 27 Gauss points only). Because x and z do not depend on the y
  index, K_e(d) = d P + Q + R / d for an element of width d: quadrature is done for one row of
  elements and reused across the width. Sparse global K and M (scipy.sparse);
- eigenproblem K phi = lambda M phi by ARPACK shift-invert (``scipy.sparse.linalg.eigsh``) with a
  small negative shift, so K - sigma M is positive definite despite the rigid modes, and a
  sparse LU with minimum-degree ordering; f = sqrt(lambda) / (2 pi).

Modes are named by ``forward.classify`` from section kinematics. Convergence: triquadratic
elements give eigenvalue errors O(h^4) for smooth modes (Strang & Fix, *An Analysis of the
Finite Element Method*, 1973, ch. 6); a re-entrant corner of interior angle omega degrades this
to O(h^(2 lambda)), sin(lambda omega) = -lambda sin(omega) (Williams (1952), J. Appl. Mech. 19,
526-528), lambda ~ 0.81 for the 20-degree taper of the test bar, hence the grading.
``solid_convergence`` reruns on a refined mesh and reports the change in cents.
"""

from __future__ import annotations

from collections.abc import Callable
from contextlib import AbstractContextManager, nullcontext
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import LinearOperator, eigsh, splu
from tonewright.acoustics.pitch import cents
from tonewright.forward.classify import ClassifiedMode, ModeSet, classify_modes
from tonewright.forward.geometry import Field, strongest_corners
from tonewright.forward.orthotropic import Orthotropic, bar_axes, stiffness_matrix

__all__ = [
    "EigenSolver",
    "SolidConvergence",
    "SolidMesh",
    "SolidResult",
    "assemble_solid",
    "depth_stations",
    "gauss_legendre_3",
    "graded_stations",
    "hex27_matrices",
    "lagrange2",
    "match_modes",
    "negative_shift",
    "nodal_masses",
    "node_grid",
    "power_spacing",
    "reentrant_kinks",
    "solid_convergence",
    "solid_modes",
    "solve_free_modes",
]

EigenSolver = Callable[[sp.spmatrix, sp.spmatrix, int, float], tuple[np.ndarray, np.ndarray]]
"""``solver(K, M, k, sigma) -> (lam, vectors)``: the k eigenpairs nearest the shift sigma."""


# ----------------------------------------------------------------------------------------------
# Reference element
def lagrange2(xi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Quadratic Lagrange basis on nodes (-1, 0, 1) and its derivative, shape (len(xi), 3)."""
    xi = np.asarray(xi, dtype=float)[:, None]
    N = np.hstack([0.5 * xi * (xi - 1.0), 1.0 - xi**2, 0.5 * xi * (xi + 1.0)])
    dN = np.hstack([xi - 0.5, -2.0 * xi, xi + 0.5])
    return N, dN


def gauss_legendre_3() -> tuple[np.ndarray, np.ndarray]:
    """3-point Gauss-Legendre rule on [-1, 1] (exact for degree 5)."""
    r = np.sqrt(0.6)
    return np.array([-r, 0.0, r]), np.array([5.0, 8.0, 5.0]) / 9.0


def _hex27_reference() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Shape values (g, 27), reference gradients (g, 27, 3) and weights (g,) at 27 Gauss points.

    Local node (a, b, c) in {0, 1, 2}^3 (x, y, z) has index 9 a + 3 b + c.
    """
    p, w = gauss_legendre_3()
    N1, dN1 = lagrange2(p)  # (3 points, 3 nodes)
    # indices: g = (i, j, k) Gauss point, node = (a, b, c)
    N = np.einsum("ia,jb,kc->ijkabc", N1, N1, N1).reshape(27, 27)
    dN = np.stack(
        [
            np.einsum("ia,jb,kc->ijkabc", dN1, N1, N1),
            np.einsum("ia,jb,kc->ijkabc", N1, dN1, N1),
            np.einsum("ia,jb,kc->ijkabc", N1, N1, dN1),
        ],
        axis=-1,
    ).reshape(27, 27, 3)
    W = np.einsum("i,j,k->ijk", w, w, w).reshape(27)
    return N, dN, W


def hex27_matrices(X: np.ndarray, C: np.ndarray, rho: float) -> tuple[np.ndarray, np.ndarray]:
    """Stiffness and consistent mass of 27-node hexahedra, all elements at once.

    ``X``: (ne, 27, 3) node coordinates in local order 9a + 3b + c; ``C``: (6, 6) Voigt
    stiffness (xx, yy, zz, yz, xz, xy). Returns K_e, M_e of shape (ne, 81, 81) with local DOF
    3 * node + component.
    """
    N, dN, W = _hex27_reference()
    ne = X.shape[0]
    K = np.zeros((ne, 81, 81))
    Ms = np.zeros((ne, 27, 27))  # scalar mass, expanded to 3 components below
    B = np.zeros((ne, 6, 27, 3))
    for g in range(W.size):
        J = np.einsum("ai,eaj->eij", dN[g], X)  # J_ij = dx_j / dxi_i
        detJ = np.linalg.det(J)
        if np.any(detJ <= 0):
            raise ValueError("inverted element (non-positive Jacobian)")
        G = np.linalg.solve(J, np.broadcast_to(dN[g].T, (ne, 3, 27)))  # (ne, 3, 27) dN/dx
        gx, gy, gz = G[:, 0], G[:, 1], G[:, 2]
        B[:, 0, :, 0] = gx
        B[:, 1, :, 1] = gy
        B[:, 2, :, 2] = gz
        B[:, 3, :, 1], B[:, 3, :, 2] = gz, gy
        B[:, 4, :, 0], B[:, 4, :, 2] = gz, gx
        B[:, 5, :, 0], B[:, 5, :, 1] = gy, gx
        Bf = B.reshape(ne, 6, 81)
        dV = detJ * W[g]
        K += np.matmul(Bf.transpose(0, 2, 1), np.matmul(C, Bf) * dV[:, None, None])
        Ms += np.outer(N[g], N[g])[None] * (rho * dV)[:, None, None]
    M = np.zeros((ne, 27, 3, 27, 3))
    for i in range(3):
        M[:, :, i, :, i] = Ms
    return K, M.reshape(ne, 81, 81)


# ----------------------------------------------------------------------------------------------
# Mesh
@dataclass(frozen=True)
class SolidMesh:
    """Element counts and grading of the mapped mesh of 27-node hexahedra.

    ``nx`` along the length (at least one per profile segment), ``ny`` across *half* the width
    (the model uses the mirror symmetry about the mid-width plane), ``nz`` through the
    thickness. Grading exponents (1 = uniform): ``grade_x`` crowds elements toward re-entrant
    kinks of the profile, ``grade_y`` toward the side face, ``grade_z`` toward the bottom face.
    """

    nx: int = 96
    ny: int = 4
    nz: int = 8
    grade_x: float = 2.0
    grade_y: float = 2.0
    grade_z: float = 1.5

    def __post_init__(self) -> None:
        for name in ("nx", "ny", "nz"):
            value = getattr(self, name)
            if not isinstance(value, int | np.integer) or isinstance(value, bool) or value < 1:
                raise ValueError(f"mesh {name} = {value!r}: must be a whole number >= 1")
        for name in ("grade_x", "grade_y", "grade_z"):
            _check_grading(name, getattr(self, name))

    def refined(self, factor: float = 1.5) -> SolidMesh:
        """A finer mesh: every count times ``factor``, rounded up, at least one more."""
        return SolidMesh(
            _more(self.nx, factor),
            _more(self.ny, factor),
            _more(self.nz, factor),
            self.grade_x,
            self.grade_y,
            self.grade_z,
        )


def _more(n: int, factor: float) -> int:
    return max(n + 1, int(np.ceil(n * factor - 1e-9)))


def _check_grading(name: str, value: float) -> None:
    if not (np.isfinite(value) and 1.0 <= value <= 4.0):
        raise ValueError(f"mesh {name} = {value!r}: allowed 1 <= exponent <= 4")


def power_spacing(n: int, q: float, crowd_start: bool, crowd_end: bool) -> np.ndarray:
    """n + 1 points on [0, 1], element sizes growing like t^q away from the crowded end(s).

    One end: t^q (or 1 - (1 - t)^q); both ends: the same on each half. For a corner where the
    solution behaves like r^lambda, q >= p / lambda restores the convergence rate of
    degree-p elements (Babuska, Kellogg & Pitkaranta (1979), Numer. Math. 33, 447-471).
    """
    t = np.arange(n + 1) / n
    if crowd_start and crowd_end:
        return np.where(t < 0.5, 0.5 * (2.0 * t) ** q, 1.0 - 0.5 * (2.0 * (1.0 - t)) ** q)
    if crowd_start:
        return t**q
    if crowd_end:
        return 1.0 - (1.0 - t) ** q
    return t


def reentrant_kinks(length: float, thickness: Field) -> np.ndarray:
    """Breakpoints where the bottom face z = t0 - h(x) makes a re-entrant corner.

    The material lies above the bottom face, so a corner is re-entrant (interior angle over
    180 degrees, singular stress) where the slope h' jumps up: the end of a taper into a thin
    flat, or the start of a rise out of it. Where an arch starts (h' jumps down) the corner is
    convex and harmless.
    """
    bp = np.asarray(thickness.breakpoints, dtype=float)
    inner = bp[(bp > 1e-9 * length) & (bp < length * (1.0 - 1e-9))]
    if inner.size == 0:
        return inner
    d = 1e-7 * length
    h = lambda x: np.asarray(thickness(x), dtype=float)  # noqa: E731
    jump = (h(inner + d) - h(inner)) / d - (h(inner) - h(inner - d)) / d
    return inner[jump > 1e-4]


def graded_stations(length: float, thickness: Field, n: int, grade: float = 1.0) -> np.ndarray:
    """Element ends along x for ``n`` elements; the profile's breakpoints inside (0, L) are
    ends, or, from dense stations (a design written at 1 mm), its real corners only, at most
    n / 2 (``forward.geometry.strongest_corners``): the quadratic elements follow a sampled
    smooth curve through their nodes.

    Segments between those ends get elements in proportion to int h^-1/2 dx (the local
    bending wavenumber of a beam goes as h^-1/2), at least one each; inside a segment the ends
    crowd toward re-entrant kinks by ``power_spacing`` with exponent ``grade``. Returns sorted
    stations from 0 to L.
    """
    bp = np.asarray(thickness.breakpoints, dtype=float)
    inner = bp[(bp > 1e-9 * length) & (bp < length * (1.0 - 1e-9))]
    inner = strongest_corners((thickness,), inner, length, max(1, n // 2))
    ends = np.unique(np.concatenate([[0.0], inner, [length]]))
    a, b = ends[:-1], ends[1:]
    t = (np.arange(16) + 0.5) / 16.0  # midpoint rule inside each segment
    xs = a[:, None] + (b - a)[:, None] * t[None, :]
    h = np.asarray(thickness(xs.ravel()), dtype=float).reshape(xs.shape)
    weight = (b - a) * np.mean(np.clip(h, 1e-12, None) ** -0.5, axis=1)
    share = n * weight / weight.sum()
    counts = np.maximum(1, np.floor(share).astype(int))
    while counts.sum() < n:  # largest remainder
        counts[np.argmax(share - counts)] += 1
    kinks = reentrant_kinks(length, thickness)
    near = lambda x: bool(np.any(np.abs(kinks - x) <= 1e-9 * length))  # noqa: E731
    pieces = [
        a[i] + (b[i] - a[i]) * power_spacing(counts[i], grade, near(a[i]), near(b[i]))[:-1]
        for i in range(a.size)
    ]
    return np.concatenate([*pieces, [length]])


def depth_stations(n: int, grade: float) -> np.ndarray:
    """Element ends in the normalised depth s in [0, 1] (0 bottom face, 1 top), crowded at 0."""
    return power_spacing(n, grade, True, False)


def _with_midpoints(ends: np.ndarray) -> np.ndarray:
    nodes = np.empty(2 * ends.size - 1)
    nodes[0::2], nodes[1::2] = ends, 0.5 * (ends[:-1] + ends[1:])
    return nodes


def _check_bar(length: float, width: float, blank_thickness: float) -> None:
    for name, value in (
        ("length", length),
        ("width", width),
        ("blank_thickness", blank_thickness),
    ):
        if not (isinstance(value, int | float | np.floating) and np.isfinite(value) and value > 0):
            raise ValueError(f"{name} = {value!r} m: must be a positive number")


def _check_thickness(h: np.ndarray, blank_thickness: float) -> None:
    if not np.all(np.isfinite(h)) or h.min() <= 0:
        raise ValueError(
            f"thickness = {np.nanmin(h)!r} m somewhere along the bar: must stay positive"
        )
    if h.max() > blank_thickness * (1.0 + 1e-9):
        raise ValueError(
            f"thickness = {h.max()!r} m exceeds blank_thickness = {blank_thickness!r} m"
        )


def node_grid(
    length: float, width: float, blank_thickness: float, thickness: Field, mesh: SolidMesh
) -> np.ndarray:
    """Nodes (2 nx + 1, 2 ny + 1, 2 nz + 1, 3) of the half bar 0 <= y <= width / 2.

    y = 0 is a side face, y = width / 2 the mid-width plane; z = t0 - h(x) (1 - s).
    """
    x = _with_midpoints(graded_stations(length, thickness, mesh.nx, mesh.grade_x))
    y = _with_midpoints(0.5 * width * power_spacing(mesh.ny, mesh.grade_y, True, False))
    s = _with_midpoints(depth_stations(mesh.nz, mesh.grade_z))
    h = np.asarray(thickness(x), dtype=float)
    _check_thickness(h, blank_thickness)
    z = blank_thickness - h[:, None] * (1.0 - s[None, :])  # (Nx, Nz)
    X = np.empty((x.size, y.size, s.size, 3))
    X[..., 0] = x[:, None, None]
    X[..., 1] = y[None, :, None]
    X[..., 2] = z[:, None, :]
    return X


def _element_nodes(shape: tuple[int, int, int]) -> np.ndarray:
    """Global node numbers (ex, ey, ez, 27); node (i, j, k) is number (i Ny + j) Nz + k."""
    Nx, Ny, Nz = shape
    ex = 2 * np.arange((Nx - 1) // 2)[:, None, None, None]
    ey = 2 * np.arange((Ny - 1) // 2)[None, :, None, None]
    ez = 2 * np.arange((Nz - 1) // 2)[None, None, :, None]
    local = np.arange(27)
    a, b, c = local // 9, (local // 3) % 3, local % 3
    return ((ex + a) * Ny + (ey + b)) * Nz + (ez + c)


def assemble_solid(X: np.ndarray, C: np.ndarray, rho: float) -> tuple[sp.csr_matrix, sp.csr_matrix]:
    """Global sparse K, M (DOF 3 * node + component) on a grid from ``node_grid``.

    The grid must be separable in y (y depends on the j index only; x and z not on j), as the
    mapped bar mesh is. Then an element of width d has J = diag-block(dx,z/dxi,zeta; d/2) and

        K_e(d) = d P + Q + R / d,    M_e(d) = d M_1,

    (the terms with zero, one and two y-derivatives), so the element matrices are computed for
    one row of elements across the width at three widths, P, Q, R solved for, and every other
    row follows without new quadrature.
    """
    Nx, Ny, Nz = X.shape[:3]
    conn = _element_nodes((Nx, Ny, Nz))  # (ex, ey, ez, 27)
    ny = conn.shape[1]
    y = X[0, :, 0, 1]
    d = y[2::2] - y[:-2:2]  # element widths (ny,)
    d_ref = float(np.mean(d))
    base = X.reshape(-1, 3)[conn[:, 0].reshape(-1, 27)].copy()  # (nx*nz, 27, 3)
    y_local = base[..., 1] - base[:, :1, 1]
    widths = d_ref * np.array([0.5, 1.0, 2.0])
    Ks, Ms = [], []
    for w in widths:
        Xw = base.copy()
        Xw[..., 1] = y_local * (w / (y_local.max(axis=1, keepdims=True)))
        Kw, Mw = hex27_matrices(Xw, C, rho)
        Ks.append(Kw)
        Ms.append(Mw / w)
    basis = np.stack([widths, np.ones(3), 1.0 / widths], axis=1)  # K(w) = [w, 1, 1/w] @ PQR
    P, Q, R = np.tensordot(np.linalg.inv(basis), np.stack(Ks), axes=1)
    M1 = Ms[1]
    n = 3 * Nx * Ny * Nz
    K = sp.csr_matrix((n, n))
    M = sp.csr_matrix((n, n))
    for j in range(ny):  # one layer of nx * nz elements at a time, to bound memory
        dofs = (3 * conn[:, j].reshape(-1, 27)[:, :, None] + np.arange(3)).reshape(-1, 81)
        rows = np.broadcast_to(dofs[:, :, None], (dofs.shape[0], 81, 81)).ravel()
        cols = np.broadcast_to(dofs[:, None, :], (dofs.shape[0], 81, 81)).ravel()
        Ke = d[j] * P + Q + R / d[j]
        K = K + sp.csr_matrix((Ke.ravel(), (rows, cols)), shape=(n, n))
        M = M + sp.csr_matrix(((d[j] * M1).ravel(), (rows, cols)), shape=(n, n))
    return K, M


# ----------------------------------------------------------------------------------------------
# Eigen solution
def _shift_invert_splu(
    K: sp.spmatrix, M: sp.spmatrix, k: int, sigma: float
) -> tuple[np.ndarray, np.ndarray]:
    # symmetric positive definite: minimum degree on A + A^T, diagonal pivots (COLAMD, the
    # default, fills in several times more on these matrices)
    lu = splu(
        sp.csc_matrix(K - sigma * M),
        permc_spec="MMD_AT_PLUS_A",
        diag_pivot_thresh=0.0,
        options={"SymmetricMode": True},
    )
    OPinv = LinearOperator(K.shape, matvec=lu.solve, dtype=float)
    with _single_threaded_blas():
        return eigsh(K, k=k, M=M, sigma=sigma, which="LM", OPinv=OPinv)


def _single_threaded_blas() -> AbstractContextManager:
    """ARPACK's many thin matrix-vector products run several times slower on two BLAS threads
    when the cores are shared (threads wait on each other). threadpoolctl, where installed,
    keeps them on one thread; results do not depend on it."""
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:  # optional: only speed is at stake
        return nullcontext()
    return threadpool_limits(limits=1, user_api="blas")


def solve_free_modes(
    K: sp.spmatrix,
    M: sp.spmatrix,
    *,
    rigid: int,
    count: int,
    sigma: float,
    fmax_hz: float | None = None,
    solver: EigenSolver | None = None,
    max_modes: int = 200,
) -> tuple[np.ndarray, np.ndarray, str]:
    """Lowest flexible modes of a free structure: (f_hz, vectors (n, m), message).

    Solves for ``count + rigid`` eigenpairs nearest the negative shift ``sigma`` and drops the
    ``rigid`` lowest. With ``fmax_hz`` all modes up to it are returned (``count`` is then the
    first batch; the batch doubles until a mode above fmax_hz is found, up to ``max_modes``).
    """
    solve = solver or _shift_invert_splu
    n = K.shape[0]
    k = min(count + rigid, n - 2)
    message = "converged"
    while True:
        lam, vec = solve(K, M, k, sigma)
        order = np.argsort(lam)
        lam, vec = lam[order], vec[:, order]
        f_hz = np.sqrt(np.clip(lam[rigid:], 0.0, None)) / (2.0 * np.pi)
        if fmax_hz is None or f_hz[-1] > fmax_hz:
            break
        if k >= min(max_modes + rigid, n - 2):
            message = f"stopped at {f_hz.size} modes, all below fmax_hz = {fmax_hz:g}"
            break
        k = min(2 * k, max_modes + rigid, n - 2)
    # rigid modes must sit far below the first flexible one
    if rigid and lam[rigid - 1] > 1e-6 * lam[rigid]:
        message = "rigid-body modes not separated from the flexible ones; check the model"
    vec = vec[:, rigid:]
    if fmax_hz is not None:
        keep = f_hz <= fmax_hz
        f_hz, vec = f_hz[keep], vec[:, keep]
    return f_hz, vec, message


# ----------------------------------------------------------------------------------------------
# Public model
SolidResult = ModeSet  # coords (Nx, Ny, Nz, 3); shapes (m, Nx, Ny, Nz, 3)


def _validate_request(count: int, fmax_hz: float | None) -> None:
    if not isinstance(count, int | np.integer) or count < 1:
        raise ValueError(f"count = {count!r}: must be a whole number >= 1")
    if fmax_hz is not None and not (np.isfinite(fmax_hz) and fmax_hz > 0):
        raise ValueError(f"fmax_hz = {fmax_hz!r}: must be a positive frequency or None")


def negative_shift(length: float, thickness_min: float, E_x: float, rho: float) -> float:
    """Shift for shift-invert: minus a quarter of the Euler-Bernoulli free-free lambda_1
    of a uniform bar as thin as the thinnest section, omega_1 = 22.373 / L^2 h sqrt(E / 12 rho)
    (Thomson, *Theory of Vibration with Applications*, App. D). Any negative shift is correct
    (K - sigma M stays positive definite); one near the lowest modes converges fastest."""
    omega_1 = 22.373 / length**2 * thickness_min * np.sqrt(E_x / (12.0 * rho))
    return -0.25 * omega_1**2


def nodal_masses(M: sp.spmatrix, components: int) -> np.ndarray:
    """Row-sum lumped masses per node (taken from the first displacement component)."""
    return np.asarray(M.sum(axis=1)).ravel()[::components]


def _mirror_grid(X: np.ndarray) -> np.ndarray:
    """Full-width grid from the half grid (mid-width plane = last y index)."""
    Xm = X[:, -2::-1].copy()
    Xm[..., 1] = 2.0 * X[0, -1, 0, 1] - Xm[..., 1]
    return np.concatenate([X, Xm], axis=1)


def _mirror_field(V: np.ndarray, parity: np.ndarray) -> np.ndarray:
    """Full-width field from a half one, ``parity`` (3,) = sign of (u, v, w) under the mirror."""
    return np.concatenate([V, V[:, :, -2::-1] * parity], axis=2)


# Mirror about the mid-width plane: symmetric modes (vertical bending, axial) keep u and w and
# flip v, so v = 0 on the plane; antisymmetric ones (lateral, torsion) keep v, so u = w = 0.
_SYMMETRY = (
    ("symmetric", (1,), np.array([1.0, -1.0, 1.0])),
    ("antisymmetric", (0, 2), np.array([-1.0, 1.0, -1.0])),
)


def solid_modes(
    length: float,
    width: float,
    blank_thickness: float,
    thickness: Field,
    material: Orthotropic,
    count: int = 12,
    fmax_hz: float | None = None,
    mesh: SolidMesh | None = None,
    solver: EigenSolver | None = None,
) -> SolidResult:
    """Free-free modes of an undercut bar by 3-D orthotropic finite elements.

    ``thickness`` is the local thickness h(x) (m) below the flat top face at z =
    ``blank_thickness``. Returns the lowest ``count`` flexible modes, or with ``fmax_hz`` all
    modes up to that frequency. ``mesh`` defaults to ``SolidMesh()``. The half bar is solved
    twice, with symmetric and antisymmetric conditions on the mid-width plane (three rigid
    modes each), and the shapes are mirrored back to the full width.
    """
    _check_bar(length, width, blank_thickness)
    _validate_request(count, fmax_hz)
    if not isinstance(material, Orthotropic):
        raise ValueError(f"material = {type(material).__name__}: must be an Orthotropic")
    mesh = mesh or SolidMesh()
    X = node_grid(length, width, blank_thickness, thickness, mesh)
    K, M = assemble_solid(X, stiffness_matrix(material), material.rho)
    h_min = float(np.min(X[:, 0, -1, 2] - X[:, 0, 0, 2]))
    sigma = negative_shift(length, h_min, bar_axes(material).E_x, material.rho)
    grid = X.shape[:3]
    plane = np.zeros(grid, dtype=bool)
    plane[:, -1, :] = True
    f_parts, v_parts, messages, n_dof = [], [], [], 0
    for _, fixed, parity in _SYMMETRY:
        held = np.zeros((*grid, 3), dtype=bool)
        for c in fixed:
            held[..., c] = plane
        free = np.flatnonzero(~held.ravel())
        Kf = K[free][:, free]
        Mf = M[free][:, free]
        n_dof += free.size
        f_hz, vec, message = solve_free_modes(
            Kf, Mf, rigid=3, count=count, sigma=sigma, fmax_hz=fmax_hz, solver=solver
        )
        full = np.zeros((K.shape[0], f_hz.size))
        full[free] = vec / np.sqrt(2.0)  # unit modal mass over the full width
        f_parts.append(f_hz)
        v_parts.append(_mirror_field(full.T.reshape(f_hz.size, *grid, 3), parity))
        messages.append(message)
    f_all = np.concatenate(f_parts)
    order = np.argsort(f_all, kind="stable")
    if fmax_hz is None:
        order = order[:count]
    f_hz = f_all[order]
    shapes = np.concatenate(v_parts)[order]
    masses = nodal_masses(M, 3).reshape(grid)
    masses[:, -1, :] *= 2.0  # the mid-plane nodes collect mass from both halves
    masses = np.concatenate([masses, masses[:, -2::-1]], axis=1)
    X_full = _mirror_grid(X)
    modes = classify_modes(f_hz, X_full, shapes, masses)
    problems = [m for m in messages if m != "converged"]
    return SolidResult(
        f_hz=f_hz,
        modes=modes,
        mesh=mesh,
        n_dof=n_dof,
        coords=X_full,
        shapes=shapes,
        status=1 if problems else 0,
        message="; ".join(problems) or "converged",
    )


@dataclass(frozen=True)
class SolidConvergence:
    """A result and its rerun on a finer mesh; ``change_cents`` per mode of the coarse run
    (matched by family and order; NaN where the fine run has no such mode)."""

    coarse: SolidResult
    fine: SolidResult
    change_cents: np.ndarray

    @property
    def max_change_cents(self) -> float:
        return float(np.nanmax(np.abs(self.change_cents)))


def match_modes(a: tuple[ClassifiedMode, ...], b: tuple[ClassifiedMode, ...]) -> np.ndarray:
    """Frequencies in ``b`` of the modes of ``a`` with the same family and order (NaN if none)."""
    index = {(m.family, m.order): m.f_hz for m in b}
    return np.array([index.get((m.family, m.order), np.nan) for m in a])


def solid_convergence(
    length: float,
    width: float,
    blank_thickness: float,
    thickness: Field,
    material: Orthotropic,
    count: int = 12,
    mesh: SolidMesh | None = None,
    factor: float = 1.5,
) -> SolidConvergence:
    """Run ``solid_modes`` on ``mesh`` and on ``mesh.refined(factor)``; report the change."""
    mesh = mesh or SolidMesh()
    coarse = solid_modes(length, width, blank_thickness, thickness, material, count, mesh=mesh)
    fine = solid_modes(
        length, width, blank_thickness, thickness, material, count + 4, mesh=mesh.refined(factor)
    )
    return SolidConvergence(coarse, fine, cents(coarse.f_hz, match_modes(coarse.modes, fine.modes)))
