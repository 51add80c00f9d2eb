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

from tonewright.errors import InputError
from tonewright.forward import Bar, String, families_of, solve
from tonewright.modes_report import part_modes
from tonewright.partfile import PartFile, load_part
from tonewright.shop import ShopPart, TubeCut, WoundString

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
WRAP_DIAMETER = 0.3e-3  # m

MISSED_MARK = "MISSED DESIGN"


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
) -> tuple[object, ShopPart | None, object]:
    """The forward part, its ShopPart (bars; None otherwise) and its certified solve.
    ``partials``: (label, target Hz or None, predicted Hz); the model's first three when
    None."""
    part = part_file.to_part(base)
    counts = dict.fromkeys(families_of(part), 0)
    counts["transverse" if isinstance(part, String) else "bending"] = 3
    modal = solve(part, counts, tol_cents=0.01, theory=part_file.model.theory)
    if not isinstance(part, Bar):
        return part, None, modal
    nodes = modal.family("bending")[0].nodes_m
    model_note = f"Model: {part_file.model.theory} beam, {modal.message}."
    if partials is None:
        # a part file claims no partials: the certifying model's (3D for a bar of constant
        # width), as 'modes' and 'design' give them
        solved = part_modes(part_file, base, 3)
        bending = [m for m in solved.modes if m.family == "bending"][:3]
        partials = tuple((f"{m.family} {m.order}", None, m.frequency_hz) for m in bending)
        if solved.model.startswith("3D") and len(bending[0].nodes_m) == len(nodes):
            nodes = bending[0].nodes_m
            model_note = f"Model: {solved.model}, {solved.message}."
    bar = part_file.bar
    if bar.width_profile:
        raise InputError("bar.width_profile: shop outputs draw bars of constant width only")
    x = np.linspace(0.0, bar.length, 2)
    if bar.profile:
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
        notes=(model_note,),
    )
    return part, shop, modal


def load_shop_source(file: Path) -> ShopSource:
    """Load a part or result file and build what the shop writers need."""
    file = Path(file)
    part_file, base = load_part(file)
    verdict = design_verdict(file)
    modal_partials = None
    if file.suffix.lower() == ".json":
        modal_partials = _partials_of(file, None)
    part, shop, modal = shop_part(part_file, base, file.stem, modal_partials)
    return ShopSource(part_file, part, modal, shop, verdict)


def marked_missed(shop: ShopPart, message: str) -> ShopPart:
    """The same part with every sheet marked as a missed design: title and a first note."""
    return replace(
        shop,
        title=f"{shop.title} - {MISSED_MARK}",
        notes=(f"{MISSED_MARK}: this design misses its target ({message}).", *shop.notes),
    )


def tube_cut_of(source: ShopSource, name: str) -> TubeCut:
    """The cut sheet entry of a tube: length, section, suspension node, predicted pitch."""
    part_file, part, modal = source.part_file, source.part, source.modal
    nodes = modal.family("bending")[0].nodes_m
    return TubeCut(
        name=name,
        length_m=part.length,
        outer_diameter_m=part_file.tube.outer_diameter,
        wall_m=part_file.tube.wall,
        node_from_top_m=nodes[0],
        node_tolerance_m=0.5e-3,
        material_name=(part_file.material_spec(None).name if part_file.material else ""),
        predicted_hz=modal.frequency("bending", 1),
    )


def wound_string_of(part_file: PartFile, name: str) -> WoundString:
    """A string's winding schedule: a steel core at its lightest density, copper wrap."""
    s = part_file.string
    if not s.density_profile:
        raise InputError("string: a winding schedule needs density_profile stations")
    x, mu = np.array(s.density_profile).T
    core_mu = float(mu.min())
    return WoundString(
        title=name,
        length_m=s.length,
        stations_x_m=tuple(x),
        linear_density_kg_m=tuple(mu),
        core_diameter_m=np.sqrt(4 * core_mu / (np.pi * STEEL_DENSITY)),
        core_density_kg_m3=STEEL_DENSITY,
        wrap_diameter_m=WRAP_DIAMETER,
        wrap_density_kg_m3=COPPER_DENSITY,
    )
