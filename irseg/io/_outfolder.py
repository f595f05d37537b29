"""The output folder: one run at a time, only irseg's own files replaced, survey files as one set.

:func:`lock_folder` holds an exclusive lock on ``OUT/.irseg-lock`` while a run writes there;
:class:`OutputManifest` (``OUT/.irseg-outputs``) lists every file irseg wrote, and only those
are ever replaced or removed; :func:`replace_files` replaces several files as one set (all
written to temporary files first, then renamed together). Used by :mod:`irseg.batch`.
"""

from __future__ import annotations

import contextlib
import errno
import hashlib
import os
from collections.abc import Iterable, Iterator, Mapping
from pathlib import Path, PurePosixPath

from ..errors import OutputError
from . import _writers
from ._writers import _describe_os_error, dumps_json, remove_file, remove_temp_files, write_bytes

__all__ = ["LOCK_NAME", "MANIFEST_NAME", "lock_folder", "OutputManifest", "replace_files"]


#: Lock file of an output folder, held (``flock``) by the run writing there; never removed.
LOCK_NAME = ".irseg-lock"

#: The output folder's manifest: the files irseg wrote there (JSON, written atomically).
MANIFEST_NAME = ".irseg-outputs"

_MANIFEST_FORMAT = "irseg-outputs"
_MANIFEST_VERSION = 1


@contextlib.contextmanager
def lock_folder(folder: str | os.PathLike[str]) -> Iterator[Path]:
    """Hold an exclusive lock on an output folder for the duration of a ``with`` block.

    The lock is an advisory ``flock`` on ``folder/.irseg-lock`` (:data:`LOCK_NAME`), taken
    without waiting and released when the block ends, also when the process dies, so a
    killed run never leaves a stale lock. The file itself stays. On a file system that
    does not support locks (some network mounts) the block runs without one.

    Parameters
    ----------
    folder : path-like
        An existing folder.

    Yields
    ------
    Path
        The lock file.

    Raises
    ------
    OutputError
        Another process holds the lock (another irseg run writes to this folder), or the
        lock file cannot be opened.
    """
    path = Path(folder) / LOCK_NAME
    flags = os.O_RDWR | os.O_CREAT | getattr(os, "O_CLOEXEC", 0) | getattr(os, "O_NOFOLLOW", 0)
    try:
        fd = os.open(path, flags, 0o666)
    except OSError as exc:
        raise OutputError(f"{path}: cannot open the output folder's lock file: {_describe_os_error(exc)}") from exc
    try:
        if not _try_lock(fd):
            raise OutputError(
                f"{folder}: another irseg run is writing to this output folder (it holds {LOCK_NAME}); "
                "wait until it has finished, or choose another output folder (the out_dir setting)"
            )
        yield path
    finally:
        os.close(fd)  # releases the lock


def _try_lock(fd: int) -> bool:
    """Lock ``fd`` exclusively without waiting: False when another holder has it."""
    try:
        import fcntl
    except ImportError:  # pragma: no cover - Windows
        import msvcrt

        try:
            msvcrt.locking(fd, msvcrt.LK_NBLCK, 1)
        except OSError:
            return False
        return True
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError as exc:
        if exc.errno in (errno.EWOULDBLOCK, errno.EAGAIN, errno.EACCES):
            return False
        if exc.errno in (errno.ENOLCK, errno.EOPNOTSUPP, errno.EINVAL):
            return True  # no locks on this file system: run unlocked
        raise OutputError(f"cannot lock the output folder: {_describe_os_error(exc)}") from exc
    return True


