"""The one TOML reader of fleetpower: a file's text to a dict, or a one-line InputError.

Owns: opening and decoding TOML files (design files, fleet files). May import ``errors``
only; nothing that validates, simulates or evaluates.
"""

from __future__ import annotations

import sys
from pathlib import Path

from ..errors import InputError

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib


def read_toml(path: str | Path) -> dict:
    """Read a TOML file into a dict.

    Raises
    ------
    InputError
        Naming the file: not found, unreadable, not UTF-8 text, or malformed TOML.
    """
    path = Path(path)
    file = str(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError(file, "", "file not found") from None
    except OSError as exc:
        raise InputError(file, "", f"cannot read: {exc.strerror}") from None
    except UnicodeDecodeError:
        raise InputError(file, "", "not UTF-8 text") from None
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(file, "", f"malformed TOML: {exc}") from None
