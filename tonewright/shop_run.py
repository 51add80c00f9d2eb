"""From a part file or a design's result to the shop's inputs: a ``ShopPart`` for bars, and
whether the design the file came from met its target.

A design that missed its target is not handed to the shop unless the maker accepts it
explicitly; an accepted miss is marked on every sheet (its title and a note), so the template,
drawing, DXF, cut table and G-code header all say so.
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from tonewright.acoustics.pitch import strike_note_hz
from tonewright.errors import InputError
from tonewright.forward import Bar, String, Tube, families_of, solve
from tonewright.modes_report import part_modes
from tonewright.partfile import PartFile, load_part
from tonewright.shop import ShopPart, TubeCut, WoundString
from tonewright.shop.part import MISSED_MARK

__all__ = [
    "MISSED_MARK",
    "DesignVerdict",
    "ShopSource",
    "design_verdict",
    "load_shop_source",
    "marked_missed",
    "shop_part",
    "tube_cut_of",
    "wound_string_of",
]

STEEL_DENSITY = 7850.0  # kg/m^3, the string's core (common practice, no source)
COPPER_DENSITY = 8960.0  # kg/m^3, the winding (common practice, no source)


@dataclass(frozen=True)
class DesignVerdict:
    """What a result.json says of its design: met or not, and why."""

    converged: bool
    message: str


@dataclass(frozen=True, eq=False)
class ShopSource:
    part_file: PartFile
    part: object  # the forward-model part
    modal: object  # its certified solve (three bending or string modes)
    shop: ShopPart | None  # bars only
    design: DesignVerdict | None  # None for a plain part file


def design_verdict(file: Path) -> DesignVerdict | None:
    """A result.json's verdict on its design (None for a part file, which claims nothing)."""
    if Path(file).suffix.lower() != ".json":
        return None
    payload = json.loads(Path(file).read_text(encoding="utf-8"))
    if "converged" not in payload:
        return None
    return DesignVerdict(bool(payload["converged"]), str(payload.get("message", "")))


def certifier_of(file: Path) -> str | None:
    """The model a result.json says certified its partials (None for a part file)."""
    if Path(file).suffix.lower() != ".json":
        return None
    payload = json.loads(Path(file).read_text(encoding="utf-8"))
    by = payload.get("certified_by")
    return str(by) if by else None


def _partials_of(file: Path, modal) -> tuple[tuple[str, float | None, float], ...]:
    """Target and predicted partials: from a result.json when given, else the model's."""
    if file.suffix.lower() == ".json":
        rows = json.loads(file.read_text(encoding="utf-8")).get("partials", [])
        return tuple(
            (f"{r['family']} {r['order']}", r.get("target_hz"), r["achieved_hz"]) for r in rows
        )
    bending = [m for m in modal.modes if m.family in ("bending", "transverse")][:3]
    return tuple((f"{m.family} {m.order}", None, m.frequency_hz) for m in bending)


