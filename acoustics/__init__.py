"""Acoustic numerics: pitch arithmetic, tap-recording analysis and modal sound synthesis.

Pure functions on arrays; nothing here reads files, prints or imports the application layer.

- ``pitch``: cents, note names, hearing bandwidths, strike notes;
- ``tap``: the partials of one recorded strike (``find_partials`` -> ``TapResult``);
- ``synth``: a mallet strike as a sum of decaying modes (``modal_strike``);
- ``preview``: which modes a strike excites and how strongly (``preview_modes``), and the
  sound they make (``strike_sound``).
"""

from tonewright.acoustics.pitch import CENTS_PER_LN, cents, cents_to_ratio, ratio_to_cents
from tonewright.acoustics.preview import (
    MALLET_CONTACT_S,
    PreviewMode,
    StrikeSound,
    excited_families,
    modal_masses,
    preview_modes,
    strike_sound,
)
from tonewright.acoustics.synth import (
    decay_from_loss_factor,
    half_sine_spectrum,
    modal_strike,
    t60_from_decay,
)
from tonewright.acoustics.tap import Partial, TapResult, find_partials

__all__ = [
    "CENTS_PER_LN",
    "MALLET_CONTACT_S",
    "Partial",
    "PreviewMode",
    "StrikeSound",
    "TapResult",
    "cents",
    "cents_to_ratio",
    "decay_from_loss_factor",
    "excited_families",
    "find_partials",
    "half_sine_spectrum",
    "modal_masses",
    "modal_strike",
    "preview_modes",
    "ratio_to_cents",
    "strike_sound",
    "t60_from_decay",
]
