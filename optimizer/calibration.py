"""Material calibration: Young's and shear moduli of a uniform blank from its measured partials.

Model
-----
A blank of known dimensions and density is a Timoshenko beam (``forward.modal``; the split
stiffness matrices below come from ``forward.moduli_split``). For a bar of
one material every stiffness term is E or G times a geometric factor (E I, E A: E; kappa G A,
G J: G), supports add a constant (cords), and the mass matrix does not depend on either
modulus. So, per family f (bending, torsion, lateral), with reference moduli E_0 and G_0,

    K_f(E, G) = (E / E_0) K_f^E + (G / G_0) K_f^G + K_f^s,      M_f fixed.

M_f is factored once, M = L L^T, and each evaluation solves the standard symmetric problem
A u = lambda u with A = L^-1 K L^-T (Golub & Van Loan, *Matrix Computations*, 4th ed., 2013,
sec. 8.7, from memory). The derivative of a simple eigenvalue follows from the stationarity of
the Rayleigh quotient (Fox, R.L. & Kapoor, M.P. (1968), "Rates of change of eigenvalues and
eigenvectors", AIAA J. 6(12), 2426-2429, from memory):

    d lambda / d ln E = (E / E_0) u^T A^E u,     d lambda / d ln G = (G / G_0) u^T A^G u,

and with f = sqrt(lambda) / 2 pi, d ln f / d ln E = (d lambda / d ln E) / (2 lambda).

Fit
---
Unknowns x = (ln E, ln G), or ln E alone with G = G_0 E / E_0 (the base material's ratio)
when no measured partial carries shear information (neither a torsional partial nor a third or
higher bending partial). Residuals in cents, one per identified partial i,

    r_i = 1200 log2(f_model,i / f_measured,i) / s_i   (``acoustics.pitch.CENTS_PER_LN`` ln),

are minimised by ``scipy.optimize.least_squares`` (trust-region reflective) with the analytic
Jacobian J_ij = (1200 / ln 2) (d ln f_i / d x_j) / s_i. Covariance (Press et al., *Numerical
Recipes*, 3rd ed., 2007, sec. 15.4-15.5, from memory):

- measured uncertainties s_i (cents): C = (J^T J)^-1, scaled by the reduced chi-square when it
  exceeds 1 (the model or the measurement is then worse than the stated uncertainties);
- none given (s_i = 1): C = s^2 (J^T J)^-1 with s^2 = sum r^2 / (n - p); undetermined when
  n = p.

Since x holds logarithms, sd(E) / E = sqrt(C_00).

Identification
--------------
Which measured partial is which mode is decided before the fit. Candidates: bending 1..n,
torsion 1, lateral 1. A scan over the shear ratio G / G_0 (a geometric grid over a factor 2
either way) and over "partial i is bending k" (k = 1..3, which fixes E) predicts every
candidate; measured partials are matched one-to-one to candidates by the Hungarian method
(``scipy.optimize.linear_sum_assignment``) with the truncated cost min((d / tau)^2, 1), d the
distance in cents and tau the identification tolerance, so a partial further than tau from any
candidate stays unidentified at the price 1. Each distinct assignment the scan finds is then
fitted, re-matched with the fitted model and re-fitted until it no longer changes; the final
score is the truncated cost of the fitted residuals, plus 1 per unidentified partial, plus 0.3
per bending mode missing below the highest identified one (a tap nearly always shows the lower
bending modes), plus a weak prior 0.05 ((ln(E/E_0))^2 + (ln(G E_0 / (E G_0)))^2) / (ln 2)^2
that only breaks ties, plus 1 when the fit is held by a bound (E beyond a factor 3 of E_0, or
G/E beyond a factor 2 of G_0/E_0: implausible moduli). The lowest score wins; a runner-up
within 0.3 is reported as an ambiguity. An assignment must contain a bending partial (E comes
from bending).

Losses
------
A partial with 1/e amplitude decay time tau rings with loss factor eta = 1 / (pi f tau)
(Cremer, Heckl & Petersson, *Structure-Borne Sound*, 3rd ed., 2005, ch. 2, from memory). A
tap's decay includes losses to the supports and radiation, so this is an upper bound on the
material's own loss factor.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import scipy.linalg
from numpy.typing import ArrayLike, NDArray
from scipy.optimize import least_squares, linear_sum_assignment
from tonewright.acoustics.pitch import CENTS_PER_LN
from tonewright.forward import Bar, moduli_split, solve

from tonewright.errors import InputError

__all__ = [
    "DEFAULT_COUNTS",
    "Calibration",
    "Hypothesis",
    "IdentifiedPartial",
    "ModuliFit",
    "ModuliModel",
    "calibrate_bar",
    "fit_moduli",
    "identify_partials",
    "loss_factor_from_decay",
    "moduli_model",
]

DEFAULT_COUNTS: Mapping[str, int] = {"bending": 6, "torsion": 1, "lateral": 1}
MISSING_BENDING_PENALTY = 0.3  # score per lower bending mode absent from an assignment
AMBIGUITY_MARGIN = 0.3  # a runner-up this close to the best score is reported
MAX_E_FACTOR = 3.0  # E may differ from the starting material by this factor either way
MAX_RATIO_FACTOR = 2.0  # and G/E from the starting material's G/E by this factor
PRIOR_WEIGHT = 0.05  # score per (factor 2)^2 away from the starting E and G/E: a tie-breaker
MAX_CANDIDATES = 6  # distinct assignments from the scan that are fitted, at most
SCAN_MARGIN = 1.5  # ... and only those whose scan cost is this close to the best


def loss_factor_from_decay(f_hz: ArrayLike, decay_s: ArrayLike) -> NDArray[np.float64]:
    """Loss factor ``eta = 1 / (pi f tau)`` of a partial with 1/e amplitude time ``tau``."""
    return 1.0 / (np.pi * np.asarray(f_hz, dtype=float) * np.asarray(decay_s, dtype=float))


# ---------------------------------------------------------------------------------------------
# The model, linear in E and G


@dataclass(frozen=True, eq=False)
class _Family:
    name: str
    count: int
    n_rigid: int
    A_E: NDArray[np.float64]  # L^-1 K^E L^-T at E_0
    A_G: NDArray[np.float64]  # L^-1 K^G L^-T at G_0
    A_s: NDArray[np.float64]  # supports (cords, springs)


@dataclass(frozen=True, eq=False)
class ModuliModel:
    """Candidate modes of a one-material bar as functions of E and G (density fixed).

    ``labels`` lists the modes as ``(family, order)``; ``E_ref`` and ``G_ref`` are the moduli
    the matrices were assembled with.
    """

    E_ref: float
    G_ref: float
    labels: tuple[tuple[str, int], ...]
    families: tuple[_Family, ...]

    def frequencies(self, E: float, G: float) -> NDArray[np.float64]:
        """Frequencies (Hz) of every labelled mode (eigenvalues only: cheaper than slopes)."""
        a, g = E / self.E_ref, G / self.G_ref
        f = []
        for fam in self.families:
            A = a * fam.A_E + g * fam.A_G + fam.A_s
            hi = min(fam.n_rigid + fam.count, A.shape[0]) - 1
            lam = scipy.linalg.eigh(
                A, eigvals_only=True, subset_by_index=(0, hi), driver="evr", check_finite=False
            )
            f.append(np.sqrt(np.maximum(lam[fam.n_rigid :], 0.0)) / (2.0 * np.pi))
        return np.concatenate(f)

    def slopes(
        self, E: float, G: float
    ) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
        """Frequencies (Hz) and their logarithmic slopes d ln f / d ln E, d ln f / d ln G."""
        a, g = E / self.E_ref, G / self.G_ref
        f, dE, dG = [], [], []
        for fam in self.families:
            A = a * fam.A_E + g * fam.A_G + fam.A_s
            hi = min(fam.n_rigid + fam.count, A.shape[0]) - 1
            lam, U = scipy.linalg.eigh(A, subset_by_index=(0, hi), driver="evr", check_finite=False)
            lam, U = lam[fam.n_rigid :], U[:, fam.n_rigid :]
            lam = np.maximum(lam, 1e-300)
            # Rayleigh-quotient derivatives (Fox & Kapoor 1968), unit-norm u
            dlam_dlnE = a * np.einsum("ik,ij,jk->k", U, fam.A_E, U)
            dlam_dlnG = g * np.einsum("ik,ij,jk->k", U, fam.A_G, U)
            f.append(np.sqrt(lam) / (2.0 * np.pi))
            dE.append(0.5 * dlam_dlnE / lam)
            dG.append(0.5 * dlam_dlnG / lam)
        return np.concatenate(f), np.concatenate(dE), np.concatenate(dG)


# Rayleigh-Ritz reduction: A(E, G) = a A_E + g A_G + A_s has eigenvectors that depend on
# g / a (and weakly on a, through the supports); the wanted eigenvectors sampled across the
# fit's range span a small space in which every (E, G) of the range is solved to rounding
# (checked in tests/test_calibrate.py against the full matrices).
_RITZ_SAMPLES = tuple(
    (a, a * r)
    for a in (1.0 / MAX_E_FACTOR, 1.0, MAX_E_FACTOR)
    for r in np.geomspace(1.0 / MAX_RATIO_FACTOR, MAX_RATIO_FACTOR, 3)
)
_RITZ_EXTRA = 10  # eigenvectors past the wanted ones at each sample


def _ritz_reduced(fam: _Family) -> _Family:
    """``fam`` projected on the eigenvectors of its wanted modes sampled over the fit's range
    of E and G/E; unchanged when that space is not much smaller than the full one."""
    n = fam.A_E.shape[0]
    top = min(fam.n_rigid + fam.count + _RITZ_EXTRA, n) - 1
    vectors = []
    for a, g in _RITZ_SAMPLES:
        A = a * fam.A_E + g * fam.A_G + fam.A_s
        vectors.append(
            scipy.linalg.eigh(A, subset_by_index=(0, top), driver="evr", check_finite=False)[1]
        )
    U, sv, _ = scipy.linalg.svd(np.hstack(vectors), full_matrices=False, check_finite=False)
    V = U[:, sv > 1e-10 * sv[0]]
    if V.shape[1] > 0.6 * n:
        return fam
    project = lambda A: V.T @ A @ V  # noqa: E731
    return _Family(
        fam.name, fam.count, fam.n_rigid, project(fam.A_E), project(fam.A_G), project(fam.A_s)
    )


def moduli_model(
    bar: Bar,
    counts: Mapping[str, int] = DEFAULT_COUNTS,
    theory: str = "timoshenko",
    tol_cents: float = 0.05,
) -> ModuliModel:
    """Assemble the split stiffness matrices once, on a mesh fine enough at the bar's material.

    The mesh is the one ``forward.solve`` reaches for ``tol_cents`` at the starting material;
    moduli within the calibration's range change the mode shapes too little to need another.
    """
    reached = solve(bar, counts, tol_cents=tol_cents, theory=theory, initial_elements=4)
    names = [name for name, count in counts.items() if count > 0]
    split = moduli_split(
        bar, names, min_elements=reached.elements, degree=reached.degree, theory=theory
    )
    families, labels = [], []
    for name in names:
        fam_split = split[name]
        Lc = scipy.linalg.cholesky(fam_split.M, lower=True, check_finite=False)

        def reduce(K: NDArray, Lc: NDArray = Lc) -> NDArray:
            X = scipy.linalg.solve_triangular(Lc, K, lower=True, check_finite=False)
            A = scipy.linalg.solve_triangular(Lc, X.T, lower=True, check_finite=False)
            return 0.5 * (A + A.T)

        fam = _ritz_reduced(
            _Family(
                name=name,
                count=min(counts[name], fam_split.M.shape[0] - fam_split.n_rigid),
                n_rigid=fam_split.n_rigid,
                A_E=reduce(fam_split.K_E),
                A_G=reduce(fam_split.K_G),
                A_s=reduce(fam_split.K_supports),
            )
        )
        families.append(fam)
        labels += [(name, k + 1) for k in range(fam.count)]
    m = bar.material
    return ModuliModel(E_ref=m.E, G_ref=m.G, labels=tuple(labels), families=tuple(families))


# ---------------------------------------------------------------------------------------------
# Least-squares fit of E (and G) to identified partials


@dataclass(frozen=True)
class ModuliFit:
    """Fitted moduli (Pa) with one-standard-deviation uncertainties (NaN: not determined)."""

    E: float
    G: float
    E_sd: float
    G_sd: float
    G_fitted: bool
    f_model_hz: NDArray[np.float64]
    residual_cents: NDArray[np.float64]
    chi2: float
    dof: int
    status: int
    message: str
    at_bound: bool = False


def fit_moduli(
    model: ModuliModel,
    modes: Sequence[int],
    f_hz: ArrayLike,
    sd_cents: ArrayLike | None = None,
    *,
    fit_G: bool = True,
    E0: float | None = None,
    G0: float | None = None,
) -> ModuliFit:
    """Least squares in cents of E (and G) to partials ``f_hz`` identified as ``model.labels``
    indices ``modes``; without ``fit_G``, G keeps the ratio G_ref / E_ref.

    Unknowns are ln E and ln(G / E), bounded to a factor ``MAX_E_FACTOR`` and
    ``MAX_RATIO_FACTOR`` around the reference material: beyond them the partials are
    mis-identified or the input is wrong, not the material unusual.
    """
    idx = np.asarray(modes, dtype=int)
    f = np.asarray(f_hz, dtype=float)
    weighted = sd_cents is not None
    s = np.ones_like(f) if sd_cents is None else np.asarray(sd_cents, dtype=float)
    lnE_ref, ln_ratio_ref = np.log(model.E_ref), np.log(model.G_ref / model.E_ref)
    E_start = model.E_ref if E0 is None else E0
    G_start = model.G_ref if G0 is None else G0
    lo = [lnE_ref - np.log(MAX_E_FACTOR)]
    hi = [lnE_ref + np.log(MAX_E_FACTOR)]
    x0 = [np.log(E_start)]
    if fit_G:
        lo.append(ln_ratio_ref - np.log(MAX_RATIO_FACTOR))
        hi.append(ln_ratio_ref + np.log(MAX_RATIO_FACTOR))
        x0.append(np.log(G_start / E_start))
    lo, hi = np.array(lo), np.array(hi)
    x0 = np.clip(np.array(x0), lo + 1e-9, hi - 1e-9)

    def moduli(x: NDArray) -> tuple[float, float]:
        E = float(np.exp(x[0]))
        return E, E * float(np.exp(x[1] if fit_G else ln_ratio_ref))

    memo: dict[bytes, tuple] = {}

    def slopes(x: NDArray) -> tuple:
        # least_squares asks for the residual and the Jacobian at the same x: solve once
        key = x.tobytes()
        if key not in memo:
            memo.clear()
            memo[key] = model.slopes(*moduli(x))
        return memo[key]

    def residual(x: NDArray) -> NDArray:
        fm = slopes(x)[0][idx]
        return CENTS_PER_LN * np.log(fm / f) / s

    def jacobian(x: NDArray) -> NDArray:
        _, dE, dG = slopes(x)
        # d/d ln E at fixed G/E moves both moduli; d/d ln(G/E) moves G alone
        cols = [dE[idx] + dG[idx], dG[idx]] if fit_G else [dE[idx] + dG[idx]]
        return CENTS_PER_LN * np.column_stack(cols) / s[:, None]

    res = least_squares(residual, x0, jac=jacobian, bounds=(lo, hi), method="trf", xtol=1e-12)
    r, J = res.fun, res.jac
    n, p = r.size, x0.size
    chi2 = float(r @ r)
    dof = n - p
    try:
        cov = np.linalg.inv(J.T @ J)
    except np.linalg.LinAlgError:
        cov = np.full((p, p), np.nan)
    if weighted:
        cov = cov * max(1.0, chi2 / dof) if dof > 0 else cov
    else:
        cov = cov * (chi2 / dof) if dof > 0 else np.full((p, p), np.nan)
    E, G = moduli(res.x)
    E_sd = E * float(np.sqrt(cov[0, 0]))
    # ln G = x_0 + x_1
    G_sd = G * float(np.sqrt(cov[0, 0] + cov[1, 1] + 2 * cov[0, 1])) if fit_G else float("nan")
    at_bound = bool(np.any(res.active_mask != 0))
    fm = model.frequencies(E, G)[idx]
    return ModuliFit(
        E=E,
        G=G,
        E_sd=E_sd,
        G_sd=G_sd,
        G_fitted=fit_G,
        f_model_hz=fm,
        residual_cents=CENTS_PER_LN * np.log(fm / f),
        chi2=chi2,
        dof=dof,
        status=int(res.status),
        message=str(res.message),
        at_bound=at_bound,
    )


# ---------------------------------------------------------------------------------------------
# Identification


def _assign(f_model: NDArray, f_meas: NDArray, tau: float) -> tuple[tuple[int | None, ...], float]:
    """One-to-one matching with truncated quadratic cost; returns mode index per partial."""
    d = CENTS_PER_LN * np.log(f_model[None, :] / f_meas[:, None])
    C = np.minimum((d / tau) ** 2, 1.0)
    rows, cols = linear_sum_assignment(C)
    out: list[int | None] = [None] * f_meas.size
    for i, j in zip(rows, cols, strict=True):
        if abs(d[i, j]) < tau:
            out[i] = int(j)
    cost = sum(1.0 if j is None else float(C[i, j]) for i, j in enumerate(out))
    return tuple(out), cost


def _shear_informative(labels: Sequence[tuple[str, int]], assigned: Sequence[int]) -> bool:
    """Does a partial carry shear: torsion, or bending 3 and up (shear lowers it most)?"""
    return any(
        labels[j][0] == "torsion" or (labels[j][0] == "bending" and labels[j][1] >= 3)
        for j in assigned
    )


def _missing_bending(labels: Sequence[tuple[str, int]], assigned: Sequence[int]) -> int:
    orders = [labels[j][1] for j in assigned if labels[j][0] == "bending"]
    return (max(orders) - len(orders)) if orders else 0


@dataclass(frozen=True)
class Hypothesis:
    """One identification: the ``model.labels`` index of each measured partial (None:
    unidentified), its score (lower is better; see the module docstring) and its fit."""

    assignment: tuple[int | None, ...]
    score: float
    fit: ModuliFit


def _fit_assignment(
    model: ModuliModel,
    f: NDArray,
    sd: NDArray | None,
    assignment: tuple[int | None, ...],
    E: float,
    G: float,
    tau: float,
) -> Hypothesis | None:
    """Fit, re-match with the fitted model, repeat until the assignment settles."""
    seen = set()
    fit, fitted = None, assignment
    for _ in range(5):
        rows = [i for i, j in enumerate(assignment) if j is not None]
        cols = [assignment[i] for i in rows]
        if not any(model.labels[j][0] == "bending" for j in cols):
            return None
        fit = fit_moduli(
            model,
            cols,
            f[rows],
            None if sd is None else sd[rows],
            fit_G=_shear_informative(model.labels, cols),
            E0=E,
            G0=G,
        )
        E, G = fit.E, fit.G
        fitted = assignment
        seen.add(assignment)
        new, _ = _assign(model.frequencies(E, G), f, tau)
        if new in seen:
            break
        assignment = new
    assignment = fitted  # the last assignment that was fitted (a cycle ends on it too)
    rows = [i for i, j in enumerate(assignment) if j is not None]
    truncated = np.minimum((fit.residual_cents / tau) ** 2, 1.0)
    prior = np.log([fit.E / model.E_ref, (fit.G / fit.E) / (model.G_ref / model.E_ref)])
    score = (
        float(truncated.sum())
        + (f.size - len(rows))
        + MISSING_BENDING_PENALTY * _missing_bending(model.labels, [assignment[i] for i in rows])
        + PRIOR_WEIGHT * float(np.sum((prior / np.log(2.0)) ** 2))
        + (1.0 if fit.at_bound else 0.0)  # held by a bound: implausible moduli
    )
    return Hypothesis(assignment, score, fit)


def identify_partials(
    model: ModuliModel,
    f_hz: ArrayLike,
    sd_cents: ArrayLike | None = None,
    tolerance_cents: float = 30.0,
    grid: int = 29,
) -> list[Hypothesis]:
    """Fitted hypotheses (assignment of partials to ``model.labels``), best first."""
    f = np.asarray(f_hz, dtype=float)
    sd = None if sd_cents is None else np.asarray(sd_cents, dtype=float)
    bending = {k: j for j, (fam, k) in enumerate(model.labels) if fam == "bending" and k <= 3}
    found: dict[tuple[int | None, ...], tuple[float, float, float]] = {}
    for r in np.geomspace(1.0 / MAX_RATIO_FACTOR, MAX_RATIO_FACTOR, grid):
        F = model.frequencies(model.E_ref, r * model.G_ref)
        for fi in f:
            for k, j in bending.items():
                c = (fi / F[j]) ** 2  # E and G both times c scale every frequency by sqrt(c)
                if not 1.0 / MAX_E_FACTOR <= c <= MAX_E_FACTOR:
                    continue
                assignment, cost = _assign(F * np.sqrt(c), f, tolerance_cents)
                cost += MISSING_BENDING_PENALTY * (k - 1)
                if assignment not in found or cost < found[assignment][0]:
                    found[assignment] = (cost, c * model.E_ref, c * r * model.G_ref)
    ranked = sorted(found.items(), key=lambda kv: kv[1][0])[:MAX_CANDIDATES]
    # scan costs are rough (grid, scaling); fitting can improve a candidate by about the
    # missing-mode and grid terms, not by whole partials
    ranked = [kv for kv in ranked if kv[1][0] <= ranked[0][1][0] + SCAN_MARGIN]
    out: dict[tuple[int | None, ...], Hypothesis] = {}
    for assignment, (_, E, G) in ranked:
        h = _fit_assignment(model, f, sd, assignment, E, G, tolerance_cents)
        if h is not None and (h.assignment not in out or h.score < out[h.assignment].score):
            out[h.assignment] = h
    return sorted(out.values(), key=lambda h: h.score)


# ---------------------------------------------------------------------------------------------
# The whole calibration


@dataclass(frozen=True)
class IdentifiedPartial:
    """A measured partial and what it was identified as (family None: unidentified)."""

    frequency_hz: float
    family: str | None
    order: int | None
    model_hz: float
    residual_cents: float
    loss_factor: float

    @property
    def label(self) -> str:
        return "unidentified" if self.family is None else f"{self.family} {self.order}"


@dataclass(frozen=True)
class Calibration:
    """Result of a calibration. Moduli in Pa, density kg/m^3; NaN marks "not determined".

    ``model_modes`` are all candidate modes at the fitted moduli, ``(family, order, Hz)``.
    """

    E: float
    G: float
    E_sd: float
    G_sd: float
    G_fitted: bool
    rho: float
    partials: tuple[IdentifiedPartial, ...]
    model_modes: tuple[tuple[str, int, float], ...]
    loss_factor: float
    rms_cents: float
    warnings: tuple[str, ...]
    status: int
    message: str

    @property
    def identified(self) -> tuple[IdentifiedPartial, ...]:
        return tuple(p for p in self.partials if p.family is not None)


def _validate(f: NDArray, sd: NDArray | None, decay: NDArray | None, tau: float) -> None:
    if f.ndim != 1 or f.size == 0:
        raise InputError("partials: none given; give at least the first bending partial (Hz)")
    if not np.all(np.isfinite(f)) or np.any(f <= 0):
        raise InputError(f"partials: got {f.tolist()}; each must be a positive frequency in Hz")
    fs = np.sort(f)
    close = np.flatnonzero(CENTS_PER_LN * np.diff(np.log(fs)) < 0.5)
    if close.size:
        i = int(close[0])
        raise InputError(
            f"partials: {fs[i]:g} and {fs[i + 1]:g} Hz are the same partial given twice "
            "(closer than 0.5 cent); give each once"
        )
    for name, arr in (("uncertainties", sd), ("decays", decay)):
        # NaN means "not measured"; zero or negative is an error
        if arr is not None and (arr.shape != f.shape or np.any(arr <= 0)):
            raise InputError(f"{name}: need one positive value per partial, got {arr.tolist()}")
    if not tau > 0:
        raise InputError(f"tolerance_cents: got {tau}; must be positive")


def calibrate_bar(
    bar: Bar,
    f_hz: ArrayLike,
    sd_cents: ArrayLike | None = None,
    decay_s: ArrayLike | None = None,
    *,
    theory: str = "timoshenko",
    tolerance_cents: float = 30.0,
    counts: Mapping[str, int] = DEFAULT_COUNTS,
    sd_floor_cents: float = 0.05,
) -> Calibration:
    """Identify the partials of a one-material bar and fit E (and G) to them.

    ``bar`` carries the measured geometry, supports and density, and a starting material
    (E, G, nu) whose shear ratio G/E is kept when G cannot be fitted. ``sd_cents`` are the
    partials' measurement uncertainties (NaN: 1 cent assumed; combined in quadrature with
    ``sd_floor_cents``, so one very sharp partial cannot outweigh the rest); ``decay_s`` their
    1/e decay times (NaN: not measured). Raises InputError for partials that cannot be
    matched to the blank's modes.
    """
    f = np.atleast_1d(np.asarray(f_hz, dtype=float))
    sd = None if sd_cents is None else np.atleast_1d(np.asarray(sd_cents, dtype=float))
    decay = None if decay_s is None else np.atleast_1d(np.asarray(decay_s, dtype=float))
    _validate(f, sd, decay, tolerance_cents)
    if sd is not None:
        sd = np.hypot(np.where(np.isfinite(sd), sd, 1.0), sd_floor_cents)
    order = np.argsort(f)
    f = f[order]
    sd = None if sd is None else sd[order]
    decay = None if decay is None else decay[order]

    model = moduli_model(bar, counts, theory=theory)
    hypotheses = identify_partials(model, f, sd, tolerance_cents)
    shown = ", ".join(f"{v:g}" for v in f)
    if not hypotheses:
        raise InputError(
            f"partials: {shown} Hz match no bending mode of the blank within a factor "
            f"{MAX_E_FACTOR:g} in E; check the dimensions (mm), the mass and the material"
        )
    best = hypotheses[0]
    fit = best.fit
    rows = [i for i, j in enumerate(best.assignment) if j is not None]
    if f.size >= 2 and len(rows) < 2:
        raise InputError(
            f"partials: {shown} Hz cannot be matched to the modes of the blank (at most one of "
            "them fits the model); check the dimensions (mm), the mass and the material, or "
            "give only the partials you are sure of"
        )
    warnings: list[str] = []
    labels = model.labels
    if len(hypotheses) > 1 and hypotheses[1].score - best.score < AMBIGUITY_MARGIN:
        other = hypotheses[1]

        def describe(a: tuple[int | None, ...]) -> str:
            return ", ".join(
                f"{f[i]:.1f} Hz = {labels[j][0]} {labels[j][1]}"
                for i, j in enumerate(a)
                if j is not None
            )

        warnings.append(
            f"identification is ambiguous: [{describe(best.assignment)}] fits about as well as "
            f"[{describe(other.assignment)}]; add partials (a third bending partial or the first "
            "torsional one) or check the blank"
        )
    E_ratio = fit.E / bar.material.E
    if not 0.5 <= E_ratio <= 2.0:
        warnings.append(
            f"fitted E is {E_ratio:.2f} times the starting material's: check the dimensions, the "
            "mass and the material"
        )
    large = [
        (f[i], labels[best.assignment[i]], r)
        for i, r in zip(rows, fit.residual_cents, strict=True)
        if abs(r) > 10.0
    ]
    for fi, (fam, k), r in large:
        warnings.append(
            f"{fi:.1f} Hz ({fam} {k}) is {r:+.1f} cents from the fitted model: a blank that is "
            "not uniform, or a mis-identified partial"
        )
    if not fit.G_fitted:
        _, dE, dG = model.slopes(fit.E, fit.G)
        j = min(
            (best.assignment[i] for i in rows if labels[best.assignment[i]][0] == "bending"),
            key=lambda j: labels[j][1],
        )
        # E that keeps that partial in place if G/E were 20 % higher: dE dlnE + dG dln G = 0
        shift = -dG[j] / (dE[j] + dG[j]) * np.log(1.2)
        warnings.append(
            "G not measured (needs the first torsional partial or a third bending partial): it "
            f"keeps the starting material's G/E ratio; were that ratio 20 % higher, E would be "
            f"{100 * np.expm1(shift):+.1f} %"
        )
    if fit.status <= 0:
        warnings.append(f"least squares did not converge: {fit.message}")

    eta = loss_factor_from_decay(f, decay) if decay is not None else np.full(f.size, np.nan)
    model_at = model.frequencies(fit.E, fit.G)
    partials = []
    residual = dict(zip(rows, fit.residual_cents, strict=True))
    for i, j in enumerate(best.assignment):
        fam, k = labels[j] if j is not None else (None, None)
        partials.append(
            IdentifiedPartial(
                frequency_hz=float(f[i]),
                family=fam,
                order=k,
                model_hz=float(model_at[j]) if j is not None else float("nan"),
                residual_cents=float(residual.get(i, np.nan)),
                loss_factor=float(eta[i]),
            )
        )
    bending_eta = [p.loss_factor for p in partials if p.family == "bending"]
    known = np.isfinite(bending_eta)
    loss = float(np.median(np.asarray(bending_eta)[known])) if np.any(known) else float("nan")
    rms = float(np.sqrt(np.mean(fit.residual_cents**2)))
    return Calibration(
        E=fit.E,
        G=fit.G,
        E_sd=fit.E_sd,
        G_sd=fit.G_sd,
        G_fitted=fit.G_fitted,
        rho=bar.material.rho,
        partials=tuple(partials),
        model_modes=tuple((fam, k, float(v)) for (fam, k), v in zip(labels, model_at, strict=True)),
        loss_factor=loss,
        rms_cents=rms,
        warnings=tuple(warnings),
        status=fit.status,
        message=f"{len(rows)} of {f.size} partials identified; rms residual {rms:.2f} cent",
    )