def shop_part(
    part_file: PartFile,
    base: Path | None,
    name: str,
    partials: Sequence[tuple[str, float | None, float]] | None = None,
    certified_by: str | None = None,
) -> tuple[object, ShopPart | None, object]:
    """The forward part, its ShopPart (bars; None otherwise) and its certified solve.
    ``partials``: (label, target Hz or None, predicted Hz); the model's first three when
    None. ``certified_by``: the model those partials come from (a design's certifier); the
    beam solve made here when None."""
    part = part_file.to_part(base)
    counts = dict.fromkeys(families_of(part), 0)
    # a tube's pitch is its strike note, from bending mode 4 (6 solved for the cut sheet)
    counts["transverse" if isinstance(part, String) else "bending"] = (
        6 if isinstance(part, Tube) else 3
    )
    modal = solve(part, counts, tol_cents=0.01, theory=part_file.model.theory)
    beam_label = f"{part_file.model.theory.capitalize()} beam model, {modal.message}"
    if not isinstance(part, Bar):
        return part, None, modal
    nodes = modal.family("bending")[0].nodes_m
    model_label = beam_label
    if partials is None:
        # a part file claims no partials: the certifying model's (3D for a bar of constant
        # width), as 'modes' and 'design' give them
        solved = part_modes(part_file, base, 3)
        bending = [m for m in solved.modes if m.family == "bending"][:3]
        partials = tuple((f"{m.family} {m.order}", None, m.frequency_hz) for m in bending)
        if solved.model.startswith("3D") and len(bending[0].nodes_m) == len(nodes):
            nodes = bending[0].nodes_m
            model_label = f"{solved.model}, {solved.message}"
    if certified_by is None:
        certified_by = model_label
    bar = part_file.bar
    if bar.width_profile:
        raise InputError("bar.width_profile: shop outputs draw bars of constant width only")
    x = np.linspace(0.0, bar.length, 2)
    if bar.undercut is not None:  # the outline at every 0.25 mm and both sides of each kink
        x = _outline_stations(part.thickness, bar.length)
    elif bar.profile:
        x = np.array([p[0] for p in bar.profile])
        if x[0] > 0:
            x = np.concatenate([[0.0], x])
        if x[-1] < bar.length:
            x = np.concatenate([x, [bar.length]])
    h = part.thickness(x)
    spec = part_file.material_spec(base)
    holes = tuple(
        (
            hole.x,
            hole.diameter,
            hole.height
            if hole.height is not None
            else 0.5 * float(part.thickness(np.array([hole.x]))[0]),
        )
        for hole in part.holes
    )
    shop = ShopPart(
        title=part_file.title or name,
        length_m=bar.length,
        width_m=bar.width,
        blank_thickness_m=bar.thickness,
        stations_x_m=tuple(float(v) for v in x),
        stations_thickness_m=tuple(float(v) for v in h),
        holes=holes,
        node_positions_m=tuple(nodes),
        node_tolerance_m=0.5e-3,
        material_name=spec.name if spec else "",
        partials=tuple(partials),
        notes=(f"Partials (model Hz) from the {certified_by}.",),
        certified_by=certified_by,
        caution_kind="wood" if spec is None or spec.kind == "wood" else "metal",
    )
    return part, shop, modal


OUTLINE_SPACING = 0.25e-3  # m: an undercut's outline is drawn and milled through these


def _outline_stations(field, length: float) -> np.ndarray:
    """Stations for the outline of a designed cut: every ``OUTLINE_SPACING`` and just either
    side of every kink (a step's two sides), so straight lines between them follow it to well
    under the 0.01 mm the tables print (|h''| dx^2 / 8 for a smooth cut)."""
    n = int(np.ceil(length / OUTLINE_SPACING))
    kinks = np.asarray(field.breakpoints, dtype=float)
    eps = 1e-6
    x = np.concatenate([np.linspace(0.0, length, n + 1), kinks - eps, kinks + eps])
    x = np.unique(x[(x >= 0.0) & (x <= length)])
    return x[np.concatenate(([True], np.diff(x) > 0.5 * eps))]


def load_shop_source(file: Path) -> ShopSource:
    """Load a part or result file and build what the shop writers need."""
    file = Path(file)
    part_file, base = load_part(file)
    verdict = design_verdict(file)
    modal_partials = None
    if file.suffix.lower() == ".json":
        modal_partials = _partials_of(file, None)
    part, shop, modal = shop_part(part_file, base, file.stem, modal_partials, certifier_of(file))
    return ShopSource(part_file, part, modal, shop, verdict)


def marked_missed(shop: ShopPart, message: str) -> ShopPart:
    """The same part with every sheet marked as a missed design: title and a first note."""
    return replace(
        shop,
        title=f"{shop.title} - {MISSED_MARK}",
        notes=(f"{MISSED_MARK}: this design misses its target ({message}).", *shop.notes),
        missed=f"this design misses its target ({message})",
    )


def _strike_of(file: Path | None) -> tuple[float | None, float | None]:
    """(target Hz, certified Hz) of a result.json's strike-note goal, or (None, None)."""
    if file is None or Path(file).suffix.lower() != ".json":
        return None, None
    for row in json.loads(Path(file).read_text(encoding="utf-8")).get("partials", []):
        if row.get("family") == "strike":
            return row.get("target_hz"), row.get("achieved_hz")
    return None, None


