"""Block shift-invert eigen-solver against dense LAPACK (a different method) and closed forms."""

import numpy as np
import pytest
from scipy.linalg import cho_factor, cho_solve, eigh
from tonewright.forward.blockeig import shift_invert_eigs


def _solver(K: np.ndarray, M: np.ndarray, sigma: float):
    factor = cho_factor(K - sigma * M)
    return lambda B: cho_solve(factor, B), lambda B: M @ B


def _string_pencil(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Linear finite elements of a fixed-fixed string, unit length, tension and density."""
    h = 1.0 / (n + 1)
    K = (2.0 * np.eye(n) - np.eye(n, k=1) - np.eye(n, k=-1)) / h
    M = h / 6.0 * (4.0 * np.eye(n) + np.eye(n, k=1) + np.eye(n, k=-1))
    return K, M


def test_string_eigenvalues_match_the_closed_form_of_linear_elements():
    # linear elements on a uniform mesh: lambda_j = (6 / h^2) (1 - cos t) / (2 + cos t),
    # t = j pi h (Strang & Fix 1973, An Analysis of the Finite Element Method, sec. 6.1;
    # the formula from memory, confirmed here to 1e-10)
    n = 400
    K, M = _string_pencil(n)
    solve, mass = _solver(K, M, sigma=-1.0)
    lam, vecs, converged = shift_invert_eigs(solve, mass, n, k=8, sigma=-1.0, eig_tol=0.0)
    h = 1.0 / (n + 1)
    t = np.arange(1, 9) * np.pi * h
    exact = 6.0 / h**2 * (1.0 - np.cos(t)) / (2.0 + np.cos(t))
    assert converged
    np.testing.assert_allclose(lam, exact, rtol=1e-10)
    np.testing.assert_allclose(vecs.T @ M @ vecs, np.eye(8), atol=1e-10)


@pytest.mark.parametrize("eig_tol, rtol", [(1e-6, 1e-6), (0.0, 1e-9)])
def test_random_pencil_matches_dense_lapack_with_a_double_eigenvalue(eig_tol, rtol):
    # the default stops on the residual-gap bound (eigenvalues to 1e-6 relative, 0.001 cent in
    # frequency); eig_tol = 0 iterates until every residual is small
    rng = np.random.default_rng(3)
    n = 300
    Q, _ = np.linalg.qr(rng.standard_normal((n, n)))
    spectrum = np.concatenate([[1.0, 2.0, 2.0, 3.5, 4.0, 4.1], 5.0 + 50.0 * rng.random(n - 6)])
    A = rng.standard_normal((n, n))
    M = A @ A.T / n + np.eye(n)  # symmetric positive definite mass
    L = np.linalg.cholesky(M)
    K = L @ (Q * spectrum) @ Q.T @ L.T  # eigenvalues of (K, M) are ``spectrum``
    K = 0.5 * (K + K.T)
    solve, mass = _solver(K, M, sigma=-0.5)
    lam, vecs, converged = shift_invert_eigs(solve, mass, n, k=6, sigma=-0.5, eig_tol=eig_tol)
    reference = eigh(K, M, eigvals_only=True, subset_by_index=[0, 5])
    assert converged
    np.testing.assert_allclose(lam, reference, rtol=rtol)
    residual = K @ vecs - (M @ vecs) * lam
    assert np.max(np.abs(residual)) < 1e-5 * np.max(np.abs(K))


def test_refuses_an_impossible_count():
    K, M = _string_pencil(10)
    solve, mass = _solver(K, M, sigma=-1.0)
    with pytest.raises(ValueError, match="k = 10"):
        shift_invert_eigs(solve, mass, 10, k=10, sigma=-1.0)


def test_condensed_solver_with_bubble_groups_equals_a_dense_solve():
    # the nested elimination (cross-section bubbles first, then the rest, then the vertex
    # layers) against LAPACK's dense solve of the same assembled matrix, on a small
    # undercut bar with two elements through the thickness (two bubble groups)
    from tonewright.forward import psolid
    from tonewright.forward.geometry import PiecewiseLinear
    from tonewright.forward.orthotropic import Orthotropic, stiffness_matrix

    wood = Orthotropic(20e9, 2.2e9, 1.2e9, 1.6e9, 1.5e9, 0.4e9, 0.37, 0.45, 0.6, 1000.0)
    h = PiecewiseLinear(np.array([0.0, 0.1, 0.2, 0.3]), np.array([0.02, 0.012, 0.012, 0.02]))
    x = psolid._Axis(np.array([0.0, 0.1, 0.2, 0.3]), 3)
    y = psolid._Axis(np.array([0.0, 0.025]), 3)
    z = psolid._Axis(np.array([0.0, 0.3, 1.0]), 3)
    xs = psolid._x_samples(x, h, 6)
    pencil = psolid._assemble(x, y, z, xs, stiffness_matrix(wood), wood.rho)
    groups = psolid._cross_section_bubbles(y, z)
    assert np.unique(groups[groups >= 0]).size == 2
    X, S = pencil.shifted(-1e6)  # free bar: a negative shift makes K - sigma M definite
    dense = sum(np.kron(Xt, St) for Xt, St in zip(X, S, strict=True))
    b = np.random.default_rng(1).standard_normal((dense.shape[0], 3))
    expected = np.linalg.solve(dense, b)
    for g in (groups, None):
        got = psolid._CondensedCholesky(X, S, 3, g).solve(b)
        np.testing.assert_allclose(got, expected, rtol=1e-8, atol=1e-12 * np.abs(expected).max())


def test_symmetry_classes_on_threads_give_the_sequential_result(monkeypatch):
    from tonewright.forward import psolid
    from tonewright.forward.geometry import constant
    from tonewright.forward.orthotropic import isotropic

    aluminium = isotropic(69e9, 0.33, 2700.0)
    bar = dict(length=0.3, width=0.04, blank_thickness=0.012, thickness=constant(0.012))
    mesh = psolid.PMesh(nx=2, px=4, py=3, pz=3)
    threaded = psolid.psolid_modes(**bar, material=aluminium, count=6, mesh=mesh)
    monkeypatch.setattr(psolid.multiprocessing, "parent_process", lambda: object())
    sequential = psolid.psolid_modes(**bar, material=aluminium, count=6, mesh=mesh)
    np.testing.assert_allclose(threaded.f_hz, sequential.f_hz, rtol=1e-12)
    assert [m.family for m in threaded.modes] == [m.family for m in sequential.modes]
