"""The files of one run, replaced as a whole set or not at all.

A run (``thinning design``, one budget of a sweep) writes several files that belong together:
the layout, its JSON record, the drawings and the report. Replacing them one by one would leave
new files beside old ones when the run is cut short (Ctrl-C, a full disk), and nothing would
flag the mix. :func:`file_set` stages every file of the run in a hidden folder inside the
target folder (same file system, so each file moves by :func:`os.replace`), and only when the
whole set is written moves it into place, the record file last, with Ctrl-C held back for the
few milliseconds the moves take. Files of the previous set that the new one does not have
(listed in the previous record's ``files``) are removed; other files in the folder are never
touched. A failure or Ctrl-C before that point removes the staging folder and leaves the
previous set as it was.

The record (``layout.json``) lists the SHA-256 of every other file of its set
(:func:`file_digests`), so a set can be checked against its record at any time, and a mix left
by a hard kill in those milliseconds can be told.

:func:`probe_folder` creates and removes a file in a folder: commands call it before a long
search, so that an unwritable folder is found at once rather than after the search.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import os
import shutil
import signal
import tempfile
import threading
from collections.abc import Iterator
from pathlib import Path

from ..errors import OutputError
from .atomic import _output_error

__all__ = ["file_set", "file_digests", "probe_folder", "STAGING_PREFIX"]

#: Name prefix of the hidden staging folders inside an output folder.
STAGING_PREFIX = ".thinning-partial-"


def probe_folder(folder: str | os.PathLike) -> Path:
    """Check that files can be created in ``folder`` (create the folder if needed).

    Creates and removes one empty temporary file in it.

    Parameters
    ----------
    folder : str or os.PathLike

    Returns
    -------
    pathlib.Path

    Raises
    ------
    OutputError
        The folder cannot be created, is a file, or refuses new files (permissions, a
        read-only file system, a full disk), naming the folder and the OS reason.
    """
    out = Path(folder)
    if out.exists() and not out.is_dir():
        raise OutputError(f"{out}: exists and is not a folder")
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(f"{out}: cannot create the output folder: {exc.strerror}") from None
    try:
        fd, name = tempfile.mkstemp(prefix=".thinning-probe-", dir=out)
    except OSError as exc:
        reason = exc.strerror or str(exc)
        raise OutputError(f"{out}: cannot write files in the output folder: {reason}") from None
    os.close(fd)
    with contextlib.suppress(OSError):
        os.unlink(name)
    return out


def file_digests(folder: str | os.PathLike, exclude=()) -> dict[str, str]:
    """SHA-256 (hex) of every file in ``folder`` by name, sorted, except ``exclude``."""
    out = {}
    for p in sorted(Path(folder).iterdir()):
        if p.is_file() and p.name not in exclude:
            out[p.name] = hashlib.sha256(p.read_bytes()).hexdigest()
    return out


def _previous_files(record: Path) -> set[str]:
    """Names the previous set's record lists in ``files`` (empty when there is none)."""
    try:
        old = json.loads(record.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return set()
    files = old.get("files") if isinstance(old, dict) else None
    if not isinstance(files, dict):
        return set()
    # plain names only: a record must never make us delete outside its folder
    return {n for n in files if isinstance(n, str) and n == Path(n).name and n not in ("", ".")}


@contextlib.contextmanager
def _interrupt_held():
    """Hold Ctrl-C back until the block ends, then raise it (main thread only)."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    pending = []
    previous = signal.signal(signal.SIGINT, lambda signum, frame: pending.append(signum))
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, previous)
    if pending:
        raise KeyboardInterrupt


def _commit(stage: Path, target: Path, record: str | None) -> None:
    names = sorted(p.name for p in stage.iterdir())
    if record in names:  # the record goes last: it marks the set complete
        names.remove(record)
        names.append(record)
    stale = (_previous_files(target / record) if record else set()) - set(names)
    with _interrupt_held():
        for name in names:
            try:
                os.replace(stage / name, target / name)
            except OSError as exc:
                raise _output_error(target / name, exc) from exc
        for name in sorted(stale):
            with contextlib.suppress(OSError):
                (target / name).unlink()


@contextlib.contextmanager
def file_set(target: str | os.PathLike, record: str | None = None) -> Iterator[Path]:
    """Stage the files of one run and put them into ``target`` as one set.

    Write every file of the run into the yielded folder. When the ``with`` block ends
    normally, the files replace those of the same names in ``target`` (``record`` last) and the
    files the previous record listed but the new set lacks are removed. When the block raises
    (an error, Ctrl-C), nothing in ``target`` changes.

    Parameters
    ----------
    target : str or os.PathLike
        An existing, writable folder (see :func:`probe_folder`).
    record : str, optional
        Name of the set's record file (a JSON object whose ``files`` lists the other files),
        moved last; the previous record's ``files`` name the files a new set replaces.

    Yields
    ------
    pathlib.Path
        The staging folder (hidden, inside ``target``).

    Raises
    ------
    OutputError
        The staging folder cannot be made or a file cannot be moved into place.
    """
    target = Path(target)
    try:
        stage = Path(tempfile.mkdtemp(prefix=STAGING_PREFIX, dir=target))
    except OSError as exc:
        raise OutputError(
            f"{target}: cannot write files in the output folder: {exc.strerror or exc}"
        ) from None
    try:
        yield stage
        _commit(stage, target, record)
    finally:
        shutil.rmtree(stage, ignore_errors=True)
