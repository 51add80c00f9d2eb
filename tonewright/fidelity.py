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

import numpy as np

from tonewright.errors import InputError
from tonewright.forward import Bar
from tonewright.forward.plane import PlaneMesh, plane_modes
from tonewright.forward.solid import SolidMesh, solid_modes
from tonewright.optimizer import Goal, HighFidelityModes

__all__ = ["FIDELITIES", "Stage", "high_fidelity_function", "stages_for", "top_face_nodes"]

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