def tube_cut_of(source: ShopSource, name: str, file: Path | None = None) -> TubeCut:
    """The cut sheet entry of a tube: length, section, suspension node and its strike note
    (from the design's result when ``file`` is one, else from the solve), with its target."""
    part_file, part, modal = source.part_file, source.part, source.modal
    nodes = modal.family("bending")[0].nodes_m
    target, strike = _strike_of(file)
    if strike is None:
        strike = strike_note_hz([m.frequency_hz for m in modal.family("bending")])
    spec = part_file.material_spec(None) if part_file.material else None
    a4 = part_file.target.a4_hz if part_file.target is not None else 440.0
    missed = ""
    if source.design is not None and not source.design.converged:
        missed = f"this design misses its target ({source.design.message})"
    return TubeCut(
        name=name,
        length_m=part.length,
        outer_diameter_m=part_file.tube.outer_diameter,
        wall_m=part_file.tube.wall,
        node_from_top_m=nodes[0],
        node_tolerance_m=0.5e-3,
        material_name=spec.name if spec else "",
        target_hz=target,
        predicted_hz=strike,
        material_kind="wood" if spec is not None and spec.kind == "wood" else "metal",
        mode1_hz=modal.frequency("bending", 1),
        a4_hz=a4,
        missed=missed,
    )


WINDING_STATIONS_MM = 10.0  # segments of the winding schedule
# copper winding wire sizes a maker can buy, mm (common practice, no source)
WRAP_SIZES_MM = (0.15, 0.2, 0.25, 0.3, 0.35, 0.4, 0.5, 0.6, 0.7, 0.8, 1.0, 1.2)
WRAP_MARGIN = 1.15  # the heaviest segment stays this far under close-wound


def _wrap_diameter(core_d: float, added_max: float) -> float:
    """The finest wrap wire that adds ``added_max`` kg/m with room to spare: close-wound
    (pitch = wire diameter) a wire of diameter d adds rho pi d^2 / 4 sqrt((pi D)^2 + d^2) / d,
    D = core + d, on a single layer."""
    for d_mm in WRAP_SIZES_MM:
        d = d_mm * 1e-3
        close = COPPER_DENSITY * np.pi * d * d / 4 * np.hypot(np.pi * (core_d + d), d) / d
        if close >= WRAP_MARGIN * added_max:
            return d
    raise InputError(
        f"string: adding {added_max * 1e3:.3g} g/m needs a wrap heavier than "
        f"{WRAP_SIZES_MM[-1]:g} mm copper; use a thicker core (diameter)"
    )


def wound_string_of(part_file: PartFile, name: str, base: Path | None = None) -> WoundString:
    """A string's winding schedule: its own core wire (``diameter`` and material) when the
    part gives one, else a steel core at the lightest density; a copper wrap. The density is
    read at ``WINDING_STATIONS_MM`` stations (and the profile's ends)."""
    s = part_file.string
    if not s.density_profile:
        raise InputError("string: a winding schedule needs density_profile stations")
    x, mu = np.array(s.density_profile).T
    if s.diameter is not None:
        spec = part_file.material_spec(base)
        core_d, core_rho = s.diameter, spec.rho
    else:
        core_d = float(np.sqrt(4 * float(mu.min()) / (np.pi * STEEL_DENSITY)))
        core_rho = STEEL_DENSITY
    L = s.length
    step = WINDING_STATIONS_MM * 1e-3
    xs = np.unique(np.concatenate([np.arange(0.0, L, step), [L]]))
    core_mu = core_rho * np.pi * core_d**2 / 4
    wrap = _wrap_diameter(core_d, max(float(mu.max()) - core_mu, 0.0))
    return WoundString(
        title=name,
        length_m=L,
        stations_x_m=tuple(xs),
        linear_density_kg_m=tuple(np.interp(xs, x, mu)),
        core_diameter_m=core_d,
        core_density_kg_m3=core_rho,
        wrap_diameter_m=wrap,
        wrap_density_kg_m3=COPPER_DENSITY,
    )
