"""Files: the one place that reads the user's inputs, checks output paths, writes atomically and
keeps numbered backups.

* `read_bytes` turns every way a read can fail into a one-line `InputError` naming the file.
* `check_output_path` fails before any work when an output cannot be written.
* `atomic_write` writes to a temporary file beside the target and renames it into place, so a
  failure never leaves a half-written file at the output path.
* `keep_backup` copies a file about to be replaced to the first free ``PATH.bakN``, a name it
  creates exclusively; `write_with_backup` does that and the replacement under a lock on the
  folder, so saves running at the same time each back up exactly the version they replace.
* `transaction` groups the outputs of one command: each is written to its temporary file, and
  all are renamed into place together at the end, or none is.
* `session` (the command line opens one per command) remembers the files read and written, so
  that no command writes over one of its own inputs, writes two outputs to one path, or replaces
  a file of another kind (a drawing, a picture) unless `overwrite` is set.

A temporary file is named ``.vectorgen-*.part``; every one still open is removed by
`remove_leftovers` (the command line calls it when it is stopped by a signal).
"""

from __future__ import annotations

import contextlib
import os
import time

from .errors import InputError, VectorgenError

__all__ = ["read_bytes", "note_input", "check_output_path", "check_outputs", "atomic_write",
           "atomic_write_bytes", "keep_backup", "write_with_backup", "transaction", "session",
           "content_kind", "remove_leftovers", "holding_stops", "defer_stop", "TEMP_PREFIX",
           "TEMP_SUFFIX"]

TEMP_PREFIX = ".vectorgen-"
TEMP_SUFFIX = ".part"
LOCK_TIMEOUT_S = 30.0           # waiting this long for another save in the folder is an error
SNIFF_BYTES = 4096
# what an output's extension says its content is (see `content_kind`)
EXTENSION_KINDS = {".wav": "a WAV file", ".png": "a PNG picture", ".svg": "an SVG drawing",
                   ".raw": "binary data", ".bin": "binary data", ".csv": "text",
                   ".json": "text", ".toml": "text", ".py": "text", ".txt": "text"}

GENERIC_KINDS = ("text", "binary data")
_LIVE_TEMPS: set = set()        # temporary files not yet renamed or removed
_SESSION = None                 # the open `session`, if any
_TRANSACTION = None             # the open `transaction`, if any


# --- inputs --------------------------------------------------------------------------------------

def read_bytes(path, what: str, max_bytes: int) -> bytes:
    """The bytes of an input file.

    Parameters
    ----------
    path : str or os.PathLike
    what : str
        The kind of file, for messages ("SVG file", "profile", "sheet").
    max_bytes : int
        Larger files are refused.

    Returns
    -------
    bytes

    Raises
    ------
    InputError
        The file is missing, a folder, unreadable or too large.

    Examples
    --------
    >>> import tempfile, os
    >>> p = os.path.join(tempfile.mkdtemp(), "a.txt")
    >>> open(p, "wb").write(b"abc")
    3
    >>> read_bytes(p, "note", 10)
    b'abc'
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
    note_input(path, what)
    return data


def note_input(path, what: str = "input") -> None:
    """Remember `path` as an input of the command being run (no-op outside a `session`), so
    that no output of the command is written over it."""
    if _SESSION is not None:
        _SESSION.inputs.append((os.fspath(path), what))


def _same_file(a: str, b: str) -> bool:
    try:
        return os.path.samefile(a, b)
    except OSError:
        return os.path.abspath(a) == os.path.abspath(b)


def _input_named(path: str):
    """(path, what) of the session's input that `path` names, or None."""
    if _SESSION is None or not os.path.exists(path):
        return None
    for given, what in _SESSION.inputs:
        if _same_file(given, path):
            return given, what
    return None


# --- what a file holds ---------------------------------------------------------------------------

