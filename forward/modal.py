"""Modes of bars, tubes and strings: family systems, supports, eigen-solution and
accuracy-controlled refinement.

Families and their energies (x along the part, primes d/dx):
- bending (vertical) and lateral, Timoshenko (default):
      U = 1/2 int E I theta'^2 + kappa G A (w' - theta)^2,  T = 1/2 int rho A w^2 + rho I theta^2
  (Timoshenko, S. P., 1921, Phil. Mag. 41, 744); Euler-Bernoulli: U = 1/2 int E I w''^2,
  T = 1/2 int rho A w^2;
- torsion (St-Venant): U = 1/2 int G J phi'^2,  T = 1/2 int rho I_p phi^2;
- axial: U = 1/2 int E A u'^2,  T = 1/2 int rho A u^2;
- transverse string: U = 1/2 int E I w''^2 + T_s w'^2,  T = 1/2 int mu w^2.
Each family is an independent generalized eigenproblem K phi = lambda M phi, lambda = omega^2.

Accuracy control: the hierarchical basis makes the degree p - 1 space a subspace of the
degree p space, so lambda_{p-1} >= lambda_p >= lambda_exact. The difference, in cents, bounds
the error of the degree p - 1 result and over-estimates that of the reported degree p result;
the largest element size is halved until it is below the requested tolerance for every reported
mode (the estimate compares degrees on one mesh, so the meshes need not be nested).
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg
from tonewright.acoustics.pitch import ratio_to_cents
from tonewright.forward.fem import (
    FieldLayout,
    Quadrature,
    Term,
    assemble,
    build_mesh,
    build_quadrature,
    c0_layout,
    c1_layout,
    evaluate_field,
    field_matrices,
)
from tonewright.forward.geometry import (
    Bar,
    Part,
    String,
    Tube,
    hole_centre_height,
    strongest_corners,
)
from tonewright.forward.sections import (
    cowper_hollow_circle,
    cowper_rectangle,
    hole_chord,
    rectangle_section,
    tube_section,
)

__all__ = [
    "FAMILIES",
    "Discretisation",
    "FamilyModes",
    "FamilySystem",
    "MeshModes",
    "ModalResult",
    "Mode",
    "ModuliSplit",
    "assemble_family",
    "discretise",
    "families_of",
    "lowest_modes",
    "mass_per_length",
    "modes_on_mesh",
    "moduli_split",
    "section_coefficients",
    "solve",
    "thickness_derivatives",
]

FAMILIES = ("bending", "lateral", "torsion", "axial", "transverse")
EigenSolver = Callable[[np.ndarray, np.ndarray, int], tuple[np.ndarray, np.ndarray]]


def families_of(part: Part) -> tuple[str, ...]:
    """Families a part has: a tube's lateral bending repeats its vertical bending."""
    if isinstance(part, String):
        return ("transverse",)
    if isinstance(part, Tube):
        return ("bending", "torsion", "axial")
    return ("bending", "lateral", "torsion", "axial")


# ---------------------------------------------------------------------------------------------
# Section coefficients at quadrature points


def bar_coefficients(
    b: np.ndarray,
    h: np.ndarray,
    chord: np.ndarray,
    z_hole: np.ndarray,
    E: float,
    G: float,
    rho: float,
    nu: float,
    shear_ratio: float = 1.0,
) -> dict[str, np.ndarray]:
    """Beam coefficients of a rectangular bar (complex-safe for complex-step derivatives).

    Vertical bending shears in the x-z plane (G); lateral bending and most of the twist of a
    wide section shear in the x-y plane (shear_ratio * G).
    """
    s = rectangle_section(b, h, chord, z_hole, shear_ratio)
    kGA = cowper_rectangle(nu) * G * s["A"]
    return {
        "EIy": E * s["Iy"],
        "EIz": E * s["Iz"],
        "kGA": kGA,
        "kGAz": shear_ratio * kGA,
        "rhoA": rho * s["A"],
        "rhoIy": rho * s["Iy"],
        "rhoIz": rho * s["Iz"],
        "GJ": G * s["J"],
        "rhoIp": rho * s["Ip"],
        "EA": E * s["A"],
    }


