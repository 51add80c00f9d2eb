"""Higher-fidelity checks of bars: the 2D side-profile model and the 3D solid model, set up
from part files, and the staged correction of beam-model designs.

Stages of a corrected design (``fidelity``):
- ``beam``: the beam model alone (fast; can be tens of cents off on wood cut from one side);
- ``plane``: corrections by the 2D plane-stress side-profile model (sees the neutral-axis
  shift and stress spreading in vertical bending; a few cents from 3D on undercut bars);
- ``solid``: the plane stage, then corrections by a coarse 3D model, then a check (and if
  needed a last correction) by the standard 3D mesh, converged to under 0.5 cent.
The 2D and 3D models carry no holes and need a constant width.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from tonewright.acoustics.pitch import cents, critical_bandwidth_hz
from tonewright.errors import InputError
from tonewright.forward import Bar, solve
from tonewright.forward.plane import PlaneMesh, plane_modes
from tonewright.forward.solid import SolidMesh, solid_modes
from tonewright.optimizer import Goal, HighFidelityModes
from tonewright.partfile import PartFile
from tonewright.tuning import resolve

__all__ = [
    "FIDELITIES",
    "MESHES",
    "Stage",
    "high_fidelity_function",
    "stages_for",
    "top_face_nodes",
    "verify_part",
]

FIDELITIES = ("beam", "plane", "solid")
COARSE_SOLID = SolidMesh(nx=48, ny=3, nz=6)


@dataclass(frozen=True)
class Stage:
    model: str  # "plane" or "solid"
    mesh: object
    label: str


def stages_for(fidelity: str) -> list[Stage]:
    if fidelity == "beam":
        return []
    stages = [Stage("plane", PlaneMesh(), "2D profile")]
    if fidelity == "solid":
        stages += [
            Stage("solid", COARSE_SOLID, "3D coarse"),
            Stage("solid", SolidMesh(), "3D"),
        ]
    return stages


def check_bar(part: Bar) -> None:
    """The 2D/3D models take a constant width."""
    x = np.concatenate([np.linspace(0.0, part.length, 9), np.asarray(part.width.breakpoints)])
    widths = part.width(x)
    if np.ptp(widths) > 1e-9 * widths.max():
        raise InputError("bar.width_profile: the 2D/3D models need a constant width")


def high_fidelity_function(stage: Stage, space, blank_thickness: float, width: float, material):
    """``hf(u, goals)``: Hz of each goal's mode in the stage's model; the 3D stages also return
    the torsion and lateral modes (``HighFidelityModes``), so the clearance of unwanted modes
    is judged in 3D, not by the beam, whose torsion modes are far off on an undercut bar."""

    def hf(u: np.ndarray, goals: Sequence[Goal]) -> np.ndarray | HighFidelityModes:
        part = space.part(u)
        # 3D: up to past the band of the top partial (under 15 % of it each side), for the
        # unwanted modes
        top = (1.25 if stage.model == "plane" else 1.35) * max(g.f_hz for g in goals)
        if stage.model == "plane":
            if any(g.family != "bending" for g in goals):
                raise InputError("the 2D model checks bending partials only: use fidelity 'solid'")
        model = plane_modes if stage.model == "plane" else solid_modes
        res = model(
            part.length,
            width,
            blank_thickness,
            part.thickness,
            material,
            fmax_hz=top,
            mesh=stage.mesh,
        )
        out = []
        for g in goals:
            fam = res.family_hz(g.family)
            if fam.size < g.order:
                raise InputError(
                    f"the {stage.label} found no {g.family} mode {g.order} below {top:.0f} Hz"
                )
            out.append(fam[g.order - 1])
        if stage.model == "plane":
            return np.array(out)
        families = {f: res.family_hz(f) for f in ("torsion", "lateral")}
        return HighFidelityModes(np.array(out), families)

    return hf


def top_face_nodes(coords: np.ndarray, shape: np.ndarray) -> list[float]:
    """Zeros of the vertical displacement along the top face's centre line (x in metres)."""
    j = coords.shape[1] // 2
    x = coords[:, j, -1, 0]
    w = shape[:, j, -1, 2]
    sign = np.sign(w)
    idx = np.flatnonzero(sign[:-1] * sign[1:] < 0)
    return [float(x[i] - w[i] * (x[i + 1] - x[i]) / (w[i + 1] - w[i])) for i in idx]


MESHES = {"coarse": COARSE_SOLID, "standard": SolidMesh(), "fine": SolidMesh().refined(1.5)}


def verify_part(part_file: PartFile, base: Path | None, table, mesh: str = "standard") -> dict:
    """3D modes of a bar (a validated part file, its validated design table) against the beam
    model and the target; a JSON-ready dict: ``modes``, ``targets``, ``warnings``, ``mesh``,
    ``model``."""
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
    top = 1.2 * (max(p.f_hz for p in targets) if targets else beam.frequency("bending", 4))
    bar = part_file.bar
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
    beam_hz = {(m.family, m.order): m.frequency_hz for m in beam.modes}
    modes = []
    for k, m in enumerate(res.modes):
        b = beam_hz.get((m.family, m.order))
        nodes = top_face_nodes(res.coords, res.shapes[k]) if m.family == "bending" else []
        modes.append(
            {
                "family": m.family,
                "order": m.order,
                "frequency_hz": round(float(m.f_hz), 4),
                "nodes_mm": [round(x * 1e3, 2) for x in nodes],
                "beam_hz": None if b is None else round(b, 4),
                "beam_minus_3d_cents": None if b is None else round(float(cents(b, m.f_hz)), 2),
                "share": round(float(m.share), 3),
            }
        )
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
        "mesh": {"name": mesh, "dofs": int(res.n_dof), "status": res.message},
        "model": "3D orthotropic solid, 27-node hexahedra; beam: Timoshenko",
    }
