"""From a part file with [target] and [design] tables to an optimizer run, and back to files.

The ``[design]`` table (all optional; lengths in mm unless a unit is written):

    shape = "spline"          # bars: spline | arch | steps
    control_points = 5        # spline
    steps = 3                 # steps
    symmetric = true
    free_length = false       # bars: let the length set the pitch
    length_range = [340, 460] # with free_length; tubes always
    width = [40, 65]          # bars: let the width move in this range (clears lateral modes)
    thickness = [20, 22, 25]  # bars: stock thicknesses; the thickest the screen passes is cut
    min_thickness = 4         # thinnest the bar may be anywhere (default 20 % of the blank)
    max_depth = 16            # deepest cut (default: blank - min_thickness)
    end_keep = 10             # ends kept at full thickness
    node_zone = 12            # uncut width at each mode-1 node (holes, cords)
    cutter_radius = 25        # smallest radius the cutter or sanding drum can follow
    clearance = "critical-band"  # or "off": keep torsion/lateral modes out of each partial's
                              # critical band (Zwicker & Terhardt, 1980), centred on the partial
    clearance_bands = 1.0     # width of that keep-clear band, in critical bandwidths
    coincidence_hz = 3        # ... unless within this many Hz of a partial
    wall_range = [1.5, 3]     # tubes: wall thickness bounds (enables a wall profile)
    density_range = [0.5e-3, 4e-3]  # strings: linear density bounds, kg/m
    seed = 1
    budget = 2000             # forward solves at most
    fidelity = "solid"        # bars: beam | plane | solid (default, 3D): the certifying model
    thickness_axis = "T"      # wood for the 2D/3D models: T quarter-sawn, R flat-sawn

The workflow: ``build_problem`` validates, ``design_report`` runs the search, the corrections
and the certified solve of the part as written, and returns an immutable ``DesignReport``;
``tonewright.design_files`` writes it. The status comes from the optimizer (one table,
``tonewright.optimizer.STATUS_MESSAGES``); nothing here decides it again.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from tonewright.acoustics.pitch import STRIKE_MODES, cents, critical_bandwidth_hz
from tonewright.errors import InputError
from tonewright.fidelity import (
    CERTIFY_MESH,
    Stage,
    bar_solid_modes,
    certifier_ends,
    check_bar,
    design_width,
    goal_frequencies,
    high_fidelity_function,
    solid_top_hz,
    stages_for,
    top_face_nodes,
)
from tonewright.forward import Bar, String, Tube, solve
from tonewright.forward.geometry import Part
from tonewright.optimizer import (
    BarUndercut,
    Clearance,
    CorrectedDesign,
    DesignResult,
    EvaluationLog,
    Evaluator,
    Goal,
    SearchSettings,
    StringDensity,
    TubeDesign,
    UnwantedMode,
    corrected_design,
    design,
)
from tonewright.optimizer.blanks import ClearingWidth, clearing_width, unwanted_scale
from tonewright.optimizer.screen import Reach, screen_bar
from tonewright.optimizer.search import clearance_binds, rechecked, unreachable
from tonewright.optimizer.spaces import undercut_terms, undercut_thickness
from tonewright.partfile import DesignTable, PartFile, parse_part
from tonewright.tuning import ResolvedTarget, resolve

__all__ = [
    "STRIKE_COMPONENTS",
    "UNWANTED_3D",
    "UNWANTED_CAVEAT",
    "CertifiedPartial",
    "DesignFigures",
    "DesignReport",
    "DesignTable",
    "HalfCriticalBand",
    "Outcome",
    "Problem",
    "achieved",
    "build_problem",
    "certify",
    "clearing_width_for",
    "design_report",
    "goals_and_clearance",
    "part_table",
    "run_design",
    "station_profile",
]

# the strike-note rule of tonewright.acoustics.pitch as goal components: (bending order,
# divisor, exponent), a geometric mean of f_k / h_k over STRIKE_MODES
STRIKE_COMPONENTS = tuple((k, h, 1.0 / len(STRIKE_MODES)) for k, h in STRIKE_MODES)

# measured with 'verify' on demo-sized bars 50 and 60 mm wide: the beam's first two torsion
# modes 162-304 cents below the 3D model's, its lateral modes 79-145 cents above (README)
UNWANTED_CAVEAT = (
    "beam model; on an undercut bar its torsion and lateral modes can be 80-300 cents off, "
    "so check them in 3D with 'tonewright verify' before cutting"
)
UNWANTED_3D = "3D model: the beam's modes scaled to the 3D solve of this very design"

Progress = Callable[[str, int, float], None]

# what the sheets and summaries call the model of each correction stage


@dataclass(frozen=True)
class HalfCriticalBand:
    """Keep-clear half-width around a partial: half of a band ``bands`` critical bandwidths
    wide (Zwicker & Terhardt, 1980), centred on the partial. A class, not a closure, so that
    a problem can cross to a worker process."""

    bands: float = 1.0

    def __call__(self, f_hz: np.ndarray) -> np.ndarray:
        return 0.5 * self.bands * critical_bandwidth_hz(f_hz)


@dataclass(frozen=True, eq=False)
class Problem:
    part_file: PartFile
    blank: Part
    space: object
    evaluator: Evaluator
    target: ResolvedTarget
    table: DesignTable
    base_dir: object = None


def _goals(target: ResolvedTarget) -> list[Goal]:
    goals = []
    for p in target.partials:
        comps = STRIKE_COMPONENTS if p.family == "strike" else ()
        goals.append(Goal(p.family, p.order, p.f_hz, p.tolerance_cents, p.weight, comps))
    return goals


def _space(part_file: PartFile, blank: Part, table: DesignTable):
    if isinstance(blank, Bar):
        t0 = part_file.bar.thickness
        if part_file.bar.profile or part_file.bar.undercut:
            raise InputError(
                "bar.profile: give the uncut blank for a design (drop profile or undercut); "
                "to tune a half-finished bar use 'tonewright advise'"
            )
        min_t = table.min_thickness if table.min_thickness is not None else 0.2 * t0
        if min_t >= t0:
            raise InputError(
                f"design.min_thickness {min_t * 1e3:g} mm must be under the blank thickness "
                f"{t0 * 1e3:g} mm"
            )
        space = BarUndercut(
            blank=blank,
            blank_thickness=t0,
            shape=table.shape,
            control_points=table.control_points,
            steps=table.steps,
            symmetric=table.symmetric,
            max_depth=table.max_depth or 0.0,
            min_thickness=min_t,
            end_keep=float(table.end_keep),
            node_zone=float(table.node_zone),
            cutter_radius=float(table.cutter_radius),
            length_range=table.length_range if table.free_length else None,
            width_range=table.width,
        )
        L_max = table.length_range[1] if table.free_length else blank.length
        if 2 * space.cut_edge(L_max) >= 0.9 * L_max:
            raise InputError("design.end_keep/node_zone leave no room for a cut: make them smaller")
        return space
    if isinstance(blank, Tube):
        lr = table.length_range or (0.5 * blank.length, 1.5 * blank.length)
        return TubeDesign(
            blank, lr, table.wall_range, table.control_points if table.wall_range else 0
        )
    if table.density_range is None:
        raise InputError("design.density_range = [lightest, heaviest] kg/m is needed for a string")
    return StringDensity(blank, table.density_range, table.control_points, table.symmetric)


def goals_and_clearance(
    part_file: PartFile, base_dir=None
) -> tuple[ResolvedTarget, list[Goal], Clearance | None, Part]:
    """The resolved target, the optimizer's goals, the clearance of unwanted modes and the
    blank of a part file with a [target] (no design space, no solve)."""
    if part_file.target is None:
        raise InputError("the part file has no [target] table: say what to tune to")
    table = part_file.design
    spec = part_file.material_spec(base_dir)
    coeff = spec.temp_coeff_cents_per_K if spec is not None else None
    target = resolve(part_file.target, material_temp_coeff=coeff)
    blank = part_file.to_part(base_dir)
    families = {p.family for p in target.partials}
    if isinstance(blank, String) and families != {"bending"}:
        raise InputError("target: a string's partials are its transverse modes; give ratios only")
    goals = _goals(target)
    if isinstance(blank, String):
        goals = [Goal("transverse", g.order, g.f_hz, g.tolerance_cents, g.weight) for g in goals]
    clearance = None
    if isinstance(blank, Bar) and table.clearance == "critical-band":
        fams = tuple(f for f in ("torsion", "lateral") if f not in families)
        clearance = Clearance(fams, HalfCriticalBand(table.clearance_bands), table.coincidence_hz)
    return target, goals, clearance, blank


def _stock_thickness(part_file: PartFile, base_dir) -> PartFile:
    """The part file with the blank thickness set to the thickest stock thickness that passes
    the feasibility screen (``optimizer.screen``); the thickest of all when none does (the
    screen then reports the bar before any search)."""
    _, goals, _, _ = goals_and_clearance(part_file, base_dir)
    chosen = None
    for t in sorted(part_file.design.thickness, reverse=True):
        candidate = part_file.model_copy(
            update={"bar": part_file.bar.model_copy(update={"thickness": t})}
        )
        space = _space(candidate, candidate.to_part(base_dir), candidate.design)
        if chosen is None:
            chosen = candidate
        if screen_bar(space, goals, candidate.model.theory).feasible:
            return candidate
    return chosen


def build_problem(part_file: PartFile, base_dir=None, seed: int | None = None) -> Problem:
    """Validate the [target] and [design] tables and set up the evaluator."""
    table = part_file.design
    if seed is not None:
        table = table.model_copy(update={"seed": seed})
    if table.thickness is not None and part_file.bar is not None:
        part_file = _stock_thickness(part_file, base_dir)
    target, goals, clearance, blank = goals_and_clearance(part_file, base_dir)
    space = _space(part_file, blank, table)
    theory = part_file.model.theory
    evaluator = Evaluator(space, goals, clearance, theory=theory)
    return Problem(part_file, blank, space, evaluator, target, table, base_dir)


@dataclass(frozen=True, eq=False)
class Outcome:
    """A design and, when corrected, each higher-fidelity stage it went through. ``result``
    is the last stage's; its status is the outcome's (never decided again here)."""

    result: DesignResult
    fidelity: str
    stages: tuple[tuple[Stage, CorrectedDesign], ...]

    @property
    def status(self) -> int:
        return self.result.status

    @property
    def converged(self) -> bool:
        return self.result.converged

    @property
    def message(self) -> str:
        return self.result.message


def fidelity_of(problem: Problem, override: str | None = None) -> str:
    chosen = override or problem.table.fidelity
    if chosen is None:
        return "solid" if isinstance(problem.blank, Bar) else "beam"
    if chosen != "beam" and not isinstance(problem.blank, Bar):
        raise InputError(f"fidelity {chosen!r}: the 2D/3D models are for bars; use 'beam'")
    return chosen


def screen(problem: Problem) -> Reach:
    """The feasibility screen of a bar's blank and limits (``optimizer.screen``); tubes and
    strings pass (their length or density is free)."""
    if not isinstance(problem.space, BarUndercut):
        return Reach(True, (), "", (), (0.0, 0.0), (), (), 0)
    theory = problem.part_file.model.theory
    # on the design's own mesh degree: no second degree selection
    return screen_bar(problem.space, problem.evaluator.goals, theory, problem.evaluator.degree)


def run_design(
    problem: Problem,
    progress=None,
    fidelity: str | None = None,
    start: np.ndarray | None = None,
) -> Outcome:
    """Beam-model design, then the staged corrections of the chosen fidelity. ``start``: the
    scaled variables of a similar design to polish first (see ``optimizer.design``).

    The correction runs even when the beam design missed: the beam's miss may be the beam's
    own error (a torsion mode it puts in a band where the 3D model does not), and the status
    and binding limit reported are then the certifying model's."""
    settings = SearchSettings(seed=problem.table.seed, budget=problem.table.budget)
    fidelity = fidelity_of(problem, fidelity)
    material = None
    if fidelity != "beam":  # fail before the search, not after it
        check_bar(problem.blank)
        spec = problem.part_file.material_spec(problem.base_dir)
        try:
            material = spec.to_solid(problem.table.thickness_axis)
        except InputError as exc:
            raise InputError(f"{exc}; or design with --beam-only") from None
    log = EvaluationLog()  # one solve count (and shape reference) for every stage
    reach = screen(problem)
    if not reach.feasible:  # reported in seconds, before any search
        log.solves += reach.solves
        binding = (*reach.binding, reach.advice) if reach.advice else reach.binding
        detail = reach.binding[0].split(": ", 1)[-1]
        return Outcome(unreachable(problem.evaluator, binding, detail, log), fidelity, ())
    result = design(problem.evaluator, settings, progress, start, log)
    stages: list[tuple[Stage, CorrectedDesign]] = []
    if fidelity == "beam":
        return Outcome(result, fidelity, ())
    bar = problem.part_file.bar
    current = result
    for stage in stages_for(fidelity):
        hf = high_fidelity_function(stage, problem.space, bar.thickness, bar.width, material)
        # a fresh beam search when the corrected model has no solution nearby: in the last
        # stage only (the 3D stage sees what the 2D one cannot, the unwanted modes)
        corrected = corrected_design(
            problem.evaluator,
            current,
            hf,
            settings,
            progress=progress,
            log=log,
            search_again=stage.model != "plane" or fidelity == "plane",
        )
        stages.append((stage, corrected))
        current = corrected.result
    return Outcome(current, fidelity, tuple(stages))


