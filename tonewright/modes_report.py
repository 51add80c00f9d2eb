"""The partials of a part file: solved to its own tolerance and laid out for a table or JSON
(``tonewright modes``)."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from tonewright.acoustics.pitch import hz_to_note, strike_note_hz
from tonewright.forward import ModalResult, Tube, families_of, solve
from tonewright.partfile import load_part

__all__ = ["PartModes", "modes_payload", "solve_part", "solve_part_file", "strike_payload"]


@dataclass(frozen=True, eq=False)
class PartModes:
    result: ModalResult
    title: str
    kind: str  # bar, tube or string
    a4_hz: float | None  # the part's own [target] a4_hz, when it has a target


def solve_part(path: Path, count: int) -> PartModes:
    """Load a part file and solve ``count`` modes of each family (a tube at least the six
    bending modes its strike note needs)."""
    part_file, base = load_part(path)
    part = part_file.to_part(base)
    counts = dict.fromkeys(families_of(part), count)
    if isinstance(part, Tube):
        counts["bending"] = max(count, 6)
    result = solve(
        part, counts, tol_cents=part_file.model.tolerance_cents, theory=part_file.model.theory
    )
    a4 = part_file.target.a4_hz if part_file.target is not None else None
    return PartModes(result, part_file.title or path.stem, part_file.kind, a4)


def solve_part_file(path: Path, count: int) -> tuple[ModalResult, str]:
    """Load a part file and solve ``count`` modes of each of its families."""
    modes = solve_part(path, count)
    return modes.result, modes.title


def strike_payload(result: ModalResult, a4_hz: float) -> dict:
    """A tube's strike note: the 2:3:4 series fitted to bending modes 4-6 (the pitch heard)."""
    f = strike_note_hz([m.frequency_hz for m in result.family("bending")])
    note, offset = hz_to_note(f, a4_hz)
    return {"frequency_hz": round(f, 6), "note": note, "cents": round(offset, 3)}


def _reference_hz(result: ModalResult) -> float:
    first = [m for m in result.modes if m.family in ("bending", "transverse") and m.order == 1]
    return first[0].frequency_hz if first else result.modes[0].frequency_hz


def modes_payload(result: ModalResult, a4_hz: float) -> dict:
    """The JSON form: one entry per mode, frequencies in Hz and node positions in mm."""
    ref = _reference_hz(result)
    out = []
    for m in result.modes:
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
    return {
        "modes": out,
        "converged": result.converged,
        "max_error_cents": float(f"{result.max_error_cents:.3g}"),
        "a4_hz": a4_hz,
    }
