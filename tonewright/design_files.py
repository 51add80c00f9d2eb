"""Writers of a design's files: each takes a ``DesignReport`` and returns file contents; the
set is written all or nothing.

``part.toml`` (the designed part, a valid part file), ``result.json`` (everything the report
holds, JSON), ``profile.png/svg`` and ``spectrum.png/svg``. ``write_design`` renders every
file in memory first, writes them into a temporary sibling folder, then moves them in: an
error or an interrupt while rendering or writing leaves the folder as it was. Existing files
are replaced only with ``force``.
"""

from __future__ import annotations

import json
import os
import shutil
import tempfile
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any

import numpy as np
import tomli_w

from tonewright.cli_support import atomic_write_bytes, check_folder_possible, prepare_out_dir
from tonewright.design import DesignReport
from tonewright.optimizer import STATUS_MESSAGES
from tonewright.plots import figure_bytes, profile_figure, shape_figure, spectrum_figure

__all__ = [
    "CAUTION",
    "OUTPUTS",
    "WRITERS",
    "check_out_dir",
    "design_files",
    "part_toml",
    "profile_files",
    "result_json",
    "result_payload",
    "spectrum_files",
    "summary_lines",
    "write_design",
    "write_files",
]

OUTPUTS = ["part.toml", "result.json", "profile.png", "profile.svg", "spectrum.png", "spectrum.svg"]

CAUTION = (
    "Before cutting: material cannot be put back. Rough-cut a few cents sharp, tap, and "
    "approach the target in small steps. Use guards and dust extraction (many tonewood dusts "
    "are sensitisers), eye and hearing protection, and follow your machine's manual."
)


