"""2-D plane-stress model of a bar's side profile, free-free: vertical bending and axial modes.

The side profile (x along the length, z through the thickness) is a membrane of thickness b
(the bar's width) in plane stress (sigma_yy = sigma_xy = sigma_yz = 0):

    find u = (u, w), omega:
        b int_A eps(v)^T C_ps eps(u) dA = omega^2 b int_A rho v . u dA   for all v,
    eps = (du/dx, dw/dz, du/dz + dw/dx),

with the orthotropic plane-stress stiffness C_ps of ``forward.orthotropic.plane_stress_xz``
(E_x = E_L, E_z, G_xz, nu_xz). Unlike a beam, this resolves the rise of the neutral axis where
the bar is thin (bending coupled with stretching), shear that spreads gradually through
thickness changes, and through-thickness squeezing; it has no lateral or torsion modes and no
anticlastic (width) effects. Discretisation: a structured mapped mesh of nx x nz 9-node
biquadratic Lagrange quadrilaterals, nodes z = t0 - h(x) (1 - s), element ends along x at the
profile's breakpoints (``forward.solid.graded_stations``); 3 x 3 Gauss quadrature, vectorised
over all elements (Zienkiewicz, Taylor & Zhu, *The Finite Element Method*, 7th ed., vol. 1,
ch. 6); element ends crowd toward re-entrant kinks and the bottom face as in the 3-D model
(power-law grading, ``forward.solid.power_spacing``); ARPACK shift-invert with a negative
shift, three rigid modes dropped. The default mesh (160 x 12) is within 0.1 cent of a 768 x 24
reference on the demo undercut bar (modes to 4.6 kHz) at a fraction of a second per solve.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from tonewright.forward.classify import ModeSet, classify_modes
from tonewright.forward.geometry import Field
from tonewright.forward.orthotropic import Orthotropic, bar_axes, plane_stress_xz
from tonewright.forward.solid import (
    EigenSolver,
    _check_bar,
    _check_grading,
    _check_thickness,
    _more,
    _validate_request,
    _with_midpoints,
    depth_stations,
    gauss_legendre_3,
    graded_stations,
    lagrange2,
    negative_shift,
    nodal_masses,
    solve_free_modes,
)

__all__ = [
    "PlaneMesh",
    "PlaneResult",
    "assemble_plane",
    "plane_modes",
    "profile_grid",
    "quad9_matrices",
]


@dataclass(frozen=True)
class PlaneMesh:
    """Element counts and grading of the side-profile mesh (9-node quadrilaterals).

    ``nx`` along the length (at least one per profile segment), ``nz`` through the thickness;
    grading exponents (1 = uniform): ``grade_x`` crowds elements toward re-entrant kinks of the
    profile, ``grade_z`` toward the bottom face (see ``forward.solid.power_spacing``).
    """

    nx: int = 160
    nz: int = 12
    grade_x: float = 2.0
    grade_z: float = 1.5

    def __post_init__(self) -> None:
        for name in ("nx", "nz"):
            value = getattr(self, name)
            if not isinstance(value, int | np.integer) or isinstance(value, bool) or value < 1:
                raise ValueError(f"mesh {name} = {value!r}: must be a whole number >= 1")
        for name in ("grade_x", "grade_z"):
            _check_grading(name, getattr(self, name))

    def refined(self, factor: float = 1.5) -> PlaneMesh:
        """A finer mesh: both counts times ``factor``, rounded up, at least one more."""
        return PlaneMesh(_more(self.nx, factor), _more(self.nz, factor), self.grade_x, self.grade_z)


def _quad9_reference() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Shape values (9 points, 9 nodes), gradients (9, 9, 2), weights (9,); node 3 a + c."""
    p, w = gauss_legendre_3()
    N1, dN1 = lagrange2(p)
    N = np.einsum("ia,kc->ikac", N1, N1).reshape(9, 9)
    dN = np.stack(
        [np.einsum("ia,kc->ikac", dN1, N1), np.einsum("ia,kc->ikac", N1, dN1)], axis=-1
    ).reshape(9, 9, 2)
    return N, dN, np.outer(w, w).ravel()


def quad9_matrices(
    X: np.ndarray, C: np.ndarray, rho: float, width: float
) -> tuple[np.ndarray, np.ndarray]:
    """Plane-stress stiffness and consistent mass of 9-node quadrilaterals, all at once.

    ``X``: (ne, 9, 2) node (x, z) in local order 3 a + c; ``C``: (3, 3) stiffness for
    (xx, zz, xz); ``width``: out-of-plane thickness b. Returns (ne, 18, 18) arrays with local
    DOF 2 * node + component (u, w).
    """
    N, dN, W = _quad9_reference()
    ne = X.shape[0]
    K = np.zeros((ne, 18, 18))
    Ms = np.zeros((ne, 9, 9))
    B = np.zeros((ne, 3, 9, 2))
    for g in range(W.size):
        J = np.einsum("ai,eaj->eij", dN[g], X)  # J_ij = dx_j / dxi_i
        detJ = J[:, 0, 0] * J[:, 1, 1] - J[:, 0, 1] * J[:, 1, 0]
        if np.any(detJ <= 0):
            raise ValueError("inverted element (non-positive Jacobian)")
        G = np.linalg.solve(J, np.broadcast_to(dN[g].T, (ne, 2, 9)))  # (ne, 2, 9)
        gx, gz = G[:, 0], G[:, 1]
        B[:, 0, :, 0] = gx
        B[:, 1, :, 1] = gz
        B[:, 2, :, 0], B[:, 2, :, 1] = gz, gx
        Bf = B.reshape(ne, 3, 18)
        dA = width * detJ * W[g]
        K += np.matmul(Bf.transpose(0, 2, 1), np.matmul(C, Bf) * dA[:, None, None])
        Ms += np.outer(N[g], N[g])[None] * (rho * dA)[:, None, None]
    M = np.zeros((ne, 9, 2, 9, 2))
    M[:, :, 0, :, 0] = Ms
    M[:, :, 1, :, 1] = Ms
    return K, M.reshape(ne, 18, 18)


