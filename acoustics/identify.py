"""Which line of a tap is which mode of the bar, and which lines are not the bar at all.

Input: the measured lines (Hz, level dB, 1/e decay s) and, optionally, the predicted modes of
the expected part as ``(family, order, Hz)``. Output: one ``LineLabel`` per line.

Method
------
1. Mains hum: a line within ``HUM_CENTS`` of a multiple (1..8) of 50 or 60 Hz that rings at
   least as long as ``HUM_MIN_DECAY_S`` is electrical (a bar partial that long at such low
   frequency would be rare, and hum does not decay at all).
2. With predicted modes: the material of a blank is not known exactly, so every predicted
   frequency is allowed one common scale factor ``s`` (``f = s * f_model``; E scales all
   frequencies by sqrt(E)). For each pairing of a strong line with a predicted bending mode
   1..3, ``s`` is fixed and the lines are matched one-to-one to the scaled modes by the
   Hungarian method (``scipy.optimize.linear_sum_assignment``) with the truncated cost
   ``w min((d / tau)^2, 1)``, d the distance in cents, tau the tolerance and w a weight that
   favours strong lines; the lowest total wins, then ``s`` is refitted (mean log ratio of the
   matched bending lines) and the matching repeated once.
3. Without predicted modes, the same search runs over the ratio patterns of ``PATTERNS``
   (bending series only), and the pattern that explains the most weight wins.
4. A line left over within ``PAIR_CENTS`` of a matched line takes the same label as one half
   of a pair (a doublet: two nearly equal modes that beat) when it is within
   ``PAIR_LEVEL_DB`` of it and decays no faster than ``PAIR_DECAY`` times its decay; a much
   weaker or shorter line beside a mode is the room's reverberation of it ("room"). Other
   left-over lines within
   ``RESONATOR_CENTS`` of a whole multiple (1..8) of bending 1 are a resonator's harmonics;
   lines below ``ROOM_FRACTION`` of bending 1 (or of the lowest predicted mode, scaled) are the
   room (rumble, handling); the rest are "unidentified".

Ratio patterns (bending modes 1, 2, 3, ... over mode 1)
-------------------------------------------------------
- uniform free-free beam (Euler-Bernoulli): roots of cos(bL) cosh(bL) = 1, 4.7300, 7.8532,
  10.9956, 14.1372, 17.2788, 20.4204; f_n / f_1 = (b_n / b_1)^2 = 1 : 2.756 : 5.404 : 8.933 :
  13.34 : 18.64 (Rayleigh, *The Theory of Sound*, 1894, sec. 174; the roots are computed here)
  - glockenspiel bars, chimes and tubes;
- marimba and vibraphone bars tuned 1 : 4 : 10 (Rossing, T.D. (2000), *Science of Percussion
  Instruments*, World Scientific, ch. 5, from memory);
- xylophone bars tuned 1 : 3 : 6 (same source, from memory).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike
from scipy.optimize import brentq, linear_sum_assignment
from tonewright.acoustics.pitch import ratio_to_cents

__all__ = [
    "PATTERNS",
    "LineLabel",
    "StrikeNote",
    "free_free_ratios",
    "label_lines",
    "tube_strike_note",
]

HUM_CENTS = 10.0
HUM_MIN_DECAY_S = 1.5
MAINS_HZ = (50.0, 60.0)
PAIR_CENTS = 40.0
PAIR_LEVEL_DB = 15.0  # the halves of a doublet are within this of each other ...
PAIR_DECAY = 0.3  # ... and neither dies more than about three times faster
RESONATOR_CENTS = 15.0
ROOM_FRACTION = 0.7
NOT_FROM_BAR = ("resonator", "room", "electrical")


def free_free_ratios(n: int = 6) -> tuple[float, ...]:
    """f_k / f_1 of a uniform free-free Euler-Bernoulli beam, k = 1..n."""

    def char(b: float) -> float:
        return np.cos(b) * np.cosh(b) - 1.0

    roots = [
        brentq(char, (k + 0.5) * np.pi - 0.3, (k + 0.5) * np.pi + 0.3) for k in range(1, n + 1)
    ]
    return tuple(float((r / roots[0]) ** 2) for r in roots)


PATTERNS: dict[str, tuple[float, ...]] = {
    "uniform bar or tube": free_free_ratios(6),
    "marimba or vibraphone bar (1:4:10)": (1.0, 4.0, 10.0),
    "xylophone bar (1:3:6)": (1.0, 3.0, 6.0),
}


@dataclass(frozen=True)
class LineLabel:
    """What one measured line is: ``kind`` bending, torsion, lateral, axial (orders from 1),
    or resonator, room, electrical (not from the bar), or unidentified. ``pair``: one half of
    a close doublet of the same mode. ``predicted_hz``: the scaled model (or pattern) value."""

    kind: str
    order: int | None = None
    pair: bool = False
    predicted_hz: float | None = None

    @property
    def from_bar(self) -> bool:
        return self.kind not in NOT_FROM_BAR

    @property
    def text(self) -> str:
        if self.kind in NOT_FROM_BAR:
            return f"not from the bar ({self.kind})"
        if self.order is None:
            return self.kind
        return f"{self.kind} {self.order}" + (" (pair)" if self.pair else "")


@dataclass(frozen=True)
class Identification:
    """Labels in the order of the lines, the common scale factor of the model (1 for a
    pattern), and what the labels were matched against."""

    labels: tuple[LineLabel, ...]
    scale: float
    basis: str


def _weights(levels_db: np.ndarray) -> np.ndarray:
    # a line at the top counts 1, one 60 dB down counts 0.25: strong lines decide
    return 0.25 + 0.75 * np.clip(1.0 + levels_db / 60.0, 0.0, 1.0)


def _match(f: np.ndarray, w: np.ndarray, model: np.ndarray, tau: float):
    d = ratio_to_cents(model[None, :] / f[:, None])
    C = w[:, None] * np.minimum((d / tau) ** 2, 1.0)
    rows, cols = linear_sum_assignment(C)
    out = [-1] * f.size
    for i, j in zip(rows, cols, strict=True):
        if abs(d[i, j]) < tau:
            out[i] = int(j)
    cost = sum(w[i] if j < 0 else C[i, j] for i, j in enumerate(out))
    return out, float(cost)


def _best_scale(f, w, model, anchors, tau, s_range):
    best = (np.inf, None, 1.0)
    for j in anchors:
        for i in range(f.size):
            s = f[i] / model[j]
            if not s_range[0] <= s <= s_range[1]:
                continue
            assign, cost = _match(f, w, s * model, tau)
            # prefer explaining the lower modes (a tap shows them) via a small order penalty
            cost += 0.05 * j
            if cost < best[0]:
                best = (cost, assign, s)
    return best


def label_lines(
    f_hz: ArrayLike,
    levels_db: ArrayLike,
    decays_s: ArrayLike,
    predicted: Sequence[tuple[str, int, float]] | None = None,
    *,
    tolerance_cents: float = 60.0,
    max_scale: float = 1.6,
) -> Identification:
    """Label every line (see the module docstring). ``predicted``: (family, order, Hz) of the
    expected part's modes; ``max_scale``: how far (factor) the material may move them all."""
    f = np.asarray(f_hz, float)
    lev = np.asarray(levels_db, float)
    dec = np.asarray(decays_s, float)
    labels: list[LineLabel | None] = [None] * f.size
    for i, fi in enumerate(f):
        for mains in MAINS_HZ:
            k = round(fi / mains)
            long = not np.isfinite(dec[i]) or dec[i] >= HUM_MIN_DECAY_S
            if 1 <= k <= 8 and abs(ratio_to_cents(fi / (k * mains))) < HUM_CENTS and long:
                labels[i] = LineLabel("electrical")
    rest = np.array([i for i in range(f.size) if labels[i] is None], int)
    if rest.size == 0:
        return Identification(tuple(labels), 1.0, "none")  # type: ignore[arg-type]
    fr, wr = f[rest], _weights(lev[rest])

    if predicted:
        fam = [p[0] for p in predicted]
        order = [p[1] for p in predicted]
        model = np.array([p[2] for p in predicted], float)
        anchors = [j for j in range(model.size) if fam[j] == "bending" and order[j] <= 3]
        _, assign, s = _best_scale(
            fr, wr, model, anchors or range(model.size), tolerance_cents, (1 / max_scale, max_scale)
        )
        if assign is not None:
            bend = [(i, j) for i, j in enumerate(assign) if j >= 0 and fam[j] == "bending"]
            if bend:
                s = float(np.exp(np.mean([np.log(fr[i] / model[j]) for i, j in bend])))
            assign, _ = _match(fr, wr, s * model, tolerance_cents)
        basis = "the expected part's modes"
        floor = ROOM_FRACTION * s * model.min()
    else:
        best = (np.inf, None, 1.0, "")
        for name, ratios in PATTERNS.items():
            r = np.asarray(ratios)
            strongest = np.argsort(-wr)[:6]
            for i in strongest:
                for j in range(min(3, r.size)):
                    s = fr[i] / r[j]
                    assign, cost = _match(fr, wr, s * r, tolerance_cents)
                    # the pattern must explain at least two lines, and more is better
                    hits = sum(a >= 0 for a in assign)
                    if hits < 2:
                        continue
                    cost += 0.05 * j - 0.01 * hits
                    if cost < best[0]:
                        best = (cost, assign, s, name)
        _, assign, s, name = best
        fam = ["bending"] * 6
        order = list(range(1, 7))
        model = np.asarray(PATTERNS.get(name, (1.0,)), float)
        basis = f"the ratio pattern of a {name}" if assign is not None else "none"
        floor = ROOM_FRACTION * s if assign is not None else 0.0

    f1 = None
    if assign is not None:
        for i, j in enumerate(assign):
            if j >= 0:
                labels[rest[i]] = LineLabel(fam[j], order[j], False, float(s * model[j]))
                if fam[j] == "bending" and order[j] == 1:
                    f1 = fr[i]
        f1 = f1 if f1 is not None else (s * model[0] if not predicted else None)
    matched = [i for i in range(f.size) if labels[i] is not None and labels[i].from_bar]
    for i in rest:
        if labels[i] is not None:
            continue
        near = [
            m for m in matched if abs(ratio_to_cents(f[i] / f[m])) < PAIR_CENTS and labels[m].order
        ]
        if near:
            m = min(near, key=lambda m: abs(f[i] - f[m]))
            lab = labels[m]
            fast = np.isfinite(dec[i]) and np.isfinite(dec[m]) and dec[i] < PAIR_DECAY * dec[m]
            if lev[i] < lev[m] - PAIR_LEVEL_DB or fast:
                # much weaker or much shorter than its neighbour: the room's response to it
                labels[i] = LineLabel("room")
                continue
            labels[i] = LineLabel(lab.kind, lab.order, True, lab.predicted_hz)
            labels[m] = LineLabel(lab.kind, lab.order, True, lab.predicted_hz)
            continue
        if f1 is not None:
            k = round(f[i] / f1)
            if 1 <= k <= 8 and abs(ratio_to_cents(f[i] / (k * f1))) < RESONATOR_CENTS:
                labels[i] = LineLabel("resonator", None, False, float(k * f1))
                continue
        if f[i] < floor:
            labels[i] = LineLabel("room")
            continue
        labels[i] = LineLabel("unidentified")
    return Identification(tuple(labels), float(s) if assign is not None else 1.0, basis)  # type: ignore[arg-type]