def station_profile(problem: Problem, u: np.ndarray, spacing: float = 1e-3) -> np.ndarray:
    """Thickness stations (x, h) in metres at ``spacing`` or finer, with every kink of the cut
    (and both sides of a step) included, so that linear interpolation reproduces the design.

    Linear interpolation is off by at most |h''| dx^2 / 8 between stations; the spacing is
    tightened until that is under 2e-5 of the thinnest section (well under 0.01 cent: the
    frequency moves by about half the relative thickness change, 1 cent = 5.8e-4).
    """
    space = problem.space
    L = space.length(u)
    fine = np.linspace(0.0, L, 4001)
    depth = space.depth_and_jacobian(u, fine)[0]
    h_min = float(np.min(space.blank_thickness - depth))
    curvature = float(np.max(np.abs(np.diff(depth, 2)))) / (fine[1] - fine[0]) ** 2
    if curvature > 0:
        spacing = min(spacing, max(1e-4, np.sqrt(8 * 2e-5 * h_min / curvature)))
    n = int(np.ceil(L / spacing))
    x = np.linspace(0.0, L, n + 1)
    kinks = space.kinks(u)
    eps = 1e-6
    extra = np.concatenate([kinks - eps, kinks + eps]) if space.shape == "steps" else kinks
    x = np.unique(np.round(np.concatenate([x, extra[(extra > 0) & (extra < L)]]), 9))
    h = space.blank_thickness - space.depth_and_jacobian(u, x)[0]
    return np.column_stack([x, h])


