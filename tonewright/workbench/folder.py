"""The workshop folder: the only place the workbench reads or writes.

Names come from the browser, so none is trusted: a name is a relative path of plain parts
(no ``..``, no absolute path, no hidden parts), and what it resolves to, symbolic links
followed, must still lie inside the folder.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path, PurePosixPath

from tonewright.errors import InputError

__all__ = ["Workshop"]

STATE_DIR = ".tonewright"  # the database and the taps live here
DESIGNS_DIR = "designs"  # one folder per designed bar
RUNS_DIR = "instruments"  # one folder per instrument run


@dataclass(frozen=True)
class Workshop:
    root: Path

    @classmethod
    def open(cls, folder: Path) -> Workshop:
        root = Path(folder).expanduser().resolve()
        if not root.is_dir():
            raise InputError(f"FOLDER {folder}: not a folder; give the workshop folder")
        return cls(root)

    @property
    def state(self) -> Path:
        return self.root / STATE_DIR

    def path(self, name: str, what: str = "path") -> Path:
        """The file ``name`` inside the workshop, or an InputError naming ``what``."""
        if not isinstance(name, str) or not name or len(name) > 400 or "\x00" in name:
            raise InputError(f"{what}: give a file name inside the workshop folder")
        pure = PurePosixPath(name.replace("\\", "/"))
        if pure.is_absolute() or any(p in ("..", "") or p.startswith(".") for p in pure.parts):
            raise InputError(f"{what} {name!r}: only names inside the workshop folder are allowed")
        full = (self.root / Path(*pure.parts)).resolve()
        if not full.is_relative_to(self.root):
            raise InputError(f"{what} {name!r}: leads outside the workshop folder")
        return full

    def relative(self, path: Path) -> str:
        return Path(path).resolve().relative_to(self.root).as_posix()

    def part_files(self) -> list[str]:
        """Every TOML file at the top of the folder, by name."""
        return sorted(p.name for p in self.root.glob("*.toml") if p.is_file())

    def designed_parts(self) -> list[str]:
        """The part files that designs and instrument runs wrote: the bars one cuts and taps."""
        found = [*self.root.glob(f"{DESIGNS_DIR}/*/part.toml")]
        found += self.root.glob(f"{RUNS_DIR}/*/bars/*/part.toml")
        return sorted(self.relative(p) for p in found if p.is_file())

    def design_dir(self, part_name: str) -> Path:
        return self.root / DESIGNS_DIR / Path(part_name).stem

    def run_dir(self, instrument_name: str) -> Path:
        return self.root / RUNS_DIR / Path(instrument_name).stem