class OutputManifest:
    """The files irseg wrote in one output folder; only those may be replaced or removed.

    The manifest is ``OUT/.irseg-outputs`` (:data:`MANIFEST_NAME`), a JSON object::

        {"format": "irseg-outputs", "version": 1,
         "files": ["anomalies.csv", "wall_0001/labels.png", ...],
         "survey_files": {"anomalies.csv": "sha256:...", ...}}

    ``files`` lists paths relative to the folder (POSIX separators). A run adds a path
    *before* it first writes there, so a run killed at any point never leaves one of its
    files unlisted; listed paths whose file is gone are dropped at the end of a run
    (:meth:`prune`). ``survey_files`` holds the sha256 of each survey-level file of the
    last complete set, so a set that is not the one irseg wrote together can be told.

    A file that exists but is not listed was not written by irseg (the user's own
    ``run.log``, an input, a file left by another tool) and is never replaced or removed
    (:meth:`in_the_way`). A manifest that cannot be read lists nothing, so nothing in the
    folder is replaced.

    Attributes
    ----------
    folder : Path
    files : set of str
    survey_files : dict of str to str
    damaged : bool
        True when a manifest file exists but is not one irseg can read.
    """

    def __init__(self, folder: str | os.PathLike[str]) -> None:
        self.folder = Path(folder)
        self.files: set[str] = set()
        self.survey_files: dict[str, str] = {}
        self.damaged = False
        path = self.folder / MANIFEST_NAME
        if not os.path.lexists(path):
            return
        from ._files import read_json_file

        data = read_json_file(path)
        files = data.get("files") if isinstance(data, dict) and data.get("format") == _MANIFEST_FORMAT else None
        if not isinstance(files, list) or not all(isinstance(f, str) for f in files):
            self.damaged = True
            return
        self.files = {f for f in files if _plain_relative(f)}
        hashes = data.get("survey_files")
        if isinstance(hashes, dict):
            self.survey_files = {str(k): str(v) for k, v in hashes.items()}

    @property
    def path(self) -> Path:
        """The manifest file."""
        return self.folder / MANIFEST_NAME

    def owns(self, rel: str) -> bool:
        """True when irseg wrote (or was about to write) ``rel``."""
        return rel in self.files

    def in_the_way(self, rel: str) -> bool:
        """True when something irseg did not write exists at ``rel`` (a file, a folder or a link)."""
        return os.path.lexists(self.folder / rel) and rel not in self.files

    def claim(self, rels: Iterable[str]) -> None:
        """List ``rels`` as irseg's and save the manifest (before the files are written).

        Raises
        ------
        OutputError
            The manifest cannot be written.
        """
        new = {r for r in rels if r not in self.files}
        if new:
            self.files |= new
            self.save()

    def remove(self, rel: str, *, hint: str = "") -> bool:
        """Remove ``rel`` if irseg wrote it (see :func:`remove_file`); a file irseg did not write stays."""
        if rel not in self.files:
            return False
        return remove_file(self.folder / rel, hint=hint)

    def prune(self) -> None:
        """Drop listed paths whose file no longer exists (kept in memory; :meth:`save` writes)."""
        self.files = {f for f in self.files if os.path.lexists(self.folder / f)}

    def save(self) -> None:
        """Write the manifest atomically.

        Raises
        ------
        OutputError
        """
        data = {
            "format": _MANIFEST_FORMAT,
            "version": _MANIFEST_VERSION,
            "note": "files written by irseg in this folder; irseg replaces or removes only these",
            "files": sorted(self.files),
            "survey_files": dict(sorted(self.survey_files.items())),
        }
        write_bytes(self.path, dumps_json(data))
        self.damaged = False

    def folders(self) -> list[Path]:
        """The folder and every sub-folder holding a listed file (real folders, never links)."""
        found = [self.folder]
        for parent in sorted({str(PurePosixPath(f).parent) for f in self.files} - {"."}):
            sub = self.folder / parent
            if sub.is_dir() and not sub.is_symlink():
                found.append(sub)
        return found

    def remove_temp_files(self) -> int:
        """Delete temporary files of an interrupted run in the folder and in the folders of listed files."""
        return sum(remove_temp_files(folder, recursive=False) for folder in self.folders())


def _plain_relative(rel: str) -> bool:
    parts = PurePosixPath(rel).parts
    return bool(parts) and not PurePosixPath(rel).is_absolute() and ".." not in parts and "\\" not in rel


def replace_files(folder: str | os.PathLike[str], files: Mapping[str, bytes | None]) -> dict[str, str]:
    """Replace several files of ``folder`` as one set: all new contents, or none.

    Every new content is first written to a temporary file in ``folder`` and flushed to
    disk; only when all of them are written are they renamed over their final names, one
    after the other, and the names mapped to None removed. A failure while writing (a full
    disk) removes the temporary files and leaves every old file as it was.

    Parameters
    ----------
    folder : path-like
        An existing folder.
    files : mapping of str to bytes or None
        File name in ``folder`` -> new content, or None to remove the file.

    Returns
    -------
    dict of str to str
        ``"sha256:<hex>"`` of each file written.

    Raises
    ------
    OutputError
        A file could not be written (nothing replaced) or renamed.
    """
    root = Path(folder)
    temps: dict[str, Path] = {}
    hashes: dict[str, str] = {}
    try:
        for name, data in files.items():
            if data is None:
                continue
            fd, tmp = _writers._mkstemp(root / name)  # via the module: tests stand in for it
            temps[name] = Path(tmp)
            with os.fdopen(fd, "wb") as handle:
                handle.write(data)
                handle.flush()
                os.fsync(handle.fileno())
            hashes[name] = "sha256:" + hashlib.sha256(data).hexdigest()
    except OSError as exc:
        _discard(temps.values())
        raise OutputError(
            f"{root / name}: could not write: {_describe_os_error(exc)} (none of "
            f"{', '.join(files)} was replaced)"
        ) from exc
    try:
        for name in list(temps):
            os.replace(temps[name], root / name)
            del temps[name]
        for name, data in files.items():
            if data is None:
                remove_file(root / name, hint="a stale file of an earlier run")
    except OutputError:
        raise
    except OSError as exc:
        raise OutputError(f"{root}: could not put the new files in place: {_describe_os_error(exc)}") from exc
    finally:
        _discard(temps.values())
    return hashes


def _discard(paths: Iterable[Path]) -> None:
    for path in list(paths):
        try:
            path.unlink()
        except OSError:
            pass
