"""Files: the one place that reads the user's inputs, checks output paths, writes atomically and
keeps numbered backups.

* `read_bytes` turns every way a read can fail into a one-line `InputError` naming the file.
* `check_output_path` fails before any work when an output cannot be written.
* `atomic_write` writes to a temporary file beside the target and renames it into place, so a
  failure never leaves a half-written file at the output path.
* `keep_backup` copies a file about to be replaced to the first free ``PATH.bakN``.
"""

from __future__ import annotations

import os
import tempfile

from .errors import InputError, VectorgenError

__all__ = ["read_bytes", "check_output_path", "atomic_write", "atomic_write_bytes",
           "keep_backup", "write_with_backup"]


def read_bytes(path, what: str, max_bytes: int) -> bytes:
    """The bytes of an input file.

    Parameters
    ----------
    path : str or os.PathLike
    what : str
        The kind of file, for messages ("SVG file", "profile", "sheet").
    max_bytes : int
        Larger files are refused.

    Raises
    ------
    InputError
        The file is missing, a folder, unreadable or too large.
    """
    path = os.fspath(path)
    try:
        with open(path, "rb") as fh:
            data = fh.read(max_bytes + 1)
    except FileNotFoundError:
        raise InputError(f"{what} not found: {path}") from None
    except IsADirectoryError:
        raise InputError(f"{what} is a folder, not a file: {path}") from None
    except OSError as exc:
        raise InputError(f"cannot read {what} {path}: {exc.strerror or exc}") from None
    if len(data) > max_bytes:
        raise InputError(f"{path}: too large for {what} (at most {max_bytes >> 20} MiB)")
    return data


def check_output_path(path, extensions: tuple[str, ...] | None = None) -> str:
    """Fail early, before any work, if `path` cannot be written; returns its extension (lower
    case). With `extensions`, the extension must be one of them."""
    path = os.fspath(path)
    ext = os.path.splitext(path)[1].lower()
    if extensions is not None and ext not in extensions:
        raise InputError(f"cannot tell the format of '{path}': use one of "
                         + ", ".join(extensions))
    folder = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(folder):
        raise InputError(f"output folder does not exist: {os.path.dirname(path) or '.'}")
    if os.path.isdir(path):
        raise InputError(f"output path is a folder: {path}")
    if not os.access(folder, os.W_OK):
        raise InputError(f"output folder is not writable: {folder}")
    return ext


def atomic_write(path, writer) -> None:
    """Call ``writer(binary_file)`` on a temporary file beside `path`, then rename it onto
    `path`. On any failure the temporary file is removed and `path` is untouched."""
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    fd, tmp = tempfile.mkstemp(dir=folder, prefix=".vectorgen-", suffix=".part")
    try:
        with os.fdopen(fd, "wb") as fh:
            writer(fh)
        os.replace(tmp, path)
    except BaseException as exc:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        if isinstance(exc, OSError):
            raise VectorgenError(f"cannot write {path}: {exc.strerror or exc}") from None
        raise


def atomic_write_bytes(path, data: bytes) -> None:
    """`atomic_write` of a bytes object."""
    atomic_write(path, lambda fh: fh.write(data))


def keep_backup(path) -> str | None:
    """Copy an existing file at `path` to the first free ``PATH.bakN``; returns that path, or
    None when there is no file to keep."""
    path = os.fspath(path)
    if not os.path.exists(path):
        return None
    n = 1
    while os.path.exists(f"{path}.bak{n}"):
        n += 1
    backup = f"{path}.bak{n}"
    try:
        with open(path, "rb") as fh:
            data = fh.read()
    except OSError as exc:
        raise VectorgenError(f"cannot read {path} to keep a backup: {exc.strerror}") from None
    atomic_write_bytes(backup, data)
    return backup


def write_with_backup(path, data: bytes, extensions: tuple[str, ...] | None = None) -> str | None:
    """Write `data` to `path` atomically, keeping any file already there as a numbered backup.
    Returns the backup's path (None when there was nothing to keep)."""
    path = os.fspath(path)
    check_output_path(path, extensions)
    backup = keep_backup(path)
    atomic_write_bytes(path, data)
    return backup
