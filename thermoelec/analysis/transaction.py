"""Output folders as a unit: one command at a time, new outputs staged and moved in together.

Every command (``run``, ``compare``, ``sweep``, ``fit``) writes through an
:class:`OutputFolder`:

- **the lock** (``DIR/.thermoelec.lock``): an advisory ``flock`` held for the
  whole command, with the holder (process, host, command, start) written in
  the file. A second command into the folder is refused naming the holder. The
  kernel drops the lock when its process dies, so a lock left by a killed
  process is recognised as stale (the file names a holder, the lock is free)
  and taken over with a note. A forked child (a sweep's workers, a heat map
  drawn beside the command) closes its copy of the lock file at once, so the
  folder is free once the command is gone, whatever its children still do.
- **the transaction** (:meth:`OutputFolder.transaction`): the command writes
  into a staging folder inside ``DIR`` (``.thermoelec-staging-<pid>``); on
  success its entries are moved into ``DIR`` with signals held back
  (:func:`~thermoelec.analysis.interrupts.deferred_signals`), entries the
  previous command wrote and this one did not are removed, and the manifest
  ``DIR/thermoelec-outputs.json`` (which lists this command's entries) is
  written last. On any failure or interruption before that the staging folder
  is removed and the previous outputs stay as they were. The moves follow a
  journal (``.thermoelec-commit.json``, the new manifest written first): should
  the process be killed outright in the middle, the next command into the
  folder completes them. Files in ``DIR`` that no manifest lists (yours) are
  never touched, except one that has the name of a new output.

Folders a command keeps between runs (a sweep's ``chunks/``) stay outside the
transaction. Imports :mod:`thermoelec.analysis.interrupts` and
:mod:`thermoelec.inputs`; nothing above.
"""

from __future__ import annotations

import datetime as _dt
import errno
import json
import os
import shutil
import socket
import sys
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from thermoelec.analysis.interrupts import deferred_signals
from thermoelec.inputs import ScenarioError
from thermoelec.version import __version__

__all__ = ["JOURNAL", "LOCK", "MANIFEST", "OutputFolder", "check_output_path", "hold", "write_text_atomic"]

#: The manifest: which entries of the folder the last command wrote.
MANIFEST = "thermoelec-outputs.json"
#: The lock file, and the journal of a commit in progress.
LOCK, JOURNAL = ".thermoelec.lock", ".thermoelec-commit.json"
_STAGING, _TRASH = ".thermoelec-staging-", ".thermoelec-trash-"

try:
    import fcntl
except ImportError:  # not POSIX: the holder's process id is checked instead
    fcntl = None  # type: ignore[assignment]

#: Folders this process holds, for :func:`hold` to be re-entrant.
_HELD: dict[Path, OutputFolder] = {}


def check_output_path(text: str | os.PathLike, option: str = "--out") -> Path:
    """A usable output folder's path, refused before anything is computed.

    Parameters
    ----------
    text : str or path-like
        The folder as given.
    option : str
        The option that named it, for the message.

    Returns
    -------
    pathlib.Path
        The folder (it may not exist yet).

    Raises
    ------
    ScenarioError
        For an empty name, a name of a file, or a folder that cannot be created or written.
    """
    if not str(text).strip():
        raise ScenarioError(option, "", "the output folder's name is empty")
    path = Path(text)
    if path.exists() and not path.is_dir():
        raise ScenarioError(option, str(path), "is a file, not a folder")
    existing = next((p for p in (path, *path.parents) if p.exists()), Path("."))
    if not existing.is_dir() or not os.access(existing, os.W_OK | os.X_OK):
        raise ScenarioError(option, str(path), f"cannot write into {existing}: permission denied")
    return path


def write_text_atomic(path: Path, text: str) -> None:
    """Write a text file whole or not at all: a temporary file beside it, then a rename.

    Parameters
    ----------
    path : pathlib.Path
        The file.
    text : str
        Its contents (UTF-8).
    """
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    tmp.write_text(text, encoding="utf-8")
    os.replace(tmp, path)


#: The lock files this process holds open, by descriptor, with their folders (:func:`_forget_in_child`).
_LOCK_FDS: dict[int, OutputFolder] = {}


def _forget_in_child() -> None:
    """In a forked child: close the copies of the held lock files (a flock lives while any copy is
    open: a command killed outright would leave its folder locked while a worker of it runs on)."""
    for fd, folder in list(_LOCK_FDS.items()):
        folder._fd = None  # nothing in the child may write through it again
        try:
            os.close(fd)
        except OSError:
            pass
    _LOCK_FDS.clear()


