"""The one TOML reader of fleetpower: a file's text to a dict, or a one-line InputError.

Owns: opening and decoding TOML files (design files, fleet files). May import ``errors``
only; nothing that validates, simulates or evaluates.
"""

from __future__ import annotations

import sys
from pathlib import Path

from ..errors import InputError
from .files import read_text_bounded

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
    file = str(path)
    text = read_text_bounded(path)
    if _nesting_depth(text) > MAX_NESTING:
        raise InputError(file, "", f"arrays or tables nested deeper than {MAX_NESTING} levels")
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(file, "", f"malformed TOML: {exc}") from None
    except RecursionError:
        raise InputError(file, "", f"nested deeper than {MAX_NESTING} levels") from None


#: Deepest nesting of arrays and inline tables read (README "Input bounds")
MAX_NESTING = 32


def _nesting_depth(text: str) -> int:
    """Deepest ``[``/``{`` nesting in ``text``, outside strings and comments (a bound
    checked before tomllib, whose recursive parser fails on deep nesting)."""
    depth = deepest = 0
    quote = ""
    i, n = 0, len(text)
    while i < n:
        c = text[i]
        if quote:
            if c == "\\" and quote == '"':
                i += 2
                continue
            if c == quote:
                quote = ""
        elif c in "\"'":
            quote = c
        elif c == "#":
            j = text.find("\n", i)
            i = n if j < 0 else j
            continue
        elif c in "[{":
            depth += 1
            deepest = max(deepest, depth)
        elif c in "]}":
            depth = max(0, depth - 1)
        i += 1
    return deepest