def pitch_convention(problem: Problem) -> str:
    """How the target's pitches were set, in one line: the A4 reference and temperament, and
    any stretch or temperature shift (which moves every target by the same cents)."""
    t = problem.target
    spec = problem.part_file.target
    words = f"notes in equal temperament at A4 = {t.a4_hz:g} Hz"
    if abs(t.stretch_cents) > 1e-9:
        words += f"; stretched {t.stretch_cents:+.2f} cents"
    if spec is not None and spec.temperature_c is not None:
        words += (
            f"; aimed {t.temperature_cents:+.2f} cents from the nominal pitch so that it sounds "
            f"on pitch at {spec.temperature_c:g} C (material data at 20 C)"
        )
    else:
        words += "; material data and pitch at 20 C"
    return words


def variable_values(space, u: np.ndarray) -> tuple[tuple[str, float], ...]:
    """The design variables in their own units, each name saying its unit (the scaled 0..1
    values are what a restart needs; these are what a maker reads)."""
    u = np.asarray(u, dtype=float)
    names = space.names()
    out = []
    for name, v in zip(names, u, strict=True):
        if name == "length":
            out.append(("length (mm)", space.length(u) * 1e3))
        elif isinstance(space, BarUndercut):
            if name == "flat half-width":
                out.append(("flat half-width (share of the half cut)", 0.9 * float(v)))
            else:
                out.append((f"{name} (mm)", float(v) * space.depth_limit * 1e3))
        elif isinstance(space, TubeDesign):
            lo, hi = space.wall_range
            out.append((f"{name} (mm)", (lo + float(v) * (hi - lo)) * 1e3))
        elif isinstance(space, StringDensity):
            lo, hi = space.density_range
            out.append((f"{name} (g/m)", (lo + float(v) * (hi - lo)) * 1e3))
        else:  # pragma: no cover - every space is named above
            out.append((f"{name} (share of its range)", float(v)))
    return tuple(out)


