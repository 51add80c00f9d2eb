"""Gouge-free cutter compensation over a piecewise-linear surface (pure numerics, millimetres).

The surface to machine is ``s(x)``, piecewise linear through ``(xs, zs)`` and the same at
every ``y`` (an undercut runs across the full width). A cutter of radius ``r`` moves along
``x``; its *tip* is its lowest point. Gouge-free tip heights are

- ball end:  ``c(x) = max_{|x'-x| <= r} [ s(x') + sqrt(r^2 - (x'-x)^2) ]``, tip ``c(x) - r``
  (``c`` is the height of the ball's centre: the ball touches the surface from above);
- flat end:  ``tip(x) = max_{|x'-x| <= r} s(x')`` (the flat bottom rests on the highest point
  under its footprint).

Because ``s`` does not depend on ``y``, the worst point of the cutter lies in the plane
``y' = y``, so these 1-D formulas are exact for the 3-D cutter. On each linear piece
``s = z_a + m (x' - x_a)`` the ball term is concave in ``x'`` and peaks at
``x' - x = m r / sqrt(1 + m^2)`` (set the derivative ``m - u / sqrt(r^2 - u^2)`` to zero),
clipped to the piece and to the window; the flat term peaks at a window end or a breakpoint.
So both maxima are evaluated exactly, without sampling ``x'``.

The surface the cutter actually leaves (its envelope) at ``x'`` is the minimum over tool
positions ``x`` of the cutter's lower surface there: ``tip + r - sqrt(r^2 - (x'-x)^2)`` for a
ball, ``tip`` for a flat end within ``|x'-x| <= r``.

A polyline through exact tip heights can dip below the exact curve between its vertices where
the curve is concave (around ridges of the surface); ``lift_chords`` measures that dip at
interior points of every segment and raises the vertices by it, and ``simplify_above`` only
drops vertices whose replacement chord passes above them, so the result stays gouge-free.

Cusp left between parallel ball-end passes at stepover ``p`` on a flat floor:
``h = r - sqrt(r^2 - (p/2)^2)`` (circle geometry).
"""

from __future__ import annotations

from typing import Literal

import numpy as np

__all__ = [
    "CutterKind",
    "ball_centre_height",
    "cusp_height",
    "envelope",
    "flat_tip_height",
    "inner_points",
    "lift_chords",
    "simplify_above",
    "stepover_for_cusp",
    "tip_height",
]

CutterKind = Literal["ball", "flat"]

# Work in blocks so the (points x pieces) arrays stay small (memory, not speed).
_BLOCK = 2_000_000


