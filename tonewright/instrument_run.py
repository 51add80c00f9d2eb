"""The instrument run: design every bar of an instrument in worker processes, resume where a
run stopped, and compose the results in memory.

Resuming: each finished bar leaves ``fingerprint.json`` in its folder, a SHA-256 hash of its
resolved inputs (blank sizes, material values, target frequencies and tolerances, design limits
and seed, model fidelity, tool version); a later run skips every bar whose hash matches and
whose files are all there, so an interrupted run continues where it stopped and a changed input
redoes exactly the bars it changes. The shop files carry a second hash (design hash plus shop
options), so switching G-code on redoes the shop files only.

Workers return values (``BarOutcome``: the bar's ``DesignReport`` and its ``ShopPart``); the
parent writes each bar's folder as it finishes (``write_bar``) and, at the end, the summary
files (``write_instrument``). A bar starts from its neighbour's design (``scheduling``): the
neighbour's report when it is designed in the same run, its result.json when it is reused.

Layout of the output folder::

    instrument-run.json   marks the folder as this command's (resuming is allowed)
    last-run.json         which bars this run designed, re-drew, reused, and which failed
    summary.csv, cut_list.csv, resonators.csv
    dimensions.png/.svg, errors.png/.svg
    bars/<note>/          blank.toml (the bar's own part file), the design files
                          (part.toml, result.json, figures), summary.txt, fingerprint.json,
                          shop/ (templates, drawing, DXF, cuts, optional G-code)
"""

from __future__ import annotations

import csv
import dataclasses
import hashlib
import io
import json
import multiprocessing
import os
import shutil
import sys
from collections.abc import Callable, Mapping, Sequence
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import tomli_w
from threadpoolctl import threadpool_limits

import tonewright
from tonewright.cli_support import atomic_write_bytes, atomic_write_text
from tonewright.design import (
    DesignReport,
    build_problem,
    clearing_width_for,
    design_report,
)
from tonewright.design_files import OUTPUTS as DESIGN_OUTPUTS
from tonewright.design_files import design_files, result_payload, summary_lines, write_files
from tonewright.errors import InputError
from tonewright.instrument import (
    BarPlan,
    InstrumentPlan,
    blank_volume_m3,
    load_instrument,
    plan_instrument,
)
from tonewright.materials import MaterialSpec
from tonewright.partfile import parse_part
from tonewright.scheduling import neighbour_parents, run_in_parent_order
from tonewright.shop import Cutter, GcodeOptions, ShopOptions, ShopPart, write_all
from tonewright.shop_run import load_shop_source, shop_part

__all__ = [
    "BARS_DIR",
    "CAUTION",
    "FINGERPRINT",
    "LAST_RUN",
    "MANIFEST",
    "BarJob",
    "BarOutcome",
    "BarRow",
    "InstrumentReport",
    "RunPlan",
    "bar_fingerprint",
    "blanks_csv",
    "blanks_figure",
    "check_out_dir",
    "cut_list_csv",
    "design_bar",
    "dimensions_figure",
    "errors_figure",
    "plan_run",
    "resonators_csv",
    "run_instrument",
    "shop_fingerprint",
    "summary_csv",
    "write_bar",
    "write_instrument",
]

MANIFEST = "instrument-run.json"
LAST_RUN = "last-run.json"
FINGERPRINT = "fingerprint.json"
BLANK_FILE = "blank.toml"
SUMMARY_FILE = "summary.txt"
SHOP_DIR = "shop"
BARS_DIR = "bars"

CUT_LIST_COLUMNS = (
    "note",
    "length_mm",
    "width_mm",
    "thickness_mm",
    "rough_length_mm",
    "rough_width_mm",
    "rough_thickness_mm",
    "volume_cm3",
    "mass_kg",
)
RESONATOR_COLUMNS = (
    "note",
    "fundamental_hz",
    "inner_diameter_mm",
    "end_correction_mm",
    "tube_length_mm",
    "air_temperature_c",
    "open_end",
)

CAUTION = (
    "Before cutting: material cannot be put back. Cut only bars marked 'met', rough-cut a few "
    "cents sharp, tap, and approach each target in small steps. Use guards and dust extraction "
    "(many tonewood dusts are sensitisers), eye and hearing protection; check any G-code in a "
    "simulator and air-cut it first, and follow your machine's manual and local practice."
)