def _json_ready(obj: Any) -> Any:
    if isinstance(obj, Mapping):
        return {k: _json_ready(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [_json_ready(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return _json_ready(obj.tolist())
    if isinstance(obj, np.floating | np.integer | np.bool_):
        return obj.item()
    return obj


def result_payload(report: DesignReport) -> dict[str, Any]:
    """The content of ``result.json``: a part file too (``part``), with the certified partials,
    the status (``tonewright.optimizer.STATUS_MESSAGES``) and how the design was found."""
    return {
        "part": _json_ready(report.part),
        "partials": [
            {
                "family": p.family,
                "order": p.order,
                "target_hz": p.target_hz,
                "achieved_hz": p.achieved_hz,
                "error_cents": p.error_cents,
                "tolerance_cents": p.tolerance_cents,
                "beam_hz": p.beam_hz,
                "certified_by": p.certified_by,
            }
            for p in report.partials
        ],
        "converged": report.converged,
        "status": report.status,
        "status_message": STATUS_MESSAGES[report.status],
        "message": report.message,
        "binding_limits": list(report.binding),
        # partials are followed by order within their family and confirmed by shape (MAC)
        "modes_tracked_by_shape": report.modes_tracked_by_shape,
        "unwanted_modes": [
            {
                "family": m.family,
                "order": m.order,
                "frequency_hz": m.f_hz,
                "nearest_partial": m.nearest_goal,
                "gap_hz": m.gap_hz,
                "keep_clear_hz": m.band_hz,
                "clear": m.clear,
            }
            for m in report.unwanted
        ],
        "unwanted_modes_model": report.unwanted_model,
        "modes": [
            {"family": f, "order": n, "frequency_hz": hz} for f, n, hz in report.figures.modes
        ],
        "modes_model": report.figures.modes_model,
        "mode1_nodes_mm": list(report.nodes_mm),
        "design": {
            "variables": dict(report.variables),
            "summary": _json_ready(report.summary),
            "seed": report.seed,
            "forward_solves": report.solves,
        },
        "certified_by": report.certified_by,
        "fidelity": report.fidelity,
        "corrections": [
            {
                "model": label,
                "steps": [
                    {
                        "beam_hz": [float(v) for v in st.beam_hz],
                        "model_hz": [float(v) for v in st.high_fidelity_hz],
                        "errors_cents": [float(v) for v in st.errors_cents],
                    }
                    for st in steps
                ],
            }
            for label, steps in report.corrections
        ],
        "caution": CAUTION,
    }


def result_json(report: DesignReport) -> dict[str, bytes]:
    text = json.dumps(_json_ready(result_payload(report)), indent=2)
    return {"result.json": text.encode("utf-8")}


def part_toml(report: DesignReport) -> dict[str, bytes]:
    state = "meets its target" if report.converged else "DOES NOT meet its target"
    header = (
        f"# Designed by tonewright: {state} ({report.message}).\n"
        f"# {report.certified_by}.\n"
        "# Lengths in mm. " + CAUTION + "\n\n"
    )
    return {"part.toml": (header + tomli_w.dumps(_json_ready(report.part))).encode("utf-8")}


def spectrum_files(report: DesignReport) -> dict[str, bytes]:
    fig = report.figures
    title = f"Partials in the {fig.modes_model} (stems) against targets (dotted)"
    second_label = "beam model (not certifying)" if fig.beam_modes else ""

    def make():
        return spectrum_figure(
            fig.modes, fig.targets, title=title, second=fig.beam_modes, second_label=second_label
        )

    return {f"spectrum.{fmt}": figure_bytes(make(), fmt) for fmt in ("png", "svg")}


def profile_files(report: DesignReport) -> dict[str, bytes]:
    fig = report.figures
    x = np.asarray(fig.x_mm)

    def make():
        if fig.thickness_mm is not None:
            return profile_figure(
                x, np.asarray(fig.thickness_mm), fig.blank_mm, fig.nodes_mm, fig.holes
            )
        return shape_figure(x, np.asarray(fig.shape), fig.nodes_mm)

    return {f"profile.{fmt}": figure_bytes(make(), fmt) for fmt in ("png", "svg")}


WRITERS: tuple[Callable[[DesignReport], dict[str, bytes]], ...] = (
    part_toml,
    result_json,
    profile_files,
    spectrum_files,
)


def design_files(report: DesignReport) -> dict[str, bytes]:
    """Every output of a design, rendered in memory (name -> bytes)."""
    files: dict[str, bytes] = {}
    for writer in WRITERS:  # looked up at call time, so a test can break one
        files.update(writer(report))
    return files


def write_files(out: Path, files: Mapping[str, bytes], *, force: bool) -> list[Path]:
    """Write ``files`` into ``out`` all or nothing: first into a temporary sibling folder
    (each file atomically), then each moved in by a rename. Refuses to replace existing files
    unless ``force``."""
    out = Path(out)
    out.parent.mkdir(parents=True, exist_ok=True)
    out = prepare_out_dir(out, list(files), force=force)
    staging = Path(tempfile.mkdtemp(dir=out.parent, prefix=f".{out.name}.", suffix=".tmp"))
    try:
        for name, data in files.items():
            atomic_write_bytes(staging / name, data)
        for name in files:
            os.replace(staging / name, out / name)
    finally:
        shutil.rmtree(staging, ignore_errors=True)
    return [out / name for name in files]


def write_design(report: DesignReport, out: Path, *, force: bool = False) -> list[Path]:
    """Render every file of the design, then write them into ``out`` all or nothing."""
    check_out_dir(out, force=force)  # refuse before rendering
    return write_files(out, design_files(report), force=force)


def check_out_dir(out: Path, *, force: bool) -> None:
    """Refuse an ``out`` that is a file or holds a design's files (unless ``force``), without
    creating anything: a new folder is made only once every file is rendered."""
    if Path(out).exists():
        prepare_out_dir(Path(out), OUTPUTS, force=force)
    else:
        check_folder_possible(Path(out), f"--out {out}")


def summary_lines(report: DesignReport, folder: Path | None = None) -> list[str]:
    """The design's summary as plain lines (the command prints them; an instrument keeps them
    as each bar's summary.txt)."""
    lines = []
    head = f"{'partial':<14}{'target Hz':>11}{'achieved Hz':>13}{'error (cents)':>15}"
    lines.append(head + f"{'tolerance':>11}  by")
    for p in report.partials:
        lines.append(
            f"{p.label:<14}{p.target_hz:>11.2f}{p.achieved_hz:>13.2f}{p.error_cents:>+15.3f}"
            f"{p.tolerance_cents:>11g}  {p.certified_by}"
        )
    lines += unwanted_lines(report)
    lines.append(
        "  " + ", ".join(f"{k.replace('_', ' ')} {v:.2f}" for k, v in report.summary.items())
    )
    if report.nodes_mm:
        lines.append("  mode-1 nodes (mm): " + ", ".join(f"{x:.1f}" for x in report.nodes_mm))
    verdict = "meets the target" if report.converged else "target out of reach"
    lines.append(f"{verdict}: {report.message}")
    lines += tail_lines(report, folder)
    return lines


def unwanted_lines(report: DesignReport) -> list[str]:
    near = sorted(report.unwanted, key=lambda m: m.gap_hz / m.band_hz)[:3]
    if not near:
        return []
    lines = [f"  unwanted modes ({report.unwanted_model}):"]
    in_3d = report.unwanted_model.startswith("3D")
    for m in near:
        flag = ("clear in 3D" if in_3d else "clear in the beam model") if m.clear else "TOO NEAR"
        lines.append(
            f"  {m.family} {m.order} at {m.f_hz:.1f} Hz: {m.gap_hz:.1f} Hz from "
            f"{m.nearest_goal} (keep {m.band_hz:.0f} Hz clear): {flag}"
        )
    return lines


def tail_lines(report: DesignReport, folder: Path | None) -> list[str]:
    lines = []
    if report.binding:
        lines.append("  limits that bind: " + "; ".join(report.binding))
    lines.append(f"  {report.certified_by}; {report.solves} forward solves")
    if folder is not None:
        lines.append(f"  wrote {folder}/part.toml, result.json, profile.png/svg, spectrum.png/svg")
    lines.append(f"  {CAUTION}")
    return lines