def content_kind(head: bytes) -> str:
    """What the first bytes of a file say it holds, in words: "a WAV file", "a PNG picture",
    "a JPEG picture", "an SVG drawing", "text", "binary data" or "empty".

    Examples
    --------
    >>> content_kind(b"RIFF\\x00\\x00\\x00\\x00WAVEfmt "), content_kind(b'<svg xmlns="x">')
    ('a WAV file', 'an SVG drawing')
    >>> content_kind(b"[screen]\\nwidth_mm = 100\\n"), content_kind(b"")
    ('text', 'empty')
    """
    if not head:
        return "empty"
    if head[:4] in (b"RIFF", b"RF64") and head[8:12] == b"WAVE":
        return "a WAV file"
    if head.startswith(b"\x89PNG\r\n\x1a\n"):
        return "a PNG picture"
    if head.startswith(b"\xff\xd8\xff"):
        return "a JPEG picture"
    text = head.lstrip(b"\xef\xbb\xbf \t\r\n")
    if text.startswith(b"<") and b"<svg" in head.lower():
        return "an SVG drawing"
    if b"\x00" in head:
        return "binary data"
    try:
        head.decode("utf-8")
    except UnicodeDecodeError as exc:
        if exc.start < len(head) - 4:           # not merely a character cut at the end
            return "binary data"
    return "text"


def _head(path: str) -> bytes | None:
    try:
        with open(path, "rb") as fh:
            return fh.read(SNIFF_BYTES)
    except OSError:
        return None


def _check_replacing(path: str, new_kind: str) -> None:
    """Refuse (in a session, unless it allows overwriting) to replace a regular file whose
    content is of another kind than `new_kind`."""
    if _SESSION is None or _SESSION.overwrite or not os.path.isfile(path):
        return
    head = _head(path)
    if head is None:
        return
    old = content_kind(head)
    # text and unrecognised bytes cannot be told apart reliably (a raw signal may look like
    # either): only a file format recognised by its content is protected from another kind
    if old in ("empty", new_kind) or (old in GENERIC_KINDS and new_kind in GENERIC_KINDS):
        return
    raise InputError(f"{path} holds {old}: refusing to replace it with {new_kind} (give the "
                     f"output another name, or {_SESSION.overwrite_hint} to replace it anyway)")


# --- output paths --------------------------------------------------------------------------------

def check_output_path(path, extensions: tuple[str, ...] | None = None) -> str:
    """Fail early, before any work, if `path` cannot be written; returns its extension (lower
    case). With `extensions`, the extension must be one of them; in a session, an existing file
    at `path` must hold what that extension names (a .wav output does not replace a drawing).

    Raises
    ------
    InputError
        An unknown extension, a missing or read-only folder, a folder at `path`, or (in a
        session) a file of another kind at `path`.
    """
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
    if extensions is not None and ext in EXTENSION_KINDS:
        _check_replacing(path, EXTENSION_KINDS[ext])
    return ext


def check_outputs(outputs, inputs=()) -> None:
    """Before any work: no two outputs name one file, and no output names an input.

    Parameters
    ----------
    outputs : sequence of (option, path)
        The command's outputs with the option that names each (paths may be None: not asked).
    inputs : sequence of (what, path)
        The command's input files (paths may be None).

    Raises
    ------
    InputError
        Naming both options (or the option and the input).

    Examples
    --------
    >>> check_outputs([("-o", "a.wav"), ("--report", "a.json")], [("profile", "p.toml")])
    >>> try:
    ...     check_outputs([("-o", "a.png"), ("--signals", "a.png")])
    ... except InputError as exc:
    ...     refused = str(exc)
    >>> refused.split(":")[0]
    '-o and --signals name the same file a.png'
    """
    seen = []
    for option, path in outputs:
        if path is None:
            continue
        path = os.fspath(path)
        for other, earlier in seen:
            if _same_file(earlier, path) or os.path.abspath(earlier) == os.path.abspath(path):
                raise InputError(f"{other} and {option} name the same file {path}: give each "
                                 f"output its own name")
        for what, given in inputs:
            if given is not None and os.path.exists(path) and _same_file(os.fspath(given), path):
                raise InputError(f"{option} names the {what} {path}, an input of this command: "
                                 f"give the output another name")
        seen.append((option, path))


# --- temporary files -----------------------------------------------------------------------------

