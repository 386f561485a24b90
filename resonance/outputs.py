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

from resonance.errors import InputError

__all__ = ["OutputDir", "csv_text_cell", "MANIFEST", "LOCK"]

#: hidden file listing what the last run wrote here (removed again when a later run does not)
MANIFEST = ".resonance-manifest.json"
#: hidden lock file: one run at a time per output folder
LOCK = ".resonance-lock"

#: first characters that make a spreadsheet evaluate a cell (OWASP, "CSV Injection")
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def csv_text_cell(value):
    """A CSV cell that no spreadsheet evaluates: text starting with ``= + - @``, a tab or a carriage
    return gets a leading apostrophe; numbers (negative ones too) are returned unchanged.

    Parameters
    ----------
    value : object
        Cell value [unitless].

    Returns
    -------
    object
        ``value``, or ``"'" + value`` for such text [unitless].

    References
    ----------
    OWASP Foundation, *CSV Injection* (community page), recommended neutralisation.
    """
    if isinstance(value, str) and value.startswith(_FORMULA_START):
        try:
            float(value)
            return value  # a number written as text, e.g. "-1.5"
        except ValueError:
            return "'" + value
    return value

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
        self._lock_fh = None
        self._take_lock(str(path))

    def _take_lock(self, label: str) -> None:
        """Exclusive lock on ``LOCK`` in the folder (released by the OS if the process dies)."""
        try:
            import fcntl  # noqa: PLC0415
        except ImportError:  # pragma: no cover - not POSIX: no lock
            return
        lock_path = self.path / LOCK
        existed = lock_path.exists()
        fh = open(lock_path, "a+", encoding="utf-8")  # noqa: SIM115 - held until commit/discard
        try:
            fcntl.flock(fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            fh.close()
            self._remove_stage()
            if not existed:
                lock_path.unlink(missing_ok=True)
            self._remove_created()
            raise InputError.single(label, "--out", f"another resonance run is writing to this folder (lock "
                                    f"{lock_path.name}); wait for it to end or choose another --out") from None
        self._lock_fh = fh
        self._lock_made = not existed

    def _release_lock(self, remove: bool) -> None:
        fh, self._lock_fh = self._lock_fh, None
        if fh is None:
            return
        if remove:
            try:
                (self.path / LOCK).unlink()
            except OSError:
                pass
        fh.close()

    def __del__(self):  # an OutputDir dropped without commit or discard still lets the lock go
        try:
            self._release_lock(remove=False)
        except Exception:  # noqa: BLE001 - interpreter shutdown
            pass

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
        self._remove_stale(set(order))
        self._write_manifest(order)
        self._remove_stage()
        self._created = []  # the directory now holds results: keep it
        self._release_lock(remove=True)
        return done

    def _previous(self) -> list[str]:
        """Names the last run's manifest lists (plain names only; anything else is ignored)."""
        import json  # noqa: PLC0415

        try:
            doc = json.loads((self.path / MANIFEST).read_text(encoding="utf-8"))
            names = doc.get("files", []) if isinstance(doc, dict) else []
        except (OSError, ValueError):
            return []
        return [n for n in names if isinstance(n, str) and n and n not in (".", "..")
                and Path(n).name == n and "/" not in n and "\\" not in n]

    def _remove_stale(self, written: set) -> None:
        """Remove files the previous run wrote here that this run did not (never a protected input)."""
        for name in self._previous():
            if name in written or name in (MANIFEST, LOCK):
                continue
            target = self.path / name
            if target.is_file() and not target.is_symlink() and not self._is_protected(target):
                try:
                    target.unlink()
                except OSError:
                    pass

    def _write_manifest(self, order: list) -> None:
        import json  # noqa: PLC0415

        from resonance import __version__  # noqa: PLC0415

        tmp = self.stage / MANIFEST
        tmp.write_text(json.dumps({"tool": f"resonance {__version__}", "files": list(order)}, indent=1) + "\n",
                       encoding="utf-8")
        os.replace(tmp, self.path / MANIFEST)

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
        self._release_lock(remove=getattr(self, "_lock_made", False))
        self._remove_created()
        self._created = []