READING_STATIONS_MM = 5.0  # the station table written beside a designed undercut


def undercut_table(problem: Problem, u: np.ndarray) -> dict[str, Any]:
    """A bar design as ``[bar.undercut]`` (mm): its own terms, which the part file evaluates
    exactly, and a table of stations every ``READING_STATIONS_MM`` (plus the cut's corners)
    to read it by, rounded to the 0.01 mm the shop tables print."""
    space = problem.space
    terms = undercut_terms(space, u)
    L = space.length(u)
    table: dict[str, Any] = {
        "shape": terms["shape"],
        "symmetric": terms["symmetric"],
        "cut_from": round(float(terms["cut_edge"]) * 1e3, 6),
        "depths": [round(float(d) * 1e3, 6) for d in terms["depths"]],
    }
    if "flat" in terms:
        table["flat"] = round(float(terms["flat"]), 9)
    x = np.arange(0.0, L * 1e3 + 1e-9, READING_STATIONS_MM) * 1e-3
    kinks = space.kinks(u)
    x = np.unique(np.concatenate([x, kinks, [L]]))
    x = x[np.concatenate(([True], np.diff(x) > 1e-7))]
    # the written depths: the reading table agrees with what the file gives to its rounding
    field = undercut_thickness(
        L,
        space.blank_thickness,
        table["shape"],
        table["symmetric"],
        table["cut_from"] * 1e-3,
        tuple(d * 1e-3 for d in table["depths"]),
        table.get("flat"),
    )
    L_mm = round(L * 1e3, 6)  # the length as written; a free length is no round number
    x_mm = np.round(x * 1e3, 2)
    x_mm = np.unique(np.concatenate([x_mm[x_mm < L_mm], [L_mm]]))
    h = field(x_mm * 1e-3) * 1e3
    table["stations"] = [[float(a), round(float(b), 2)] for a, b in zip(x_mm, h, strict=True)]
    return table


