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
from tonewright.plots import (
    density_figure,
    figure_bytes,
    profile_figure,
    shape_figure,
    spectrum_figure,
)

__all__ = [
    "CAUTION",
    "OUTPUTS",
    "STRING_CAUTION",
    "TUBE_CAUTION",
    "WRITERS",
    "caution_of",
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
TUBE_CAUTION = (
    "Before cutting: material cannot be put back. Cut the tube a little long, tap, and "
    "shorten it in small steps. Clamp it, deburr the cut ends (sharp), use extraction for "
    "metal dust, eye and hearing protection, and follow your machine's manual."
)
STRING_CAUTION = (
    "Before winding: wind no more than the schedule gives and weigh as you go. A string under "
    "tension stores energy: wear eye protection and never lean over it while tensioning."
)


def caution_of(report: DesignReport) -> str:
    """The caution for what the design makes: a bar, a tube or a string."""
    if "tube" in report.part:
        return TUBE_CAUTION
    if "string" in report.part:
        return STRING_CAUTION
    return CAUTION


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
            # each variable as a share (0 to 1) of its range: what a restart starts from
            "variables": dict(report.variables),
            "values": dict(report.values),
            "summary": _json_ready(report.summary),
            "seed": report.seed,
            "forward_solves": report.solves,
        },
        "certified_by": report.certified_by,
        "pitch_convention": report.pitch_convention,
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
        "caution": caution_of(report),
    }


def result_json(report: DesignReport) -> dict[str, bytes]:
    text = json.dumps(_json_ready(result_payload(report)), indent=2)
    return {"result.json": text.encode("utf-8")}


_PAIRS_PER_LINE = 6


def _toml_value(value: Any) -> str:
    """One TOML value, arrays inline (rows of pairs wrapped a few to a line)."""
    if isinstance(value, Mapping):
        return (
            "{ " + ", ".join(f"{_toml_key(k)} = {_toml_value(v)}" for k, v in value.items()) + " }"
        )
    if isinstance(value, list | tuple):
        if value and all(isinstance(v, list | tuple) for v in value):
            items = [_toml_value(v) for v in value]
            rows = [
                "    " + ", ".join(items[k : k + _PAIRS_PER_LINE]) + ","
                for k in range(0, len(items), _PAIRS_PER_LINE)
            ]
            return "[\n" + "\n".join(rows) + "\n]"
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    return tomli_w.dumps({"v": value}).split("=", 1)[1].strip()


def _toml_key(key: str) -> str:
    return tomli_w.dumps({key: 0}).split("=", 1)[0].strip()


def _is_tables(value: Any) -> bool:
    return (
        isinstance(value, list | tuple)
        and bool(value)
        and all(isinstance(v, Mapping) for v in value)
    )


def compact_toml(table: Mapping[str, Any], prefix: str = "") -> str:
    """TOML for a part table that a maker can read: scalars and short arrays on one line,
    station tables a few pairs to a line, sub-tables as sections (``tomllib`` reads it back
    to the same values)."""
    lines = [
        f"{_toml_key(k)} = {_toml_value(v)}"
        for k, v in table.items()
        if not isinstance(v, Mapping) and not _is_tables(v)
    ]
    for k, v in table.items():
        name = f"{prefix}{_toml_key(k)}"
        if isinstance(v, Mapping):
            lines += ["", f"[{name}]", compact_toml(v, f"{name}.").strip("\n")]
        elif _is_tables(v):
            for item in v:
                lines += ["", f"[[{name}]]", compact_toml(item, f"{name}.").strip("\n")]
    return "\n".join(lines).strip("\n") + "\n"


_KIND_NOTES = {
    "bar": "# A designed bar's cut is [bar.undercut]: the design's own shape, which tonewright\n"
    "# evaluates exactly; its stations (every 5 mm and at the cut's corners, thickness to\n"
    "# leave from the top face) are for reading and are checked against it.\n",
    "string": "# density_profile: linear density in kg/m (core plus winding) at 1 mm stations;\n"
    "# diameter is the core wire; 'tonewright shop' turns it into a winding schedule.\n",
    "tube": "# The tube's length is the design; hang it at the node 'tonewright shop' gives.\n",
}


def part_toml(report: DesignReport) -> dict[str, bytes]:
    state = "meets its target" if report.converged else "DOES NOT meet its target"
    header = (
        f"# Designed by tonewright: {state} ({report.message}).\n"
        f"# Partials certified by the {report.certified_by}.\n"
        f"# Target: {report.pitch_convention}.\n"
        "# Lengths in mm.\n"
        + _KIND_NOTES.get(next((k for k in _KIND_NOTES if k in report.part), ""), "")
        + "# "
        + caution_of(report)
        + "\n\n"
    )
    return {"part.toml": (header + compact_toml(_json_ready(report.part))).encode("utf-8")}


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
        if fig.density_g_m is not None:
            return density_figure(x, np.asarray(fig.density_g_m), fig.nodes_mm)
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
    lines.append("  " + summary_text(report.summary))
    if report.nodes_mm:
        lines.append("  mode-1 nodes (mm): " + ", ".join(f"{x:.1f}" for x in report.nodes_mm))
    verdict = "meets the target" if report.converged else "target out of reach"
    lines.append(f"{verdict}: {report.message}")
    lines += tail_lines(report, folder)
    return lines


# summary key -> (words, unit, factor from the key's unit, format)
SUMMARY_TERMS: dict[str, tuple[str, str, float, str]] = {
    "length_mm": ("length", "mm", 1.0, ".1f"),
    "cut_starts_mm": ("cut starts at", "mm", 1.0, ".1f"),
    "cut_ends_mm": ("ends at", "mm", 1.0, ".1f"),
    "shape_from_mm": ("(allowed from", "mm of each end)", 1.0, ".1f"),
    "max_depth_mm": ("deepest cut", "mm", 1.0, ".2f"),
    "min_thickness_mm": ("thinnest", "mm", 1.0, ".2f"),
    "min_density_kg_m": ("linear density from", "g/m", 1e3, ".4g"),
    "max_density_kg_m": ("to", "g/m", 1e3, ".4g"),
}


def summary_text(summary: Mapping[str, float]) -> str:
    """The design's summary in words and units ("length 400.0 mm, cut starts at 70.5 mm")."""
    parts = []
    for key, value in summary.items():
        words, unit, factor, fmt = SUMMARY_TERMS.get(key, (key.replace("_", " "), "", 1.0, ".4g"))
        parts.append(f"{words} {value * factor:{fmt}} {unit}".rstrip())
    return ", ".join(parts).replace(", (allowed", " (allowed").replace(", to ", " to ")


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
        # a design that met its target only touches these limits; one that missed is held by them
        words = "at the edge of the design space" if report.converged else "limits that bind"
        lines.append(f"  {words}: " + "; ".join(report.binding))
    lines.append(
        f"  partials certified by the {report.certified_by}; {report.solves} forward solves"
    )
    if report.pitch_convention:
        lines.append(f"  target: {report.pitch_convention}")
    if folder is not None:
        lines.append(f"  wrote {folder}/part.toml, result.json, profile.png/svg, spectrum.png/svg")
    lines.append(f"  {caution_of(report)}")
    return lines
