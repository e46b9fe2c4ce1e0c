"""Reading the user's input files: one place that turns the ways a read can fail into one-line
errors naming the file."""

from __future__ import annotations

import os

from .errors import VectorgenError


def read_bytes(path, what: str, max_bytes: int) -> bytes:
    """The bytes of `path` (`what` names the kind of file in messages), at most `max_bytes`."""
    path = os.fspath(path)
    try:
        with open(path, "rb") as fh:
            data = fh.read(max_bytes + 1)
    except FileNotFoundError:
        raise VectorgenError(f"{what} not found: {path}") from None
    except IsADirectoryError:
        raise VectorgenError(f"{what} is a folder, not a file: {path}") from None
    except OSError as exc:
        raise VectorgenError(f"cannot read {what} {path}: {exc.strerror or exc}") from None
    if len(data) > max_bytes:
        raise VectorgenError(f"{path}: too large for {what} (at most {max_bytes >> 20} MiB)")
    return data
