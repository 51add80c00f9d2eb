"""The partials of a part file, laid out for a table or JSON (``tonewright modes``).

A bar of constant width is solved by the model that certifies designs, the p-version 3D solid
(``tonewright.fidelity.bar_solid_modes``, with its error estimate per mode); the beam
model is the option ``model="beam"`` and the only model of tubes, strings and bars of varying
width. Every result names its model. Given probe points on the top face, each 3D mode also
carries its mass-normalised vertical displacement there (the sound preview's strike weights).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from tonewright.acoustics.pitch import STRIKE_MODES, hz_to_note, strike_note_hz
from tonewright.errors import InputError
from tonewright.fidelity import MODEL_LABELS, bar_solid_modes, check_bar, top_face_nodes
from tonewright.forward import Bar, Tube, families_of, solve
from tonewright.partfile import PartFile, load_part

__all__ = [
    "MODELS",
    "PartModes",
    "SolidMode",
    "SolvedPart",
    "modes_payload",
    "part_modes",
    "solve_part",
    "solve_part_file",
    "strike_payload",
]

MODELS = ("auto", "solid", "beam")


@dataclass(frozen=True)
class SolidMode:
    """One mode of the 3D model, with the fields ``modes_payload`` reads."""

    family: str
    order: int
    frequency_hz: float
    error_cents: float  # error estimate (NaN where the lower space has no such mode)
    nodes_m: tuple[float, ...]
    # mass-normalised vertical displacement (1/sqrt(kg)) at the probes part_modes was given
    probe_w: tuple[float, ...] = ()


@dataclass(frozen=True)
class PartModes:
    """Modes of a part and the model that computed them."""

    modes: tuple
    converged: bool
    max_error_cents: float
    message: str
    model: str  # a label for people, e.g. "3D solid (p-version)"
    notes: tuple[str, ...] = ()


def _beam_modes(part_file: PartFile, part, count: int, note: str = "") -> PartModes:
    counts = dict.fromkeys(families_of(part), count)
    if isinstance(part, Tube):  # the strike note needs bending mode 4 at least
        counts["bending"] = max(count, max(m for m, _ in STRIKE_MODES))
    result = solve(
        part, counts, tol_cents=part_file.model.tolerance_cents, theory=part_file.model.theory
    )
    return PartModes(
        tuple(result.modes),
        result.converged,
        result.max_error_cents,
        result.message,
        f"beam model ({part_file.model.theory})",
        (note,) if note else (),
    )


def _solid_modes(
    part_file: PartFile,
    base: Path | None,
    part: Bar,
    count: int,
    probes: tuple[tuple[float, float], ...] = (),
) -> PartModes:
    spec = part_file.material_spec(base)
    material = spec.to_solid(part_file.design.thickness_axis)
    # the modes up to a little past the beam's bending `count` (the 3D model's bending modes
    # lie at or below the beam's on an undercut bar, its torsion modes above)
    beam = solve(part, {"bending": count}, tol_cents=0.1, theory=part_file.model.theory)
    top = 1.3 * beam.frequency("bending", count)
    width = part_file.bar.width
    # the 3D model's y runs 0 .. width across the bar; a probe's y is from the centre line
    points = np.array([(x, 0.5 * width + y) for x, y in probes]) if probes else None
    conv = bar_solid_modes(part, width, part_file.bar.thickness, material, top, probes=points)
    res = conv.result
    modes = []
    for k, m in enumerate(res.modes):
        if m.family == "other" or m.order > count:
            continue
        nodes = top_face_nodes(res.coords, res.shapes[k]) if m.family == "bending" else []
        w = tuple(float(v) for v in res.probe_w[k]) if points is not None else ()
        modes.append(
            SolidMode(
                m.family,
                m.order,
                float(m.f_hz),
                abs(float(conv.error_cents[k])),
                tuple(nodes),
                w,
            )
        )
    errors = [m.error_cents for m in modes if np.isfinite(m.error_cents)]
    worst = max(errors) if errors else float("nan")
    notes = [f"3D modes up to {top:.0f} Hz"]
    if part.holes:
        notes.append("the 3D model leaves out the suspension holes")
    message = f"{res.message} to {worst:.2g} cent (estimated), {res.n_dof} unknowns"
    ok = res.status == 0 and bool(errors)
    return PartModes(tuple(modes), ok, worst, message, MODEL_LABELS["psolid"], tuple(notes))


def part_modes(
    part_file: PartFile,
    base: Path | None,
    count: int,
    model: str = "auto",
    probes: tuple[tuple[float, float], ...] = (),
) -> PartModes:
    """Modes of a validated part file. ``model``: ``auto`` (the certifying 3D model for a bar
    of constant width, else the beam), ``solid`` (3D, bars only) or ``beam``. ``probes``:
    points (x, y) in metres on the top face, y from the centre line; each 3D mode then
    carries its mass-normalised vertical displacement there (``SolidMode.probe_w``); the
    beam's modes ignore them."""
    if model not in MODELS:
        raise InputError(f"--model {model!r}: choose auto, solid or beam")
    part = part_file.to_part(base)
    if model == "beam":
        return _beam_modes(part_file, part, count)
    if not isinstance(part, Bar):
        if model == "solid":
            raise InputError("--model solid: the 3D model is for bars; tubes and strings: beam")
        return _beam_modes(part_file, part, count)
    try:
        check_bar(part)
    except InputError:
        if model == "solid":
            raise
        return _beam_modes(part_file, part, count, "the bar's width varies: the 3D model needs one")
    return _solid_modes(part_file, base, part, count, probes)


