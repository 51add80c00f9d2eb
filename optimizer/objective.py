"""The design objective: errors in cents of the tuned partials, clearance of unwanted modes.

For a goal partial with target f_t, tolerance tol and weight w, the residual is
    r = w * 1200 log2(f / f_t) / tol,
so |r| <= w means "within tolerance". A derived goal such as a chime's strike note combines
bending partials as a weighted geometric mean, f = prod_k (f_k / d_k)^(a_k), and its residual
is the same sum in cents. With lambda = (2 pi f)^2,
    d cents / d s = (1200 / ln 2) * (1 / (2 lambda)) * d lambda / d s,
and d lambda / d s comes from ``optimizer.sensitivity``.

Unwanted modes (torsion, lateral bending) must keep clear of every goal partial, taken at its
target frequency (where it will sound once tuned, whichever model certifies it): the gap
|f_m - f_p| must be at least ``keep_clear_hz(f_p)`` (the caller's rule, e.g. half a critical
bandwidth: outside the critical band centred on the partial), or at most ``coincidence_hz``
(a mode that close merges with the partial; common practice, no source). A violation adds a
hinge residual, the distance still to go to the band's edge (0 when clear): the search pushes
modes out of the band, never into coincidence, which no model predicts reliably enough.

Modes are identified within their family by shape as well as order: the modal assurance
criterion (Allemang, R. J. & Brown, D. L., 1982, "A correlation coefficient for modal vector
analysis", Proc. 1st IMAC, 110-116) against the shapes of the first design evaluated with
shapes (the global search asks for eigenvalues only); in the decoupled
beam families the two always agree, and a disagreement is reported.

The ``Evaluator`` is configuration only (space, goals, clearance, mesh, weights) and never
changes; variants (shifted goals, scaled unwanted modes, a finer mesh) are new evaluators.
What evaluating changes (the solve counter, the shape reference for the MAC, a small cache)
lives in an ``EvaluationLog`` the caller passes in (as pycma keeps parameters and state apart).
"""

from __future__ import annotations

import itertools
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from types import MappingProxyType

import numpy as np
from tonewright.acoustics.pitch import cents
from tonewright.forward.geometry import Part
from tonewright.forward.modal import (
    Discretisation,
    assemble_family,
    discretise,
    lowest_modes,
    section_coefficients,
)
from tonewright.forward.pattern import family_pattern, pattern_modes
from tonewright.optimizer.sensitivity import eigenvalue_gradients

__all__ = [
    "Clearance",
    "Evaluation",
    "EvaluationLog",
    "Evaluator",
    "Goal",
    "UnwantedMode",
    "mac",
    "ratios_by_order",
]

CENTS_PER_LN = 1200.0 / np.log(2.0)
CLEAR_MARGIN = 0.01  # the clearance hinge pushes modes this fraction beyond the band


@dataclass(frozen=True)
class Goal:
    """A partial to tune: family and order within it, or a derived ``strike`` note with
    ``components`` = ((bending order, divisor, exponent), ...)."""

    family: str
    order: int
    f_hz: float
    tolerance_cents: float = 1.0
    weight: float = 1.0
    components: tuple[tuple[int, float, float], ...] = ()

    @property
    def label(self) -> str:
        return "strike note" if self.family == "strike" else f"{self.family} {self.order}"


@dataclass(frozen=True)
class Clearance:
    """Families that must keep clear of the goals, and the band to keep clear by."""

    families: tuple[str, ...]
    keep_clear_hz: Callable[[np.ndarray], np.ndarray]
    coincidence_hz: float = 3.0
    weight: float = 1.0


def ratios_by_order(ratios: np.ndarray | None, n: int) -> np.ndarray:
    """``n`` ratios by mode order from a family's array (orders past it keep its last ratio;
    none: 1), as ``Evaluator.with_unwanted_scale`` applies them."""
    if ratios is None or ratios.size == 0:
        return np.ones(n)
    return np.concatenate([ratios[:n], np.full(max(0, n - ratios.size), ratios[-1])])


@dataclass(frozen=True)
class UnwantedMode:
    family: str
    order: int
    f_hz: float
    nearest_goal: str
    gap_hz: float
    band_hz: float
    coincidence_hz: float

    @property
    def clear(self) -> bool:
        return not (self.coincidence_hz < self.gap_hz < self.band_hz)