if hasattr(os, "register_at_fork"):
    os.register_at_fork(after_in_child=_forget_in_child)


def _now() -> str:
    return _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%d %H:%M:%S UTC")


def _alive(pid: int) -> bool:
    if pid <= 0:  # 0 and -1 would ask the process group, or every process
        return False
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


class OutputFolder:
    """An output folder held by one command: locked, cleaned of what a killed command left, written as a unit.

    Use as a context manager (or through :func:`hold`); :meth:`transaction` stages and commits.

    Parameters
    ----------
    path : pathlib.Path
        The folder (created if missing).
    command : str
        What holds it (``"thermoelec sweep s.toml --out DIR"``), named to a command refused.
    manifest : bool
        Keep a manifest and remove the previous command's entries this one did not
        write (True: a folder of one command's outputs); False for a folder shared
        by files of several commands (``fit`` writes a cell file and its report
        into any folder).
    """

    def __init__(self, path: Path, command: str, manifest: bool = True):
        self.path, self.command, self.manifest = Path(path), command, manifest
        self._fd: int | None = None
        self.notes: list[str] = []

    # -- the lock ---------------------------------------------------------------------------

    def __enter__(self) -> OutputFolder:
        try:
            self.path.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise ScenarioError("--out", str(self.path), f"cannot create the folder: {exc.strerror}") from None
        self._lock()
        try:
            self._recover()
        except BaseException:
            self._unlock()
            raise
        return self

    def __exit__(self, *exc_info: Any) -> None:
        self._unlock()

    def _lock(self) -> None:
        try:
            fd = os.open(self.path / LOCK, os.O_RDWR | os.O_CREAT, 0o644)
        except OSError as exc:
            raise ScenarioError("--out", str(self.path), f"cannot write into the folder: {exc.strerror}") from None
        try:
            previous = _read_holder(fd)
            locked = False
            if fcntl is not None:
                try:
                    fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                    locked = True
                except OSError as exc:
                    if exc.errno in (errno.EWOULDBLOCK, errno.EAGAIN, errno.EACCES):
                        raise ScenarioError("--out", str(self.path), _refusal(previous)) from None
                    # a file system without flock (some network mounts): the holder's process is asked instead
            if not locked and previous and previous.get("host") == socket.gethostname() and \
                    _alive(previous["pid"]):
                raise ScenarioError("--out", str(self.path), _refusal(previous))
            if previous:
                self.notes.append(f"{self.path}: the lock left by process {previous.get('pid')} "
                                  f"({previous.get('command', 'thermoelec')}, started {previous.get('started')}), "
                                  "which is no longer running, was taken over")
            holder = {"pid": os.getpid(), "host": socket.gethostname(), "command": self.command,
                      "started": _now()}
            os.ftruncate(fd, 0)
            os.pwrite(fd, json.dumps(holder).encode(), 0)
        except BaseException:
            os.close(fd)
            raise
        self._fd = fd
        _LOCK_FDS[fd] = self

    def _unlock(self) -> None:
        if self._fd is None:
            return
        _LOCK_FDS.pop(self._fd, None)
        try:
            os.ftruncate(self._fd, 0)  # an empty lock file is a free one; a named holder without the lock, stale
        finally:
            os.close(self._fd)  # closing drops the flock
            self._fd = None

    # -- what a killed command left ---------------------------------------------------------

    def _recover(self) -> None:
        """Complete a commit cut short, remove staging and trash folders of commands no longer running."""
        journal = self.path / JOURNAL
        if journal.exists():
            try:
                record = json.loads(journal.read_text(encoding="utf-8"))
            except (OSError, ValueError):
                record = None
            if record is not None and (self.path / record.get("staging", "")).is_dir():
                self._apply(record)
                self.notes.append(f"{self.path}: completed the commit of outputs of a command that was killed")
            elif record is not None and record.get("manifest", True):
                os.replace(journal, self.path / MANIFEST)  # every entry had been moved in
            else:
                journal.unlink()
        for leftover in self.path.glob(".thermoelec-*-*"):
            if leftover.name.startswith((_STAGING, _TRASH)) and leftover.is_dir():
                shutil.rmtree(leftover, ignore_errors=True)

    def entries(self) -> list[str]:
        """The entries the last committed command wrote (from the manifest; none without one)."""
        try:
            return list(json.loads((self.path / MANIFEST).read_text(encoding="utf-8")).get("outputs", []))
        except (OSError, ValueError, AttributeError):
            return []

    # -- the transaction --------------------------------------------------------------------

    @contextmanager
    def transaction(self) -> Iterator[Path]:
        """A staging folder to write this command's outputs into; committed when the block ends well.

        Yields
        ------
        pathlib.Path
            The staging folder (inside the output folder, so the moves are renames).

        Raises
        ------
        Exception
            Whatever the block raised, after the staging folder was removed (the
            previous outputs are untouched).
        """
        staging = self.path / f"{_STAGING}{os.getpid()}"
        shutil.rmtree(staging, ignore_errors=True)
        staging.mkdir()
        try:
            yield staging
        except BaseException:
            shutil.rmtree(staging, ignore_errors=True)
            raise
        self.commit(staging)

    def commit(self, staging: Path) -> list[Path]:
        """Move the staged entries into the folder as one unit; returns them at their places.

        Parameters
        ----------
        staging : pathlib.Path
            A folder inside the output folder holding this command's outputs.

        Returns
        -------
        list of pathlib.Path
            The entries now in the output folder.
        """
        entries = sorted(p.name for p in staging.iterdir())
        old = self.entries() if self.manifest else []
        record = {"command": self.command, "thermoelec_version": __version__, "written": _now(),
                  "outputs": entries, "stale": [name for name in old if name not in entries],
                  "staging": staging.name, "manifest": self.manifest}
        with deferred_signals():
            write_text_atomic(self.path / JOURNAL, json.dumps(record, indent=2))
            self._apply(record)
        return [self.path / name for name in entries]

    def _apply(self, record: dict[str, Any]) -> None:
        """Carry out a journal: staged entries in, stale ones out, the journal becomes the manifest."""
        staging = self.path / record["staging"]
        trash = self.path / f"{_TRASH}{os.getpid()}"
        trash.mkdir(exist_ok=True)
        names = [p.name for p in staging.iterdir()] if staging.is_dir() else []
        for name in names:
            source, target = staging / name, self.path / name
            if (target.is_dir() and not target.is_symlink()) or (target.exists() and source.is_dir()):
                os.replace(target, trash / name)  # a folder is replaced whole
            os.replace(source, target)
        for name in record.get("stale", []):
            target = self.path / name
            if (target.exists() or target.is_symlink()) and name not in names:
                os.replace(target, trash / name)
        journal = self.path / JOURNAL
        if record.get("manifest", True):
            os.replace(journal, self.path / MANIFEST)
        else:
            journal.unlink(missing_ok=True)
        shutil.rmtree(trash, ignore_errors=True)
        shutil.rmtree(staging, ignore_errors=True)