# --------------------------------------------------------------------------- chimes and tubes

TUBE_HIGH_MODES = (4, 5, 6)
"""Free-free bending modes a tubular bell's strike note is heard from."""
TUBE_PATTERN_TOLERANCE_CENTS = 80.0  # real tubes (end plugs, wall thickness) stray from 81:121:169


@dataclass(frozen=True)
class StrikeNote:
    """The strike note of a chime (Hz), the measured modes 4, 5, 6 it used (Hz; None: not
    found) and the name of the rule."""

    f_hz: float
    modes_hz: tuple[float | None, ...]
    rule: str = "an octave below free-free bending mode 4 (Rossing 2000)"


def tube_strike_note(f_hz: ArrayLike, levels_db: ArrayLike) -> StrikeNote | None:
    """Strike note of a tubular bell: an octave below its fourth free-free bending mode.

    Published rule: the strike note of a tubular bell is heard an octave below the fourth
    free-free bending mode, whose neighbours 5 and 6 lie near 81 : 121 : 169 (close to
    2 : 3 : 4) and make it a virtual pitch (Rossing, T.D. (2000), *Science of Percussion
    Instruments*, World Scientific, ch. 3 "Chimes and tubular bells"; Fletcher, N.H. & Rossing,
    T.D. (1998), *The Physics of Musical Instruments*, 2nd ed., Springer, sec. 19.2; from
    memory). Mode 4 is found by the pattern, not by counting lines from the bottom, so room
    rumble, hum or a missing low mode do not shift it: every line is tried as mode 4 and
    scored by the strength of the lines found near 121/81 and 169/81 of it (and near the
    lower modes 1..3 of the free-free series, weaker evidence). None: no line has a
    neighbour in the pattern.
    """
    f = np.asarray(f_hz, float)
    w = _weights(np.asarray(levels_db, float))
    ratios = np.asarray(free_free_ratios(6))
    rel = ratios / ratios[3]  # every mode over mode 4
    best: tuple[float, int, list[int | None]] | None = None
    for i in range(f.size):
        found: list[int | None] = []
        score = w[i]
        for k, r in enumerate(rel):
            if k == 3:
                found.append(i)
                continue
            d = np.abs(ratio_to_cents(f / (r * f[i])))
            j = int(np.argmin(d))
            if d[j] < TUBE_PATTERN_TOLERANCE_CENTS:
                found.append(j)
                score += w[j] * (1.0 if k in (4, 5) else 0.5)
            else:
                found.append(None)
        if found[4] is None and found[5] is None:
            continue
        if best is None or score > best[0]:
            best = (score, i, found)
    if best is None:
        return None
    _, i, found = best
    modes = tuple(None if found[k - 1] is None else float(f[found[k - 1]]) for k in TUBE_HIGH_MODES)
    return StrikeNote(float(f[i] / 2.0), modes)