# ---------------------------------------------------------------------------------------------
# Fingerprints


def _material_record(spec: MaterialSpec) -> dict[str, Any]:
    ortho = dataclasses.asdict(spec.orthotropic) if spec.orthotropic is not None else None
    return {
        "E": spec.E,
        "G": spec.G,
        "rho": spec.rho,
        "nu": spec.nu,
        "loss_factor": spec.loss_factor,
        "temp_coeff_cents_per_K": spec.temp_coeff_cents_per_K,
        "orthotropic": ortho,
    }


def _digest(record: Any) -> str:
    text = json.dumps(record, sort_keys=True, separators=(",", ":"), default=repr)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def bar_fingerprint(
    bar: BarPlan,
    material: MaterialSpec,
    fidelity: str | None = None,
    attempts: int = 1,
    max_narrowing: float = 0.0,
) -> str:
    """Hash of everything a bar's design depends on (see the module docstring)."""
    part = {k: v for k, v in bar.part.items() if k not in ("material", "design")}
    record = {
        "tool": f"tonewright {tonewright.__version__}",
        "part": part,
        # defaults included, so that a changed default redoes the bar
        "design": bar.design.model_dump(mode="json"),
        "material": _material_record(material),
        "target": [
            [p.family, p.order, p.f_hz, p.tolerance_cents, p.weight] for p in bar.target.partials
        ],
        # the default certifier changed (2D, then 3D): a bar designed under the old default
        # is designed again
        "fidelity": fidelity or "default: 2D pre-correction, 3D p-version certifier",
        "attempts": attempts,
        "max_narrowing": max_narrowing,
    }
    return _digest(record)


def shop_fingerprint(design_fp: str, options: ShopOptions) -> str:
    """Hash of a bar's design and the shop options its shop files were drawn with."""
    return _digest({"design": design_fp, "shop": dataclasses.asdict(options)})