def _temp_beside(path: str):
    import tempfile             # (not at start-up: the command line must start fast)

    folder = os.path.dirname(os.path.abspath(path))
    fd, tmp = tempfile.mkstemp(dir=folder, prefix=TEMP_PREFIX, suffix=TEMP_SUFFIX)
    _LIVE_TEMPS.add(tmp)
    return fd, tmp


def _discard(tmp: str) -> None:
    try:
        os.unlink(tmp)
    except OSError:
        pass
    _LIVE_TEMPS.discard(tmp)


def remove_leftovers() -> None:
    """Remove every temporary file this process still has open (after a signal stopped it)."""
    for tmp in list(_LIVE_TEMPS):
        _discard(tmp)


def _file_mode(path: str) -> int:
    """The permissions an output at `path` gets: those of the file it replaces, else what
    the umask gives a new file (a temporary file is created private, 0600)."""
    try:
        return os.stat(path).st_mode & 0o7777
    except OSError:
        mask = os.umask(0o022)
        os.umask(mask)
        return 0o666 & ~mask


def _write_temp(path: str, writer) -> str:
    """`writer(binary_file)` into a new temporary file beside `path`; its name. On any failure
    the temporary file is gone and an OSError is one line naming `path`."""
    fd, tmp = _temp_beside(path)
    try:
        with os.fdopen(fd, "wb") as fh:
            writer(fh)
            if hasattr(os, "fchmod"):
                os.fchmod(fh.fileno(), _file_mode(path))
    except BaseException as exc:
        _discard(tmp)
        if isinstance(exc, OSError):
            raise VectorgenError(f"cannot write {path}: {exc.strerror or exc}") from None
        raise
    return tmp


def _claim(path: str, replaces_input: bool) -> None:
    """In a session: refuse a second output to `path`, or an output over an input."""
    if _SESSION is None:
        return
    for earlier in _SESSION.written:
        if os.path.abspath(earlier) == os.path.abspath(path) or (
                os.path.exists(path) and _same_file(earlier, path)):
            raise InputError(f"two outputs of this command go to {path}: give each output its "
                             f"own name")
    if not replaces_input:
        hit = _input_named(path)
        if hit is not None:
            raise InputError(f"{path} is the {hit[1]} this command reads: refusing to write "
                             f"over it (give the output another name)")
    _SESSION.written.append(path)


def _put_in_place(tmp: str, path: str) -> None:
    """Rename the temporary file onto `path`, after checking what it would replace."""
    try:
        _check_replacing(path, content_kind(_head(tmp) or b""))
        os.replace(tmp, path)
    except BaseException as exc:
        _discard(tmp)
        if isinstance(exc, OSError):
            raise VectorgenError(f"cannot write {path}: {exc.strerror or exc}") from None
        raise
    _LIVE_TEMPS.discard(tmp)


def atomic_write(path, writer, replaces_input: bool = False) -> None:
    """Call ``writer(binary_file)`` on a temporary file beside `path`, then rename it onto
    `path`. On any failure the temporary file is removed and `path` is untouched. Inside a
    `transaction` the rename waits for the transaction's end.

    Parameters
    ----------
    path : str or os.PathLike
    writer : callable
        ``writer(fh)`` writes the whole content to the binary file `fh`.
    replaces_input : bool
        The command means to replace one of its own inputs (a profile rewritten in place,
        with a backup kept); otherwise, in a session, writing over an input is refused.

    Raises
    ------
    VectorgenError
        The file cannot be written (one line, naming it).
    InputError
        In a session: `path` is an input, was written already, or holds another kind of file.

    Examples
    --------
    >>> import tempfile, os
    >>> p = os.path.join(tempfile.mkdtemp(), "out.txt")
    >>> atomic_write(p, lambda fh: fh.write(b"hello"))
    >>> open(p, "rb").read()
    b'hello'
    """
    path = os.fspath(path)
    _claim(path, replaces_input)
    tmp = _write_temp(path, writer)
    if _TRANSACTION is not None:
        try:
            _check_replacing(path, content_kind(_head(tmp) or b""))
        except BaseException:
            _discard(tmp)
            raise
        _TRANSACTION.actions.append(("replace", tmp, path, None))
        return
    _put_in_place(tmp, path)


def atomic_write_bytes(path, data: bytes, replaces_input: bool = False) -> None:
    """`atomic_write` of a bytes object."""
    atomic_write(path, lambda fh: fh.write(data), replaces_input)