def certify(problem: Problem, part: Part):
    """An independent, accuracy-controlled solve (0.01 cent) of the part as written to file,
    with the families the goals and the clearance need."""
    counts = dict(problem.evaluator.counts)
    for fam in counts:
        counts[fam] = max(counts[fam], 4)
    return solve(part, counts, tol_cents=0.01, theory=problem.part_file.model.theory)


def achieved(problem: Problem, modal) -> list[dict[str, Any]]:
    """Target against achieved frequency for every goal, from a certified solve."""
    rows = []
    for g in problem.evaluator.goals:
        if g.family == "strike":
            logf = sum(a * np.log(modal.frequency("bending", k) / d) for k, d, a in g.components)
            f = float(np.exp(logf))
        else:
            f = modal.frequency(g.family, g.order)
        rows.append(
            {
                "family": g.family,
                "order": g.order,
                "target_hz": g.f_hz,
                "achieved_hz": f,
                "error_cents": float(cents(f, g.f_hz)),
                "tolerance_cents": g.tolerance_cents,
            }
        )
    return rows


def part_table(problem: Problem, u: np.ndarray) -> dict[str, Any]:
    """The designed part as a part-file table (mm), ready for TOML or JSON."""
    pf = problem.part_file
    out: dict[str, Any] = {}
    if pf.title:
        out["title"] = f"{pf.title} (designed)"
    if pf.material is not None:  # a string given by its linear density needs none
        out["material"] = pf.material_value()
    space = problem.space
    L = space.length(u)
    if pf.bar is not None:
        width = space.width(u) if isinstance(space, BarUndercut) else None
        bar: dict[str, Any] = {
            "length": round(L * 1e3, 6),
            "width": round((pf.bar.width if width is None else width) * 1e3, 6),
            "thickness": round(pf.bar.thickness * 1e3, 6),
            "undercut": undercut_table(problem, u),
        }
        if pf.bar.width_profile:
            bar["width_profile"] = [[x * 1e3, w * 1e3] for x, w in pf.bar.width_profile]
        if pf.bar.holes:
            bar["holes"] = [
                {
                    k: v * 1e3
                    for k, v in (("at", h.at), ("diameter", h.diameter), ("height", h.height))
                    if v is not None
                }
                for h in pf.bar.holes
            ]
        out["bar"] = bar
    elif pf.tube is not None:
        tube: dict[str, Any] = {
            "length": round(L * 1e3, 6),
            "outer_diameter": pf.tube.outer_diameter * 1e3,
            "wall": pf.tube.wall * 1e3,
        }
        if space.wall_range:
            x = np.linspace(0.0, L, int(np.ceil(L / 1e-3)) + 1)
            w = space.wall_and_jacobian(u, x)[0]
            tube["wall_profile"] = [
                [round(a * 1e3, 6), round(b * 1e3, 6)] for a, b in zip(x, w, strict=True)
            ]
        out["tube"] = tube
    else:
        s = pf.string
        x = np.linspace(0.0, L, int(np.ceil(L / 1e-3)) + 1)
        mu = space.density_and_jacobian(u, x)[0]
        string: dict[str, Any] = {"length": round(L * 1e3, 6), "tension": s.tension}
        if s.diameter is not None:  # the core wire the winding goes on
            string["diameter"] = round(s.diameter * 1e3, 6)
        string["density_profile"] = [
            [round(a * 1e3, 6), float(f"{b:.9g}")] for a, b in zip(x, mu, strict=True)
        ]
        EI = float(problem.blank.bending_stiffness(np.array([0.0]))[0])
        if EI > 0:
            string["bending_stiffness"] = EI
        out["string"] = string
    if pf.support:
        out["support"] = [
            {k: (v * 1e3 if k == "at" else v) for k, v in s.model_dump().items() if v is not None}
            for s in pf.support
        ]
    if pf.model.theory != "timoshenko" or pf.model.tolerance_cents != 0.01:
        out["model"] = pf.model.model_dump()
    out["target"] = pf.target_value()
    return out


