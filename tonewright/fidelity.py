"""Higher-fidelity checks of bars: the fast 3D solid model (p-version hexahedra) that
certifies every bar design by default, the 2D side-profile model, the 27-node 3D model kept
as a cross-check, all set up from part files; and the staged correction of beam designs.

Fidelities of a design (``fidelity``):
- ``beam``: the beam model alone (fast; can be tens of cents off on wood cut from one side,
  and its torsion modes hundreds of cents off on an undercut bar);
- ``plane``: corrections by the 2D plane-stress side-profile model (bending only; the
  clearance of torsion and lateral modes stays the beam's);
- ``solid`` (the default for bars): corrections by the p-version 3D model
  (``forward.psolid``), which also judges the torsion and lateral modes, so a design that
  meets its target meets it in 3D, unwanted modes included.
The 2D and 3D models carry no holes and need a constant width.

The 3D certifier's mesh: one element between neighbouring kinks of the design's cut (the
knots of a spline, the ends of the cut, the edges of steps), split so that none is longer than
an eighth of the bar, with degrees (5, 6, 5) along, across half the width and through the
thickness. Where the cut has re-entrant corners (straight tapers meeting a flat) the model
adds two geometric layers of elements on each side of each corner, a second element through
the thickness, and one degree across the width and through the thickness. On the demo bar and
the benchmark bars every wanted mode (bending 1-4, torsion 1-3, lateral 1-2) is then within 0.1
cent of a converged reference (``benchmarks/solid.py``; ``tests/test_psolid.py``; for the
straight-taper bar checked against scikit-fem, ``tests/test_fidelity.py``).
"""

from __future__ import annotations

import itertools
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from tonewright.acoustics.pitch import cents, critical_bandwidth_hz
from tonewright.errors import InputError
from tonewright.forward import Bar, solve
from tonewright.forward.classify import ModeSet
from tonewright.forward.plane import PlaneMesh, plane_modes
from tonewright.forward.psolid import PMesh, psolid_convergence, psolid_modes
from tonewright.forward.solid import SolidMesh, solid_modes
from tonewright.optimizer import Goal, HighFidelityModes
from tonewright.partfile import PartFile
from tonewright.tuning import resolve

__all__ = [
    "CERTIFY_MESH",
    "FIDELITIES",
    "MESHES",
    "MODEL_LABELS",
    "PART_MESH",
    "VERIFY_MODELS",
    "Stage",
    "bar_solid_modes",
    "certifier_ends",
    "design_width",
    "goal_frequencies",
    "high_fidelity_function",
    "part_element_ends",
    "solid_top_hz",
    "stages_for",
    "top_face_nodes",
    "verify_part",
]

FIDELITIES = ("beam", "plane", "solid")
# the design loop's 3D model: elements between the cut's kinks (certifier_ends); at a cut's
# re-entrant corners one degree more across the width and through the thickness
CERTIFY_MESH = PMesh(nx=1, px=5, py=6, pz=5, corner_raise=1)
# a part file's profile is stations (no kinks known): elements from the cut's edges
# (part_element_ends), one degree more along x
PART_MESH = PMesh(nx=1, px=6, py=6, pz=5)
MAX_ELEMENT_SHARE = 1.0 / 8.0  # of the bar's length
COARSE_SOLID = SolidMesh(nx=48, ny=3, nz=6)
MODEL_LABELS = {
    "psolid": "3D solid (p-version)",
    "plane": "2D profile",
    "solid": "3D solid (27-node)",
}


@dataclass(frozen=True)
class Stage:
    model: str  # "psolid", "plane" or "solid" (27-node)
    mesh: object
    label: str


def stages_for(fidelity: str) -> list[Stage]:
    if fidelity == "beam":
        return []
    if fidelity == "plane":
        return [Stage("plane", PlaneMesh(), MODEL_LABELS["plane"])]
    return [
        Stage("plane", PlaneMesh(), MODEL_LABELS["plane"]),
        Stage("psolid", CERTIFY_MESH, MODEL_LABELS["psolid"]),
    ]


