"""Meshes, composite quadrature and vectorised assembly of one-dimensional eigenproblems.

Every family of vibration is a quadratic form, assembled as a sum of *terms*
    K = sum_t  int c_t(x) (B_t u)(B_t v) dx,      M = sum_t int m_t(x) (B_t u)(B_t v) dx,
where c_t is a section coefficient (E I, kappa G A, rho A, ...) and B_t maps the local degrees
of freedom to a field value or derivative at a point. Terms are kept after assembly so that
eigenvalue sensitivities follow directly (Fox & Kapoor, 1968, AIAA J. 6, 2426):
    d lambda / d s = sum_t int (dc_t/ds - lambda dm_t/ds) (B_t phi)^2 dx,   phi^T M phi = 1.

Quadrature is composite: each element is split at the kinks of the section data (profile
stations) and Gauss-Legendre rules are used on the pieces, so a piecewise-linear thickness
profile is integrated exactly. Over a drilled hole the substitution x = x_h + r sin(t) removes
the square-root behaviour of the chord at the hole's edges.

Element families (see ``forward.basis``): hierarchical C0 functions of degree p for axial,
torsion and the rotation of Timoshenko beams, degree p + 1 for the Timoshenko deflection (so the
Kirchhoff constraint w' = theta is representable and the element does not lock); C1 functions
of degree p for Euler-Bernoulli bending and strings.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass

import numpy as np
from tonewright.forward.basis import c0_basis, c1_basis, gauss_legendre

__all__ = [
    "FieldLayout",
    "Quadrature",
    "Term",
    "assemble",
    "build_mesh",
    "build_quadrature",
    "c0_layout",
    "c1_layout",
    "evaluate_field",
]


@dataclass(frozen=True, eq=False)
class Quadrature:
    """Composite quadrature: points ``x``, weights ``w`` (including dx), owning ``element``,
    and the reference coordinate ``xi`` of each point in its element."""

    edges: np.ndarray
    x: np.ndarray
    w: np.ndarray
    element: np.ndarray
    xi: np.ndarray

    @property
    def half_length(self) -> np.ndarray:
        """Half-length of the element owning each point (dx/dxi)."""
        return 0.5 * np.diff(self.edges)[self.element]


def build_mesh(
    length: float, fixed_points: np.ndarray, max_element: float, min_gap: float
) -> np.ndarray:
    """Element edges: 0, length, every fixed point, then uniform splits down to max_element.

    Fixed points closer than ``min_gap`` to one already kept are dropped (a node exactly at a
    support position is required; near-duplicates only cost time).
    """
    pts = np.unique(
        np.clip(np.concatenate(([0.0, length], np.asarray(fixed_points, float))), 0.0, length)
    )
    kept = [pts[0]]
    for p in pts[1:]:
        if p - kept[-1] >= min_gap:
            kept.append(p)
    if kept[-1] != length:  # the end was within min_gap of a kept point: move that point
        kept[-1] = length
    coarse = np.asarray(kept)
    pieces = [coarse[:1]]
    for a, b in itertools.pairwise(coarse):
        n = max(1, int(np.ceil((b - a) / max_element - 1e-9)))
        pieces.append(np.linspace(a, b, n + 1)[1:])
    return np.concatenate(pieces)


def build_quadrature(
    edges: np.ndarray,
    breakpoints: np.ndarray,
    holes: tuple[tuple[float, float], ...],
    n_gauss: int,
) -> Quadrature:
    """Composite Gauss rule over ``edges`` split at ``breakpoints`` and at the hole spans.

    ``holes`` holds (centre, radius) pairs; points inside a hole span use the sine map.
    """
    length = edges[-1]
    cuts = [edges, np.asarray(breakpoints, dtype=float)]
    for centre, radius in holes:
        cuts.append(np.array([centre - radius, centre, centre + radius]))
    cuts = np.unique(np.clip(np.concatenate(cuts), 0.0, length))
    a, b = cuts[:-1], cuts[1:]
    keep = (b - a) > 1e-12 * length
    a, b = a[keep], b[keep]
    gx, gw = gauss_legendre(n_gauss)
    mid, half = 0.5 * (a + b), 0.5 * (b - a)
    x = mid[:, None] + half[:, None] * gx
    w = half[:, None] * gw * np.ones_like(x)
    for centre, radius in holes:
        inside = (mid > centre - radius) & (mid < centre + radius)
        if not np.any(inside):
            continue
        ta = np.arcsin(np.clip((a[inside] - centre) / radius, -1.0, 1.0))
        tb = np.arcsin(np.clip((b[inside] - centre) / radius, -1.0, 1.0))
        tm, th = 0.5 * (ta + tb), 0.5 * (tb - ta)
        t = tm[:, None] + th[:, None] * gx
        x[inside] = centre + radius * np.sin(t)
        w[inside] = th[:, None] * gw * radius * np.cos(t)
    element = np.searchsorted(edges, mid, side="right") - 1
    element = np.clip(element, 0, edges.size - 2)
    element = np.repeat(element, n_gauss)
    x = x.ravel()
    xi = 2.0 * (x - edges[element]) / (edges[element + 1] - edges[element]) - 1.0
    return Quadrature(edges=edges, x=x, w=w.ravel(), element=element, xi=np.clip(xi, -1.0, 1.0))


@dataclass(frozen=True, eq=False)
class FieldLayout:
    """Where one field's degrees of freedom sit: global ``dofs`` per element (n_el, n_loc),
    its continuity ``kind`` ("c0"/"c1"), its ``degree``, the global index of the value (and,
    for C1, slope) at each mesh node, and which dofs belong to the next-lower degree."""

    kind: str
    degree: int
    dofs: np.ndarray
    node_value: np.ndarray
    node_slope: np.ndarray | None
    lower: np.ndarray
    size: int


def c0_layout(n_elements: int, p: int, offset: int = 0) -> FieldLayout:
    """Vertex values shared between elements, p - 1 interior functions per element."""
    n_nodes = n_elements + 1
    e = np.arange(n_elements)
    interior = n_nodes + e[:, None] * (p - 1) + np.arange(p - 1)
    dofs = np.column_stack([e, e + 1, interior]) + offset
    size = n_nodes + n_elements * (p - 1)
    lower = np.ones(size, dtype=bool)
    if p >= 2:
        lower[interior[:, -1]] = False
    return FieldLayout("c0", p, dofs, np.arange(n_nodes) + offset, None, lower, size)


def c1_layout(n_elements: int, p: int, offset: int = 0) -> FieldLayout:
    """Value and slope at each node, p - 3 interior functions per element."""
    n_nodes = n_elements + 1
    e = np.arange(n_elements)
    interior = 2 * n_nodes + e[:, None] * (p - 3) + np.arange(p - 3)
    dofs = np.column_stack([2 * e, 2 * e + 1, 2 * e + 2, 2 * e + 3, interior]) + offset
    size = 2 * n_nodes + n_elements * (p - 3)
    lower = np.ones(size, dtype=bool)
    if p >= 4:
        lower[interior[:, -1]] = False
    nodes = np.arange(n_nodes)
    return FieldLayout("c1", p, dofs, 2 * nodes + offset, 2 * nodes + 1 + offset, lower, size)


def field_matrices(layout: FieldLayout, quad: Quadrature) -> list[np.ndarray]:
    """Physical value and x-derivatives of the field's local functions at every point.

    Returns [values, d/dx] for C0 and [values, d/dx, d2/dx2] for C1, each (n_q, n_loc).
    """
    J = quad.half_length[:, None]
    if layout.kind == "c0":
        phi = c0_basis(layout.degree, quad.xi, 1)
        return [phi[0], phi[1] / J]
    phi = c1_basis(layout.degree, quad.xi, 2)
    scale = np.ones((quad.x.size, layout.degree + 1))
    scale[:, [1, 3]] = J  # slope functions carry the physical slope
    return [phi[0] * scale, phi[1] * scale / J, phi[2] * scale / J**2]


@dataclass(frozen=True, eq=False)
class Term:
    """One quadratic term: coefficient name and its B matrix (n_q, n_loc_total)."""

    coefficient: str
    B: np.ndarray


def assemble(
    n_dof: int, dofs_q: np.ndarray, weights: list[np.ndarray], B: list[np.ndarray]
) -> np.ndarray:
    """Dense n_dof x n_dof matrix of sum_t sum_q weights_tq B_tqi B_tqj scattered to dofs_q.

    The points of one element are consecutive (rows of ``dofs_q`` repeat): each element's
    matrix is one product (B w)^T B over its points, so a profile with hundreds of kinks (and
    as many quadrature sub-intervals) costs matrix products, not a q x n x n array.
    """
    change = np.flatnonzero(np.any(dofs_q[1:] != dofs_q[:-1], axis=1)) + 1
    starts = np.concatenate(([0], change))
    ends = np.concatenate((change, [dofs_q.shape[0]]))
    n_loc = dofs_q.shape[1]
    local = np.zeros((starts.size, n_loc, n_loc))
    for w, b in zip(weights, B, strict=True):
        bw = b * w[:, None]
        for k, (s, e) in enumerate(zip(starts, ends, strict=True)):
            local[k] += bw[s:e].T @ b[s:e]
    dofs_e = dofs_q[starts]
    flat = (dofs_e[:, :, None] * n_dof + dofs_e[:, None, :]).ravel()
    return np.bincount(flat, weights=local.ravel(), minlength=n_dof * n_dof).reshape(n_dof, n_dof)


def evaluate_field(
    layout: FieldLayout, edges: np.ndarray, coef: np.ndarray, x: np.ndarray
) -> np.ndarray:
    """Value of a field with global coefficients ``coef`` at arbitrary points ``x``."""
    x = np.asarray(x, dtype=float)
    e = np.clip(np.searchsorted(edges, x, side="right") - 1, 0, edges.size - 2)
    xi = np.clip(2.0 * (x - edges[e]) / (edges[e + 1] - edges[e]) - 1.0, -1.0, 1.0)
    quad = Quadrature(edges=edges, x=x, w=np.zeros_like(x), element=e, xi=xi)
    values = field_matrices(layout, quad)[0]
    return np.einsum("qi,qi->q", values, coef[layout.dofs[e]])
