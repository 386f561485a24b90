"""Writing outputs safely: temporary names, moved into place only when complete.

Never writes over an input file; refuses an output directory that is a file.
A run that fails part-way leaves the output directory as it found it: no new
files, no staging directory, and no directory it created itself.
"""

from __future__ import annotations

import os
import shutil
import tempfile
from pathlib import Path

from .errors import InputError

__all__ = ["OutputDir"]

#: prefix of the hidden staging directory made inside the output directory
STAGE_PREFIX = ".resonance-partial-"


def _same_file(a: Path, b: Path) -> bool:
    """True when two existing paths are the same file (also through hard links)."""
    try:
        return os.path.samefile(a, b)
    except OSError:
        return False


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
    last : tuple of str
        Output names moved into place last (``results.json`` by default), so
        that their presence means the rest of the run's files are in place.

    Raises
    ------
    InputError
        ``path`` is a file, cannot be created or is not writable (field ``--out``).
    """

    def __init__(self, path, protect=(), last: tuple = ("results.json",)):
        self.path = Path(path)
        self.protect = [Path(p) for p in protect]
        self._protect_resolved = {p.resolve() for p in self.protect}
        self.last = tuple(last)
        if self.path.exists() and not self.path.is_dir():
            raise InputError.single(str(path), "--out", "exists and is a file, not a directory")
        # directories made here are removed again when the run is discarded (if still empty)
        self._created: list[Path] = []
        p = self.path.absolute()
        while not p.exists() and p != p.parent:
            self._created.append(p)
            p = p.parent
        try:
            self.path.mkdir(parents=True, exist_ok=True)
        except OSError as e:
            raise InputError.single(str(path), "--out", f"cannot create the directory ({e.strerror})") from None
        if not os.access(self.path, os.W_OK | os.X_OK):
            self._remove_created()
            raise InputError.single(str(path), "--out", "directory is not writable")
        try:
            self.stage = Path(tempfile.mkdtemp(prefix=STAGE_PREFIX, dir=self.path))
        except OSError as e:
            self._remove_created()
            raise InputError.single(str(path), "--out", f"cannot write in the directory ({e.strerror})") from None
        self.names: list[str] = []

    def _is_protected(self, target: Path) -> bool:
        if target.resolve() in self._protect_resolved:
            return True
        return target.exists() and any(_same_file(target, p) for p in self.protect)

    def file(self, name: str) -> Path:
        """Staging path for output ``name`` (a plain file name).

        Raises
        ------
        InputError
            The final file would overwrite an input (field ``--out``).
        ValueError
            ``name`` is not a plain file name (a programming error).
        """
        if not name or name in (".", "..") or Path(name).name != name or "/" in name or "\\" in name:
            raise ValueError(f"output name {name!r} must be a plain file name")
        target = self.path / name
        if self._is_protected(target):
            raise InputError.single(str(target), "--out", "would overwrite an input file; choose another --out")
        if name not in self.names:
            self.names.append(name)
        return self.stage / name

    def write_text(self, name: str, text: str) -> None:
        """Stage a text file."""
        self.file(name).write_text(text, encoding="utf-8")

    def commit(self) -> list[Path]:
        """Move every staged file into place; returns the final paths.

        Every target is checked before the first move (not an input, not a
        directory); files named in ``last`` are moved after the others.

        Raises
        ------
        InputError
            A target is an input file or an existing directory; nothing has
            been moved and the staging directory is removed.
        """
        staged = [n for n in self.names if (self.stage / n).is_file()]
        order = [n for n in staged if n not in self.last] + [n for n in self.last if n in staged]
        for name in order:
            dst = self.path / name
            if self._is_protected(dst):
                self.discard()
                raise InputError.single(str(dst), "--out", "would overwrite an input file; choose another --out")
            if dst.is_dir():
                self.discard()
                raise InputError.single(str(dst), "--out", "an output name is taken by a directory; remove it or "
                                        "choose another --out")
        done = []
        for name in order:
            dst = self.path / name
            os.replace(self.stage / name, dst)
            done.append(dst)
        self._remove_stage()
        self._created = []  # the directory now holds results: keep it
        return done

    def _remove_stage(self) -> None:
        shutil.rmtree(self.stage, ignore_errors=True)

    def _remove_created(self) -> None:
        for d in self._created:  # deepest first
            try:
                d.rmdir()
            except OSError:
                break

    def discard(self) -> None:
        """Remove the staging directory and whatever it holds (and a directory made for this run, if empty)."""
        self._remove_stage()
        self._remove_created()
        self._created = []
