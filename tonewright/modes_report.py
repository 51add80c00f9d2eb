"""The partials of a part file: solved to its own tolerance and laid out for a table or JSON
(``tonewright modes``)."""

from __future__ import annotations

from pathlib import Path

from tonewright.acoustics.pitch import hz_to_note
from tonewright.forward import ModalResult, families_of, solve
from tonewright.partfile import load_part

__all__ = ["modes_payload", "solve_part_file"]


def solve_part_file(path: Path, count: int) -> tuple[ModalResult, str]:
    """Load a part file and solve ``count`` modes of each of its families."""
    part_file, base = load_part(path)
    part = part_file.to_part(base)
    counts = dict.fromkeys(families_of(part), count)
    result = solve(
        part, counts, tol_cents=part_file.model.tolerance_cents, theory=part_file.model.theory
    )
    return result, part_file.title or path.stem


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
