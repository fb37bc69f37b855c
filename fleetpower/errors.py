"""Errors a user can act on.

Every problem with a user's file is raised as :class:`InputError`, which carries the
file, the place in it (a key path such as ``parts.series_capacitance`` or a CSV row and
column) and a one-line message. The CLI prints ``file: place: message`` and exits 2,
never a traceback.
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable


class FleetpowerError(Exception):
    """Base class of all errors fleetpower raises on purpose."""


class InputError(FleetpowerError):
    """A user's input is malformed or out of range.

    Parameters
    ----------
    file : str
        Path of the offending file (or ``"<input>"`` when built in memory).
    where : str
        Key path (``"parts.zener_voltage"``) or ``"row 4, column count"``.
    message : str
        What is wrong, in one line.
    """

    def __init__(self, file: str, where: str, message: str):
        self.file = str(file)
        self.where = str(where)
        self.message = str(message)
        super().__init__(self.one_line())

    def one_line(self) -> str:
        """``file: place: message`` on one line: characters a terminal would not print
        (line breaks, NUL, escapes) that a user's key, value or path holds are shown
        escaped, so the message never spans several lines."""
        place = f"{self.where}: " if self.where else ""
        return printable(f"{self.file}: {place}{self.message}")


def printable(text: str) -> str:
    """``text`` with every non-printable character escaped (``\\x1e``, ``\\u2028``)."""
    if text.isprintable():
        return text
    return "".join(c if c.isprintable() else c.encode("unicode_escape").decode("ascii")
                   for c in text)


class SolverError(FleetpowerError):
    """The periodic steady state could not be found (non-convergence or NaN)."""


def suggest(word: str, choices: Iterable[str]) -> str:
    """Return ``" (did you mean 'x'?)"`` for the closest choice, or ``""``."""
    match = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    return f" (did you mean '{match[0]}'?)" if match else ""
