"""Counter-based streams: a column drawn alone and a single env's draw block equal the full draws."""

from __future__ import annotations

import numpy as np

from taskgen.envs.streams import DrawBlock, subkeys, uniform, uniform_column


def test_a_column_drawn_alone_equals_that_column_of_the_full_draw():
    """uniform_column(keys, step, j) is column j of uniform(keys, step, width) for any width > j,
    so a consumer may draw later columns only for the rows that need them (common practice:
    counter-based generators are random access, Salmon et al., SC 2011)."""
    keys = subkeys(np.arange(1, 200, dtype=np.uint64), "distractor")
    step = np.arange(199) % 13
    full = uniform(keys, step, 6)
    for j in range(6):
        assert np.array_equal(uniform_column(keys, step, j), full[:, j])
        assert np.array_equal(uniform_column(keys, step, j), uniform(keys, step, j + 1)[:, j])


def test_a_draw_block_equals_the_step_by_step_draws_across_block_edges():
    """A single env's DrawBlock gives uniform(key, t, width) at every step t, across the edges of its
    growing blocks and after a new episode begins (common practice)."""
    block = DrawBlock(3)
    for episode in (5, 9):
        key = subkeys(np.array([episode], dtype=np.uint64), "distractor")
        block.begin(key)
        for t in range(600):
            assert block.at(t) == uniform(key, t, 3)[0].tolist(), (episode, t)
