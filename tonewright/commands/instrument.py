"""``tonewright instrument FILE --out DIR``: design every bar of an instrument in parallel and
write each bar's design and shop files, a summary, plots, a cut list of blanks and the lengths
of the resonator tubes.

Resuming: each finished bar leaves ``fingerprint.json`` in its folder, a SHA-256 hash of its
resolved inputs (blank sizes, material values, target frequencies and tolerances, design limits
and seed, model fidelity, tool version); a later run skips every bar whose hash matches and
whose files are all there, so an interrupted run continues where it stopped and a changed input
redoes exactly the bars it changes. The shop files carry a second hash (design hash plus shop
options), so switching G-code on redoes the shop files only.

Layout of ``DIR``::

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
import sys
from collections.abc import Callable, Sequence
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass
from pathlib import Path
from typing import Annotated, Any

import numpy as np
import tomli_w
import typer
from rich import box
from rich.console import Console
from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn
from rich.table import Table
from threadpoolctl import threadpool_limits

import tonewright
from tonewright.cli_support import atomic_write_bytes, atomic_write_text, guarded
from tonewright.commands.design import OUTPUTS as DESIGN_OUTPUTS
from tonewright.commands.design import UNWANTED_CAVEAT, write_design
from tonewright.commands.shop import shop_part_from
from tonewright.errors import InputError
from tonewright.instrument import (
    BarPlan,
    InstrumentPlan,
    blank_volume_m3,
    load_instrument,
    plan_instrument,
)
from tonewright.materials import MaterialSpec
from tonewright.scheduling import neighbour_parents, run_in_parent_order
from tonewright.shop import Cutter, GcodeOptions, ShopOptions, write_all

__all__ = [
    "FINGERPRINT",
    "MANIFEST",
    "BarRow",
    "bar_fingerprint",
    "register",
    "run_instrument",
    "shop_fingerprint",
]

MANIFEST = "instrument-run.json"
LAST_RUN = "last-run.json"
FINGERPRINT = "fingerprint.json"
BLANK_FILE = "blank.toml"
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
    bar: BarPlan, material: MaterialSpec, fidelity: str | None = None, attempts: int = 1
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
        "fidelity": fidelity,
        "attempts": attempts,
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


# ---------------------------------------------------------------------------------------------
# One bar, in a worker process


@dataclass(frozen=True)
class _Job:
    note: str
    folder: str
    part: dict[str, Any]
    design_fp: str
    redo_design: bool
    shop: ShopOptions | None
    shop_fp: str | None
    fidelity: str | None
    attempts: int
    start_from: str | None = None  # folder of the neighbour whose design this one starts from
    seed: int = 1  # the bar's design.seed: the first of the seeds tried


def _worker_init() -> None:
    # one BLAS thread per worker (the eigenproblems are small, workers fill the cores), and
    # the single-bar progress bars of `write_design` silenced: the parent draws its own
    threadpool_limits(limits=1, user_api="blas")
    sys.stderr = open(os.devnull, "w")  # lives as long as the worker


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


def _blank_toml(part: dict[str, Any]) -> str:
    header = (
        "# One bar of an instrument, written by 'tonewright instrument': the uncut blank, its\n"
        "# target and design limits. 'tonewright design' reads this file as it is.\n\n"
    )
    return header + tomli_w.dumps(part)


def _shortfall(result: dict[str, Any]) -> float:
    """How far a design is from its target: 0 when met, else the worst error in tolerances
    (plus one, so that any miss ranks behind any design that meets its target)."""
    if result.get("converged"):
        return 0.0
    worst = max(
        (abs(r["error_cents"]) / r["tolerance_cents"] for r in result.get("partials", ())),
        default=np.inf,
    )
    return 1.0 + worst


def _neighbour_start(job: _Job) -> dict[str, float] | None:
    """The design variables of the neighbour this bar starts from, if it met its target."""
    if job.start_from is None:
        return None
    try:
        result = json.loads((Path(job.start_from) / "result.json").read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    variables = result.get("design", {}).get("variables") if result.get("converged") else None
    return variables if isinstance(variables, dict) else None


def _design_with_restarts(blank: Path, folder: Path, job: _Job) -> None:
    """`tonewright design` with the seeds seed, seed + 1, ... (``job.attempts`` at most) until
    one meets the target; the best attempt's files are moved into ``folder``. The first
    attempt polishes the neighbour's design first (``tonewright.scheduling``). A new seed
    starts the global search elsewhere, which is what an evolution strategy stuck in a local
    minimum needs."""
    seed0 = job.seed
    start = _neighbour_start(job)
    for stale in folder.glob(".attempt-*"):  # left by a run that was stopped
        _clear_dir(stale)
    best: tuple[float, Path, str] | None = None
    tried: list[Path] = []
    for k in range(job.attempts):
        trial = folder / f".attempt-{k + 1}"
        tried.append(trial)
        text = io.StringIO()
        console = Console(file=text, width=160, color_system=None)
        first = start if k == 0 else None
        write_design(blank, trial, seed0 + k, True, console, job.fidelity, first)
        result = json.loads((trial / "result.json").read_text(encoding="utf-8"))
        score = _shortfall(result)
        if best is None or score < best[0]:
            best = (score, trial, text.getvalue())
        if score == 0.0:
            break
    _, chosen, summary = best
    for name in DESIGN_OUTPUTS:
        os.replace(chosen / name, folder / name)
    summary = summary.replace(str(chosen), str(folder))
    atomic_write_text(folder / "summary.txt", summary, overwrite=True)
    for trial in tried:
        _clear_dir(trial)


def _work(job: _Job, _parent: Any = None) -> dict[str, Any]:
    """Design one bar (unless its design is current) and draw its shop files. (The parent's
    output is not needed: the neighbour's design is read from its folder.)"""
    folder = Path(job.folder)
    out: dict[str, Any] = {"note": job.note, "error": None, "shop_error": None}
    try:
        folder.mkdir(parents=True, exist_ok=True)
        old = _read_record(folder)
        (folder / FINGERPRINT).unlink(missing_ok=True)  # no record while files are in flux
        if job.redo_design:
            _clear_dir(folder / SHOP_DIR)  # drawn from the old design
            blank = folder / BLANK_FILE
            atomic_write_text(blank, _blank_toml(job.part), overwrite=True)
            _design_with_restarts(blank, folder, job)
            old = {}
        _write_record(folder, job.design_fp, old.get("shop"), old.get("shop_files") or [])
        if job.shop is None:
            return out
        result = json.loads((folder / "result.json").read_text(encoding="utf-8"))
        if not result.get("converged"):
            _clear_dir(folder / SHOP_DIR)  # never hand the shop a bar that misses its target
            _write_record(folder, job.design_fp, None, [])
            return out
        _clear_dir(folder / SHOP_DIR)
        try:
            shop_part = shop_part_from(folder / "result.json")[2]
            written = write_all(shop_part, folder / SHOP_DIR, job.shop, force=True)
        except InputError as exc:
            out["shop_error"] = str(exc)
            _write_record(folder, job.design_fp, None, [])
            return out
        files = [p.relative_to(folder).as_posix() for p in written]
        _write_record(folder, job.design_fp, job.shop_fp, files)
    except InputError as exc:
        out["error"] = str(exc)
    except Exception as exc:  # one bar's crash must not stop the others; reported per bar
        out["error"] = f"{type(exc).__name__}: {exc}"
    return out


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


def _row_from_result(bar: BarPlan, folder: Path, error: str | None, shop_error: str | None):
    if error is not None:
        return BarRow(bar.note, (), None, None, None, None, "error", error)
    try:
        payload = json.loads((folder / "result.json").read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return BarRow(bar.note, (), None, None, None, None, "error", "no result.json")
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
        note=bar.note,
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


def _print_table(console: Console, rows: Sequence[BarRow]) -> None:
    """The summary, compact enough for 80 columns: full figures are in summary.csv."""
    table = Table(title="Instrument", box=box.SIMPLE_HEAD, padding=(0, 0, 0, 1), pad_edge=False)
    table.add_column("note", no_wrap=True)
    table.add_column("f1 Hz", justify="right", no_wrap=True)
    table.add_column("cents off", justify="right", no_wrap=True)
    for name in ("length", "deepest", "thinnest"):
        table.add_column(name, justify="right", no_wrap=True)
    table.add_column("nearest", no_wrap=True)
    table.add_column("status", no_wrap=True)
    for r in rows:
        nearest = ""
        if r.nearest_mode:
            m = r.nearest_mode
            nearest = f"{m['family'][0].upper()}{m['order']} {m['gap_hz']:.0f} Hz"
        colour = "green" if r.status == "met" else "red"
        table.add_row(
            r.note,
            f"{r.partials[0]['target_hz']:.2f}" if r.partials else "",
            " ".join(f"{p['error_cents']:+.1f}" for p in r.partials),
            _fmt(r.length_mm, 1),
            _fmt(r.max_depth_mm, 1),
            _fmt(r.min_thickness_mm, 1),
            nearest,
            f"[{colour}]{r.status}[/{colour}]",
        )
    console.print(table)
    console.print(
        "  lengths in mm; cents off: each tuned partial from its target; nearest: the torsional "
        "(T) or lateral (L) mode nearest a tuned partial, and how far from it, by the "
        f"{UNWANTED_CAVEAT}"
    )
    for r in rows:
        if r.status != "met":
            console.print(f"  {r.note}: {r.message}")


# ---------------------------------------------------------------------------------------------
# The run


def _check_out_dir(out: Path, force: bool) -> None:
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


def _run_jobs(
    jobs: list[_Job], parents: list[int | None], n_workers: int, on_done: Callable[[dict], None]
) -> None:
    with ProcessPoolExecutor(
        max_workers=n_workers, mp_context=_pool_context(), initializer=_worker_init
    ) as pool:
        with Progress(
            TextColumn("[bold]designing bars"),
            BarColumn(),
            MofNCompleteColumn(),
            TextColumn("{task.fields[info]}"),
            TimeElapsedColumn(),
            console=Console(stderr=True),
            transient=True,
        ) as bar:
            task = bar.add_task("bars", total=len(jobs), info="")

            def finished(_: int, outcome: dict) -> None:
                on_done(outcome)
                bar.update(task, advance=1, info=f"last: {outcome['note']}")

            run_in_parent_order(pool, _work, jobs, parents, finished)


def run_instrument(
    file: Path,
    out: Path,
    *,
    jobs: int | None = None,
    force: bool = False,
    shop: bool = True,
    gcode: bool = False,
    paper: str = "A4",
    fidelity: str | None = None,
    console: Console | None = None,
) -> int:
    """Design, draw and summarise a whole instrument; returns the exit code (0 every bar met
    its target, 1 some did not)."""
    console = console or Console()
    spec, base = load_instrument(file)
    plan = plan_instrument(spec, base)
    if fidelity is not None and fidelity not in ("beam", "plane", "solid"):
        raise InputError(f"--fidelity {fidelity!r}: choose beam, plane or solid")
    n_workers = jobs if jobs is not None else (os.cpu_count() or 1)
    if n_workers < 1:
        raise InputError(f"--jobs {jobs}: give 1 or more")
    options = None
    if shop:
        gcode_options = GcodeOptions(cutter=Cutter("ball", 6.0)) if gcode else None
        options = ShopOptions(paper=paper, gcode=gcode_options)
    out = Path(out)
    _check_out_dir(out, force)
    manifest = {
        "written_by": "tonewright instrument",
        "tool_version": tonewright.__version__,
        "title": plan.title,
        "notes": [b.note for b in plan.bars],
    }
    atomic_write_text(out / MANIFEST, json.dumps(manifest, indent=2) + "\n", overwrite=True)

    work: list[_Job] = []
    work_index: dict[int, int] = {}  # bar index -> index in `work`
    reused: list[str] = []
    neighbour = neighbour_parents(len(plan.bars))
    for i, b in enumerate(plan.bars):
        folder = out / BARS_DIR / b.note
        fp = bar_fingerprint(b, plan.material, fidelity, plan.attempts)
        sfp = shop_fingerprint(fp, options) if options is not None else None
        record = {} if force else _read_record(folder)
        redo = not _design_done(folder, record, fp)
        # shop files are drawn only for designs that meet their targets
        redraw = (
            options is not None
            and not redo
            and not _shop_done(folder, record, sfp)
            and _design_met(folder)
        )
        if redo or redraw:
            parent = neighbour[i]
            work_index[i] = len(work)
            work.append(
                _Job(
                    note=b.note,
                    folder=str(folder),
                    part=dict(b.part),
                    design_fp=fp,
                    redo_design=redo,
                    shop=options,
                    shop_fp=sfp,
                    fidelity=fidelity,
                    attempts=plan.attempts,
                    seed=b.design.seed,
                    start_from=None
                    if parent is None
                    else str(out / BARS_DIR / plan.bars[parent].note),
                )
            )
        else:
            reused.append(b.note)

    outcomes: dict[str, dict[str, Any]] = {}
    if work:
        try:
            # a bar waits for its neighbour only when that neighbour is designed in this run
            parents = [work_index.get(neighbour[i]) for i in work_index]
            _run_jobs(
                work, parents, min(n_workers, len(work)), lambda o: outcomes.update({o["note"]: o})
            )
        except KeyboardInterrupt:
            typer.echo(
                "interrupted: finished bars are kept; run the same command again to continue",
                err=True,
            )
            raise typer.Exit(code=130) from None

    rows = [
        _row_from_result(
            b,
            out / BARS_DIR / b.note,
            outcomes.get(b.note, {}).get("error"),
            outcomes.get(b.note, {}).get("shop_error"),
        )
        for b in plan.bars
    ]
    _write_outputs(out, plan, rows)
    designed = [j.note for j in work if j.redo_design]
    last = {
        "designed": designed,
        "shop_only": [j.note for j in work if not j.redo_design],
        "reused": reused,
        "failed": [r.note for r in rows if r.status != "met"],
    }
    atomic_write_text(out / LAST_RUN, json.dumps(last, indent=2) + "\n", overwrite=True)

    _print_table(console, rows)
    met = sum(r.status == "met" for r in rows)
    console.print(
        f"{met} of {len(rows)} bars meet their targets; designed {len(designed)}, "
        f"reused {len(reused)}; wrote {out}"
    )
    stale = _stale_folders(out, plan)
    if stale:
        console.print(f"  folders of bars no longer in the instrument: {', '.join(stale)}")
    console.print(f"  {CAUTION}")
    return 0 if met == len(rows) else 1


def _design_met(folder: Path) -> bool:
    try:
        payload = json.loads((folder / "result.json").read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return False
    return bool(payload.get("converged"))


def _stale_folders(out: Path, plan: InstrumentPlan) -> list[str]:
    bars = out / BARS_DIR
    if not bars.is_dir():
        return []
    current = {b.note for b in plan.bars}
    return sorted(p.name for p in bars.iterdir() if p.is_dir() and p.name not in current)


def _write_outputs(out: Path, plan: InstrumentPlan, rows: Sequence[BarRow]) -> None:
    from tonewright.plots import figure_bytes

    atomic_write_text(out / "summary.csv", summary_csv(rows), overwrite=True)
    atomic_write_text(out / "cut_list.csv", cut_list_csv(plan), overwrite=True)
    if plan.resonators:
        atomic_write_text(out / "resonators.csv", resonators_csv(plan), overwrite=True)
    for name, make in (("dimensions", dimensions_figure), ("errors", errors_figure)):
        for fmt in ("png", "svg"):
            data = figure_bytes(make(plan, rows), fmt)
            atomic_write_bytes(out / f"{name}.{fmt}", data, overwrite=True)


# ---------------------------------------------------------------------------------------------
# Command line


def register(app: typer.Typer) -> None:
    @app.command("instrument")
    @guarded
    def instrument_cmd(
        file: Annotated[Path, typer.Argument(help="Instrument file (TOML).")],
        out: Annotated[Path, typer.Option("--out", "-o", help="Folder for the results.")],
        jobs: Annotated[
            int | None, typer.Option("--jobs", "-j", help="Bars designed at once (default: cores).")
        ] = None,
        shop: Annotated[
            bool, typer.Option("--shop/--no-shop", help="Draw templates, drawings, DXF, cuts.")
        ] = True,
        gcode: Annotated[
            bool, typer.Option("--gcode", help="Also write router G-code (6 mm ball end).")
        ] = False,
        paper: Annotated[str, typer.Option(help="Paper for templates: A4, A3, Letter...")] = "A4",
        fidelity: Annotated[
            str | None,
            typer.Option(help="Model that certifies each bar: beam, plane or solid."),
        ] = None,
        force: Annotated[
            bool, typer.Option("--force", help="Redo every bar and replace files in --out.")
        ] = False,
    ) -> None:
        """Design every bar of an instrument in parallel; resume where a run stopped."""
        code = run_instrument(
            file,
            out,
            jobs=jobs,
            force=force,
            shop=shop,
            gcode=gcode,
            paper=paper,
            fidelity=fidelity,
        )
        if code:
            raise typer.Exit(code=code)
