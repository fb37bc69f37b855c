"""The collector during a batch (fleetpower._heap): old objects frozen, and only for it.

Checked against CPython's documented gc API (gc.freeze, gc.unfreeze, gc.get_freeze_count,
https://docs.python.org/3/library/gc.html); no figure of the trade involved.
"""

import gc
import weakref

from fleetpower._heap import frozen_during, old_objects_frozen


class _Node:
    pass


def test_frozen_inside_and_unfrozen_after():
    assert gc.get_freeze_count() == 0
    with old_objects_frozen():
        assert gc.get_freeze_count() > 0
    assert gc.get_freeze_count() == 0


def test_nested_block_leaves_the_outer_freeze():
    with old_objects_frozen():
        with old_objects_frozen():
            pass
        assert gc.get_freeze_count() > 0  # the inner block did not unfreeze
    assert gc.get_freeze_count() == 0


def test_a_process_freeze_is_left_alone():
    gc.freeze()
    try:
        before = gc.get_freeze_count()
        with old_objects_frozen():
            pass
        assert gc.get_freeze_count() == before  # not unfrozen by the block
    finally:
        gc.unfreeze()


def test_disabled_collector_is_not_touched():
    gc.disable()
    try:
        with old_objects_frozen():
            assert gc.get_freeze_count() == 0
    finally:
        gc.enable()


def test_unfrozen_after_an_exception():
    try:
        with old_objects_frozen():
            raise KeyError("x")
    except KeyError:
        pass
    assert gc.get_freeze_count() == 0


def test_cycles_made_during_the_block_are_collected():
    @frozen_during
    def batch():
        a, b = _Node(), _Node()
        a.other, b.other = b, a  # a reference cycle: only the collector frees it
        return weakref.ref(a)

    ref = batch()
    gc.collect()
    assert ref() is None
    assert gc.get_freeze_count() == 0
    assert batch.__name__ == "batch"  # wrapped, name kept (pickled by name for Dask)