# ---------------------------------------------------------------------------------------------
# The report of one design


@dataclass(frozen=True)
class CertifiedPartial:
    """One goal as certified: its target, what the certifying model found, and by whom."""

    family: str
    order: int
    target_hz: float
    achieved_hz: float  # in the certifying model
    beam_hz: float  # certified beam solve of the part as written
    error_cents: float
    tolerance_cents: float
    certified_by: str

    @property
    def label(self) -> str:
        if self.family == "strike":
            return "strike note"
        if self.family == "transverse":  # a string's own word: its modes, not a beam's
            return f"mode {self.order}"
        return f"{self.family} {self.order}"


@dataclass(frozen=True)
class DesignFigures:
    """What the figures of a design show (mm, Hz), so that they are drawn without a solve."""

    modes: tuple[tuple[str, int, float], ...]  # (family, order, Hz) up to 1.35 x the top goal
    # in the certifying model (``modes_model``)
    targets: tuple[tuple[str, float, float], ...]  # (label, Hz, tolerance in cents)
    x_mm: tuple[float, ...]
    thickness_mm: tuple[float, ...] | None  # bars: the side profile
    blank_mm: float | None
    holes: tuple[tuple[float, float, float], ...]  # (x, diameter, height) mm
    shape: tuple[float, ...] | None  # tubes and strings: the first mode shape
    nodes_mm: tuple[float, ...]
    density_g_m: tuple[float, ...] | None = None  # strings: the designed linear density
    modes_model: str = "beam model"
    beam_modes: tuple[tuple[str, int, float], ...] = ()  # the beam's, when it did not certify


@dataclass(frozen=True, eq=False)
class DesignReport:
    """A design as the workflow returns it: plain immutable values (picklable, so a worker
    process can hand it back), ready for the writers in ``tonewright.design_files``.

    ``status`` is the optimizer's (``STATUS_MESSAGES``), after the certified solve of the
    written part; ``partials`` that certified solve; ``part`` the written-part table;
    ``certified_by`` the model that certified it."""

    title: str
    status: int
    message: str
    binding: tuple[str, ...]
    fidelity: str
    partials: tuple[CertifiedPartial, ...]
    part: Mapping[str, Any]
    certified_by: str
    variables: tuple[tuple[str, float], ...]
    summary: Mapping[str, float]
    seed: int
    solves: int
    modes_tracked_by_shape: bool
    unwanted: tuple[UnwantedMode, ...]
    unwanted_model: str
    corrections: tuple[tuple[str, tuple[Any, ...]], ...]  # (model label, CorrectionSteps)
    figures: DesignFigures
    values: tuple[tuple[str, float], ...] = ()  # the variables in their units (name with unit)
    pitch_convention: str = ""  # A4, temperament, and any stretch or temperature shift

    @property
    def converged(self) -> bool:
        return self.status == 0

    @property
    def nodes_mm(self) -> tuple[float, ...]:
        return self.figures.nodes_mm

    def start_variables(self) -> Mapping[str, float] | None:
        """The design variables for a similar part to start from, when this design met."""
        return dict(self.variables) if self.converged else None


def _unwanted_model(outcome: Outcome) -> str:
    """Which model judged the clearance of the unwanted modes in this outcome."""
    if outcome.stages and outcome.stages[-1][0].model in ("solid", "psolid"):
        if outcome.stages[-1][1].final.clear is not None:
            return UNWANTED_3D
    return UNWANTED_CAVEAT


