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