def check_bar(part: Bar) -> None:
    """The 2D/3D models take a constant width."""
    x = np.concatenate([np.linspace(0.0, part.length, 9), np.asarray(part.width.breakpoints)])
    widths = part.width(x)
    if np.ptp(widths) > 1e-9 * widths.max():
        raise InputError("bar.width_profile: the 2D/3D models need a constant width")


def certifier_ends(
    length: float, kinks: np.ndarray, longest_share: float = MAX_ELEMENT_SHARE
) -> np.ndarray:
    """Element ends for the 3D certifier: the kinks, with every gap longer than
    ``longest_share`` of the length split evenly (the p-version converges exponentially
    only where the profile is smooth inside elements, and an element much longer than the
    bar's thickness changes needs a high degree along x)."""
    pts = np.unique(np.concatenate([[0.0, length], np.asarray(kinks, dtype=float)]))
    pts = pts[(pts >= 0.0) & (pts <= length)]
    longest = longest_share * length
    out = [pts[:1]]
    for a, b in itertools.pairwise(pts):
        n = int(np.ceil((b - a) / longest - 1e-9))
        out.append(np.linspace(a, b, n + 1)[1:])
    return np.concatenate(out)


def part_element_ends(part: Bar, blank_thickness: float) -> np.ndarray:
    """Element ends for a bar whose profile is given as stations (a part file): the cut's
    two edges (the last stations at full thickness, where the curvature of the profile
    jumps), then gaps split to a twelfth of the length. With twelve equal elements that miss
    the edges, a designed xylophone bar read 3.8 cents sharp; with these, 0.2 cent
    (``tests/test_design_3d.py`` checks the written part against its design)."""
    x = np.asarray(part.thickness.breakpoints, dtype=float)
    x = x[(x > 0.0) & (x < part.length)]
    edges = np.zeros(0)
    if x.size:
        cut = np.flatnonzero(part.thickness(x) < blank_thickness * (1.0 - 1e-9))
        if cut.size:
            first, last = cut[0], cut[-1]
            edges = np.array(
                [
                    x[first - 1] if first > 0 else 0.0,
                    x[last + 1] if last + 1 < x.size else part.length,
                ]
            )
    return certifier_ends(part.length, edges, 1.0 / 12.0)


def goal_frequencies(res: ModeSet, goals: Sequence[Goal], label: str, top: float) -> np.ndarray:
    """Hz of each goal's mode in a solid or profile result (a strike goal: the geometric mean
    of its bending components)."""
    out = []
    for g in goals:
        if g.family == "strike":
            fam = res.family_hz("bending")
            need = max(k for k, _, _ in g.components)
            if fam.size < need:
                raise InputError(f"the {label} found no bending mode {need} below {top:.0f} Hz")
            out.append(float(np.exp(sum(a * np.log(fam[k - 1] / d) for k, d, a in g.components))))
            continue
        fam = res.family_hz(g.family)
        if fam.size < g.order:
            raise InputError(f"the {label} found no {g.family} mode {g.order} below {top:.0f} Hz")
        out.append(float(fam[g.order - 1]))
    return np.array(out)


def solid_top_hz(goals: Sequence[Goal]) -> float:
    """Highest frequency the 3D check needs: past the band of the top partial (half a
    critical band is under 10 % of a partial above 500 Hz, Zwicker & Terhardt 1980), so the
    unwanted modes around it are seen."""
    top = 0.0
    for g in goals:
        f = g.f_hz
        if g.family == "strike":
            f = g.f_hz * max(d for _, d, _ in g.components)
        top = max(top, f)
    return 1.25 * top


def design_width(space, u: np.ndarray, blank_width: float) -> float:
    """The width of design ``u``: the designed one when the width is a variable, else the
    blank's (bending in the beam and 2D models does not depend on it; the 3D model's does)."""
    w = space.width(u) if hasattr(space, "width") else None
    return blank_width if w is None else w


