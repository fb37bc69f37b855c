"""Writing files: every file fleetpower writes goes through :func:`write_atomic`.

Owns: atomic text writes (a temporary file in the same folder, then a rename, so a file
is never half-written). May import ``errors`` only.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

from ..errors import InputError


def write_atomic(path: str | Path, text: str) -> None:
    """Write ``text`` to ``path`` via a temporary file and a rename (never half-written)."""
    path = Path(path)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    except OSError as exc:
        raise InputError(str(path), "", f"cannot write: {exc.strerror or exc}") from None
    try:
        umask = os.umask(0)
        os.umask(umask)
        with os.fdopen(fd, "w", encoding="utf-8", newline="") as fh:
            os.fchmod(fh.fileno(), 0o666 & ~umask)  # mkstemp makes 0600; match open()
            fh.write(text)
        os.replace(tmp, path)
    except BaseException as exc:
        if os.path.exists(tmp):
            os.unlink(tmp)
        if isinstance(exc, OSError):
            raise InputError(str(path), "", f"cannot write: {exc.strerror or exc}") from None
        raise


#: Longest path read [characters] and largest file read [bytes] (README "Input bounds")
MAX_PATH_CHARS = 1024
MAX_READ_BYTES = 4 * 1024 * 1024


def check_path(path: str | Path, key: str = "") -> str:
    """``path`` as text, refused (naming it) when it holds a NUL byte or is too long.

    Called before any file-system call on a user's path, which would otherwise raise
    ``ValueError`` (NUL) or ``OSError`` (name too long) from deep inside the library.
    """
    file = str(path)
    if "\x00" in file:
        raise InputError(file, key, "a path cannot contain a NUL byte")
    if len(file) > MAX_PATH_CHARS:
        raise InputError(file[:60] + "...", key, f"path of {len(file)} characters is too "
                         f"long (at most {MAX_PATH_CHARS})")
    return file


def read_text_bounded(path: str | Path) -> str:
    """A regular file's UTF-8 text, bounded: the path checked and stat'ed before opening.

    Raises
    ------
    InputError
        Naming the file: a NUL byte or too long a path, not found, not a regular file
        (a directory, FIFO or device), larger than :data:`MAX_READ_BYTES`, unreadable or
        not UTF-8 text.
    """
    import stat

    file = check_path(path)
    try:
        st = os.stat(file)
    except FileNotFoundError:
        raise InputError(file, "", "file not found") from None
    except OSError as exc:
        raise InputError(file, "", f"cannot read: {exc.strerror or exc}") from None
    if not stat.S_ISREG(st.st_mode):
        kind = "a directory" if stat.S_ISDIR(st.st_mode) else "not a regular file"
        raise InputError(file, "", f"cannot read: {kind}")
    if st.st_size > MAX_READ_BYTES:
        raise InputError(file, "", f"file of {st.st_size} bytes is too large "
                         f"(at most {MAX_READ_BYTES})")
    try:
        with open(file, "rb") as fh:
            data = fh.read(MAX_READ_BYTES + 1)
    except OSError as exc:
        raise InputError(file, "", f"cannot read: {exc.strerror or exc}") from None
    if len(data) > MAX_READ_BYTES:
        raise InputError(file, "", f"file larger than {MAX_READ_BYTES} bytes")
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError:
        raise InputError(file, "", "not UTF-8 text") from None