def _figures(
    problem: Problem,
    part: Part,
    modal,
    rows: list[dict[str, Any]],
    certified_modes: tuple[tuple[str, int, float], ...] | None = None,
    certified_by: str = "",
    certified_nodes_mm: tuple[float, ...] | None = None,
) -> DesignFigures:
    first = "bending" if modal.family("bending") else "transverse"
    nodes = tuple(x * 1e3 for x in modal.family(first)[0].nodes_m)
    if certified_nodes_mm is not None and len(certified_nodes_mm) == len(nodes):
        nodes = certified_nodes_mm  # the certifying model's, on the top face's centre line
    used = [r["achieved_hz"] for r in rows]
    for k, _ in STRIKE_MODES if any(r["family"] == "strike" for r in rows) else ():
        used.append(modal.frequency("bending", k))  # the strike note's own modes
    top = 1.35 * max(used)
    beam_modes = tuple(
        (m.family, m.order, m.frequency_hz) for m in modal.modes if m.frequency_hz <= top
    )
    beam_modes += tuple(("strike", 1, r["achieved_hz"]) for r in rows if r["family"] == "strike")
    modes, second, model = beam_modes, (), f"beam model ({problem.part_file.model.theory})"
    if certified_modes is not None:
        modes = tuple(m for m in certified_modes if m[2] <= top and m[0] != "other")
        second, model = beam_modes, certified_by
    targets = tuple(
        (
            f"{r['family']} {r['order']}" if r["family"] != "strike" else "strike",
            r["target_hz"],
            r["tolerance_cents"],
        )
        for r in rows
    )
    x = np.linspace(0.0, part.length, 801)
    if isinstance(part, Bar):
        holes = tuple(
            (
                hh.x * 1e3,
                hh.diameter * 1e3,
                (hh.height or 0.5 * float(part.thickness(np.array([hh.x]))[0])) * 1e3,
            )
            for hh in part.holes
        )
        thickness = tuple(float(v) for v in part.thickness(x) * 1e3)
        blank = problem.part_file.bar.thickness * 1e3
        shape = None
    else:
        holes, thickness, blank = (), None, None
        shape = tuple(float(v) for v in modal.modes[0].shape(x))
    density = None
    if isinstance(part, String):
        density = tuple(float(v) * 1e3 for v in part.linear_density(x))
    return DesignFigures(
        modes,
        targets,
        tuple(float(v) for v in x * 1e3),
        thickness,
        blank,
        holes,
        shape,
        nodes,
        density_g_m=density,
        modes_model=model,
        beam_modes=second,
    )


def _material_3d(problem: Problem):
    spec = problem.part_file.material_spec(problem.base_dir)
    return spec.to_solid(problem.table.thickness_axis)


def certify_3d(problem: Problem, u: np.ndarray):
    """The 3D certifier's solve of the design ``u`` (its own mesh, the cut's kinks as element
    ends) with its error estimate (``forward.psolid.psolid_convergence``)."""
    part = problem.space.part(u)
    bar = problem.part_file.bar
    top = solid_top_hz(problem.evaluator.goals)
    ends = certifier_ends(part.length, problem.space.kinks(u))
    width = design_width(problem.space, u, bar.width)
    return bar_solid_modes(
        part, width, bar.thickness, _material_3d(problem), top, CERTIFY_MESH, ends
    )


WANTED_3D = {"bending": 4, "torsion": 3, "lateral": 2}


def _wanted_error(conv) -> float:
    """Largest error estimate (cents, ``PSolidConvergence.error_cents``) over the modes a
    bar's design cares about."""
    errs = [
        abs(float(e))
        for m, e in zip(conv.result.modes, conv.error_cents, strict=True)
        if m.order <= WANTED_3D.get(m.family, 0) and np.isfinite(e)
    ]
    return max(errs) if errs else float("nan")