def high_fidelity_function(stage: Stage, space, blank_thickness: float, width: float, material):
    """``hf(u, goals)``: Hz of each goal's mode in the stage's model; the 3D stages also return
    the torsion and lateral modes (``HighFidelityModes``), so the clearance of unwanted modes
    is judged in 3D, not by the beam, whose torsion modes are far off on an undercut bar."""

    def hf(u: np.ndarray, goals: Sequence[Goal]) -> np.ndarray | HighFidelityModes:
        part = space.part(u)
        top = solid_top_hz(goals)
        bar = (
            part.length,
            design_width(space, u, width),
            blank_thickness,
            part.thickness,
            material,
        )
        if stage.model == "plane":
            if any(g.family not in ("bending", "strike") for g in goals):
                raise InputError("the 2D model checks bending partials only: use fidelity 'solid'")
            res = plane_modes(*bar, fmax_hz=top, mesh=stage.mesh)
            return goal_frequencies(res, goals, stage.label, top)
        if stage.model == "psolid":
            ends = certifier_ends(part.length, space.kinks(u))
            res = psolid_modes(*bar, count=8, mesh=stage.mesh, element_ends=ends, fmax_hz=top)
        else:
            res = solid_modes(*bar, fmax_hz=top, mesh=stage.mesh)
        families = {f: res.family_hz(f) for f in ("torsion", "lateral")}
        modes = tuple((m.family, m.order, float(m.f_hz)) for m in res.modes)
        return HighFidelityModes(goal_frequencies(res, goals, stage.label, top), families, modes)

    return hf


def bar_solid_modes(
    part: Bar,
    width: float,
    blank_thickness: float,
    material,
    fmax_hz: float,
    mesh: PMesh = PART_MESH,
    element_ends: np.ndarray | None = None,
    probes: np.ndarray | None = None,
):
    """The p-version 3D modes of a bar up to ``fmax_hz`` with its error estimate (the
    same model one and two degrees lower): a ``PSolidConvergence``. Without ``element_ends`` the
    profile is taken as stations (``part_element_ends``). ``probes``: top-face points (x, y)
    in the model's coordinates (y from 0 to ``width``) for ``result.probe_w``."""
    if element_ends is None:
        element_ends = part_element_ends(part, blank_thickness)
    try:
        return psolid_convergence(
            part.length,
            width,
            blank_thickness,
            part.thickness,
            material,
            count=8,
            mesh=mesh,
            element_ends=element_ends,
            fmax_hz=fmax_hz,
            probes=probes,
        )
    except ValueError as exc:
        raise InputError(f"3D model: {exc}") from None


def top_face_nodes(coords: np.ndarray, shape: np.ndarray) -> list[float]:
    """Zeros of the vertical displacement along the top face's centre line (x in metres)."""
    j = coords.shape[1] // 2
    x = coords[:, j, -1, 0]
    w = shape[:, j, -1, 2]
    sign = np.sign(w)
    idx = np.flatnonzero(sign[:-1] * sign[1:] < 0)
    return [float(x[i] - w[i] * (x[i + 1] - x[i]) / (w[i + 1] - w[i])) for i in idx]


MESHES = {"coarse": COARSE_SOLID, "standard": SolidMesh(), "fine": SolidMesh().refined(1.5)}
VERIFY_MODELS = ("psolid", "hex27")


