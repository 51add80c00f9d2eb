"""The invented demo bar the shop-output tests draw, cut and mill (test data, not shipped)."""

import numpy as np

from tonewright.shop.part import ShopPart


def demo_part() -> ShopPart:
    """An invented demo: a 380 x 50 x 20 mm padauk-like bar undercut to 6 mm.

    The profile is a smooth arch between x = 90 and 290 mm sampled at 10 mm; nodes and holes
    sit just outside it, near 0.21 L, roughly where an undercut bar's mode-1 nodes lie.
    Invented data for examples and tests only: a real design comes from the forward model.
    """
    L, T, t_min = 0.380, 0.020, 0.006
    x = np.concatenate(([0.0], np.arange(0.090, 0.2900001, 0.010), [L]))
    u = np.clip((x - 0.090) / 0.200, 0.0, 1.0)  # 0..1 across the arch
    t = T - (T - t_min) * np.sin(np.pi * u) ** 1.5
    nodes = (0.0805, L - 0.0805)
    return ShopPart(
        title="Demo bar F3 (workshop sample)",
        length_m=L,
        width_m=0.050,
        blank_thickness_m=T,
        stations_x_m=tuple(x),
        stations_thickness_m=tuple(t),
        holes=tuple((n, 0.005, 0.010) for n in nodes),
        node_positions_m=nodes,
        node_tolerance_m=0.001,
        material_name="padauk-like hardwood (demo)",
        grain_note="grain along the length",
        partials=(("f1", 174.61, 174.9), ("f2", 698.46, 697.1), ("f3", 1746.1, 1752.0)),
        notes=("Invented demo bar for examples and tests.",),
    )
