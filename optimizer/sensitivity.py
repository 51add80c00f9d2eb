"""Eigenvalue sensitivities from mode shapes.

For K(s) phi = lambda M(s) phi with phi^T M phi = 1 and a simple eigenvalue (Fox, R. L. &
Kapoor, M. P., 1968, "Rates of change of eigenvalues and eigenvectors", AIAA J. 6, 2426-2429):
    d lambda / d s = phi^T (dK/ds - lambda dM/ds) phi.
With K and M written as sums of terms int c_t(x) (B_t u)^2 dx (see ``forward.fem``), only the
section coefficients c_t depend on the design, so
    d lambda / d s_k = sum_t sum_q w_q (d c_t / d s_k)(x_q) (B_t phi)(x_q)^2  (stiffness terms)
                     - lambda * (the same sum over mass terms).
Point springs and masses do not depend on the design and drop out.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
from tonewright.forward.modal import FamilySystem

__all__ = ["eigenvalue_gradients", "mode_densities"]


def mode_densities(system: FamilySystem, vectors: np.ndarray) -> dict[str, np.ndarray]:
    """Squared term values (B_t phi)^2 at every quadrature point, per coefficient name.

    ``vectors`` holds reduced eigenvectors as columns; result arrays are (n_modes, n_q),
    stiffness and mass terms under keys ("K", name) and ("M", name).
    """
    full = np.zeros((system.n_global, vectors.shape[1]))
    full[system.free] = vectors
    local = full[system.dofs_q]  # (n_q, n_loc, n_modes)
    out: dict = {}
    for kind, terms in (("K", system.stiffness), ("M", system.mass)):
        for term in terms:
            values = np.einsum("ql,qlm->mq", term.B, local)
            key = (kind, term.coefficient)
            out[key] = out.get(key, 0.0) + values**2
    return out


def eigenvalue_gradients(
    system: FamilySystem,
    lam: np.ndarray,
    vectors: np.ndarray,
    dcoef: Mapping[str, np.ndarray],
) -> np.ndarray:
    """d lambda_m / d s_k for every mode m (columns of ``vectors``) and design variable k.

    ``dcoef[name]`` is d c_name / d s_k at the quadrature points, shape (n_vars, n_q);
    coefficients absent from ``dcoef`` do not depend on the design.
    """
    dens = mode_densities(system, vectors)
    n_vars = next(iter(dcoef.values())).shape[0] if dcoef else 0
    grad = np.zeros((lam.size, n_vars))
    w = system.weights
    for (kind, name), values in dens.items():
        if name not in dcoef:
            continue
        contrib = (values * w) @ dcoef[name].T  # (n_modes, n_vars)
        grad += contrib if kind == "K" else -lam[:, None] * contrib
    return grad
