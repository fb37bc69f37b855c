"""Frozen dataclass instances built fast, for the per-case loops over a batch.

A frozen dataclass's generated ``__init__`` sets every field through
``object.__setattr__``: 6 us for a :class:`~fleetpower.simulate.StateResult`, 4 us for a
:class:`~fleetpower.pq.ieee1459.PowerQuality`, a sixth of a spread case's Python. For a
class without ``__post_init__`` or ``default_factory`` fields, filling the instance's
``__dict__`` from every field's value gives the same object (equal, hashable alike,
``dataclasses.replace`` and pickle work), still frozen to assignment.

Owns: :func:`frozen`. Imports nothing of fleetpower.
"""

from __future__ import annotations

import dataclasses
from functools import cache
from typing import Any


@cache
def _field_names(cls: type) -> frozenset[str]:
    if hasattr(cls, "__post_init__") or any(
            f.default_factory is not dataclasses.MISSING for f in dataclasses.fields(cls)):
        raise TypeError(f"{cls.__name__}: frozen() needs a dataclass without __post_init__ "
                        "or default_factory fields")
    return frozenset(f.name for f in dataclasses.fields(cls))


def frozen(cls: type, values: dict[str, Any]) -> Any:
    """An instance of the frozen dataclass ``cls`` with ``values`` (field name -> value;
    fields left out take their defaults), without its generated ``__init__``.

    Raises
    ------
    TypeError
        On a name that is not a field, or a class this does not suit (see the module).
    """
    names = _field_names(cls)
    if not names.issuperset(values):
        raise TypeError(f"{cls.__name__}: not fields: {sorted(set(values) - names)}")
    obj = object.__new__(cls)
    obj.__dict__.update(values)
    return obj