def _read_holder(fd: int) -> dict[str, Any] | None:
    """The holder a lock file names (None for an empty file, or one that is not a holder's record)."""
    try:
        text = os.pread(fd, 4096, 0).decode("utf-8", "replace").strip()
        holder = json.loads(text) if text else None
    except (OSError, ValueError):
        return None
    if not isinstance(holder, dict) or not isinstance(holder.get("pid"), int):
        return None
    return holder


def _refusal(holder: dict[str, Any] | None) -> str:
    if not holder:
        return "another thermoelec command is writing into this folder; wait for it, or choose another --out"
    return (f"in use by process {holder.get('pid')} on {holder.get('host')} ({holder.get('command')}, started "
            f"{holder.get('started')}); wait for it to finish, or choose another --out")


@contextmanager
def hold(path: Path, command: str | None = None, manifest: bool = True) -> Iterator[OutputFolder]:
    """Hold an output folder for the block: :class:`OutputFolder`, re-entrant within this process.

    Parameters
    ----------
    path : pathlib.Path
        The folder.
    command : str, optional
        What holds it, for a command refused (default: this process's command line).
    manifest : bool
        As for :class:`OutputFolder`.

    Yields
    ------
    OutputFolder
        The held folder (the same object to a nested :func:`hold` of it).
    """
    key = Path(path).resolve()
    if key in _HELD:
        yield _HELD[key]
        return
    folder = OutputFolder(Path(path), command or " ".join(["thermoelec", *sys.argv[1:]]), manifest)
    with folder:
        _HELD[key] = folder
        try:
            yield folder
        finally:
            del _HELD[key]