def tube_coefficients(D: np.ndarray, wall: np.ndarray, m) -> dict[str, np.ndarray]:
    """Beam coefficients of a round tube (complex-safe for complex-step derivatives)."""
    s = tube_section(D, wall)
    kappa = cowper_hollow_circle(m.nu, (D - 2.0 * wall) / D)
    return {
        "EIy": m.E * s["Iy"],
        "kGA": kappa * m.G * s["A"],
        "rhoA": m.rho * s["A"],
        "rhoIy": m.rho * s["Iy"],
        "GJ": m.G * s["J"],
        "rhoIp": m.rho * s["Ip"],
        "EA": m.E * s["A"],
    }


def hole_data(part: Bar, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Chord of every hole at x and the height of the hole centre there (zeros elsewhere)."""
    chord = np.zeros_like(x)
    z = np.zeros_like(x)
    for hole in part.holes:
        c = hole_chord(x, hole.x, hole.diameter)
        height = hole_centre_height(hole.height, float(part.thickness(np.array([hole.x]))[0]))
        chord = chord + c
        z = np.where(c > 0, height, z)
    return chord, z


def section_coefficients(part: Part, x: np.ndarray) -> dict[str, np.ndarray]:
    """Every beam coefficient the part's families need, at positions x."""
    if isinstance(part, Bar):
        m = part.material
        chord, z = hole_data(part, x)
        return bar_coefficients(
            part.width(x), part.thickness(x), chord, z, m.E, m.G, m.rho, m.nu, m.shear_ratio
        )
    if isinstance(part, Tube):
        return tube_coefficients(part.outer_diameter(x), part.wall(x), part.material)
    return {
        "EI": part.bending_stiffness(x),
        "T": np.full_like(x, part.tension),
        "mu": part.linear_density(x),
    }


# ---------------------------------------------------------------------------------------------
# Discretisation and family systems


@dataclass(frozen=True, eq=False)
class Discretisation:
    """A mesh, its composite quadrature and the polynomial degree."""

    quad: Quadrature
    degree: int
    theory: str
    _terms: dict = field(default_factory=dict, repr=False)  # family -> terms, built once

    @property
    def edges(self) -> np.ndarray:
        return self.quad.edges

    @property
    def n_elements(self) -> int:
        return self.edges.size - 1


def _fixed_points(part: Part, max_breakpoint_nodes: int) -> np.ndarray:
    pts = [s.x for s in part.supports]
    if isinstance(part, Bar):
        for hole in part.holes:
            r = 0.5 * hole.diameter
            pts += [hole.x - r, hole.x, hole.x + r]
    pts += list(_strongest_kinks(part, max_breakpoint_nodes))
    return np.asarray(pts, dtype=float)


def _strongest_kinks(part: Part, limit: int) -> np.ndarray:
    """Up to ``limit`` breakpoints where the section data bend most sharply (see
    ``forward.geometry.strongest_corners``); none but the few for tubes and strings."""
    bps = _breakpoints(part)
    if bps.size <= limit:
        return bps
    fields = (part.thickness,) if isinstance(part, Bar) else ()
    return strongest_corners(fields, bps, part.length, limit) if fields else np.empty(0)


def _breakpoints(part: Part) -> np.ndarray:
    if isinstance(part, Bar):
        fields = (part.width, part.thickness)
    elif isinstance(part, Tube):
        fields = (part.outer_diameter, part.wall)
    else:
        fields = (part.linear_density, part.bending_stiffness)
    bps = np.concatenate([np.asarray(f.breakpoints, dtype=float) for f in fields])
    return np.unique(bps[(bps > 0.0) & (bps < part.length)])


def discretise(
    part: Part,
    elements: int = 6,
    degree: int = 6,
    theory: str = "timoshenko",
    max_breakpoint_nodes: int = 24,
) -> Discretisation:
    """Mesh with nodes at supports, hole edges and (few) profile kinks, at least ``elements``."""
    if theory not in ("timoshenko", "euler-bernoulli"):
        raise ValueError("theory must be 'timoshenko' or 'euler-bernoulli'")
    L = part.length
    edges = build_mesh(L, _fixed_points(part, max_breakpoint_nodes), L / elements, 1e-4 * L)
    holes = tuple((h.x, 0.5 * h.diameter) for h in part.holes) if isinstance(part, Bar) else ()
    quad = build_quadrature(edges, _breakpoints(part), holes, degree + 4)
    return Discretisation(quad=quad, degree=degree, theory=theory)


@dataclass(frozen=True, eq=False)
class FamilySystem:
    """One family's reduced eigenproblem, with what is needed for shapes and sensitivities."""

    family: str
    K: np.ndarray
    M: np.ndarray
    free: np.ndarray  # global dof index of each reduced dof
    lower: np.ndarray  # reduced dofs spanning the degree p - 1 subspace
    stiffness: tuple[Term, ...]
    mass: tuple[Term, ...]
    dofs_q: np.ndarray  # global dofs of each quadrature point's element (n_q, n_loc)
    weights: np.ndarray
    display: FieldLayout  # the field whose zeros are the nodes
    n_rigid: int  # rigid-body modes the hard supports leave (dropped from the bottom)
    spring_diag: np.ndarray  # support spring stiffness on reduced dofs
    n_global: int


def _family_terms(
    family: str, theory: str, p: int, disc: Discretisation, flexible: bool = False
) -> tuple[list[FieldLayout], list[Term], list[Term]]:
    """Fields, stiffness terms and mass terms of a family (``flexible``: a string with EI = 0)."""
    quad, n_el = disc.quad, disc.n_elements
    if family in ("bending", "lateral"):
        suffix = "y" if family == "bending" else "z"
        if theory == "timoshenko":
            w = c0_layout(n_el, p + 1)
            th = c0_layout(n_el, p, offset=w.size)
            Fw, Ft = field_matrices(w, quad), field_matrices(th, quad)
            zw, zt = np.zeros_like(Fw[0]), np.zeros_like(Ft[0])
            stiffness = [
                Term("EI" + suffix, np.hstack([zw, Ft[1]])),
                Term("kGA" if family == "bending" else "kGAz", np.hstack([Fw[1], -Ft[0]])),
            ]
            mass = [
                Term("rhoA", np.hstack([Fw[0], zt])),
                Term("rhoI" + suffix, np.hstack([zw, Ft[0]])),
            ]
            return [w, th], stiffness, mass
        w = c1_layout(n_el, max(p, 3))
        F = field_matrices(w, quad)
        return [w], [Term("EI" + suffix, F[2])], [Term("rhoA", F[0])]
    if family == "transverse" and flexible:
        # EI = 0: the exact shape kinks at point masses and touches; a C0 field can, C1 cannot
        w = c0_layout(n_el, p)
        F = field_matrices(w, quad)
        return [w], [Term("T", F[1])], [Term("mu", F[0])]
    if family == "transverse":
        w = c1_layout(n_el, max(p, 3))
        F = field_matrices(w, quad)
        return [w], [Term("EI", F[2]), Term("T", F[1])], [Term("mu", F[0])]
    u = c0_layout(n_el, p)
    F = field_matrices(u, quad)
    if family == "torsion":
        return [u], [Term("GJ", F[1])], [Term("rhoIp", F[0])]
    return [u], [Term("EA", F[1])], [Term("rhoA", F[0])]


def _node_index(edges: np.ndarray, x: float) -> int:
    i = int(np.argmin(np.abs(edges - x)))
    return i


def is_flexible(family: str, coefficients: Mapping[str, np.ndarray]) -> bool:
    """A string without bending stiffness: its transverse family takes C0 elements."""
    return family == "transverse" and not np.any(coefficients["EI"])


def assemble_family(
    part: Part,
    disc: Discretisation,
    family: str,
    coefficients: Mapping[str, np.ndarray],
    flexible: bool | None = None,
) -> FamilySystem:
    """Assemble K and M of one family, apply supports, and reduce to the free dofs.

    ``flexible``: a string without bending stiffness (C0 elements); None decides from the
    coefficients (:func:`is_flexible`)."""
    if flexible is None:
        flexible = is_flexible(family, coefficients)
    layouts, stiffness, mass = _family_terms(family, disc.theory, disc.degree, disc, flexible)
    n = sum(lay.size for lay in layouts)
    quad = disc.quad
    dofs_q = np.hstack([lay.dofs[quad.element] for lay in layouts])
    K = assemble(
        n,
        dofs_q,
        [quad.w * coefficients[t.coefficient] for t in stiffness],
        [t.B for t in stiffness],
    )
    M = assemble(
        n, dofs_q, [quad.w * coefficients[t.coefficient] for t in mass], [t.B for t in mass]
    )
    display = layouts[0]
    held: set[int] = set()
    held_points: list[float] = []
    clamped = False
    spring = np.zeros(n)
    translational = family in ("bending", "lateral", "axial", "transverse")
    vertical = family in ("bending", "transverse")
    for s in part.supports:
        i = _node_index(disc.edges, s.x)
        disp = int(display.node_value[i])
        if s.kind == "clamp":
            clamped = True
            held_points.append(s.x)
            for lay in layouts:
                held.add(int(lay.node_value[i]))
                if lay.node_slope is not None:
                    held.add(int(lay.node_slope[i]))
        elif (s.kind == "pin" and family in ("bending", "lateral", "transverse")) or (
            s.kind == "touch" and vertical
        ):
            held.add(disp)
            held_points.append(s.x)
        elif s.kind == "spring" and vertical:
            K[disp, disp] += s.value
            spring[disp] += s.value
        elif s.kind == "mass" and translational:
            M[disp, disp] += s.value
    free = np.setdiff1d(np.arange(n), np.fromiter(held, dtype=int, count=len(held)))
    lower = np.concatenate([lay.lower for lay in layouts])[free]
    n_rigid = _rigid_mode_count(family, part, held_points, clamped)
    return FamilySystem(
        family=family,
        K=K[np.ix_(free, free)],
        M=M[np.ix_(free, free)],
        free=free,
        lower=lower,
        stiffness=tuple(stiffness),
        mass=tuple(mass),
        dofs_q=dofs_q,
        weights=quad.w,
        display=display,
        n_rigid=n_rigid,
        spring_diag=spring[free],
        n_global=n,
    )


def _rigid_mode_count(family: str, part: Part, held_points: list[float], clamped: bool) -> int:
    """Dimension of the rigid-body motions that no hard support holds.

    Bending and lateral: w = a + b x (two motions); a taut string: w = a only (a tilt stretches
    it); torsion and axial: one motion unless clamped. Springs do not count: a suspension on
    cords turns rigid motions into slow bounce modes, which are dropped all the same.
    """
    if family in ("torsion", "axial"):
        return 0 if clamped else 1
    if family == "transverse" and part.tension > 0:
        return 0 if held_points else 1
    rows = [[1.0, x] for x in held_points] + ([[0.0, 1.0]] if clamped else [])
    return 2 - (np.linalg.matrix_rank(np.array(rows)) if rows else 0)


# Shift of the inverted eigenproblem, lam_s = (2 pi 1 kHz)^2: inside the audio band.
_SHIFT = (2.0 * np.pi * 1000.0) ** 2


def dense_eigh(K: np.ndarray, M: np.ndarray, count: int) -> tuple[np.ndarray, np.ndarray]:
    """Lowest ``count`` eigenpairs of K x = lam M x (LAPACK, M-orthonormal vectors).

    Solved inverted, M x = mu (K + s M) x with mu = 1 / (lam + s): the lowest lam are the
    largest mu, which come out to full relative accuracy, whereas solving K x = lam M x directly
    loses about lam_max / lam_min of relative accuracy (10^15 on fine C1 meshes, where it gave
    noise of several cents). Relative error ~ eps (lam + s)^2 / (s lam): < 1e-9 from 1 Hz to 1 MHz.
    """
    n = K.shape[0]
    count = min(count, n)
    mu, vec = scipy.linalg.eigh(
        M, K + _SHIFT * M, subset_by_index=(n - count, n - 1), check_finite=False
    )
    mu, vec = mu[::-1], vec[:, ::-1]
    return 1.0 / mu - _SHIFT, vec / np.sqrt(mu)


def lowest_modes(
    system: FamilySystem,
    count: int,
    subspace: np.ndarray | None = None,
    eigensolver: EigenSolver = dense_eigh,
) -> tuple[np.ndarray, np.ndarray]:
    """The ``count`` lowest elastic eigenpairs: the rigid-body (or, on springs, bounce) modes
    left by the supports are the lowest ``n_rigid`` and are dropped.

    Returns eigenvalues (lambda = omega^2) and M-normalised vectors on the reduced dofs.
    """
    K, M = system.K, system.M
    if subspace is not None:
        K, M = K[np.ix_(subspace, subspace)], M[np.ix_(subspace, subspace)]
    lam, vec = eigensolver(K, M, count + system.n_rigid)
    if subspace is not None:
        full = np.zeros((system.K.shape[0], vec.shape[1]))
        full[subspace] = vec
        vec = full
    keep = np.arange(lam.size) >= system.n_rigid
    return lam[keep][:count], vec[:, keep][:, :count]


# ---------------------------------------------------------------------------------------------
# Results


@dataclass(frozen=True, eq=False)
class Mode:
    """One mode: family, order within the family (1 = lowest elastic mode), frequency,
    estimated discretisation error, interior node positions and the displacement shape."""

    family: str
    order: int
    frequency_hz: float
    error_cents: float
    nodes_m: tuple[float, ...]
    _shape: Callable[[np.ndarray], np.ndarray] = field(repr=False)

    def shape(self, x_m: np.ndarray) -> np.ndarray:
        """Displacement (deflection, twist or stretch) at x, scaled to a peak of 1."""
        return self._shape(np.asarray(x_m, dtype=float))


@dataclass(frozen=True, eq=False)
class ModalResult:
    """All computed modes sorted by frequency, with the accuracy reached."""

    modes: tuple[Mode, ...]
    converged: bool
    max_error_cents: float
    elements: int
    degree: int
    message: str

    def family(self, name: str) -> list[Mode]:
        return [m for m in self.modes if m.family == name]

    def frequency(self, family: str, order: int) -> float:
        for m in self.modes:
            if m.family == family and m.order == order:
                return m.frequency_hz
        raise KeyError(f"no {family} mode of order {order}")


def _find_zeros(f: Callable[[np.ndarray], np.ndarray], x: np.ndarray) -> np.ndarray:
    """Interior sign changes of f sampled at x, refined by vectorised bisection."""
    v = f(x)
    tiny = 1e-9 * np.max(np.abs(v))
    nz = np.flatnonzero(np.abs(v) > tiny)
    if nz.size < 2:
        return np.empty(0)
    s = np.sign(v[nz])
    change = np.flatnonzero(s[:-1] != s[1:])
    a, b = x[nz[change]], x[nz[change + 1]]
    fa, fb = v[nz[change]], v[nz[change + 1]]
    # Illinois regula falsi (Dowell & Jarratt, 1971, BIT 11, 168): superlinear, always bracketed
    for _ in range(12):
        m = b - fb * (b - a) / (fb - fa)
        fm = f(m)
        same = np.sign(fm) == np.sign(fb)
        fa = np.where(same, 0.5 * fa, fb)
        a = np.where(same, a, b)
        b, fb = m, fm
        if np.all(np.abs(b - a) < 1e-12 * x[-1]):
            break
    return b


def _shape_function(system: FamilySystem, edges: np.ndarray, vec: np.ndarray):
    coef = np.zeros(system.n_global)
    coef[system.free] = vec
    samples = np.linspace(0.0, edges[-1], 401)
    values = evaluate_field(system.display, edges, coef, samples)
    peak = values[np.argmax(np.abs(values))]
    scale = 1.0 / peak if peak != 0 else 1.0
    return lambda x: scale * evaluate_field(system.display, edges, coef, x)


def _modes_at(
    part: Part,
    disc: Discretisation,
    counts: Mapping[str, int],
    eigensolver: EigenSolver,
) -> dict[str, tuple[np.ndarray, np.ndarray, np.ndarray, FamilySystem]]:
    coefficients = section_coefficients(part, disc.quad.x)
    out = {}
    for family, count in counts.items():
        if count <= 0:
            continue
        system = assemble_family(part, disc, family, coefficients)
        lam, vec = lowest_modes(system, count, eigensolver=eigensolver)
        lam_lo, _ = lowest_modes(
            system, count, subspace=np.flatnonzero(system.lower), eigensolver=eigensolver
        )
        n = min(lam.size, lam_lo.size)
        out[family] = (lam[:n], lam_lo[:n], vec[:, :n], system)
    return out


def _cents_between(lam_hi: np.ndarray, lam_lo: np.ndarray) -> np.ndarray:
    # f goes as sqrt(lambda): half the cents of the eigenvalue ratio
    return 0.5 * ratio_to_cents(np.maximum(lam_lo, 1e-300) / np.maximum(lam_hi, 1e-300))


def solve(
    part: Part,
    counts: Mapping[str, int] | None = None,
    tol_cents: float = 0.01,
    theory: str = "timoshenko",
    degree: int = 8,
    initial_elements: int = 4,
    max_refinements: int = 7,
    max_dofs: int = 2400,
    eigensolver: EigenSolver = dense_eigh,
) -> ModalResult:
    """Lowest modes of each family, mesh refined until every one is within ``tol_cents``.

    ``counts`` maps family -> number of modes (default: 4 of each of the part's families).
    """
    fams = families_of(part)
    if counts is None:
        counts = dict.fromkeys(fams, 4)
    unknown = set(counts) - set(fams)
    if unknown:
        raise ValueError(f"{type(part).__name__} has no {sorted(unknown)} modes; it has {fams}")
    elements = initial_elements
    for _ in range(max_refinements + 1):
        disc = discretise(part, elements=elements, degree=degree, theory=theory)
        found = _modes_at(part, disc, counts, eigensolver)
        errors = [np.abs(_cents_between(hi, lo)) for hi, lo, _, _ in found.values()]
        worst = max((float(np.max(e)) for e in errors if e.size), default=0.0)
        if worst <= tol_cents or elements * 2 * (degree + 1) > max_dofs:
            break
        elements *= 2
    converged = worst <= tol_cents
    modes: list[Mode] = []
    sample = np.linspace(0.0, part.length, 40 * disc.n_elements + 1)
    for family, (lam, lam_lo, vec, system) in found.items():
        err = _cents_between(lam, lam_lo)
        for k in range(lam.size):
            shape = _shape_function(system, disc.edges, vec[:, k])
            nodes = _find_zeros(shape, sample)
            modes.append(
                Mode(
                    family=family,
                    order=k + 1,
                    frequency_hz=float(np.sqrt(max(lam[k], 0.0)) / (2.0 * np.pi)),
                    error_cents=float(err[k]),
                    nodes_m=tuple(float(v) for v in nodes),
                    _shape=shape,
                )
            )
    modes.sort(key=lambda m: m.frequency_hz)
    message = (
        f"converged: every mode within {worst:.2g} cent (tolerance {tol_cents:g})"
        if converged
        else f"not converged: worst error estimate {worst:.3g} cent, {disc.n_elements} elements"
    )
    return ModalResult(
        modes=tuple(modes),
        converged=converged,
        max_error_cents=worst,
        elements=disc.n_elements,
        degree=degree,
        message=message,
    )


# ---------------------------------------------------------------------------------------------
# Entry points for the inverse problems of the bench (calibration, cut planning, preview)
#
# Each is a thin, documented view of the machinery above, so callers outside ``forward``
# never assemble families or build quadratures themselves.

# d(section coefficient)/dh by the complex step: Im c(h + i s) / s = c'(h) + O(s^2), with no
# subtractive cancellation, so s can be tiny (Squire, W. & Trapp, G., 1998, "Using complex
# variables to estimate derivatives of real functions", SIAM Review 40, 110-112).
_COMPLEX_STEP = 1e-30
_E_TERMS = ("EIy", "EIz", "EA")  # stiffness coefficients proportional to E
_G_TERMS = ("kGA", "kGAz", "GJ")  # stiffness coefficients proportional to G


def mass_per_length(part: Part, family: str, x: np.ndarray) -> np.ndarray:
    """Inertia per unit length that weighs the squared displacement of ``family`` at x.

    The kinetic energy of a mode with displacement ``g(x)`` (deflection, twist or stretch)
    is ``1/2 omega^2 int m(x) g(x)^2 dx`` up to rotary inertia, with ``m = rho A`` for
    bending, lateral and axial motion, ``rho I_p`` for torsion and ``mu`` for a string, so
    ``int m g^2 dx`` is the modal mass of that shape.
    """
    c = section_coefficients(part, np.asarray(x, dtype=float))
    if family == "torsion":
        return c["rhoIp"]
    if family == "transverse":
        return c["mu"]
    return c["rhoA"]


def thickness_derivatives(bar: Bar, x: np.ndarray) -> dict[str, np.ndarray]:
    """d c / d h of every beam coefficient c of ``bar`` at x, h the local thickness.

    Complex step on ``bar_coefficients`` (exact to rounding); the holes stay where they are
    (their chord and centre height are taken from the bar as it is).
    """
    x = np.asarray(x, dtype=float)
    m = bar.material
    chord, z = hole_data(bar, x)
    h = bar.thickness(x) + 1j * _COMPLEX_STEP
    c = bar_coefficients(bar.width(x), h, chord, z, m.E, m.G, m.rho, m.nu, m.shear_ratio)
    return {name: np.imag(v) / _COMPLEX_STEP for name, v in c.items()}


@dataclass(frozen=True, eq=False)
class FamilyModes:
    """The lowest modes of one family on a fixed mesh.

    ``lam`` (omega^2) and ``vectors`` (M-normalised, reduced dofs) from the degree p space,
    ``lam_lower`` from the nested degree p - 1 space; ``system`` is what
    ``optimizer.sensitivity.eigenvalue_gradients`` needs for derivatives.
    """

    system: FamilySystem
    lam: np.ndarray
    lam_lower: np.ndarray
    vectors: np.ndarray

    @property
    def error_cents(self) -> np.ndarray:
        """Nested estimate ``600 log2(lam_{p-1} / lam_p)`` (cents) of each mode's error."""
        n = min(self.lam.size, self.lam_lower.size)
        return 600.0 * np.log2(self.lam_lower[:n] / self.lam[:n])


@dataclass(frozen=True, eq=False)
class MeshModes:
    """Modes of several families on one mesh, and the quadrature points ``x`` (m) that
    coefficient derivatives for ``eigenvalue_gradients`` must be given at."""

    x: np.ndarray
    n_elements: int
    degree: int
    families: Mapping[str, FamilyModes]


def modes_on_mesh(
    part: Part,
    counts: Mapping[str, int],
    *,
    elements: int,
    degree: int = 8,
    theory: str = "timoshenko",
    extra_breakpoints: Iterable[float] = (),
    eigensolver: EigenSolver = dense_eigh,
) -> MeshModes:
    """The lowest ``counts[family]`` modes of each family on the mesh of ``discretise``
    (at least ``elements`` elements of degree ``degree``).

    ``extra_breakpoints`` split the quadrature further (inside (0, L)), so a coefficient
    derivative with kinks there (a cut's edges) is integrated exactly; they add no nodes.
    """
    disc = discretise(part, elements=elements, degree=degree, theory=theory)
    extra = np.asarray(list(extra_breakpoints), dtype=float)
    extra = extra[(extra > 0.0) & (extra < part.length)]
    if extra.size:
        holes = tuple((h.x, 0.5 * h.diameter) for h in part.holes) if isinstance(part, Bar) else ()
        bps = np.unique(np.concatenate([_breakpoints(part), extra]))
        quad = build_quadrature(disc.edges, bps, holes, degree + 4)
        disc = Discretisation(quad=quad, degree=degree, theory=theory)
    coefficients = section_coefficients(part, disc.quad.x)
    out: dict[str, FamilyModes] = {}
    for family, count in counts.items():
        if count <= 0:
            continue
        system = assemble_family(part, disc, family, coefficients)
        lam, vec = lowest_modes(system, count, eigensolver=eigensolver)
        lam_lo, _ = lowest_modes(
            system, count, subspace=np.flatnonzero(system.lower), eigensolver=eigensolver
        )
        out[family] = FamilyModes(system, lam, lam_lo, vec)
    return MeshModes(disc.quad.x, disc.n_elements, degree, out)


@dataclass(frozen=True, eq=False)
class ModuliSplit:
    """One family of a one-material bar with its stiffness split by modulus:

        K(E, G) = (E / E_0) K_E + (G / G_0) K_G + K_supports,   M independent of E and G,

    at the bar's own moduli E_0, G_0 (every stiffness coefficient of a rectangular section is E
    or G times geometry; support springs add a constant). ``n_rigid`` rigid-body or bounce
    modes lie at the bottom of the spectrum.
    """

    family: str
    K_E: np.ndarray
    K_G: np.ndarray
    K_supports: np.ndarray
    M: np.ndarray
    n_rigid: int


def _keep_stiffness(coefficients: Mapping[str, np.ndarray], keep: tuple[str, ...]) -> dict:
    """Coefficients with the stiffness terms not in ``keep`` zeroed (mass terms untouched)."""
    stiffness = set(_E_TERMS) | set(_G_TERMS)
    return {
        k: (v if k in keep or k not in stiffness else np.zeros_like(v))
        for k, v in coefficients.items()
    }


def moduli_split(
    bar: Bar,
    families: Iterable[str],
    *,
    min_elements: int,
    degree: int = 8,
    theory: str = "timoshenko",
) -> dict[str, ModuliSplit]:
    """``ModuliSplit`` of each family on the mesh ``solve`` settles on when it reports
    ``min_elements`` elements (it asks ``discretise`` for 4, 8, 16 ... elements)."""
    target = 4
    disc = discretise(bar, elements=target, degree=degree, theory=theory)
    while disc.n_elements < min_elements:
        target *= 2
        disc = discretise(bar, elements=target, degree=degree, theory=theory)
    coefficients = section_coefficients(bar, disc.quad.x)
    only_E = _keep_stiffness(coefficients, _E_TERMS)
    only_G = _keep_stiffness(coefficients, _G_TERMS)
    out: dict[str, ModuliSplit] = {}
    for family in families:
        sys_E = assemble_family(bar, disc, family, only_E)
        sys_G = assemble_family(bar, disc, family, only_G)
        K_s = np.diag(sys_E.spring_diag)
        out[family] = ModuliSplit(
            family=family,
            K_E=sys_E.K - K_s,
            K_G=sys_G.K - K_s,
            K_supports=K_s,
            M=sys_E.M,
            n_rigid=sys_E.n_rigid,
        )
    return out
