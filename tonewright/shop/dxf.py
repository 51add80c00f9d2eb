"""DXF of the bar's side view in millimetres (R2010, LWPOLYLINE), for CAD/CAM and laser templates.

Coordinates: ``x`` along the bar from its left end, ``y`` up, origin at the left end of the
blank's bottom face; the flat top face is at ``y = T`` and the undercut (bottom) surface at
``y = T - t(x)``. Layers:

- ``OUTLINE``: the finished bar's closed outline; the blank's outline as a dashed rectangle;
- ``UNDERCUT``: the cut path, an open polyline along the bottom surface from end to end;
- ``HOLES``: one circle per hole;
- ``NODES``: a line across the bar at each node and dashed lines at node +- tolerance;
- ``TEXT``: title, material, grain, units, cautions.
"""

from __future__ import annotations

import contextlib
import io
from collections.abc import Iterator

import ezdxf
import numpy as np

from tonewright.shop.cautions import caution_lines
from tonewright.shop.part import ShopPart

__all__ = ["LAYERS", "dxf_text"]

LAYERS: dict[str, int] = {"OUTLINE": 7, "UNDERCUT": 1, "HOLES": 5, "NODES": 3, "TEXT": 8}


@contextlib.contextmanager
def _fixed_metadata() -> Iterator[None]:
    # ezdxf stamps creation/update times and random GUIDs; its own switch fixes them so the
    # file is byte-stable. It is a module-wide option, so restore it afterwards.
    before = ezdxf.options.write_fixed_meta_data_for_testing
    ezdxf.options.write_fixed_meta_data_for_testing = True
    try:
        yield
    finally:
        ezdxf.options.write_fixed_meta_data_for_testing = before


def dxf_text(part: ShopPart) -> str:
    """The DXF document as text (millimetres, $INSUNITS = 4)."""
    with _fixed_metadata():
        doc = ezdxf.new("R2010", setup=True, units=ezdxf.units.MM)
        for name, colour in LAYERS.items():
            doc.layers.add(name, color=colour)
        msp = doc.modelspace()
        L = part.length_m * 1000.0
        T = part.blank_thickness_m * 1000.0
        x = np.asarray(part.stations_x_m) * 1000.0
        y_bottom = part.bottom_surface_m(np.asarray(part.stations_x_m)) * 1000.0
        bottom = [(float(a), float(b)) for a, b in zip(x, y_bottom, strict=True)]

        outline = [(0.0, T), (L, T), *bottom[::-1]]
        msp.add_lwpolyline(outline, close=True, dxfattribs={"layer": "OUTLINE"})
        msp.add_lwpolyline(
            [(0.0, 0.0), (L, 0.0), (L, T), (0.0, T)],
            close=True,
            dxfattribs={"layer": "OUTLINE", "linetype": "DASHED"},
        )
        msp.add_lwpolyline(bottom, dxfattribs={"layer": "UNDERCUT"})

        for hx, hd, hh in part.holes:
            centre_y = float(part.bottom_surface_m(hx)) * 1000.0 + hh * 1000.0
            msp.add_circle((hx * 1000.0, centre_y), hd * 500.0, dxfattribs={"layer": "HOLES"})

        tol = part.node_tolerance_m * 1000.0
        for n in part.node_positions_m:
            xn = n * 1000.0
            msp.add_line((xn, -5.0), (xn, T + 5.0), dxfattribs={"layer": "NODES"})
            if tol > 0:
                for xt in (xn - tol, xn + tol):
                    msp.add_line(
                        (xt, -2.0),
                        (xt, T + 2.0),
                        dxfattribs={"layer": "NODES", "linetype": "DASHED"},
                    )

        lines = [
            part.title,
            f"side view, millimetres, origin at the left end of the blank's bottom face; "
            f"blank {L:.2f} x {part.width_m * 1000:.2f} x {T:.2f} mm",
            f"material: {part.material_name or 'not given'}; {part.grain_note}",
            "layers: OUTLINE bar and (dashed) blank; UNDERCUT cut path; HOLES; NODES "
            f"(dashed: +-{tol:g} mm); TEXT",
            *(f"note: {n}" for n in part.notes),
            *caution_lines(100, part.caution_kind),
        ]
        height = 2.5
        for i, line in enumerate(lines):
            msp.add_text(
                line,
                height=height if i else 1.6 * height,
                dxfattribs={"layer": "TEXT", "insert": (0.0, -12.0 - 1.7 * height * i)},
            )
        stream = io.StringIO()
        doc.write(stream)
    return stream.getvalue()