def _read_record(folder: Path) -> dict[str, Any]:
    try:
        record = json.loads((folder / FINGERPRINT).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    return record if isinstance(record, dict) else {}


def _design_done(folder: Path, record: dict[str, Any], fp: str) -> bool:
    return record.get("design") == fp and all((folder / n).is_file() for n in DESIGN_OUTPUTS)


def _shop_done(folder: Path, record: dict[str, Any], fp: str) -> bool:
    files = record.get("shop_files") or []
    return record.get("shop") == fp and bool(files) and all((folder / f).is_file() for f in files)


def _saved_payload(folder: Path) -> dict[str, Any] | None:
    """A reused bar's result.json, written by an earlier run (the record resuming relies on)."""
    try:
        payload = json.loads((folder / "result.json").read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    return payload if isinstance(payload, dict) else None


# ---------------------------------------------------------------------------------------------
# One bar, in a worker process


@dataclass(frozen=True)
class BarJob:
    """What a worker needs to design (or only re-draw) one bar; picklable."""

    note: str
    folder: str
    part: Mapping[str, Any]
    design_fp: str
    redo_design: bool
    shop: ShopOptions | None
    shop_fp: str | None
    fidelity: str | None
    attempts: int
    max_narrowing: float = 0.0  # share of the planned width a bar may lose (see below)
    start: Mapping[str, float] | None = None  # a reused neighbour's design variables
    waits_for_parent: bool = False  # the neighbour is designed in this run: start from it


@dataclass(frozen=True)
class BarOutcome:
    """What a worker hands back: the bar's report (None when only its shop files were redone,
    or on an error), the ShopPart to draw, and any error."""

    job: BarJob
    report: DesignReport | None
    shop: ShopPart | None = None
    error: str | None = None
    shop_error: str | None = None


def _shortfall(report: DesignReport) -> float:
    """How far a design is from its target: 0 when met, else the worst error in tolerances
    (plus one, so that any miss ranks behind any design that meets its target)."""
    if report.converged:
        return 0.0
    worst = max((abs(p.error_cents) / p.tolerance_cents for p in report.partials), default=np.inf)
    return 1.0 + worst


NARROWING_ROUNDS = 2  # a narrower bar's retuned cut moves its modes: look once more


def _narrowing_note(planned_mm: float, width_mm: float) -> str:
    return (
        f"; width narrowed from {planned_mm:.1f} to {width_mm:.1f} mm (cut from the planned "
        "blank) to keep the torsion and lateral modes out of the partials' bands"
    )


def design_with_restarts(job: BarJob, start: Mapping[str, float] | None) -> DesignReport:
    """The bar's design; the best attempt is kept. The first attempt polishes the neighbour's
    design first (``tonewright.scheduling``). After a miss because a torsion or lateral mode
    sits in a partial's band (no new seed helps there), the bar is designed again at the
    widest narrower width that clears it in the certifying model
    (``design.clearing_width_for``), down to ``job.max_narrowing`` of its planned width,
    from the missed cut; the message says so. After other misses the next seed is tried
    (seed, seed + 1, ..., ``job.attempts`` in all): a new seed starts the global search
    elsewhere, which is what an evolution strategy stuck in a local minimum needs."""
    part = dict(job.part)
    part_file = parse_part(part, where=f"bar {job.note}")
    seed = part_file.design.seed
    planned = float(part["bar"]["width"])
    narrowest = (1.0 - job.max_narrowing) * planned * 1e-3
    seeds_tried, narrowings = 1, 0
    best: tuple[float, DesignReport] | None = None
    while True:
        problem = build_problem(part_file, None, seed)
        report = design_report(problem, None, job.fidelity, start)
        if narrowings:
            note = _narrowing_note(planned, float(part["bar"]["width"]))
            report = dataclasses.replace(report, message=report.message + note)
        score = _shortfall(report)
        if best is None or score < best[0]:
            best = (score, report)
        if score == 0.0:
            break
        found = None
        if job.max_narrowing > 0 and narrowings < NARROWING_ROUNDS:
            found = clearing_width_for(problem, report, narrowest)
        if found is not None:
            part = {**part, "bar": {**part["bar"], "width": round(found.width * 1e3, 1)}}
            part_file = parse_part(part, where=f"bar {job.note}")
            start, narrowings = dict(report.variables), narrowings + 1
        elif seeds_tried < job.attempts:
            seed, start, seeds_tried = seed + 1, None, seeds_tried + 1
        else:
            break
    return best[1]


def _shop_part_of(report: DesignReport, note: str) -> ShopPart | None:
    part_file = parse_part(dict(report.part), where=f"designed bar {note}")
    partials = tuple((f"{p.family} {p.order}", p.target_hz, p.achieved_hz) for p in report.partials)
    return shop_part(part_file, None, note, partials)[1]


def design_bar(job: BarJob, parent: BarOutcome | None = None) -> BarOutcome:
    """Design one bar (unless its design is current) and prepare its shop part; in a worker.
    ``parent``: the neighbour's outcome when it was designed in this run."""
    try:
        report = None
        if job.redo_design:
            start = job.start
            if job.waits_for_parent:
                met = parent is not None and parent.report is not None
                start = parent.report.start_variables() if met else None
            report = design_with_restarts(job, start)
        if job.shop is None:
            return BarOutcome(job, report)
        try:
            if report is not None:
                if not report.converged:  # never hand the shop a bar that misses its target
                    return BarOutcome(job, report)
                shop = _shop_part_of(report, job.note)
            else:  # only the shop files are redone: from the bar's saved result
                shop = load_shop_source(Path(job.folder) / "result.json").shop
        except InputError as exc:
            return BarOutcome(job, report, shop_error=str(exc))
        return BarOutcome(job, report, shop=shop)
    except InputError as exc:
        return BarOutcome(job, None, error=str(exc))
    except Exception as exc:  # one bar's crash must not stop the others; reported per bar
        return BarOutcome(job, None, error=f"{type(exc).__name__}: {exc}")


# ---------------------------------------------------------------------------------------------
# Writing one bar's folder (in the parent, as each bar finishes)


def _clear_dir(path: Path) -> None:
    """Remove a folder this command wrote (files only; it holds no sub-folders)."""
    if path.is_dir():
        for item in path.iterdir():
            if item.is_file():
                item.unlink()
        if not any(path.iterdir()):
            path.rmdir()


def _write_record(folder: Path, design_fp: str, shop_fp: str | None, shop_files) -> None:
    record = {"design": design_fp, "shop": shop_fp, "shop_files": sorted(shop_files)}
    atomic_write_text(folder / FINGERPRINT, json.dumps(record, indent=2) + "\n", overwrite=True)


def _blank_toml(part: Mapping[str, Any]) -> str:
    header = (
        "# One bar of an instrument, written by 'tonewright instrument': the uncut blank, its\n"
        "# target and design limits. 'tonewright design' reads this file as it is.\n\n"
    )
    return header + tomli_w.dumps(dict(part))


def write_bar(outcome: BarOutcome) -> BarOutcome:
    """Write a finished bar's folder: blank, design files, summary, shop files, then the
    fingerprint record last (no record while files are in flux). A shop file that cannot be
    drawn is reported in the returned outcome."""
    job = outcome.job
    folder = Path(job.folder)
    if outcome.error is not None:
        return outcome
    folder.mkdir(parents=True, exist_ok=True)
    old = _read_record(folder)
    (folder / FINGERPRINT).unlink(missing_ok=True)
    report = outcome.report
    if report is not None:
        _clear_dir(folder / SHOP_DIR)  # drawn from the old design
        for stale in folder.glob(".attempt-*"):  # left by runs of earlier versions
            _clear_dir(stale)
        files = {BLANK_FILE: _blank_toml(job.part).encode("utf-8"), **design_files(report)}
        text = "\n".join(summary_lines(report, folder)) + "\n"
        files[SUMMARY_FILE] = text.encode("utf-8")
        write_files(folder, files, force=True)
        old = {}
    _write_record(folder, job.design_fp, old.get("shop"), old.get("shop_files") or [])
    if job.shop is None or outcome.shop_error is not None:
        if outcome.shop_error is not None:
            _write_record(folder, job.design_fp, None, [])
        return outcome
    _clear_dir(folder / SHOP_DIR)
    if outcome.shop is None:  # a missed design: nothing to cut from
        _write_record(folder, job.design_fp, None, [])
        return outcome
    try:
        written = write_all(outcome.shop, folder / SHOP_DIR, job.shop, force=True)
    except InputError as exc:
        _write_record(folder, job.design_fp, None, [])
        return dataclasses.replace(outcome, shop_error=str(exc))
    shop_files = [p.relative_to(folder).as_posix() for p in written]
    _write_record(folder, job.design_fp, job.shop_fp, shop_files)
    return outcome


# ---------------------------------------------------------------------------------------------
# Summary


@dataclass(frozen=True)
class BarRow:
    """One line of the summary: what was asked, what the design achieved, and its verdict."""

    note: str
    partials: tuple[dict[str, Any], ...]
    length_mm: float | None
    max_depth_mm: float | None
    min_thickness_mm: float | None
    nearest_mode: dict[str, Any] | None
    status: str  # met | missed | error
    message: str


def _row(note: str, payload: Mapping[str, Any] | None, error: str | None, shop_error: str | None):
    if error is not None:
        return BarRow(note, (), None, None, None, None, "error", error)
    if payload is None:
        return BarRow(note, (), None, None, None, None, "error", "no result.json")
    summary = payload.get("design", {}).get("summary", {})
    modes = payload.get("unwanted_modes") or []
    nearest = min(modes, key=lambda m: m["gap_hz"]) if modes else None
    met = bool(payload.get("converged"))
    message = str(payload.get("message", ""))
    binding = payload.get("binding_limits") or []
    if not met and binding:
        message += "; limits that bind: " + "; ".join(binding)
    status = "met" if met else "missed"
    if met and shop_error:
        status, message = "error", f"shop files: {shop_error}"
    return BarRow(
        note=note,
        partials=tuple(payload.get("partials", ())),
        length_mm=summary.get("length_mm"),
        max_depth_mm=summary.get("max_depth_mm"),
        min_thickness_mm=summary.get("min_thickness_mm"),
        nearest_mode=nearest,
        status=status,
        message=message,
    )


def _fmt(value: float | None, digits: int) -> str:
    return "" if value is None else f"{value:.{digits}f}"


def summary_csv(rows: Sequence[BarRow]) -> str:
    n = max((len(r.partials) for r in rows), default=0)
    head = ["note"]
    for k in range(1, n + 1):
        head += [f"p{k}_partial", f"p{k}_target_hz", f"p{k}_achieved_hz", f"p{k}_error_cents"]
    head += ["length_mm", "max_depth_mm", "min_thickness_mm", "nearest_unwanted_mode"]
    head += ["nearest_unwanted_hz", "gap_hz", "keep_clear_hz", "status", "message"]
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(head)
    for r in rows:
        line = [r.note]
        for k in range(n):
            if k < len(r.partials):
                p = r.partials[k]
                line += [
                    f"{p['family']} {p['order']}",
                    _fmt(p["target_hz"], 3),
                    _fmt(p["achieved_hz"], 3),
                    _fmt(p["error_cents"], 3),
                ]
            else:
                line += ["", "", "", ""]
        m = r.nearest_mode
        line += [_fmt(r.length_mm, 2), _fmt(r.max_depth_mm, 2), _fmt(r.min_thickness_mm, 2)]
        if m:
            line += [f"{m['family']} {m['order']}", _fmt(m["frequency_hz"], 2)]
            line += [_fmt(m["gap_hz"], 2), _fmt(m["keep_clear_hz"], 2)]
        else:
            line += ["", "", "", ""]
        line += [r.status, r.message]
        w.writerow(line)
    return buf.getvalue()


def cut_list_csv(plan: InstrumentPlan) -> str:
    """Blanks to saw: finished sizes, rough sizes with the trimming allowance, volume and mass
    (rough sizes), and the totals."""
    rho = plan.material.rho
    size = np.array([[b.length_m, b.width_m, b.thickness_m] for b in plan.bars])
    rough = size + np.asarray(plan.allowance_m)
    V = blank_volume_m3(*size.T, plan.allowance_m)
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(CUT_LIST_COLUMNS)
    for b, s, r, v in zip(plan.bars, size, rough, V, strict=True):
        w.writerow(
            [b.note, *(f"{x * 1e3:.1f}" for x in (*s, *r)), f"{v * 1e6:.1f}", f"{rho * v:.3f}"]
        )
    total = f"total ({len(plan.bars)} blanks)"
    w.writerow([total, *[""] * 6, f"{V.sum() * 1e6:.1f}", f"{rho * V.sum():.3f}"])
    w.writerow([f"density {rho:g} kg/m^3 ({plan.material.name})", *[""] * 8])
    return buf.getvalue()


BLANKS_COLUMNS = (
    "note",
    "length_mm",
    "width_mm",
    "thickness_mm",
    "reachable",
    "modes_clear",
    "why_thickness",
    "why_width",
    "binding",
    "nearest_blank",
)


def blanks_csv(plan: InstrumentPlan) -> str:
    """The blank schedule the tool chose from [stock]: sizes and the reason for each."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(BLANKS_COLUMNS)
    for c in plan.schedule:
        w.writerow(
            [
                c.note,
                f"{c.length * 1e3:.1f}",
                f"{c.width * 1e3:.1f}",
                f"{c.thickness * 1e3:.1f}",
                "yes" if c.reachable else "no",
                "yes" if c.clear else "no",
                c.thickness_reason,
                c.width_reason,
                "; ".join(c.binding),
                c.advice,
            ]
        )
    return buf.getvalue()


def blanks_figure(plan: InstrumentPlan):
    """Length, width and thickness of the schedule along the keyboard; bars the pre-design
    could not reach are marked."""
    import matplotlib.pyplot as plt

    notes = [c.note for c in plan.schedule]
    x = np.arange(len(notes))
    fig, (top, bottom) = plt.subplots(2, 1, figsize=(9, 6), sharex=True)
    top.plot(x, [c.length * 1e3 for c in plan.schedule], "o-", color="#5b4630", markersize=3)
    top.set_ylabel("blank length (mm)")
    bottom.step(x, [c.width * 1e3 for c in plan.schedule], where="mid", color="#1b6f8a")
    bottom.step(x, [c.thickness * 1e3 for c in plan.schedule], where="mid", color="#b5651d")
    bottom.plot([], [], color="#1b6f8a", label="width")
    bottom.plot([], [], color="#b5651d", label="thickness")
    bad = [i for i, c in enumerate(plan.schedule) if not (c.reachable and c.clear)]
    if bad:
        ys = [plan.schedule[i].thickness * 1e3 for i in bad]
        bottom.plot(bad, ys, "x", color="#c0392b", markersize=9, label="out of reach / unclear")
    bottom.set_ylabel("mm (stock sizes)")
    bottom.legend(loc="upper right", fontsize=8, frameon=False)
    _note_axis(top, notes)
    _note_axis(bottom, notes)
    top.set_title(f"{plan.title}: blanks sized from stock")
    fig.tight_layout()
    return fig


def resonators_csv(plan: InstrumentPlan) -> str:
    """One stopped tube per bar, tuned to the bar's target fundamental."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(RESONATOR_COLUMNS)
    for r in plan.resonators:
        w.writerow(
            [
                r.note,
                f"{r.f_hz:.3f}",
                f"{r.inner_diameter_m * 1e3:.1f}",
                f"{r.end_correction_m * 1e3:.2f}",
                f"{r.length_m * 1e3:.1f}",
                f"{plan.resonator_temperature_c:g}",
                plan.resonator_end,
            ]
        )
    return buf.getvalue()


def _note_axis(ax, notes: Sequence[str]) -> None:
    step = max(1, len(notes) // 26)
    idx = list(range(0, len(notes), step))
    ax.set_xticks(idx)
    ax.set_xticklabels([notes[i] for i in idx], rotation=90, fontsize=8)
    ax.set_xlim(-0.6, len(notes) - 0.4)
    ax.grid(alpha=0.25)


def dimensions_figure(plan: InstrumentPlan, rows: Sequence[BarRow]):
    import matplotlib.pyplot as plt

    notes = [b.note for b in plan.bars]
    x = np.arange(len(notes))
    fig, (top, bottom) = plt.subplots(2, 1, figsize=(9, 6), sharex=True)
    top.plot(x, [b.length_m * 1e3 for b in plan.bars], color="#5b4630", label="blank length")
    top.set_ylabel("bar length (mm)")
    top.legend(loc="upper right", fontsize=8, frameon=False)
    bottom.plot(
        x, [b.thickness_m * 1e3 for b in plan.bars], color="#5b4630", label="blank thickness"
    )
    depth = [np.nan if r.max_depth_mm is None else r.max_depth_mm for r in rows]
    thin = [np.nan if r.min_thickness_mm is None else r.min_thickness_mm for r in rows]
    bottom.plot(x, depth, "o-", color="#1b6f8a", markersize=4, label="deepest undercut")
    bottom.plot(x, thin, "s-", color="#b5651d", markersize=4, label="thinnest point")
    bottom.set_ylabel("mm")
    bottom.legend(loc="upper right", fontsize=8, frameon=False)
    _note_axis(top, notes)
    _note_axis(bottom, notes)
    top.set_title(f"{plan.title}: blanks and undercuts")
    fig.tight_layout()
    return fig


def errors_figure(plan: InstrumentPlan, rows: Sequence[BarRow]):
    import matplotlib.pyplot as plt

    notes = [b.note for b in plan.bars]
    fig, ax = plt.subplots(figsize=(9, 4.2))
    colours = ("#1b6f8a", "#b5651d", "#7b4fa0", "#5a8f29")
    n = max((len(r.partials) for r in rows), default=0)
    for k in range(n):
        xs = [i for i, r in enumerate(rows) if len(r.partials) > k]
        err = [rows[i].partials[k]["error_cents"] for i in xs]
        tol = [rows[i].partials[k]["tolerance_cents"] for i in xs]
        c = colours[k % len(colours)]
        ax.plot(xs, err, "o", color=c, markersize=4, label=f"partial {k + 1}")
        ax.hlines(tol, np.array(xs) - 0.3, np.array(xs) + 0.3, colors=c, linewidth=0.8)
        ax.hlines(np.negative(tol), np.array(xs) - 0.3, np.array(xs) + 0.3, colors=c, lw=0.8)
    bad = [i for i, r in enumerate(rows) if r.status != "met"]
    if bad:
        ax.plot(bad, [0.0] * len(bad), "x", color="#c0392b", markersize=9, label="not met")
    ax.axhline(0.0, color="black", linewidth=0.5)
    ax.set_ylabel("error (cents); dashes: tolerance")
    ax.set_title(f"{plan.title}: partials against their targets")
    ax.legend(loc="upper right", fontsize=8, frameon=False, ncol=min(5, n + 1))
    _note_axis(ax, notes)
    fig.tight_layout()
    return fig


# ---------------------------------------------------------------------------------------------
# The run


@dataclass(frozen=True)
class InstrumentReport:
    """A whole run: the plan, one summary row per bar, which bars were designed, re-drawn or
    reused, and the folders of bars no longer in the instrument."""

    plan: InstrumentPlan
    rows: tuple[BarRow, ...]
    designed: tuple[str, ...]
    shop_only: tuple[str, ...]
    reused: tuple[str, ...]
    stale: tuple[str, ...]

    @property
    def met(self) -> int:
        return sum(r.status == "met" for r in self.rows)

    @property
    def exit_code(self) -> int:
        return 0 if self.met == len(self.rows) else 1


def check_out_dir(out: Path, force: bool) -> None:
    if out.exists() and not out.is_dir():
        raise InputError(f"--out {out} is a file; give a folder")
    if out.is_dir() and not (out / MANIFEST).is_file() and any(out.iterdir()) and not force:
        raise InputError(
            f"--out {out} holds files that 'tonewright instrument' did not write; "
            "choose another folder or pass --force"
        )


def _pool_context():
    # fork is fast (workers inherit the imports); every worker is forked at the first submit,
    # before any thread of ours starts. Elsewhere spawn is the safe choice.
    methods = multiprocessing.get_all_start_methods()
    name = "fork" if "fork" in methods and sys.platform.startswith("linux") else "spawn"
    return multiprocessing.get_context(name)


def _worker_init() -> None:
    # one BLAS thread per worker: the eigenproblems are small and the workers fill the cores
    threadpool_limits(limits=1, user_api="blas")


def _stale_folders(out: Path, plan: InstrumentPlan) -> list[str]:
    bars = out / BARS_DIR
    if not bars.is_dir():
        return []
    current = {b.note for b in plan.bars}
    return sorted(
        p.name
        for p in bars.iterdir()
        if p.is_dir() and p.name not in current and not p.name.startswith(".")
    )


@dataclass(frozen=True)
class RunPlan:
    """A validated run: the instrument's plan, the bars to work on (``work``, with the index
    of the job each waits for), the reused ones and their saved results."""

    out: Path
    plan: InstrumentPlan
    work: tuple[BarJob, ...]
    parents: tuple[int | None, ...]
    reused: tuple[str, ...]
    saved: Mapping[int, Mapping[str, Any] | None]
    n_workers: int


def plan_run(
    file: Path,
    out: Path,
    *,
    jobs: int | None = None,
    force: bool = False,
    shop: bool = True,
    gcode: bool = False,
    paper: str = "A4",
    fidelity: str | None = None,
    progress: Callable[[str], None] | None = None,
) -> RunPlan:
    """Validate the instrument file and the options, mark ``out`` as this command's, and sort
    the bars into those to design, to re-draw and to reuse (the fingerprints). With a [stock]
    table the blanks are sized first (``progress(text)`` is told of each step)."""
    spec, base = load_instrument(file)
    if fidelity is not None and fidelity not in ("beam", "plane", "solid"):
        raise InputError(f"--fidelity {fidelity!r}: choose beam, plane or solid")
    plan = plan_instrument(spec, base, progress)
    n_workers = jobs if jobs is not None else (os.cpu_count() or 1)
    if n_workers < 1:
        raise InputError(f"--jobs {jobs}: give 1 or more")
    options = None
    if shop:
        gcode_options = GcodeOptions(cutter=Cutter("ball", 6.0)) if gcode else None
        options = ShopOptions(paper=paper, gcode=gcode_options)
    out = Path(out)
    check_out_dir(out, force)
    manifest = {
        "written_by": "tonewright instrument",
        "tool_version": tonewright.__version__,
        "title": plan.title,
        "notes": [b.note for b in plan.bars],
    }
    atomic_write_text(out / MANIFEST, json.dumps(manifest, indent=2) + "\n", overwrite=True)
    for staging in (out / BARS_DIR).glob(".*.tmp"):  # left by a run that was stopped
        shutil.rmtree(staging, ignore_errors=True)

    plans: list[tuple[int, BarPlan, str, str | None, bool]] = []
    for i, b in enumerate(plan.bars):
        folder = out / BARS_DIR / b.note
        fp = bar_fingerprint(b, plan.material, fidelity, plan.attempts, plan.max_narrowing)
        sfp = shop_fingerprint(fp, options) if options is not None else None
        record = {} if force else _read_record(folder)
        redo = not _design_done(folder, record, fp)
        plans.append((i, b, fp, sfp, redo))
    redone = {i for i, _, _, _, redo in plans if redo}
    saved: dict[int, dict[str, Any] | None] = {
        i: _saved_payload(out / BARS_DIR / b.note) for i, b, _, _, redo in plans if not redo
    }
    neighbour = neighbour_parents(len(plan.bars))
    work: list[BarJob] = []
    work_index: dict[int, int] = {}  # bar index -> index in `work`
    reused: list[str] = []
    for i, b, fp, sfp, redo in plans:
        folder = out / BARS_DIR / b.note
        # shop files are drawn only for designs that meet their targets
        payload = saved.get(i)
        redraw = (
            options is not None
            and not redo
            and not _shop_done(folder, _read_record(folder), sfp)
            and bool(payload and payload.get("converged"))
        )
        if not (redo or redraw):
            reused.append(b.note)
            continue
        parent = neighbour[i]
        start = None
        if redo and parent is not None and parent not in redone:
            p_payload = saved.get(parent)
            if p_payload and p_payload.get("converged"):
                start = p_payload.get("design", {}).get("variables")
        work_index[i] = len(work)
        work.append(
            BarJob(
                note=b.note,
                folder=str(folder),
                part=dict(b.part),
                design_fp=fp,
                redo_design=redo,
                shop=options,
                shop_fp=sfp,
                fidelity=fidelity,
                attempts=plan.attempts,
                max_narrowing=plan.max_narrowing,
                start=start if isinstance(start, dict) else None,
                waits_for_parent=parent is not None and parent in redone,
            )
        )

    # a bar waits for its neighbour only when that neighbour is worked on in this run
    parents = tuple(work_index.get(neighbour[i]) for i in work_index)
    return RunPlan(out, plan, tuple(work), parents, tuple(reused), saved, n_workers)


def run_instrument(run: RunPlan, on_bar: Callable[[str], None] | None = None) -> InstrumentReport:
    """Design, draw and summarise a whole instrument in worker processes; each bar's folder is
    written as it finishes. ``on_bar(note)`` is told of each finished bar (a progress bar)."""
    out, plan, work, saved = run.out, run.plan, list(run.work), run.saved
    finished: dict[str, BarOutcome] = {}
    if work:

        def done(_: int, outcome: BarOutcome) -> None:
            written = write_bar(outcome)
            finished[written.job.note] = written
            if on_bar:
                on_bar(written.job.note)

        with ProcessPoolExecutor(
            max_workers=min(run.n_workers, len(work)),
            mp_context=_pool_context(),
            initializer=_worker_init,
        ) as pool:
            run_in_parent_order(pool, design_bar, work, list(run.parents), done)

    rows = []
    for i, b in enumerate(plan.bars):
        o = finished.get(b.note)
        if o is not None and o.report is not None:
            payload = result_payload(o.report)
        elif o is not None and o.error is not None:
            payload = None
        else:
            payload = saved.get(i) if i in saved else _saved_payload(out / BARS_DIR / b.note)
        rows.append(_row(b.note, payload, o.error if o else None, o.shop_error if o else None))
    return InstrumentReport(
        plan=plan,
        rows=tuple(rows),
        designed=tuple(j.note for j in work if j.redo_design),
        shop_only=tuple(j.note for j in work if not j.redo_design),
        reused=run.reused,
        stale=tuple(_stale_folders(out, plan)),
    )


def write_instrument(report: InstrumentReport, out: Path) -> None:
    """The run's own files: summary, cut list, resonators, figures, last-run.json."""
    from tonewright.plots import figure_bytes

    plan, rows = report.plan, report.rows
    atomic_write_text(out / "summary.csv", summary_csv(rows), overwrite=True)
    atomic_write_text(out / "cut_list.csv", cut_list_csv(plan), overwrite=True)
    if plan.resonators:
        atomic_write_text(out / "resonators.csv", resonators_csv(plan), overwrite=True)
    for name, make in (("dimensions", dimensions_figure), ("errors", errors_figure)):
        for fmt in ("png", "svg"):
            data = figure_bytes(make(plan, rows), fmt)
            atomic_write_bytes(out / f"{name}.{fmt}", data, overwrite=True)
    if plan.schedule:
        atomic_write_text(out / "blanks.csv", blanks_csv(plan), overwrite=True)
        for fmt in ("png", "svg"):
            data = figure_bytes(blanks_figure(plan), fmt)
            atomic_write_bytes(out / f"blanks.{fmt}", data, overwrite=True)
    last = {
        "designed": list(report.designed),
        "shop_only": list(report.shop_only),
        "reused": list(report.reused),
        "failed": [r.note for r in rows if r.status != "met"],
    }
    atomic_write_text(out / LAST_RUN, json.dumps(last, indent=2) + "\n", overwrite=True)