@dataclass(frozen=True, eq=False)
class SolvedPart:
    """A part file's modes, its title, its kind and its own pitch reference."""

    result: PartModes
    title: str
    kind: str  # bar, tube or string
    a4_hz: float | None  # the part's own [target] a4_hz, when it has a target


def solve_part(path: Path, count: int, model: str = "auto") -> SolvedPart:
    """Load a part file and solve ``count`` modes of each family (a tube at least the bending
    modes its strike note needs) with ``model``."""
    part_file, base = load_part(path)
    a4 = part_file.target.a4_hz if part_file.target is not None else None
    result = part_modes(part_file, base, count, model)
    return SolvedPart(result, part_file.title or path.stem, part_file.kind, a4)


def solve_part_file(path: Path, count: int, model: str = "auto") -> tuple[PartModes, str]:
    """Load a part file and solve ``count`` modes of each of its families."""
    solved = solve_part(path, count, model)
    return solved.result, solved.title


def strike_payload(result: PartModes, a4_hz: float) -> dict:
    """A tube's strike note, an octave below bending mode 4 (the pitch heard)."""
    bending = sorted(m.frequency_hz for m in result.modes if m.family == "bending")
    f = strike_note_hz(bending)
    note, offset = hz_to_note(f, a4_hz)
    return {"frequency_hz": round(f, 6), "note": note, "cents": round(offset, 3)}


def _reference_hz(result) -> float:
    first = [m for m in result.modes if m.family in ("bending", "transverse") and m.order == 1]
    return first[0].frequency_hz if first else result.modes[0].frequency_hz


def modes_payload(result, a4_hz: float) -> dict:
    """The JSON form: one entry per mode, frequencies in Hz and node positions in mm."""
    ref = _reference_hz(result)
    out = []
    for m in sorted(result.modes, key=lambda m: m.frequency_hz):
        note, offset = hz_to_note(m.frequency_hz, a4_hz)
        out.append(
            {
                "family": m.family,
                "order": m.order,
                "frequency_hz": round(m.frequency_hz, 6),
                "ratio": round(m.frequency_hz / ref, 6),
                "note": note,
                "cents": round(offset, 3),
                "error_cents": float(f"{m.error_cents:.3g}"),
                "nodes_mm": [round(x * 1e3, 3) for x in m.nodes_m],
            }
        )
    payload = {
        "modes": out,
        "converged": result.converged,
        "max_error_cents": float(f"{result.max_error_cents:.3g}"),
        "a4_hz": a4_hz,
    }
    if isinstance(result, PartModes):
        payload["model"] = result.model
        payload["notes"] = list(result.notes)
    return payload
