"""Acoustic numerics: pitch arithmetic, tap-recording analysis and modal sound synthesis.

Pure functions on arrays; nothing here reads files, prints or imports the application layer.

- ``pitch``: cents, note names, hearing bandwidths, strike notes;
- ``tap``: the partials of one recorded strike (``find_partials`` -> ``TapResult``);
- ``decay``: a partial's T60 from its band's backward-integrated energy (no single
  exponential assumed);
- ``synth``: a mallet strike as a sum of decaying modes (``modal_strike``);
- ``preview``: which modes a strike excites and how strongly (``preview_modes``), and the
  sound they make (``strike_sound``). It builds on ``tonewright.forward`` (modal masses of a
  solved part), so it is imported as ``tonewright.acoustics.preview``, not from here: the
  other modules are leaves that ``forward`` itself uses (``pitch``).
"""

from tonewright.acoustics.pitch import CENTS_PER_LN, cents, cents_to_ratio, ratio_to_cents
from tonewright.acoustics.synth import (
    decay_from_loss_factor,
    half_sine_spectrum,
    modal_strike,
    t60_from_decay,
)
from tonewright.acoustics.tap import Partial, TapResult, find_partials

__all__ = [
    "CENTS_PER_LN",
    "Partial",
    "TapResult",
    "cents",
    "cents_to_ratio",
    "decay_from_loss_factor",
    "find_partials",
    "half_sine_spectrum",
    "modal_strike",
    "ratio_to_cents",
    "t60_from_decay",
]
