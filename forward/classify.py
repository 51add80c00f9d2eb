"""Name the modes of a bar from their shapes: bending, lateral, torsion, axial or other.

Each cross-section x = const of a structured node grid is fitted with the rigid-body kinematics
of a beam section. With nodal masses m (lumped from the consistent mass matrix), section mass
A = sum m, centroid (y_c, z_c) and offsets eta = y - y_c, zeta = z - z_c:

    axial     U       = sum m u / A
    bending   W       = sum m w / A,   theta_y = -sum m zeta u / sum m zeta^2
    lateral   V       = sum m v / A,   theta_z =  sum m eta u / sum m eta^2
    torsion   phi     = sum m (eta w - zeta v) / sum m (eta^2 + zeta^2),
              psi     = sum m eta zeta u / sum m (eta zeta)^2        (warping)

These are mass-orthogonal projections of the section's displacement (for sections symmetric
about the mid-width), so each family's kinetic-energy share

    bending  = sum_x (A W^2 + I_y theta_y^2),   lateral = sum_x (A V^2 + I_z theta_z^2),
    torsion  = sum_x (I_p phi^2 + J_w psi^2),   axial   = sum_x A U^2,

divided by sum m (u^2 + v^2 + w^2), lies in [0, 1] and the four add up to at most 1. A mode
belongs to the family with the largest share if that share exceeds ``threshold``, else to
"other". The order n is the rank by frequency within the family (1 = lowest); the node count is
the number of sign changes of the family's main coordinate (W, V, phi or U) along x: free-free
bending and lateral mode n has n + 1 nodes, torsion and axial mode n has n (e.g. Thomson,
*Theory of Vibration with Applications*, App. D; Rayleigh, *The Theory of Sound*, sec. 157).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Literal

import numpy as np

__all__ = [
    "FAMILIES",
    "ClassifiedMode",
    "ModeSet",
    "classify_modes",
    "family_shares",
    "sign_changes",
]

Family = Literal["bending", "lateral", "torsion", "axial", "other"]
FAMILIES: tuple[Family, ...] = ("bending", "lateral", "torsion", "axial")


@dataclass(frozen=True)
class ClassifiedMode:
    """One mode: frequency (Hz), family, order within the family, node count, purity.

    ``share`` is the kinetic-energy fraction of the family's section kinematics (0..1).
    """

    f_hz: float
    family: Family
    order: int
    nodes: int
    share: float


def _safe_div(num: np.ndarray, den: np.ndarray) -> np.ndarray:
    out = np.zeros(np.broadcast(num, den).shape)
    np.divide(num, den, out=out, where=den > 0)
    return out


def family_shares(
    coords: np.ndarray, shapes: np.ndarray, masses: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Kinetic-energy shares of the four families and their main coordinates along x.

    ``coords``: (Nx, Ny, Nz, 3) node positions; ``shapes``: (m, Nx, Ny, Nz, 3) displacements
    (u, v, w); ``masses``: (Nx, Ny, Nz) nodal masses. Returns ``shares`` (m, 4) and ``main``
    (m, 4, Nx) in the order of ``FAMILIES``.
    """
    m = masses
    A = m.sum(axis=(1, 2))  # (Nx,)
    yc = (m * coords[..., 1]).sum(axis=(1, 2)) / A
    zc = (m * coords[..., 2]).sum(axis=(1, 2)) / A
    eta = coords[..., 1] - yc[:, None, None]
    zeta = coords[..., 2] - zc[:, None, None]
    Iy = (m * zeta**2).sum(axis=(1, 2))
    Iz = (m * eta**2).sum(axis=(1, 2))
    Ip = Iy + Iz
    Jw = (m * (eta * zeta) ** 2).sum(axis=(1, 2))
    u, v, w = shapes[..., 0], shapes[..., 1], shapes[..., 2]

    def section_sum(f: np.ndarray) -> np.ndarray:
        return (m * f).sum(axis=(-2, -1))  # (modes, Nx)

    U = section_sum(u) / A
    V = section_sum(v) / A
    W = section_sum(w) / A
    theta_y = _safe_div(-section_sum(zeta * u), Iy)
    theta_z = _safe_div(section_sum(eta * u), Iz)
    phi = _safe_div(section_sum(eta * w - zeta * v), Ip)
    psi = _safe_div(section_sum(eta * zeta * u), Jw)

    total = section_sum(u**2 + v**2 + w**2).sum(axis=-1)
    energy = np.stack(
        [
            (A * W**2 + Iy * theta_y**2).sum(axis=-1),
            (A * V**2 + Iz * theta_z**2).sum(axis=-1),
            (Ip * phi**2 + Jw * psi**2).sum(axis=-1),
            (A * U**2).sum(axis=-1),
        ],
        axis=-1,
    )
    shares = energy / total[:, None]
    main = np.stack([W, V, phi, U], axis=1)
    return shares, main


def sign_changes(f: np.ndarray, floor: float = 1e-3) -> np.ndarray:
    """Sign changes along the last axis, ignoring samples below ``floor`` times the peak."""
    f = np.atleast_2d(f)
    peak = np.abs(f).max(axis=-1, keepdims=True)
    s = np.where(np.abs(f) > floor * peak, np.sign(f), 0.0)
    counts = []
    for row in s:  # one short row per mode
        nz = row[row != 0]
        counts.append(int(np.count_nonzero(nz[1:] != nz[:-1])))
    return np.array(counts, dtype=int)


def classify_modes(
    f_hz: np.ndarray,
    coords: np.ndarray,
    shapes: np.ndarray,
    masses: np.ndarray,
    threshold: float = 0.5,
) -> tuple[ClassifiedMode, ...]:
    """Family, order and node count of each mode (modes sorted by frequency on input)."""
    shares, main = family_shares(coords, shapes, masses)
    best = shares.argmax(axis=1)
    rank: dict[str, int] = {}
    modes = []
    for i, f in enumerate(np.asarray(f_hz, dtype=float)):
        k = int(best[i])
        share = float(shares[i, k])
        family: Family = FAMILIES[k] if share > threshold else "other"
        rank[family] = rank.get(family, 0) + 1
        nodes = int(sign_changes(main[i, k])[0])
        modes.append(ClassifiedMode(float(f), family, rank[family], nodes, share))
    return tuple(modes)


@dataclass(frozen=True)
class ModeSet:
    """Free-free modes of a 2D or 3D model: ``f_hz`` (m,), ``modes`` classified, the ``mesh``,
    ``n_dof``, node ``coords`` and mass-normalised ``shapes`` (one per mode, node-wise
    displacement components), ``status`` (0 ok, 1 warning) and ``message``; ``probe_w``
    (modes, points), where asked, the mass-normalised vertical displacement at given points
    of the top face."""

    f_hz: np.ndarray
    modes: tuple[ClassifiedMode, ...]
    mesh: object
    n_dof: int
    coords: np.ndarray = field(repr=False)
    shapes: np.ndarray = field(repr=False)
    status: int = 0
    message: str = "converged"
    probe_w: np.ndarray | None = field(default=None, repr=False)

    def family_hz(self, name: str) -> np.ndarray:
        """Frequencies (Hz) of one family, in order."""
        return np.array([m.f_hz for m in self.modes if m.family == name])
