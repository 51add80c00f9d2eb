"""Library of target profiles: one TOML file per profile in this folder.

This package only locates the data; ``tonewright.tuning`` reads and checks it.
"""

from __future__ import annotations

from importlib import resources
from pathlib import Path

__all__ = ["targets_dir"]


def targets_dir() -> Path:
    """The folder holding the profile files (source tree, editable or wheel install)."""
    root = resources.files(__name__)
    # Installed as plain files (wheel unpacked into site-packages, or a source checkout) the
    # traversable is already a filesystem path; zip imports are not supported for data files.
    return Path(str(root))