def _blocks(n: int, width: int) -> list[slice]:
    step = max(1, _BLOCK // max(width, 1))
    return [slice(i, min(i + step, n)) for i in range(0, n, step)]


def ball_centre_height(x: np.ndarray, xs: np.ndarray, zs: np.ndarray, r: float) -> np.ndarray:
    """Lowest gouge-free height of a ball's centre above ``x``; ``-inf`` with no surface near."""
    x = np.asarray(x, dtype=float)
    xa, xb = xs[:-1], xs[1:]
    za = zs[:-1]
    m = np.diff(zs) / np.diff(xs)
    u_star = m * r / np.sqrt(1.0 + m * m)  # stationary offset x' - x on each piece
    c = np.full(x.shape, -np.inf)
    flat = x.ravel()
    out = c.ravel()
    for sl in _blocks(flat.size, xa.size):
        xx = flat[sl, None]
        lo = np.maximum(xa, xx - r)
        hi = np.minimum(xb, xx + r)
        xp = np.clip(xx + u_star, lo, hi)
        u = xp - xx
        val = za + m * (xp - xa) + np.sqrt(np.maximum(r * r - u * u, 0.0))
        val = np.where(lo <= hi, val, -np.inf)
        out[sl] = val.max(axis=1)
    return out.reshape(x.shape)


def flat_tip_height(x: np.ndarray, xs: np.ndarray, zs: np.ndarray, r: float) -> np.ndarray:
    """Lowest gouge-free tip height of a flat end: the surface's maximum under the footprint."""
    x = np.asarray(x, dtype=float)
    flat = x.ravel()
    out = np.full(flat.shape, -np.inf)
    for sl in _blocks(flat.size, xs.size):
        xx = flat[sl]
        lo = np.maximum(xx - r, xs[0])
        hi = np.minimum(xx + r, xs[-1])
        ends = np.maximum(np.interp(lo, xs, zs), np.interp(hi, xs, zs))
        inside = (xs[None, :] >= lo[:, None]) & (xs[None, :] <= hi[:, None])
        inner = np.where(inside, zs[None, :], -np.inf).max(axis=1)
        out[sl] = np.where(lo <= hi, np.maximum(ends, inner), -np.inf)
    return out.reshape(x.shape)


def tip_height(
    kind: CutterKind, x: np.ndarray, xs: np.ndarray, zs: np.ndarray, r: float
) -> np.ndarray:
    """Gouge-free height of the cutter's lowest point for either cutter kind."""
    if kind == "ball":
        return ball_centre_height(x, xs, zs, r) - r
    return flat_tip_height(x, xs, zs, r)


def envelope(
    kind: CutterKind, x_tool: np.ndarray, z_tip: np.ndarray, x_eval: np.ndarray, r: float
) -> np.ndarray:
    """Surface left by the cutter at ``x_eval`` after visiting every ``(x_tool, z_tip)``.

    ``+inf`` where no tool position reaches. Tool positions in between the given ones only
    cut deeper, so this is an upper bound on the surface of a continuous pass.
    """
    x_eval = np.asarray(x_eval, dtype=float)
    out = np.full(x_eval.shape, np.inf)
    order = np.argsort(x_tool)
    xt, zt = np.asarray(x_tool)[order], np.asarray(z_tip)[order]
    for sl in _blocks(x_eval.size, 4096):
        xe = x_eval[sl]
        i0 = np.searchsorted(xt, xe.min() - r, side="left")
        i1 = np.searchsorted(xt, xe.max() + r, side="right")
        dx = xe[:, None] - xt[None, i0:i1]
        reach = np.abs(dx) <= r
        if kind == "ball":
            lower = zt[None, i0:i1] + r - np.sqrt(np.maximum(r * r - dx * dx, 0.0))
        else:
            lower = np.broadcast_to(zt[None, i0:i1], dx.shape)
        out[sl] = np.where(reach, lower, np.inf).min(axis=1, initial=np.inf)
    return out


def lift_chords(x: np.ndarray, z: np.ndarray, required: np.ndarray, n_inner: int = 8) -> np.ndarray:
    """Raise polyline vertices so each chord clears ``required`` at ``n_inner`` inner points.

    ``required`` has shape ``(len(x) - 1, n_inner)``: the exact tip heights at
    ``x[i] + k/(n_inner + 1) (x[i+1] - x[i])``, k = 1..n_inner. Returns new heights.
    """
    frac = np.arange(1, n_inner + 1) / (n_inner + 1)
    chord = z[:-1, None] + frac[None, :] * np.diff(z)[:, None]
    deficit = np.maximum(required - chord, 0.0).max(axis=1)
    lift = np.zeros_like(z)
    lift[:-1] = deficit
    lift[1:] = np.maximum(lift[1:], deficit)
    return z + lift


def inner_points(x: np.ndarray, n_inner: int = 8) -> np.ndarray:
    """The inner sample points used by ``lift_chords`` (shape ``(len(x) - 1, n_inner)``)."""
    frac = np.arange(1, n_inner + 1) / (n_inner + 1)
    return x[:-1, None] + frac[None, :] * np.diff(x)[:, None]


def simplify_above(x: np.ndarray, z: np.ndarray, tol: float) -> np.ndarray:
    """Indices of vertices to keep so that every dropped vertex lies on or below its chord.

    A chord that passes above (by at most ``tol``) every vertex it replaces lies above the
    original polyline throughout, so simplification never lowers the path.
    """
    n = x.size
    keep = [0]
    i = 0
    while i < n - 1:
        j = i + 1
        while j + 1 < n:
            k = np.arange(i + 1, j + 1)
            t = (x[k] - x[i]) / (x[j + 1] - x[i])
            gap = z[i] + t * (z[j + 1] - z[i]) - z[k]
            if np.all(gap >= 0.0) and np.all(gap <= tol):
                j += 1
            else:
                break
        keep.append(j)
        i = j
    return np.asarray(keep)


def cusp_height(r: float, stepover: float) -> float:
    """Ridge height between ball-end passes on a flat floor: ``r - sqrt(r^2 - (p/2)^2)``."""
    half = min(stepover / 2.0, r)
    return float(r - np.sqrt(r * r - half * half))


def stepover_for_cusp(r: float, h: float) -> float:
    """Largest ball-end stepover leaving cusps no taller than ``h``: ``2 sqrt(2 r h - h^2)``."""
    h = min(h, r)
    return float(2.0 * np.sqrt(2.0 * r * h - h * h))
