"""fleetpower._records.frozen builds the same frozen dataclass instances as their __init__.

Source: the dataclasses module's documented behaviour (Python 3.11 docs, "Frozen
instances": assignment raises FrozenInstanceError; __eq__ compares the fields as a tuple);
the property checked is equality with the generated constructor.
"""

from __future__ import annotations

import dataclasses
import pickle

import pytest

from fleetpower._records import frozen
from fleetpower.pq.ieee1459 import power_quality, power_quality_rows


@dataclasses.dataclass(frozen=True)
class Point:
    x_m: float
    y_m: float = 2.0
    label: str | None = None


@dataclasses.dataclass(frozen=True)
class Checked:
    x_m: float

    def __post_init__(self):  # pragma: no cover - never reached through frozen()
        raise AssertionError


def test_frozen_equals_the_constructor_and_stays_frozen():
    a = frozen(Point, {"x_m": 1.0, "label": "a"})
    b = Point(1.0, label="a")
    assert a == b and hash(a) == hash(b) and repr(a) == repr(b)
    assert a.y_m == 2.0  # a field left out takes its default
    with pytest.raises(dataclasses.FrozenInstanceError):
        a.x_m = 3.0
    assert dataclasses.replace(a, y_m=5.0) == Point(1.0, 5.0, "a")
    assert pickle.loads(pickle.dumps(a)) == b
    assert dataclasses.asdict(a) == dataclasses.asdict(b)


def test_frozen_refuses_what_it_cannot_build_alike():
    with pytest.raises(TypeError, match="not fields"):
        frozen(Point, {"x_m": 1.0, "z_m": 0.0})
    with pytest.raises(TypeError, match="__post_init__"):
        frozen(Checked, {"x_m": 1.0})


def test_batch_power_quality_equals_the_single_case_constructor():
    import numpy as np

    t = np.arange(256) / 256
    v = 325.0 * np.sin(2 * np.pi * t)
    i = np.where(np.sin(2 * np.pi * t) > 0.9, 0.5, 0.0)
    (batch,) = power_quality_rows(v[None], i[None])
    single = power_quality(v, i)
    for f in dataclasses.fields(single):
        a, b = getattr(batch, f.name), getattr(single, f.name)
        assert np.array_equal(a, b) if isinstance(a, np.ndarray) else a == b, f.name
