"""Writing files: every file fleetpower writes goes through :func:`write_atomic`.

Owns: atomic writes (a temporary file in the same folder, flushed to disk, then renamed
over the target, so a reader sees the old complete file or the new complete file, never a
part), the refusal to overwrite a file without ``--force`` (:func:`check_writable`), and
the bounded reading of a user's file (:func:`read_text_bounded`). May import ``errors``
only.
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Callable, Iterable
from pathlib import Path
from typing import BinaryIO

from ..errors import InputError

#: Infix of a temporary file's name: ``.<name>.fleetpower-tmp-<random>`` beside the target.
#: A run that is killed (SIGKILL, power loss) mid-write can leave one behind; its name says
#: what it is, and it can be deleted. A Ctrl-C or any error removes it.
TMP_INFIX = ".fleetpower-tmp-"

#: The one-line refusal to overwrite (README "Files written")
EXISTS = "exists; use --force to overwrite it"


def temp_prefix(path: str | Path) -> str:
    """Name prefix of the temporary files written for ``path`` (``.<name>.fleetpower-tmp-``)."""
    return f".{Path(path).name}{TMP_INFIX}"


def check_writable(paths: Iterable[str | Path], force: bool, option: str = "") -> None:
    """Refuse, naming the first one, a target that exists when ``force`` is false.

    Called before the expensive work (fail fast) and again before writing a set of files,
    so that either none or all of a verb's files are written; :func:`write_atomic` checks
    once more as it commits. A target that is a folder is refused even with ``force``.

    Raises
    ------
    InputError
        ``<path>: <option>: exists; use --force to overwrite it`` (exit 2).
    """
    for p in paths:
        file = check_path(p, option)
        if os.path.isdir(file):
            raise InputError(file, option, "is a folder, not a file")
        if not force and os.path.lexists(file):
            raise InputError(file, option, EXISTS)


def _write_all(fh: BinaryIO, data: str | bytes | Callable[[BinaryIO], None]) -> None:
    """Write ``data`` (text as UTF-8, bytes as they are, or a writer called with ``fh``)."""
    if callable(data):
        data(fh)
    else:
        fh.write(data.encode("utf-8") if isinstance(data, str) else data)


def _sync_folder(folder: Path) -> None:
    """Flush the folder's entry of the renamed file to disk (best effort: not every
    platform or file system lets a folder be opened or synced)."""
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def _commit(tmp: str, path: Path, overwrite: bool, option: str) -> None:
    """Put the finished temporary file ``tmp`` in place of ``path``.

    With ``overwrite`` a rename (``os.replace``, atomic on POSIX and Windows). Without it a
    hard link, which fails when the target exists (no window in which another writer's
    file could be replaced); where the file system has no hard links, a check and a rename.
    """
    if overwrite:
        os.replace(tmp, path)
        return
    try:
        os.link(tmp, path)
    except FileExistsError:
        raise InputError(str(path), option, EXISTS) from None
    except OSError:  # no hard links here (some network or FAT file systems)
        if os.path.lexists(path):
            raise InputError(str(path), option, EXISTS) from None
        os.replace(tmp, path)
        return
    os.unlink(tmp)


def _current_umask() -> int:
    """The process's file-creation mask, read without changing it where the system says
    it (Linux: ``/proc/self/status``, since kernel 4.7); else by setting and restoring it,
    which another thread creating a file in between would see (the command line writes
    from one thread)."""
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError):
        pass
    umask = os.umask(0)
    os.umask(umask)
    return umask


def write_atomic(path: str | Path, data: str | bytes | Callable[[BinaryIO], None], *,
                 overwrite: bool = True, option: str = "") -> None:
    """Write ``data`` to ``path`` atomically: never a half-written file.

    The data go to a temporary file ``.<name>.fleetpower-tmp-<random>`` in the target's
    folder, are flushed to disk (``fsync``), and the file is renamed over the target.
    On any exception, a ``KeyboardInterrupt`` included, the temporary file is removed and
    the target is untouched (absent, or the old complete file).

    Parameters
    ----------
    path : str or Path
        Target file; missing parent folders are made.
    data : str, bytes or callable
        Text (written as UTF-8, line ends as given), bytes, or a function writing to the
        binary file object it is handed (e.g. ``lambda fh: fig.savefig(fh, format="png")``).
    overwrite : bool
        Replace an existing target (the CLI's ``--force``); when false an existing target
        is refused with :class:`InputError` and left as it was.
    option : str
        The command-line option naming the target, for the error's place.

    Raises
    ------
    InputError
        The target exists (without ``overwrite``), or the folder cannot be made or
        written (naming the path).
    """
    path = Path(check_path(path, option))
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(str(path), option, f"cannot write: {exc.strerror or exc}") from None
    if not overwrite and os.path.lexists(path):  # fail before writing anything
        raise InputError(str(path), option, EXISTS)
    tmp = None
    try:
        fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=temp_prefix(path))
        umask = _current_umask()
        with os.fdopen(fd, "wb") as fh:
            os.fchmod(fh.fileno(), 0o666 & ~umask)  # mkstemp makes 0600; match open()
            _write_all(fh, data)
            fh.flush()
            os.fsync(fh.fileno())
        _commit(tmp, path, overwrite, option)
        tmp = None
        _sync_folder(path.parent)
    except BaseException as exc:
        if tmp is not None and os.path.lexists(tmp):
            os.unlink(tmp)
        if isinstance(exc, OSError):
            raise InputError(str(path), option,
                             f"cannot write: {exc.strerror or exc}") from None
        raise


#: Longest path read [characters] and largest file read [bytes] (README "Input bounds")
MAX_PATH_CHARS = 1024
MAX_READ_BYTES = 4 * 1024 * 1024
#: Largest inventory CSV read [bytes]: a fleet of 10^5 groups with 24-hour profiles takes
#: about 16 MB; twice that is still evaluated well within a minute (README "Input bounds")
MAX_INVENTORY_BYTES = 32 * 1024 * 1024
#: Largest capture or harmonic table read [bytes]: a scope's export of 10 mains cycles at
#: 100 kS/s is about 1 MB (20,000 rows of ~30 bytes); 64 MiB leaves room for about two
#: million rows (README "Input bounds")
MAX_CAPTURE_BYTES = 64 * 1024 * 1024


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


def read_bytes_bounded(path: str | Path, max_bytes: int | None = None) -> bytes:
    """A regular file's bytes, bounded: the path checked and stat'ed before opening, at
    most ``max_bytes`` read (default :data:`MAX_READ_BYTES`).

    Raises
    ------
    InputError
        Naming the file: a NUL byte or too long a path, not found, not a regular file
        (a directory, FIFO or device), larger than the bound, or unreadable.
    """
    import stat

    file = check_path(path)
    limit = MAX_READ_BYTES if max_bytes is None else int(max_bytes)
    try:
        st = os.stat(file)
    except FileNotFoundError:
        raise InputError(file, "", "file not found") from None
    except OSError as exc:
        raise InputError(file, "", f"cannot read: {exc.strerror or exc}") from None
    if not stat.S_ISREG(st.st_mode):
        kind = "a directory" if stat.S_ISDIR(st.st_mode) else "not a regular file"
        raise InputError(file, "", f"cannot read: {kind}")
    if st.st_size > limit:
        raise InputError(file, "", f"file of {st.st_size} bytes is too large "
                         f"(at most {limit})")
    try:
        with open(file, "rb") as fh:
            data = fh.read(limit + 1)
    except OSError as exc:
        raise InputError(file, "", f"cannot read: {exc.strerror or exc}") from None
    if len(data) > limit:
        raise InputError(file, "", f"file larger than {limit} bytes")
    return data


def read_text_bounded(path: str | Path, max_bytes: int | None = None) -> str:
    """A regular file's UTF-8 text, bounded (:func:`read_bytes_bounded`).

    Raises
    ------
    InputError
        Naming the file: as :func:`read_bytes_bounded`, or not UTF-8 text.
    """
    data = read_bytes_bounded(path, max_bytes)
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError:
        raise InputError(str(path), "", "not UTF-8 text") from None