# --- backups -------------------------------------------------------------------------------------

def _reserve_backup(path: str) -> str:
    """Create the first free ``PATH.bakN`` exclusively (O_CREAT | O_EXCL: a name another
    process is creating at the same moment is passed over) and return its name."""
    n = 1
    while True:
        name = f"{path}.bak{n}"
        try:
            fd = os.open(name, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
        except FileExistsError:
            n += 1
            continue
        except OSError as exc:
            raise VectorgenError(f"cannot create the backup {name}: "
                                 f"{exc.strerror or exc}") from None
        os.close(fd)
        return name


def _fill_backup(path: str, backup: str) -> bool:
    """Copy `path` into the reserved `backup` (through a temporary file, so a backup is never
    half-written). False (and the reservation removed) when `path` no longer exists."""
    try:
        with open(path, "rb") as fh:
            data = fh.read()
    except FileNotFoundError:
        _remove_quietly(backup)
        return False
    except OSError as exc:
        _remove_quietly(backup)
        raise VectorgenError(f"cannot read {path} to keep a backup: {exc.strerror}") from None
    try:
        tmp = _write_temp(backup, lambda fh: fh.write(data))
        try:                    # a backup is as private as the file it keeps
            os.chmod(tmp, os.stat(path).st_mode & 0o7777)
        except OSError:
            pass
        os.replace(tmp, backup)
        _LIVE_TEMPS.discard(tmp)
    except BaseException:
        _remove_quietly(backup)
        raise
    return True


def _remove_quietly(path: str) -> None:
    try:
        os.unlink(path)
    except OSError:
        pass


@contextlib.contextmanager
def _folder_lock(path: str):
    """An exclusive advisory lock (flock) on the folder of `path` for the duration: saves in
    one folder by several processes run one at a time. No-op where flock is missing."""
    try:
        import fcntl
    except ImportError:             # not POSIX: exclusive names alone
        yield
        return
    folder = os.path.dirname(os.path.abspath(path))
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        yield
        return
    try:
        deadline = time.monotonic() + LOCK_TIMEOUT_S
        while True:
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                break
            except BlockingIOError:
                if time.monotonic() > deadline:
                    raise VectorgenError(f"another program has kept {folder} locked for "
                                         f"{LOCK_TIMEOUT_S:g} s: try again") from None
                time.sleep(0.005)
            except OSError:         # a file system without locks
                break
        yield
    finally:
        os.close(fd)                # releases the lock


def keep_backup(path) -> str | None:
    """Copy an existing file at `path` to the first free ``PATH.bakN`` (created exclusively);
    returns that path, or None when there is no file to keep.

    Examples
    --------
    >>> import tempfile, os
    >>> p = os.path.join(tempfile.mkdtemp(), "p.toml")
    >>> keep_backup(p) is None
    True
    >>> open(p, "w").write("a = 1\\n")
    6
    >>> os.path.basename(keep_backup(p)), os.path.basename(keep_backup(p))
    ('p.toml.bak1', 'p.toml.bak2')
    """
    path = os.fspath(path)
    if not os.path.exists(path):
        return None
    backup = _reserve_backup(path)
    return backup if _fill_backup(path, backup) else None


def write_with_backup(path, data: bytes, extensions: tuple[str, ...] | None = None) -> str | None:
    """Write `data` to `path` atomically, keeping any file already there as a numbered backup.
    The backup and the replacement happen under a lock on the folder, so of several saves at
    the same moment each backs up exactly the version it replaces. `path` may be one of the
    command's inputs (a profile rewritten in place). Returns the backup's path (None when
    there was nothing to keep).

    Examples
    --------
    >>> import tempfile, os
    >>> p = os.path.join(tempfile.mkdtemp(), "p.toml")
    >>> write_with_backup(p, b"a = 1\\n") is None
    True
    >>> os.path.basename(write_with_backup(p, b"a = 2\\n")), open(p).read()
    ('p.toml.bak1', 'a = 2\\n')
    """
    path = os.fspath(path)
    check_output_path(path, extensions)
    _check_replacing(path, content_kind(data[:SNIFF_BYTES]))     # before a backup is made
    if _TRANSACTION is not None:
        _claim(path, True)
        tmp = _write_temp(path, lambda fh: fh.write(data))
        with _folder_lock(path):
            backup = _reserve_backup(path) if os.path.exists(path) else None
        _TRANSACTION.actions.append(("backup", tmp, path, backup))
        return backup
    _claim(path, True)
    tmp = _write_temp(path, lambda fh: fh.write(data))
    with holding_stops(), _folder_lock(path):
        try:
            backup = keep_backup(path)
        except BaseException:
            _discard(tmp)
            raise
        _put_in_place(tmp, path)
    return backup


# --- transactions and sessions -------------------------------------------------------------------

class _Transaction:
    def __init__(self):
        self.actions: list = []     # (kind, temporary file, target, reserved backup or None)

    def commit(self) -> None:
        """Every staged file into place, with the stop signals held back meanwhile (a signal
        then acts after the last rename: all outputs are there, or, before, none)."""
        with holding_stops():
            self._commit()

    def _commit(self) -> None:
        try:
            for kind, tmp, path, backup in self.actions:
                if kind == "backup":
                    with _folder_lock(path):
                        if backup is not None and not _fill_backup(path, backup):
                            backup = None
                        _put_in_place(tmp, path)
                else:
                    _put_in_place(tmp, path)
            self.actions = []
        finally:
            self.rollback()

    def rollback(self) -> None:
        for _kind, tmp, _path, backup in self.actions:
            _discard(tmp)
            if backup is not None:
                _remove_quietly(backup)
        self.actions = []


_HELD = [0, None]               # [depth of `holding_stops`, (signum, handler) held back]


@contextlib.contextmanager
def holding_stops():
    """While the block runs, a stop signal routed through `defer_stop` waits; it acts (its
    handler is called) when the outermost block ends."""
    _HELD[0] += 1
    try:
        yield
    finally:
        _HELD[0] -= 1
        if _HELD[0] == 0 and _HELD[1] is not None:
            signum, handler = _HELD[1]
            _HELD[1] = None
            handler(signum)


def defer_stop(signum: int, handler) -> bool:
    """For a signal handler: True (and `handler(signum)` is called later) while files are
    being put in place by `holding_stops`; False when the handler should act now."""
    if _HELD[0] == 0:
        return False
    if _HELD[1] is None:
        _HELD[1] = (signum, handler)
    return True


@contextlib.contextmanager
def transaction():
    """Group outputs: inside, `atomic_write` (and everything built on it) writes each file to
    its temporary file; at the end of the block all are renamed into place, or, when the
    block fails (an exception, a signal), all temporary files are removed and nothing is
    written. A transaction inside a transaction joins it.

    Examples
    --------
    >>> import tempfile, os
    >>> d = tempfile.mkdtemp()
    >>> try:
    ...     with transaction():
    ...         atomic_write_bytes(os.path.join(d, "a.txt"), b"a")
    ...         raise KeyError("late failure")
    ... except KeyError:
    ...     pass
    >>> os.listdir(d)
    []
    """
    global _TRANSACTION
    if _TRANSACTION is not None:
        yield _TRANSACTION
        return
    tx = _TRANSACTION = _Transaction()
    try:
        try:
            yield tx
        except BaseException:
            tx.rollback()
            raise
        tx.commit()
    finally:
        _TRANSACTION = None


class _Session:
    def __init__(self, overwrite: bool, overwrite_hint: str):
        self.overwrite = overwrite
        self.overwrite_hint = overwrite_hint
        self.inputs: list = []      # (path, what)
        self.written: list = []     # output paths


@contextlib.contextmanager
def session(overwrite: bool = False, overwrite_hint: str = "allow overwriting"):
    """The files of one command: inside, outputs are refused over the command's inputs, twice
    to one path, and (unless `overwrite`) over a file of another kind; `overwrite_hint` says
    how the user allows that (the command line: "give --overwrite")."""
    global _SESSION
    old = _SESSION
    _SESSION = _Session(bool(overwrite), overwrite_hint)
    try:
        yield _SESSION
    finally:
        _SESSION = old
