"""Writing outputs safely: temporary names, moved into place only when complete.

Never writes over an input file; refuses an output directory that is a file.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

from .errors import InputError

__all__ = ["OutputDir"]


class OutputDir:
    """A directory that receives a run's outputs.

    Files are first written under a hidden staging directory inside ``path``
    and moved into place by :meth:`commit`, so a failure part-way leaves no
    half-written report behind.

    Parameters
    ----------
    path : str or Path
        Output directory (created if missing).
    protect : iterable of paths
        Input files that must never be overwritten.
    """

    def __init__(self, path, protect=()):
        self.path = Path(path)
        self.protect = {Path(p).resolve() for p in protect}
        if self.path.exists() and not self.path.is_dir():
            raise InputError.single(str(path), "--out", "exists and is a file, not a directory")
        try:
            self.path.mkdir(parents=True, exist_ok=True)
        except OSError as e:
            raise InputError.single(str(path), "--out", f"cannot create the directory ({e.strerror})") from None
        if not os.access(self.path, os.W_OK):
            raise InputError.single(str(path), "--out", "directory is not writable")
        self.stage = Path(tempfile.mkdtemp(prefix=".resonance-partial-", dir=self.path))
        self.names: list[str] = []

    def file(self, name: str) -> Path:
        """Staging path for output ``name`` (a plain file name)."""
        target = (self.path / name).resolve()
        if target in self.protect:
            raise InputError.single(str(self.path / name), "--out", "would overwrite an input file; choose another --out")
        self.names.append(name)
        return self.stage / name

    def write_text(self, name: str, text: str) -> None:
        """Stage a text file."""
        self.file(name).write_text(text, encoding="utf-8")

    def commit(self) -> list[Path]:
        """Move every staged file into place; returns the final paths."""
        done = []
        for name in self.names:
            src = self.stage / name
            if src.exists():
                dst = self.path / name
                os.replace(src, dst)
                done.append(dst)
        self.discard()
        return done

    def discard(self) -> None:
        """Remove the staging directory and whatever it holds."""
        if self.stage.exists():
            for p in sorted(self.stage.rglob("*"), reverse=True):
                p.unlink() if p.is_file() else p.rmdir()
            self.stage.rmdir()
