"""Write output files all at once or not at all.

Every output of `thinning` goes through here: the data is written to a temporary file in the
same folder as the target, flushed to disk, and then moved over the target with
:func:`os.replace`, which is atomic on one file system. If anything goes wrong on the way
(an exception in the writer, a full disk, Ctrl-C) the temporary file is deleted and the target
is left as it was: absent, or the complete old version.
"""

from __future__ import annotations

import contextlib
import errno
import json
import math
import os
import tempfile
from collections.abc import Iterator, Mapping
from pathlib import Path
from typing import IO, Any

import numpy as np

from ..errors import OutputError

__all__ = ["atomic_open", "atomic_write", "atomic_write_json", "json_safe"]

# The process umask, read once; new files get the permissions `open` would give them.
_UMASK = os.umask(0)
os.umask(_UMASK)

# OS errors raised while writing that are about the output, not about the caller's code.
_OUTPUT_ERRNOS = {
    getattr(errno, name)
    for name in ("ENOSPC", "EDQUOT", "EFBIG", "EIO", "EROFS")
    if hasattr(errno, name)
}


def _output_error(path: Path, exc: OSError) -> OutputError:
    """One-line OutputError naming the target path and the OS reason."""
    reason = exc.strerror or str(exc)
    folder = path.parent
    if isinstance(exc, FileNotFoundError) and not folder.is_dir():
        reason = f"folder {str(folder)!r} does not exist"
    elif isinstance(exc, NotADirectoryError):
        reason = f"{str(folder)!r} is not a folder"
    elif isinstance(exc, IsADirectoryError) or path.is_dir():
        reason = "it is a folder"
    err = OutputError(f"{path}: cannot write: {reason}")
    err.errno = exc.errno
    return err


@contextlib.contextmanager
def atomic_open(
    path: str | os.PathLike,
    mode: str = "w",
    *,
    newline: str | None = "\n",
    encoding: str = "utf-8",
) -> Iterator[IO[Any]]:
    """Open a file for writing that appears at ``path`` only once it is complete.

    Parameters
    ----------
    path : str or os.PathLike
        The target file. Its folder must exist.
    mode : {"w", "wt", "wb"}
        Text or binary. Text is written with ``encoding`` and ``newline``.
    newline : str or None
        Passed to :func:`open` in text mode; the default ``"\\n"`` writes ``\\n`` line endings
        on every platform.
    encoding : str
        Text encoding (text mode only).

    Yields
    ------
    file object
        Writing to it writes the temporary file.

    Raises
    ------
    OutputError
        The folder is missing or not writable, the target is a folder, or the disk is full.
        Any other exception from the ``with`` block propagates unchanged. In every failure the
        temporary file is removed and the target left as it was.
    """
    if mode not in ("w", "wt", "wb"):
        raise ValueError(f"atomic_open: mode {mode!r} is not one of 'w', 'wt', 'wb'")
    path = Path(path)
    binary = mode == "wb"
    if path.is_dir():
        raise OutputError(f"{path}: cannot write: it is a folder")
    try:
        fd, tmp_name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    except OSError as exc:
        raise _output_error(path, exc) from None
    tmp = Path(tmp_name)
    try:
        try:
            perm = path.stat().st_mode & 0o7777 if path.exists() else 0o666 & ~_UMASK
            os.chmod(fd, perm)
        except OSError:
            pass  # permissions are a courtesy; the write itself is what matters
        if binary:
            f = os.fdopen(fd, "wb")
        else:
            f = os.fdopen(fd, "w", encoding=encoding, newline=newline)
        with f:
            try:
                yield f
            except OSError as exc:
                if exc.errno in _OUTPUT_ERRNOS and not isinstance(exc, OutputError):
                    raise _output_error(path, exc) from exc
                raise
            try:
                f.flush()
                os.fsync(f.fileno())
            except OSError as exc:
                raise _output_error(path, exc) from exc
        try:
            os.replace(tmp, path)
        except OSError as exc:
            raise _output_error(path, exc) from exc
    except BaseException:
        with contextlib.suppress(OSError):
            tmp.unlink()
        raise


def atomic_write(path: str | os.PathLike, data: bytes | str) -> None:
    """Write ``data`` to ``path`` atomically (see :func:`atomic_open`).

    Parameters
    ----------
    path : str or os.PathLike
    data : bytes or str
        Text is encoded as UTF-8 and written as it is (no newline translation).

    Raises
    ------
    OutputError
    """
    if isinstance(data, str):
        data = data.encode("utf-8")
    with atomic_open(path, "wb") as f:
        f.write(data)


def json_safe(obj: Any) -> Any:
    """A copy of ``obj`` that :func:`json.dumps` accepts with ``allow_nan=False``.

    Non-finite floats become ``None``; numpy scalars and arrays become Python numbers and
    lists; tuples become lists; mapping keys are kept (they must already be strings).
    """
    if isinstance(obj, Mapping):
        return {k: json_safe(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [json_safe(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return json_safe(obj.tolist())
    if isinstance(obj, bool | np.bool_):
        return bool(obj)
    if isinstance(obj, int | np.integer):
        return int(obj)
    if isinstance(obj, float | np.floating):
        v = float(obj)
        return v if math.isfinite(v) else None
    return obj


def atomic_write_json(path: str | os.PathLike, obj: Any) -> None:
    """Write ``obj`` as JSON to ``path`` atomically.

    Indent 2, keys in the given order, UTF-8, a trailing newline. Non-finite floats (NaN,
    ±inf) are written as ``null``, since JSON has no spelling for them.

    Parameters
    ----------
    path : str or os.PathLike
    obj : JSON-like
        Dicts, lists, tuples, str, int, float, bool, None, numpy scalars and arrays.

    Raises
    ------
    OutputError
        The file cannot be written.
    TypeError
        ``obj`` holds something JSON cannot represent (nothing is written then).
    """
    text = json.dumps(
        json_safe(obj), indent=2, sort_keys=False, allow_nan=False, ensure_ascii=False
    )
    atomic_write(path, text + "\n")