@dataclass(frozen=True, eq=False)
class Evaluation:
    u: np.ndarray
    achieved_hz: np.ndarray  # per goal
    errors_cents: np.ndarray  # per goal
    unwanted: tuple[UnwantedMode, ...]
    clearance_violation: np.ndarray  # hinge values (Hz), one per unwanted mode
    residuals: np.ndarray
    jacobian: np.ndarray | None
    shapes: dict[str, np.ndarray] = field(repr=False, default_factory=dict)
    mac_ok: bool = True
    family_hz: dict[str, np.ndarray] = field(repr=False, default_factory=dict)  # beam, unscaled
    clearance_ok: bool = True  # no unwanted mode inside a band (exact bands, not the hinge's)

    def within_tolerance(self, goals: Sequence[Goal]) -> bool:
        tol = np.array([g.tolerance_cents for g in goals])
        return bool(np.all(np.abs(self.errors_cents) <= tol))


def mac(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Modal assurance criterion between the columns of a and of b (sampled shapes)."""
    num = np.abs(a.T @ b) ** 2
    return num / np.outer(np.sum(a * a, axis=0), np.sum(b * b, axis=0))


@dataclass
class EvaluationLog:
    """What evaluating changes, kept apart from the objective (as pycma keeps its state apart
    from its parameters): the forward solves counted, the mode shapes the partials are tracked
    against (the first design evaluated, for the MAC), and a small cache of recent evaluations
    keyed by the evaluator that made them. One log per search; the ``Evaluator`` never
    changes."""

    solves: int = 0
    reference_shapes: dict[str, np.ndarray] | None = None
    cache: dict[tuple[int, bytes], Evaluation] = field(default_factory=dict, repr=False)


_TOKENS = itertools.count()


class Evaluator:
    """The objective: a design space, goals, the clearance and the mesh, fixed at construction.

    It is immutable: ``with_goals``, ``with_unwanted_scale`` and ``refined`` return new
    evaluators. What evaluating changes (the solve counter, the shape reference, a cache) lives
    in an ``EvaluationLog`` passed to ``evaluate``; without one, a throwaway log is used."""

    space: object
    goals: tuple[Goal, ...]
    partials_hz: np.ndarray
    clearance: Clearance | None
    theory: str
    elements: int
    mesh_tol_cents: float
    counts: Mapping[str, int]
    degree: int
    unwanted_scale: Mapping[str, np.ndarray]

    def __init__(
        self,
        space,
        goals: Sequence[Goal],
        clearance: Clearance | None = None,
        theory: str = "timoshenko",
        degree: int | None = None,
        elements: int = 4,
        mesh_tol_cents: float = 0.005,
        unwanted_scale: Mapping[str, np.ndarray] | None = None,
    ) -> None:
        put = object.__setattr__
        put(self, "space", space)
        put(self, "goals", tuple(goals))
        # unwanted modes are kept clear of where the partials will sound: the targets
        put(self, "partials_hz", np.array([g.f_hz for g in self.goals]))
        put(self, "clearance", clearance)
        put(self, "theory", theory)
        put(self, "elements", elements)
        put(self, "mesh_tol_cents", mesh_tol_cents)
        put(self, "counts", MappingProxyType(self._counts()))
        scale = {k: np.asarray(v, dtype=float) for k, v in (unwanted_scale or {}).items()}
        put(self, "unwanted_scale", MappingProxyType(scale))
        put(self, "degree", degree or self._converged_degree(space.part(space.start())))
        self._finish()

    def __setattr__(self, name: str, value) -> None:
        raise AttributeError(f"Evaluator is immutable: use with_goals/with_unwanted_scale ({name})")

    def _finish(self) -> None:
        put = object.__setattr__
        put(self, "_token", next(_TOKENS))
        fixed, patterns = None, {}
        if self.space.length_index is None:
            start = self.space.part(self.space.start())
            fixed = self._discretise(start, self.degree)
            coef = section_coefficients(start, fixed.quad.x)
            mirror = bool(getattr(self.space, "symmetric", False))
            patterns = {
                fam: family_pattern(start, fixed, fam, coef, symmetric=mirror)
                for fam in self.counts
            }
        put(self, "_fixed_disc", fixed)
        # the fixed mesh's assembly, built once: a design costs products and one eigen-solve
        put(self, "_patterns", MappingProxyType(patterns))

    def _derived(self, **changes) -> Evaluator:
        new = object.__new__(Evaluator)
        for name, value in {**self.__dict__, **changes}.items():
            object.__setattr__(new, name, value)
        new._finish()
        return new

    def with_goals(self, goals: Sequence[Goal]) -> Evaluator:
        """The same objective with other goals (same families and orders), e.g. shifted by a
        model defect. The clearance keeps referring to the sounding partials, ``partials_hz``."""
        return self._derived(goals=tuple(goals))

    def with_unwanted_scale(self, scale: Mapping[str, np.ndarray]) -> Evaluator:
        """The beam frequencies of the clearance families' modes (by order) multiplied by these
        ratios, e.g. 3D over beam at the current design: the clearance is then judged on
        frequencies a higher-fidelity model confirmed. Orders beyond a family's array keep its
        last ratio; an empty dict is the beam model."""
        scale = {k: np.asarray(v, dtype=float) for k, v in scale.items()}
        return self._derived(unwanted_scale=MappingProxyType(scale))

    def refined(self, degree: int | None = None) -> Evaluator:
        """A finer mesh: the polynomial degree raised by two (after a certified solve disagreed
        with this mesh), or to ``degree`` when that is higher."""
        return self._derived(degree=max(self.degree + 2 if degree is None else degree, self.degree))

    def goals_hz(self) -> np.ndarray:
        """The goals' target frequencies (Hz), which may be shifted from ``partials_hz``."""
        return np.array([g.f_hz for g in self.goals])

    def _ratios(self, family: str, n: int) -> np.ndarray:
        return ratios_by_order(self.unwanted_scale.get(family), n)

    def _converged_degree(self, part: Part) -> int:
        """Lowest degree whose nested (p - 1 vs p) error estimate is within mesh_tol_cents
        for every mode the goals and the clearance need, on the starting design and, for a
        cut, on a deep one (three quarters of the depth limit everywhere): the mesh is then
        fixed for every design, and the final one is certified by ``forward.solve``."""
        parts = [part]
        if hasattr(self.space, "depth_limit"):
            deep = np.full(self.space.n, 0.75)  # a deep cut: three quarters of the limit
            if self.space.length_index is not None:
                deep[self.space.length_index] = 0.5
            parts.append(self.space.part(deep))
        for p in range(4, 13):
            if all(self._estimate(q, p) <= self.mesh_tol_cents for q in parts):
                return p
        return 12

    def _estimate(self, part: Part, p: int) -> float:
        disc = self._discretise(part, p)
        coef = section_coefficients(part, disc.quad.x)
        worst = 0.0
        for fam, count in self.counts.items():
            system = assemble_family(part, disc, fam, coef)
            hi = lowest_modes(system, count)[0]
            lo = lowest_modes(system, count, subspace=np.flatnonzero(system.lower))[0]
            n = min(hi.size, lo.size)
            # eigenvalues: half their interval in cents is the frequencies'
            worst = max(worst, float(np.max(0.5 * cents(lo[:n], hi[:n]))))
        return worst

    def _counts(self) -> dict[str, int]:
        counts: dict[str, int] = {}
        for g in self.goals:
            if g.family == "strike":
                top = max(c[0] for c in g.components)
                counts["bending"] = max(counts.get("bending", 0), top)
            else:
                counts[g.family] = max(counts.get(g.family, 0), g.order)
        if self.clearance:
            for fam in self.clearance.families:
                counts.setdefault(fam, 3)
        return counts

    def _discretise(self, part: Part, degree: int) -> Discretisation:
        # a smooth cut (spline, arch) needs no nodes at its knots: the quadrature is split
        # there, and fewer, higher-degree elements reach the same accuracy with fewer dofs
        smooth = getattr(self.space, "shape", None) in ("spline", "arch")
        nodes = 0 if smooth else 24
        return discretise(
            part,
            elements=2 * self.elements if smooth else self.elements,
            degree=degree,
            theory=self.theory,
            max_breakpoint_nodes=nodes,
        )

    def _solve(self, u: np.ndarray, log: EvaluationLog, vectors: bool = True):
        part = self.space.part(u)
        if self._fixed_disc is not None:
            return self._solve_fixed(part, log, vectors)
        disc = self._discretise(part, self.degree)
        coef = section_coefficients(part, disc.quad.x)
        top = max(g.f_hz for g in self.goals)
        out = {}
        for fam, count in self.counts.items():
            system = assemble_family(part, disc, fam, coef)
            n = count
            while True:
                lam, vec = lowest_modes(system, n)
                enough = lam.size < n or fam not in (
                    self.clearance.families if self.clearance else ()
                )
                if enough or np.sqrt(lam[-1]) / (2 * np.pi) > 1.3 * top or n >= 12:
                    break
                n += 3
            out[fam] = (lam, vec, system)
        log.solves += 1
        return part, disc, out

    def _solve_fixed(self, part: Part, log: EvaluationLog, vectors: bool):
        """The fast path on the fixed mesh: eigenvalues (and vectors only when asked) from
        the cached patterns; every clearance family down to 1.3 x the top goal, 12 at most."""
        disc = self._fixed_disc
        coef = section_coefficients(part, disc.quad.x)
        top = max(g.f_hz for g in self.goals)
        below = (2.0 * np.pi * 1.3 * top) ** 2
        clearing = self.clearance.families if self.clearance else ()
        out = {}
        for fam, count in self.counts.items():
            pattern = self._patterns[fam]
            lam, vec = pattern_modes(
                pattern,
                coef,
                count,
                vectors=vectors,
                below_lam=below if fam in clearing else None,
            )
            out[fam] = (lam, vec, pattern.system)
        log.solves += 1
        return part, disc, out

    def _frequencies(self, modes) -> tuple[np.ndarray, list[list[tuple[str, int, float]]]]:
        """Per goal: achieved frequency and the (family, index, exponent) lambdas it uses."""
        achieved, uses = [], []
        for g in self.goals:
            if g.family == "strike":
                lam = modes["bending"][0]
                logf, use = 0.0, []
                for order, divisor, exponent in g.components:
                    f = np.sqrt(lam[order - 1]) / (2 * np.pi)
                    logf += exponent * np.log(f / divisor)
                    use.append(("bending", order - 1, exponent))
                achieved.append(np.exp(logf))
                uses.append(use)
            else:
                lam = modes[g.family][0]
                if lam.size < g.order:
                    raise ValueError(f"the part has fewer than {g.order} {g.family} modes")
                achieved.append(np.sqrt(lam[g.order - 1]) / (2 * np.pi))
                uses.append([(g.family, g.order - 1, 1.0)])
        return np.array(achieved), uses

    def _unwanted(
        self, modes, achieved: np.ndarray
    ) -> tuple[list[UnwantedMode], np.ndarray, list, bool]:
        """Unwanted modes up to 1.3 x the top goal (for the report), a fixed-size hinge (for
        each clearance family and goal, the worst violation by any mode of the family), and
        whether every mode is clear of the exact bands (the verdict's test)."""
        if not self.clearance:
            return [], np.zeros(0), [], True
        c = self.clearance
        band = c.keep_clear_hz(achieved)
        found, hinge, which = [], [], []
        clear = True
        for fam in c.families:
            f = np.sqrt(np.maximum(modes[fam][0], 0.0)) / (2 * np.pi)
            f = f * self._ratios(fam, f.size)
            for k, fk in enumerate(f):
                if fk > 1.3 * achieved.max():
                    break
                gaps = np.abs(fk - achieved)
                j = int(np.argmin(gaps / band))
                found.append(
                    UnwantedMode(
                        fam,
                        k + 1,
                        float(fk),
                        self.goals[j].label,
                        float(gaps[j]),
                        float(band[j]),
                        c.coincidence_hz,
                    )
                )
            for j in range(achieved.size):
                gaps = np.abs(f - achieved[j])
                clear = clear and not np.any((gaps > c.coincidence_hz) & (gaps < band[j]))
                # aim 1 % beyond the band: a hinge converges onto its edge from inside
                edge = (1.0 + CLEAR_MARGIN) * band[j]
                inside = (gaps > c.coincidence_hz) & (gaps < edge)
                v = np.where(inside, edge - gaps, 0.0)  # always push the mode away
                k = int(np.argmax(v)) if v.size else 0
                hinge.append(float(v[k]) if v.size else 0.0)
                which.append((fam, k, j, float(gaps[k]) if v.size else 0.0, float(edge)))
        return found, np.array(hinge), which, bool(clear)

    def evaluate(
        self,
        u: np.ndarray,
        jacobian: bool = False,
        log: EvaluationLog | None = None,
        shapes: bool = True,
    ) -> Evaluation:
        """Residuals (and with ``jacobian`` their analytic Jacobian) at the scaled design ``u``;
        the solves are counted, and partials tracked by shape, in ``log``. ``shapes=False``
        (the global search, which reads residuals only) skips the mode shapes and the shape
        tracking: on a fixed mesh only eigenvalues are computed."""
        log = EvaluationLog() if log is None else log
        u = np.asarray(u, dtype=float)
        shapes = shapes or jacobian
        key = (self._token, u.tobytes())
        cached = log.cache.get(key)
        if cached is not None and (cached.jacobian is not None or not jacobian):
            if cached.shapes or not shapes:
                return cached
        part, disc, modes = self._solve(u, log, vectors=shapes)
        achieved, uses = self._frequencies(modes)
        errors = cents(achieved, self.goals_hz())
        scale = np.array([g.weight / g.tolerance_cents for g in self.goals])
        unwanted, hinge, which, clearance_ok = self._unwanted(modes, self.partials_hz)
        cw = self.clearance.weight if self.clearance else 0.0
        band = np.array([w[4] for w in which])
        residuals = np.concatenate([errors * scale, cw * 100.0 * hinge / np.maximum(band, 1e-9)])
        vectors = {fam: vec for fam, (lam, vec, system) in modes.items() if vec is not None}
        mac_ok = _track(log, vectors) if shapes else True
        J = None
        if jacobian:
            J = self._jacobian(u, part, disc, modes, uses, which, scale, cw, log)
        family_hz = {
            fam: np.sqrt(np.maximum(lam, 0.0)) / (2 * np.pi) for fam, (lam, _, _) in modes.items()
        }
        ev = Evaluation(
            u,
            achieved,
            errors,
            tuple(unwanted),
            hinge,
            residuals,
            J,
            vectors,
            mac_ok,
            family_hz,
            clearance_ok,
        )
        if len(log.cache) > 64:
            log.cache.clear()
        log.cache[key] = ev
        return ev

    def _dlam(self, u, part, disc, modes, log: EvaluationLog) -> dict[str, np.ndarray]:
        """d lambda / d u for every solved mode of every family, (n_modes, n_vars)."""
        n = self.space.n
        dcoef = self.space.coefficient_jacobian(u, part, disc.quad.x)
        li = self.space.length_index
        out = {}
        for fam, (lam, vec, system) in modes.items():
            grad = np.zeros((lam.size, n))
            if dcoef:
                shape_idx = [k for k in range(n) if k != li]
                g = eigenvalue_gradients(system, lam, vec, dcoef)
                grad[:, shape_idx] = g
            out[fam] = grad
        if li is not None:
            # the length stretches the mesh: a central difference, two extra solves
            h = 1e-6
            up, dn = u.copy(), u.copy()
            up[li] = min(u[li] + h, 1.0)
            dn[li] = max(u[li] - h, 0.0)
            _, _, mp = self._solve(up, log)
            _, _, mm = self._solve(dn, log)
            for fam in out:
                k = min(mp[fam][0].size, mm[fam][0].size, out[fam].shape[0])
                out[fam][:k, li] = (mp[fam][0][:k] - mm[fam][0][:k]) / (up[li] - dn[li])
        return out

    def _jacobian(self, u, part, disc, modes, uses, which, scale, cw, log: EvaluationLog):
        dlam = self._dlam(u, part, disc, modes, log)
        n = self.space.n
        rows = []
        for use in uses:
            row = np.zeros(n)
            for fam, idx, exponent in use:
                lam = modes[fam][0][idx]
                row += exponent * CENTS_PER_LN * dlam[fam][idx] / (2.0 * lam)
            rows.append(row)
        J_goals = np.array(rows) * scale[:, None]
        J_clear = np.zeros((len(which), n))
        coincidence = self.clearance.coincidence_hz if self.clearance else 0.0
        for r, (fam, k, j, gap, band) in enumerate(which):
            if not coincidence < gap < band:
                continue
            f_b = np.sqrt(modes[fam][0][k]) / (2 * np.pi)
            ratio = self._ratios(fam, k + 1)[k]
            df_m = ratio * dlam[fam][k] / (8 * np.pi**2 * f_b)  # df/dlambda = 1 / (8 pi^2 f)
            dgap = np.sign(ratio * f_b - self.partials_hz[j]) * df_m
            J_clear[r] = -dgap * cw * 100.0 / band
        return np.vstack([J_goals, J_clear])


def _track(log: EvaluationLog, shapes: dict[str, np.ndarray]) -> bool:
    """True when every goal family's modes still match the first design's by shape."""
    if log.reference_shapes is None:
        log.reference_shapes = {f: v for f, v in shapes.items() if f != "strike"}
        return True
    for fam, ref in log.reference_shapes.items():
        cur = shapes.get(fam)
        if cur is None or cur.shape[0] != ref.shape[0]:
            continue  # a new mesh (free length): order is the identification
        k = min(ref.shape[1], cur.shape[1])
        best = np.argmax(mac(ref[:, :k], cur[:, :k]), axis=1)
        if np.any(best != np.arange(k)):
            return False
    return True
