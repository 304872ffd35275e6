"""The forecast's memory-saving blocks give the same numbers as the whole batch at once
(issue 17: peak memory of a forecast within twice the fleet read). A check of the engine
against itself: the blocks only split work that never looks across series or groups."""

from __future__ import annotations

import pytest

import numpy as np

from logbook.analysis import paths
from logbook.analysis.fit import fit_batch
from logbook.analysis.fleet import pack_fleet
from tests.unit.test_forecast import TODAY, small_fleet


def _batch():
    rates = [4e-4, 6e-4, 9e-4, 2e-3, 3e-4, 5e-4, 7e-4, 1e-3, 8e-4, 2e-4, 6e-4, 4e-4]
    batch = pack_fleet(small_fleet(rates, step_pump=4), TODAY).pack.batch
    return batch, fit_batch(batch).weights.astype(float)


def test_one_step_scores_in_blocks_equal_the_whole_batch():
    batch, w = _batch()
    x, y = np.nan_to_num(batch.x), np.nan_to_num(batch.y, nan=1.0)
    whole = paths.one_step_scores(x, y, w, block=10_000)
    for block in (1, 5, 7):
        split = paths.one_step_scores(x, y, w, block=block)
        assert np.array_equal(split[0], whole[0]) and np.array_equal(split[1], whole[1])


@pytest.mark.slow
def test_calibration_in_blocks_of_whole_groups_equals_the_whole_batch():
    batch, w = _batch()
    args = (batch.x, batch.y, w, batch.limit, batch.direction, batch.group)
    whole = paths.calibrate(*args, block=10_000)
    assert len(np.unique(batch.group[batch.group >= 0])) >= 3 and (whole.n_scores > 0).any()
    for block in (1, 8, 20):
        split = paths.calibrate(*args, block=block)
        for got, want in ((split.fast, whole.fast), (split.slow, whole.slow), (split.n_scores, whole.n_scores)):
            assert np.array_equal(got, want)


def test_group_blocks_keep_groups_whole_and_cover_every_row_once():
    group = np.array([0, 1, 0, 2, -1, 1, 2, 2, -1, 0])
    rows = np.arange(group.size)
    for block in (1, 2, 3, 4, 100):
        blocks = list(paths._group_blocks(rows, group, block))
        assert np.array_equal(np.sort(np.concatenate(blocks)), rows)
        for g in (0, 1, 2):
            holding = [i for i, b in enumerate(blocks) if (group[b] == g).any()]
            assert len(holding) == 1  # a group is never split
        assert all(b.size <= block or len({*group[b]} - {-1}) == 1 for b in blocks)


def test_one_timeline_per_snapshot_shared_and_dropped_with_it():
    import gc
    from dataclasses import replace

    from logbook.analysis.timeline import _SHARED, Timeline

    fleet = small_fleet([4e-4, 6e-4])
    first = Timeline.of(fleet)
    assert Timeline.of(fleet) is first  # the engine, the rounds and fleet life read the same arrays
    other = replace(fleet, readings=fleet.readings[:-1])  # another snapshot: its own timeline
    assert Timeline.of(other) is not first and len(Timeline.of(other).hours) == len(first.hours) - 1
    built = Timeline(fleet.fitments, fleet.readings, fleet.events)
    assert np.array_equal(built.hours, first.hours) and np.array_equal(built.fit, first.fit)
    key = id(other)
    del other
    gc.collect()
    assert key not in _SHARED