def profile_grid(
    length: float, blank_thickness: float, thickness: Field, mesh: PlaneMesh
) -> np.ndarray:
    """Node (x, z) coordinates, shape (2 nx + 1, 2 nz + 1, 2)."""
    x = _with_midpoints(graded_stations(length, thickness, mesh.nx, mesh.grade_x))
    s = _with_midpoints(depth_stations(mesh.nz, mesh.grade_z))
    h = np.asarray(thickness(x), dtype=float)
    _check_thickness(h, blank_thickness)
    X = np.empty((x.size, s.size, 2))
    X[..., 0] = x[:, None]
    X[..., 1] = blank_thickness - h[:, None] * (1.0 - s[None, :])
    return X


def assemble_plane(
    X: np.ndarray, C: np.ndarray, rho: float, width: float
) -> tuple[sp.csr_matrix, sp.csr_matrix]:
    """Global sparse K, M (DOF 2 * node + component, node i Nz + k) on a ``profile_grid``."""
    Nx, Nz = X.shape[:2]
    ex = 2 * np.arange((Nx - 1) // 2)[:, None, None]
    ez = 2 * np.arange((Nz - 1) // 2)[None, :, None]
    local = np.arange(9)
    conn = ((ex + local // 3) * Nz + (ez + local % 3)).reshape(-1, 9)
    Ke, Me = quad9_matrices(X.reshape(-1, 2)[conn], C, rho, width)
    dofs = (2 * conn[:, :, None] + np.arange(2)).reshape(-1, 18)
    rows = np.broadcast_to(dofs[:, :, None], Ke.shape).ravel()
    cols = np.broadcast_to(dofs[:, None, :], Ke.shape).ravel()
    n = 2 * Nx * Nz
    K = sp.csr_matrix((Ke.ravel(), (rows, cols)), shape=(n, n))
    M = sp.csr_matrix((Me.ravel(), (rows, cols)), shape=(n, n))
    return K, M


PlaneResult = ModeSet  # coords (Nx, Nz, 2) as (x, z); shapes (m, Nx, Nz, 2) as (u, w)


def plane_modes(
    length: float,
    width: float,
    blank_thickness: float,
    thickness: Field,
    material: Orthotropic,
    count: int = 8,
    fmax_hz: float | None = None,
    mesh: PlaneMesh | None = None,
    solver: EigenSolver | None = None,
) -> PlaneResult:
    """Free-free in-plane modes of the side profile (vertical bending and axial).

    ``thickness`` h(x) (m) hangs below the flat top at z = ``blank_thickness``; ``width`` (m)
    is the out-of-plane thickness. Returns the lowest ``count`` flexible modes, or with
    ``fmax_hz`` all up to that frequency. ``mesh`` defaults to ``PlaneMesh()``.
    """
    _check_bar(length, width, blank_thickness)
    _validate_request(count, fmax_hz)
    if not isinstance(material, Orthotropic):
        raise ValueError(f"material = {type(material).__name__}: must be an Orthotropic")
    mesh = mesh or PlaneMesh()
    X = profile_grid(length, blank_thickness, thickness, mesh)
    K, M = assemble_plane(X, plane_stress_xz(material), material.rho, width)
    h_min = float(np.min(X[:, -1, 1] - X[:, 0, 1]))
    sigma = negative_shift(length, h_min, bar_axes(material).E_x, material.rho)
    f_hz, vec, message = solve_free_modes(
        K, M, rigid=3, count=count, sigma=sigma, fmax_hz=fmax_hz, solver=solver
    )
    shapes = vec.T.reshape(f_hz.size, *X.shape)
    # section kinematics on a one-node-wide 3-D view (y = 0, v = 0)
    X3 = np.stack([X[..., 0], np.zeros(X.shape[:2]), X[..., 1]], axis=-1)[:, None]
    U3 = np.stack([shapes[..., 0], np.zeros(shapes.shape[:3]), shapes[..., 1]], axis=-1)[:, :, None]
    masses = nodal_masses(M, 2).reshape(X.shape[:2])[:, None, :]
    modes = classify_modes(f_hz, X3, U3, masses)
    return PlaneResult(
        f_hz=f_hz,
        modes=modes,
        mesh=mesh,
        n_dof=K.shape[0],
        coords=X,
        shapes=shapes,
        status=0 if message == "converged" else 1,
        message=message,
    )
