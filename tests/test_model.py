"""Compiled tables: structure, reachability and shortest solutions against networkx."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest

from taskgen.analysis import shortest_solutions
from taskgen.model import distances_from, reachable

from conftest import corridor_model


def _graph(model):
    """The model's transition graph as a networkx DiGraph."""
    g = nx.DiGraph()
    g.add_nodes_from(range(model.num_states))
    g.add_edges_from((s, int(t)) for s, row in enumerate(model.next_state) for t in row)
    return g


@pytest.mark.parametrize("length, arm_length, k, n", [(0, 1, 2, 1), (4, 2, 3, 2), (7, 3, 5, 4)])
def test_shortest_solutions_match_networkx(length, arm_length, k, n):
    """Breadth-first shortest solutions equal networkx's shortest path lengths (networkx)."""
    model = corridor_model(length=length, arm_length=arm_length, values=k, visible_steps=n)
    g = _graph(model)
    ours = shortest_solutions(model)
    for s in model.initial_states():
        lengths = nx.single_source_shortest_path_length(g, int(s))
        best = min(d for t, d in lengths.items() if model.success[t])
        assert ours[int(model.value[s])] == best
        dist = distances_from(model.next_state, int(s))
        assert all(dist[t] == d for t, d in lengths.items())


def test_every_state_is_reachable_from_reset():
    """Compilation keeps only states reachable from a reset state (networkx descendants)."""
    model = corridor_model(length=5, values=3, visible_steps=3)
    g = _graph(model)
    seen = set()
    for s in model.initial_states():
        seen |= nx.descendants(g, int(s)) | {int(s)}
    assert seen == set(range(model.num_states))
    assert reachable(model.next_state, model.initial_states()).all()


def test_layout_is_a_tree_with_k_dead_end_arms():
    """The corridor's cell graph is a tree whose leaves are the start and the k arm ends
    (networkx is_tree)."""
    model = corridor_model(length=4, arm_length=2, values=4)
    layout = model.layout
    g = nx.Graph()
    g.add_nodes_from(range(layout.num_cells))
    g.add_edges_from((c, int(n)) for c, row in enumerate(layout.neighbour) for n in row if n >= 0)
    assert nx.is_tree(g)
    leaves = {c for c in g if g.degree(c) == 1}
    assert leaves == {layout.start, *map(int, layout.sites["goal"])}


def test_tables_are_consistent():
    """Terminal states absorb for free; success is terminal; the reset distribution is the prior."""
    model = corridor_model(length=3, values=3, rewards={"step": -0.5})
    term = np.flatnonzero(model.terminal)
    assert (model.next_state[term] == term[:, None]).all()
    assert (model.reward[term] == 0).all()
    assert not (model.success & ~model.terminal).any()
    assert model.initial.sum() == pytest.approx(1.0)
    assert np.allclose(model.initial[model.initial_states()], 1 / 3)
    assert (model.value[model.success] == np.searchsorted(model.layout.sites["goal"],
                                                           model.cell[model.success])).all()


def test_observation_keys_hide_the_cue_after_the_window():
    """States past the display window that differ only in the cue share one observation key."""
    model = corridor_model(length=5, values=3, visible_steps=2)
    late = model.cue.timer >= 2
    for b in np.unique(model.cue.blind_state[late]):
        members = np.flatnonzero(model.cue.blind_state == b)
        assert np.unique(model.obs_key[members]).size == 1
    early = np.flatnonzero(model.cue.timer < 2)
    assert (model.cue.key_value[model.obs_key[early]] == model.value[early]).all()


def test_auto_step_limit_is_factor_times_longest_solution():
    """max_steps: auto gives ceil(factor × longest shortest solution) (the spec's definition)."""
    model = corridor_model(length=4, arm_length=1, values=3, episode={"max_steps_factor": 2.5})
    assert model.horizon == int(np.ceil(2.5 * max(shortest_solutions(model).values())))
