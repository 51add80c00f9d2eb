"""Synthesis inputs for a sound preview: which modes a mallet strike excites, how strongly, and
how long they ring.

Model
-----
A short vertical impulse P on the top face at ``(x_s, y_s)`` (``x`` along the part, ``y``
across the width from the centre line) sets each mode ringing; the preview is the vertical
velocity of the surface at the listening point ``(x_l, y_l)``. By modal superposition (e.g.
Meirovitch, L. (2001), *Fundamentals of Vibrations*, ch. 7, from memory), with mode shapes
``g_k`` and modal masses ``m_k``,

    v(t) = P sum_k a_k exp(-t / tau_k) cos(omega_k t),    a_k = g_k(s) g_k(l) / m_k,

    bending (and string):  g_k = w_k(x),      m_k = int rho A w_k^2 dx   (int mu w_k^2 dx),
    torsion:               g_k = y theta_k(x), m_k = int rho I_p theta_k^2 dx,

since an impulse off the centre line by ``y`` is a torque ``P y`` and a twist ``theta`` moves
the surface at ``y`` by ``y theta``. The rotary inertia of bending (a term of order
(h / wavelength)^2) is left out of ``m_k``: the preview needs levels to a fraction of a dB,
not better. A round tube struck on its surface is pushed through its axis: no torsion.
For a uniform free-free Euler-Bernoulli bar, every ``w_k`` normalised to ``int w^2 = L`` is
2 in magnitude at the ends (Blevins, R.D. (1979), *Formulas for Natural Frequency and Mode
Shape*, table 8-1, from memory), so a strike and a listener at one end give every bending mode
the same ``a_k = 4 / (rho A L)``; the tests check this.

With a 3D model's modes (``solid_weighted``), ``u_k`` mass-normalised (int_V rho |u_k|^2 dV
= 1), the same superposition needs no modal mass and no beam kinematics:

    a_k = w_k(s) w_k(l),    w_k the vertical (z) component of u_k on the top face,

so the twist, the section's own deformation (anticlastic bending across the width), shear and
rotary inertia come with the shapes. The decay keeps ``tau_k = 1 / (pi f_k eta)`` at the 3D
frequency.

Decays: ``tau_k = 1 / (pi f_k eta)`` from the material loss factor (``acoustics.synth``).

Sound: each mode rings at ``|a_k P(f_k)|``, ``P`` the half-sine pulse spectrum of the
mallet (``acoustics.synth.half_sine_spectrum``); modes more than 80 dB below the loudest are
listed as not excited (the strike or the listening point sits on a node) and the rest are
summed by ``acoustics.synth.modal_strike``.

Mallets: the contact time of a mallet on a bar sets how far up the partials are excited
(``acoustics.synth.half_sine_spectrum``): soft yarn about 2 ms, medium about 1 ms, hard
plastic or rubber about 0.4 ms (common practice, no source; Fletcher & Rossing, *The Physics
of Musical Instruments*, 2nd ed., 1998, ch. 19 discuss contact times of this order, from
memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from tonewright.acoustics.synth import decay_from_loss_factor, half_sine_spectrum, modal_strike
from tonewright.forward import Bar, ModalResult, Part, String, Tube, mass_per_length

from tonewright.errors import InputError

__all__ = [
    "AUDIBLE_HZ",
    "MALLET_CONTACT_S",
    "PreviewMode",
    "StrikeSound",
    "excited_families",
    "modal_masses",
    "preview_modes",
    "solid_weighted",
    "strike_sound",
]

MALLET_CONTACT_S = {"soft": 2.0e-3, "medium": 1.0e-3, "hard": 0.4e-3}  # common practice
AUDIBLE_HZ = 20_000.0  # highest partial worth synthesising (upper limit of hearing)
NYQUIST_MARGIN = 0.45  # keep partials below this fraction of the sample rate
SILENT_DB = -80.0  # a mode this far below the strongest is listed as not excited
_QUADRATURE_POINTS = 2001  # Simpson on this many points: far below a dB for any mode solved


@dataclass(frozen=True)
class PreviewMode:
    """One mode as the preview plays it: amplitude ``a_k`` (1/kg, signed) and 1/e decay (s)."""

    family: str
    order: int
    frequency_hz: float
    amplitude: float
    decay_s: float


def excited_families(part: Part) -> tuple[str, ...]:
    """Families a vertical strike on the top face sets ringing."""
    if isinstance(part, String):
        return ("transverse",)
    if isinstance(part, Tube):
        return ("bending",)
    return ("bending", "torsion")


def _simpson(y: NDArray[np.float64], x: NDArray[np.float64]) -> NDArray[np.float64]:
    """Composite Simpson rule along the last axis on an odd number of equal steps."""
    h = x[1] - x[0]
    w = np.ones(x.size)
    w[1:-1:2], w[2:-1:2] = 4.0, 2.0
    return (h / 3.0) * (y @ w)


def modal_masses(part: Part, result: ModalResult) -> NDArray[np.float64]:
    """``m_k`` of every mode of ``result`` with its shape as ``Mode.shape`` returns it."""
    x = np.linspace(0.0, part.length, _QUADRATURE_POINTS)
    density = {fam: mass_per_length(part, fam, x) for fam in {m.family for m in result.modes}}
    out = np.empty(len(result.modes))
    for i, mode in enumerate(result.modes):
        out[i] = _simpson(density[mode.family] * mode.shape(x) ** 2, x)
    return out


def _check_point(part: Part, x: float, y: float, what: str) -> None:
    L = part.length
    if not 0.0 <= x <= L:
        raise InputError(f"{what} x {x * 1e3:g} mm: must lie on the part, 0 to {L * 1e3:g} mm")
    if isinstance(part, Bar):
        half = 0.5 * float(part.width(np.array([x]))[0])
        if abs(y) > half:
            raise InputError(
                f"{what} y {y * 1e3:g} mm: must lie on the bar, within "
                f"{half * 1e3:g} mm of the centre line there"
            )


def preview_modes(
    part: Part,
    result: ModalResult,
    strike: tuple[float, float],
    listen: tuple[float, float],
    loss_factor: float,
) -> tuple[PreviewMode, ...]:
    """Amplitudes and decays of the modes in ``result`` that a strike excites.

    ``strike`` and ``listen`` are ``(x, y)`` in metres; ``y`` counts only for torsion.
    """
    _check_point(part, *strike, "strike")
    _check_point(part, *listen, "listen")
    if not 0.0 < loss_factor < 1.0:
        raise InputError(f"loss factor {loss_factor:g}: must lie between 0 and 1")
    families = excited_families(part)
    modes = [m for m in result.modes if m.family in families]
    masses = modal_masses(part, result)
    mass_of = {id(m): mk for m, mk in zip(result.modes, masses, strict=True)}
    out = []
    for m in modes:
        g_s = float(m.shape(np.array([strike[0]]))[0])
        g_l = float(m.shape(np.array([listen[0]]))[0])
        if m.family == "torsion":
            g_s, g_l = strike[1] * g_s, listen[1] * g_l
        out.append(
            PreviewMode(
                family=m.family,
                order=m.order,
                frequency_hz=m.frequency_hz,
                amplitude=g_s * g_l / mass_of[id(m)],
                decay_s=float(decay_from_loss_factor(m.frequency_hz, loss_factor)),
            )
        )
    return tuple(out)


def solid_weighted(
    mode: PreviewMode, frequency_hz: float, w_strike: float, w_listen: float
) -> PreviewMode:
    """``mode`` as a 3D model gives it: at ``frequency_hz``, ``a_k = w_k(s) w_k(l)`` from the
    mass-normalised vertical displacements (1/sqrt(kg)) under the strike and the ear, and the
    decay ``tau = 1 / (pi f eta)`` moved to the new frequency (the same loss factor)."""
    if not (np.isfinite(frequency_hz) and frequency_hz > 0):
        raise InputError(f"frequency {frequency_hz!r} Hz: must be a positive number")
    return PreviewMode(
        family=mode.family,
        order=mode.order,
        frequency_hz=float(frequency_hz),
        amplitude=float(w_strike) * float(w_listen),
        decay_s=mode.decay_s * mode.frequency_hz / float(frequency_hz),
    )


@dataclass(frozen=True, eq=False)
class StrikeSound:
    """The synthesised strike, the modes played with their level (dB, strongest 0) and the
    modes left out as not excited (more than 80 dB down: a node under the strike or the ear)."""

    samples: NDArray[np.float64]
    rate: int
    played: tuple[tuple[PreviewMode, float], ...]
    silent: tuple[PreviewMode, ...]


def strike_sound(
    modes: tuple[PreviewMode, ...], contact_s: float, rate: int, duration_s: float
) -> StrikeSound:
    """Sum of the audible ``modes`` (below 20 kHz and 0.45 ``rate``) struck by a half-sine
    pulse of ``contact_s``: ``duration_s`` seconds at ``rate``, peaking at -1 dBFS."""
    top = min(AUDIBLE_HZ, NYQUIST_MARGIN * rate)
    audible = [m for m in modes if m.frequency_hz < top]
    if not audible:
        raise InputError(f"rate {rate} Hz: every partial lies above {top:g} Hz")
    f = np.array([m.frequency_hz for m in audible])
    a = np.array([m.amplitude for m in audible])
    level = np.abs(a * half_sine_spectrum(f, contact_s))
    if not np.max(level) > 0:
        raise InputError("the strike excites none of the modes: move the strike off the nodes")
    db = 20.0 * np.log10(np.maximum(level, 1e-300) / np.max(level))
    keep = db > SILENT_DB
    samples = modal_strike(
        f[keep],
        a[keep],
        np.array([m.decay_s for m in audible])[keep],
        rate=rate,
        duration_s=duration_s,
        mallet_contact_s=contact_s,
    )
    played = tuple((m, float(d)) for m, d, k in zip(audible, db, keep, strict=True) if k)
    silent = tuple(m for m, k in zip(audible, keep, strict=True) if not k)
    return StrikeSound(samples, rate, played, silent)