def design_report(
    problem: Problem,
    progress: Progress | None = None,
    fidelity: str | None = None,
    start: Mapping[str, float] | None = None,
) -> DesignReport:
    """Design, correct, write the part table, certify it, and report.

    ``start``: the design variables of a similar part (a neighbouring bar's
    ``DesignReport.start_variables()``) to polish first; ignored unless the variables are the
    same as this problem's."""
    fidelity = fidelity_of(problem, fidelity)
    names = list(problem.space.names())
    u0 = None
    if start is not None and list(start) == names:
        u0 = np.array([float(start[k]) for k in names])
    outcome = run_design(problem, progress, fidelity, u0)
    result = outcome.result
    table = part_table(problem, result.u)
    written = parse_part(table, where="designed part")  # the table must be a valid part file
    part = written.to_part(problem.base_dir)
    modal = certify(problem, part)
    rows = achieved(problem, modal)
    solver = (
        "string model"
        if isinstance(part, String)
        else (f"{problem.part_file.model.theory.capitalize()} beam model")
    )
    certifier = solver
    for r in rows:
        r["beam_hz"] = r["achieved_hz"]
        r["certified_by"] = certifier
    certified_modes = None
    nodes_3d = None
    by = certifier
    converged_note = f"beam model converged to {modal.max_error_cents:.2g} cent"
    if outcome.stages:
        stage, corrected = outcome.stages[-1]
        hi_hz = corrected.final.high_fidelity_hz
        by = stage.label
        if stage.model == "psolid":
            conv = certify_3d(problem, result.u)
            res = conv.result
            hi_hz = goal_frequencies(res, problem.evaluator.goals, stage.label, res.f_hz[-1])
            certified_modes = tuple((m.family, m.order, float(m.f_hz)) for m in res.modes)
            first = next(
                k for k, m in enumerate(res.modes) if m.family == "bending" and m.order == 1
            )
            nodes_3d = tuple(x * 1e3 for x in top_face_nodes(res.coords, res.shapes[first]))
            worst = _wanted_error(conv)
            converged_note = (
                f"3D model {res.n_dof} unknowns, error under {worst:.2g} cent (estimate "
                f"extrapolated over three degrees, the change from one degree lower at sharp "
                f"corners); beam model converged to "
                f"{modal.max_error_cents:.2g} cent"
            )
        elif corrected.final.modes:
            certified_modes = corrected.final.modes
        for r, f in zip(rows, hi_hz, strict=True):
            r["achieved_hz"] = float(f)
            r["error_cents"] = float(cents(f, r["target_hz"]))
            r["certified_by"] = stage.label
    result = rechecked(
        result, [r["error_cents"] for r in rows], [r["tolerance_cents"] for r in rows]
    )
    partials = tuple(
        CertifiedPartial(
            r["family"],
            int(r["order"]),
            float(r["target_hz"]),
            float(r["achieved_hz"]),
            float(r["beam_hz"]),
            float(r["error_cents"]),
            float(r["tolerance_cents"]),
            r["certified_by"],
        )
        for r in rows
    )
    pf = problem.part_file
    report = DesignReport(
        title=pf.title or "",
        status=result.status,
        message=result.message,
        binding=tuple(result.binding),
        fidelity=fidelity,
        partials=partials,
        part=table,
        certified_by=(
            f"{by}; {converged_note}"
            if outcome.stages
            else f"{solver}, converged to {modal.max_error_cents:.2g} cent"
        ),
        variables=tuple(zip(names, map(float, result.u), strict=True)),
        values=variable_values(problem.space, result.u),
        pitch_convention=pitch_convention(problem),
        summary=dict(problem.space.describe(result.u)),
        seed=problem.table.seed,
        solves=result.solves,
        modes_tracked_by_shape=bool(result.evaluation.mac_ok),
        unwanted=tuple(result.evaluation.unwanted),
        unwanted_model=_unwanted_model(outcome),
        corrections=tuple((stage.label, corrected.steps) for stage, corrected in outcome.stages),
        figures=_figures(problem, part, modal, rows, certified_modes, by, nodes_3d),
    )
    advice = width_advice(problem, report)
    if advice:
        report = dataclasses.replace(report, binding=(*report.binding, advice))
    return report


def clearing_width_for(
    problem: Problem, report: DesignReport, narrowest: float, widest: float | None = None
) -> ClearingWidth | None:
    """After a bar's design missed on the clearance of a torsion or lateral mode: a narrower
    width (down to ``narrowest``, m) at which that design's unwanted modes, where its
    certifying model put them, clear every partial's band (``optimizer.blanks``: the beam's
    modes at each width times their 3D-over-beam ratios at this design); with ``widest``, a
    wider one instead (advice on the blank). None when the miss is not the clearance, the
    width is already a design variable, or no width clears."""
    clearance = problem.evaluator.clearance
    space = problem.space
    # a mode within a band, even one close enough to count as coincident, can stall the
    # 3D correction (the modes mix near a crossing): a width that moves it off helps too
    crowded = any(m.gap_hz < m.band_hz for m in report.unwanted)
    if (
        report.converged
        or clearance is None
        or not isinstance(space, BarUndercut)
        or space.width_range
        or not (crowded or clearance_binds(report.status, report.binding))
    ):
        return None
    part = space.part(np.array([v for _, v in report.variables]))
    observed = [(m.family, m.order, m.f_hz) for m in report.unwanted]
    scale = unwanted_scale(part, clearance, observed)
    goals = problem.evaluator.goals
    return clearing_width(part, goals, clearance, scale, narrowest, widest=widest)


NARROWEST_ADVICE, WIDEST_ADVICE = 0.7, 1.25  # of the bar's width: the widths advised on


def width_advice(problem: Problem, report: DesignReport) -> str | None:
    """For a miss on a torsion or lateral mode: the width that would clear it, in words
    (narrower: cut from this blank; else wider: a new blank), or None."""
    if report.converged or problem.part_file.bar is None:
        return None
    w = float(report.part["bar"]["width"]) * 1e-3
    why = "would keep the torsion and lateral modes clear (predicted from this design's modes)"
    narrower = clearing_width_for(problem, report, NARROWEST_ADVICE * w)
    if narrower is not None:
        return f"a width of {narrower.width * 1e3:.1f} mm, cut from this blank, {why}"
    wider = clearing_width_for(problem, report, w, widest=WIDEST_ADVICE * w)
    if wider is not None:
        return f"a blank {wider.width * 1e3:.1f} mm wide {why}"
    return None
