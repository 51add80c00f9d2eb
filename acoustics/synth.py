"""Modal synthesis of a struck bar: decaying sinusoids driven by a half-sine mallet pulse.

Model
-----
Each mode k is a lightly damped oscillator with frequency ``f_k`` (Hz) and amplitude decay
rate ``alpha_k = 1 / tau_k`` (1/s). Its unit impulse response is

    h_k(t) = exp(-alpha_k t) sin(omega_k t),   omega_k = 2 pi f_k,

and the mallet force is a half-sine pulse of contact time ``T_c``:

    F(t) = sin(pi t / T_c)  for 0 <= t <= T_c, else 0.

The response ``y_k = F * h_k`` is evaluated in closed form. With ``s = -alpha + i omega``
and ``b = pi / T_c``, ``h_k(t) = Im exp(s t)`` and

    y_k(t) = Im[ exp(s t) G(min(t, T_c)) ],
    G(tau) = int_0^tau sin(b u) exp(-s u) du = (b - exp(-s tau) (s sin(b tau) + b cos(b tau)))
                                              / (s^2 + b^2).

After contact (t >= T_c), ``G(T_c) = F_hat(s)``, the Laplace transform of the pulse, so the
mode rings as a free decaying sinusoid whose amplitude is weighted by the pulse spectrum

    P(f) = F_hat(2 pi i f) / F_hat(0) = pi^2 (1 + exp(-2 pi i f T_c)) / (2 (pi^2 - (2 pi f T_c)^2)),

|P(0)| = 1, |P(1 / (2 T_c))| = pi / 4, first zero at f = 1.5 / T_c (a harder mallet, i.e. a
shorter contact, pushes the zeros up and brightens the sound). ``y_k`` is scaled by
``1 / F_hat(0) = pi / (2 T_c)`` so that a given ``amplitude`` is the ringing amplitude for a
very short pulse; the caller supplies the product of mode-shape values at the strike point and
at the listening point.

Losses: with loss factor ``eta`` (Q = 1 / eta), the amplitude decays as ``exp(-pi f eta t)``,
i.e. ``tau = 1 / (pi f eta)``, T60 = ``tau ln(1000)`` = 2.2 / (f eta), and the half-power
bandwidth of the resonance is ``f eta``.

The sum of modes is normalised to a peak of ``peak_dbfs`` and faded out with a raised cosine
over the last ``fade_s`` seconds. Everything is deterministic.

References
----------
- Harris, C.M. & Piersol, A.G. (2002), *Harris' Shock and Vibration Handbook*, 5th ed.,
  ch. 8: Fourier spectrum of the half-sine pulse (from memory).
- Cremer, L., Heckl, M. & Petersson, B.A.T. (2005), *Structure-Borne Sound*, 3rd ed.,
  ch. 2: loss factor, Q = 1/eta, reverberation time T60 = 2.2 / (f eta) (from memory).
- Fletcher, N.H. & Rossing, T.D. (1998), *The Physics of Musical Instruments*, 2nd ed.,
  ch. 1-2 (damped oscillators) and ch. 19 (mallet contact) (from memory).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from tonewright.errors import InputError

__all__ = [
    "decay_from_loss_factor",
    "half_sine_spectrum",
    "modal_strike",
    "t60_from_decay",
]

LN_1000 = float(np.log(1000.0))


def decay_from_loss_factor(f_hz: ArrayLike, eta: ArrayLike) -> NDArray[np.float64]:
    """Amplitude decay time ``tau = 1 / (pi f eta)`` (s) of a mode with loss factor ``eta``."""
    f_hz = np.asarray(f_hz, dtype=float)
    eta = np.asarray(eta, dtype=float)
    return 1.0 / (np.pi * f_hz * eta)


def t60_from_decay(tau_s: ArrayLike) -> NDArray[np.float64]:
    """Time for the level to fall by 60 dB, ``tau ln(1000)``, from the 1/e amplitude time."""
    return np.asarray(tau_s, dtype=float) * LN_1000


def half_sine_spectrum(f_hz: ArrayLike, contact_s: float) -> NDArray[np.complex128]:
    """Fourier transform of a half-sine pulse of duration ``contact_s``, normalised to 1 at DC.

    ``P(f) = pi^2 (1 + exp(-i x)) / (2 (pi^2 - x^2))`` with ``x = 2 pi f T``. Written with
    ``d = x - pi`` as ``pi^2 expm1(-i d) / (2 d (x + pi))``, it stays accurate near the removable
    singularity ``x = pi``, where it tends to ``-i pi / 4``. ``P(-f) = conj(P(f))``.
    """
    f_hz = np.asarray(f_hz, dtype=float)
    x = 2.0 * np.pi * np.abs(f_hz) * contact_s
    d = x - np.pi
    at_pi = d == 0.0
    safe_d = np.where(at_pi, 1.0, d)
    P = np.pi**2 * np.expm1(-1j * safe_d) / (2.0 * safe_d * (x + np.pi))
    P = np.where(at_pi, -0.25j * np.pi, P)
    return np.where(f_hz < 0, np.conj(P), P)


def _contact_integral(s: complex, b: float, tau: NDArray[np.float64]) -> NDArray[np.complex128]:
    """``int_0^tau sin(b u) exp(-s u) du`` in closed form (vectorised over ``tau``)."""
    num = b - np.exp(-s * tau) * (s * np.sin(b * tau) + b * np.cos(b * tau))
    return num / (s * s + b * b)


def _validate(
    f: NDArray[np.float64],
    a: NDArray[np.float64],
    tau: NDArray[np.float64],
    rate: int,
    duration_s: float,
    contact_s: float,
    fade_s: float,
) -> None:
    if f.ndim != 1 or f.size == 0:
        raise InputError(f"frequencies_hz: got shape {f.shape}; give a non-empty 1-D list")
    if a.shape != f.shape or tau.shape != f.shape:
        raise InputError(
            f"amplitudes/decays_s: got lengths {a.size}/{tau.size}; need {f.size}, "
            "one per frequency"
        )
    if not int(rate) == rate or rate < 1000:
        raise InputError(f"rate: got {rate}; give an integer sample rate of at least 1000 Hz")
    if not np.all(np.isfinite(f)) or np.any(f <= 0) or np.any(f >= rate / 2):
        raise InputError(
            f"frequencies_hz: got {f.tolist()}; each must lie between 0 and the Nyquist "
            f"frequency {rate / 2:g} Hz"
        )
    if not np.all(np.isfinite(a)):
        raise InputError(f"amplitudes: got {a.tolist()}; all must be finite")
    if not np.all(np.isfinite(tau)) or np.any(tau <= 0):
        raise InputError(f"decays_s: got {tau.tolist()}; each must be positive and finite")
    if not np.isfinite(duration_s) or duration_s <= 0:
        raise InputError(f"duration_s: got {duration_s}; must be positive")
    if not np.isfinite(contact_s) or contact_s <= 0 or contact_s >= duration_s:
        raise InputError(
            f"mallet_contact_s: got {contact_s}; must be positive and shorter than the sound"
        )
    if not np.isfinite(fade_s) or fade_s < 0 or fade_s >= duration_s:
        raise InputError(f"fade_s: got {fade_s}; must be between 0 and duration_s")


def modal_strike(
    frequencies_hz: ArrayLike,
    amplitudes: ArrayLike,
    decays_s: ArrayLike,
    rate: int = 44100,
    duration_s: float = 3.0,
    mallet_contact_s: float = 1e-3,
    *,
    fade_s: float = 0.02,
    peak_dbfs: float = -1.0,
) -> NDArray[np.float64]:
    """Sound of one mallet strike: the sum of modes driven by a half-sine force pulse.

    ``amplitudes`` are per-mode weights (mode shape at the strike point times mode shape at the
    listening point); ``decays_s`` are 1/e amplitude times (see ``decay_from_loss_factor``).
    Returns ``round(duration_s * rate)`` samples peaking at ``peak_dbfs`` dB full scale.
    """
    f = np.atleast_1d(np.asarray(frequencies_hz, dtype=float))
    a = np.atleast_1d(np.asarray(amplitudes, dtype=float))
    tau = np.atleast_1d(np.asarray(decays_s, dtype=float))
    _validate(f, a, tau, rate, duration_s, mallet_contact_s, fade_s)

    n = round(duration_s * rate)
    t = np.arange(n) / rate
    t_contact = np.minimum(t, mallet_contact_s)
    b = np.pi / mallet_contact_s
    dc_gain = 2.0 * mallet_contact_s / np.pi  # F_hat(0): area of the pulse
    y = np.zeros(n)
    for f_k, a_k, tau_k in zip(f, a, tau, strict=True):
        s = complex(-1.0 / tau_k, 2.0 * np.pi * f_k)
        y += a_k * np.imag(np.exp(s * t) * _contact_integral(s, b, t_contact)) / dc_gain

    peak = np.max(np.abs(y))
    if not peak > 0:
        raise InputError(
            f"mallet_contact_s: {mallet_contact_s} s excites none of the modes "
            "(all amplitudes zero or at zeros of the pulse spectrum)"
        )
    y *= 10.0 ** (peak_dbfs / 20.0) / peak
    n_fade = round(fade_s * rate)
    if n_fade > 0:
        # Raised-cosine fade so the file ends without a click.
        y[n - n_fade :] *= 0.5 * (1.0 + np.cos(np.pi * np.arange(1, n_fade + 1) / n_fade))
    return y
