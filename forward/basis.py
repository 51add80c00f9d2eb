"""Hierarchical one-dimensional shape functions on the reference element xi in [-1, 1].

C0 family (axial, torsion, Timoshenko fields), degree p >= 1 (Szabo & Babuska, 1991,
*Finite Element Analysis*, ch. 3, integrated Legendre functions):
    N_0 = (1 - xi)/2,  N_1 = (1 + xi)/2,
    N_k = (P_k(xi) - P_{k-2}(xi)) / sqrt(2 (2k - 1)),   k = 2..p,
where P_k are Legendre polynomials. The interior functions vanish at both ends, and the
space of degree p is a subset of the space of degree p + 1, so eigenvalues computed on nested
spaces decrease monotonically and their difference estimates the discretisation error.

C1 family (Euler-Bernoulli bending, stiff strings), degree p >= 3: the four Hermite cubics
(value and slope at each end; slopes scaled by the element half-length) plus interior
functions phi_j(xi) = integral_{-1}^{xi} N_j(t) dt, j = 3..p-1 (degree j + 1), whose value and
slope vanish at both ends.

Functions are evaluated at arbitrary points xi, so quadrature may be composite (split at
kinks of the section data) without any change here.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from numpy.polynomial import Legendre, Polynomial

__all__ = ["c0_basis", "c1_basis", "gauss_legendre"]


@lru_cache(maxsize=32)
def _c0_polys(p: int) -> tuple[Legendre, ...]:
    if p < 1:
        raise ValueError("C0 degree must be at least 1")
    polys = [Legendre([0.5, -0.5]), Legendre([0.5, 0.5])]
    for k in range(2, p + 1):
        coef = np.zeros(k + 1)
        coef[k] = 1.0
        coef[k - 2] = -1.0
        polys.append(Legendre(coef / np.sqrt(2.0 * (2 * k - 1))))
    return tuple(polys)


@lru_cache(maxsize=32)
def _c1_polys(p: int) -> tuple[Legendre, ...]:
    if p < 3:
        raise ValueError("C1 degree must be at least 3")
    hermite_power = [
        Polynomial([2.0, -3.0, 0.0, 1.0]) / 4.0,  # value at xi = -1
        Polynomial([1.0, -1.0, -1.0, 1.0]) / 4.0,  # slope d/dxi at xi = -1
        Polynomial([2.0, 3.0, 0.0, -1.0]) / 4.0,  # value at xi = +1
        Polynomial([-1.0, -1.0, 1.0, 1.0]) / 4.0,  # slope d/dxi at xi = +1
    ]
    polys = [h.convert(kind=Legendre) for h in hermite_power]
    c0 = _c0_polys(max(p - 1, 2))
    for j in range(3, p):
        polys.append(c0[j].integ(lbnd=-1.0))
    return tuple(polys)


@lru_cache(maxsize=64)
def _coefficients(kind: str, p: int, derivative: int) -> np.ndarray:
    """Legendre-series coefficients of every local function's derivative, (p + 1, n_funcs)."""
    polys = _c0_polys(p) if kind == "c0" else _c1_polys(p)
    C = np.zeros((p + 1, len(polys)))
    for j, poly in enumerate(polys):
        c = poly.deriv(derivative).coef if derivative else poly.coef
        C[: c.size, j] = c
    C.setflags(write=False)
    return C


def _evaluate(kind: str, p: int, xi: np.ndarray, derivatives: int) -> np.ndarray:
    V = np.polynomial.legendre.legvander(np.asarray(xi, dtype=float).ravel(), p)
    return np.stack([V @ _coefficients(kind, p, d) for d in range(derivatives + 1)])


def c0_basis(p: int, xi: np.ndarray, derivatives: int = 1) -> np.ndarray:
    """Values and xi-derivatives, shape (derivatives + 1, len(xi), p + 1)."""
    return _evaluate("c0", p, xi, derivatives)


def c1_basis(p: int, xi: np.ndarray, derivatives: int = 2) -> np.ndarray:
    """Values and xi-derivatives of the C1 family, shape (derivatives + 1, len(xi), p + 1).

    Columns: value at -1, slope at -1, value at +1, slope at +1, interior functions. The slope
    functions are d/dxi slopes; multiply by the element half-length for physical slopes.
    """
    return _evaluate("c1", p, xi, derivatives)


@lru_cache(maxsize=32)
def gauss_legendre(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre points and weights on [-1, 1] (exact for degree 2n - 1)."""
    x, w = np.polynomial.legendre.leggauss(n)
    x.setflags(write=False)
    w.setflags(write=False)
    return x, w