def verify_part(
    part_file: PartFile, base: Path | None, table, mesh: str = "standard", model: str = "psolid"
) -> dict:
    """3D modes of a bar (a validated part file, its validated design table) against the beam
    model and the target; a JSON-ready dict: ``modes``, ``targets``, ``warnings``, ``mesh``,
    ``model``. ``model``: ``psolid`` (the certifying p-version model, with its nested error
    estimate per mode) or ``hex27`` (the 27-node model on ``mesh``, a cross-check)."""
    if model not in VERIFY_MODELS:
        raise InputError(f"--model {model!r}: choose psolid or hex27")
    if mesh not in MESHES:
        raise InputError(f"--mesh {mesh!r}: choose coarse, standard or fine")
    part = part_file.to_part(base)
    if not isinstance(part, Bar):
        raise InputError("verify: the 3D model is for bars; tubes and strings use 'modes'")
    check_bar(part)
    spec = part_file.material_spec(base)
    material = spec.to_solid(table.thickness_axis)
    beam = solve(part, {"bending": 6, "lateral": 3, "torsion": 4, "axial": 1}, tol_cents=0.01)
    targets = []
    if part_file.target is not None:
        resolved = resolve(part_file.target, spec.temp_coeff_cents_per_K)
        targets = [p for p in resolved.partials if p.family != "strike"]
    top = 1.25 * (max(p.f_hz for p in targets) if targets else beam.frequency("bending", 4))
    bar = part_file.bar
    errors: dict[tuple[str, int], float] = {}
    if model == "psolid":
        conv = bar_solid_modes(part, bar.width, bar.thickness, material, top)
        res = conv.result
        errors = {
            (m.family, m.order): float(e)
            for m, e in zip(res.modes, conv.error_cents, strict=True)
            if np.isfinite(e)
        }
        mesh_info = {
            "name": f"p-version ({PART_MESH.px}, {PART_MESH.py}, {PART_MESH.pz})",
            "dofs": int(res.n_dof),
            "status": res.message,
            "max_error_cents": round(conv.max_error_cents, 4) if errors else None,
        }
        label = "3D orthotropic solid, p-version hexahedra (estimated error); beam: Timoshenko"
    else:
        try:
            res = solid_modes(
                part.length,
                bar.width,
                bar.thickness,
                part.thickness,
                material,
                fmax_hz=top,
                mesh=MESHES[mesh],
            )
        except ValueError as exc:
            raise InputError(f"verify: {exc}") from None
        mesh_info = {"name": mesh, "dofs": int(res.n_dof), "status": res.message}
        label = "3D orthotropic solid, 27-node hexahedra; beam: Timoshenko"
    beam_hz = {(m.family, m.order): m.frequency_hz for m in beam.modes}
    modes = []
    for k, m in enumerate(res.modes):
        b = beam_hz.get((m.family, m.order))
        nodes = top_face_nodes(res.coords, res.shapes[k]) if m.family == "bending" else []
        entry = {
            "family": m.family,
            "order": m.order,
            "frequency_hz": round(float(m.f_hz), 4),
            "nodes_mm": [round(x * 1e3, 2) for x in nodes],
            "beam_hz": None if b is None else round(b, 4),
            "beam_minus_3d_cents": None if b is None else round(float(cents(b, m.f_hz)), 2),
            "share": round(float(m.share), 3),
        }
        if model == "psolid":
            e = errors.get((m.family, m.order))
            entry["error_cents"] = None if e is None else round(abs(e), 4)
        modes.append(entry)
    rows, warnings = [], []
    solid_hz = {(m["family"], m["order"]): m["frequency_hz"] for m in modes}
    for p in targets:
        f = solid_hz.get((p.family, p.order))
        err = None if f is None else float(cents(f, p.f_hz))
        rows.append(
            {
                "family": p.family,
                "order": p.order,
                "target_hz": p.f_hz,
                "solid_hz": f,
                "error_cents": None if err is None else round(err, 3),
                "tolerance_cents": p.tolerance_cents,
                "within": bool(err is not None and abs(err) <= p.tolerance_cents),
            }
        )
        band = 0.5 * table.clearance_bands * float(critical_bandwidth_hz(p.f_hz))
        for m in modes:
            if (m["family"], m["order"]) == (p.family, p.order) or m["family"] == p.family:
                continue
            gap = abs(m["frequency_hz"] - p.f_hz)
            if table.coincidence_hz < gap < band:
                warnings.append(
                    f"{m['family']} {m['order']} at {m['frequency_hz']:.1f} Hz is {gap:.1f} Hz "
                    f"from the {p.family} {p.order} target ({p.f_hz:.1f} Hz); "
                    f"keep {band:.0f} Hz clear"
                )
    if part.holes:
        warnings.append("the 3D model leaves out the suspension holes")
    return {
        "modes": modes,
        "targets": rows,
        "warnings": warnings,
        "mesh": mesh_info,
        "model": label,
    }
