"""Maze generators against graph theory: spanning trees, their number, uniformity, braiding."""

from __future__ import annotations

import math
from collections import Counter

import networkx as nx
import numpy as np
import pytest

from taskgen.generate.maze import (backtracker_maze, braid, count_spanning_trees, dead_ends, maze_layout,
                                   rooms_maze, wilson_maze)
from taskgen.generate.placement import PlacementError, PlacementRules, place, visible_from


def _graph(passages):
    """The maze as a networkx graph of cells joined by passages."""
    h, w, _ = passages.shape
    layout = maze_layout(passages, 0, [])
    g = nx.Graph()
    g.add_nodes_from(range(h * w))
    g.add_edges_from((u, int(v)) for u, row in enumerate(layout.neighbour) for v in row if v >= 0)
    return g


@pytest.mark.parametrize("generator", [wilson_maze, backtracker_maze])
@pytest.mark.parametrize("h, w", [(1, 1), (1, 6), (4, 4), (7, 11)])
def test_perfect_mazes_are_spanning_trees(generator, h, w):
    """A perfect maze is a spanning tree of the grid graph: connected, cells − 1 passages
    (networkx is_tree)."""
    passages = generator(np.random.default_rng(h * 31 + w), h, w)
    g = _graph(passages)
    assert nx.is_tree(g) and g.number_of_edges() == h * w - 1


def test_passages_are_symmetric():
    """A passage open from one side is open from the other."""
    p = wilson_maze(np.random.default_rng(0), 6, 5)
    assert np.array_equal(p[1:, :, 0], p[:-1, :, 2]) and np.array_equal(p[:, :-1, 1], p[:, 1:, 3])
    assert not p[0, :, 0].any() and not p[:, -1, 1].any() and not p[-1, :, 2].any() and not p[:, 0, 3].any()


# OEIS A007341: number of spanning trees of the n × n grid graph.
A007341 = [1, 4, 192, 100352, 557568000, 32565539635200, 19872369301840986112]


@pytest.mark.parametrize("n", range(1, 8))
def test_maze_count_matches_oeis(n):
    """Kirchhoff's matrix-tree theorem with exact integer elimination gives OEIS A007341."""
    assert count_spanning_trees(n, n) == A007341[n - 1]


def _chi_square_critical(dof: int, z: float = 3.090232) -> float:
    """Upper 0.001 point of chi-square by the Wilson–Hilferty cube-root approximation
    (Wilson & Hilferty, PNAS 1931); z is the standard normal 0.999 quantile."""
    a = 2 / (9 * dof)
    return dof * (1 - a + z * math.sqrt(a)) ** 3


@pytest.mark.parametrize("n, samples", [(2, 4000), (3, 19200)])
def test_uniform_generator_is_uniform(n, samples):
    """Wilson's algorithm draws every perfect maze of the n × n grid equally often: a chi-square
    test over all A007341(n) mazes does not reject at p = 0.001 (Pearson's chi-square)."""
    rng = np.random.default_rng(20261201)
    counts = Counter(wilson_maze(rng, n, n).tobytes() for _ in range(samples))
    total = A007341[n - 1]
    assert len(counts) == total
    expected = samples / total
    statistic = sum((c - expected) ** 2 / expected for c in counts.values())
    assert statistic < _chi_square_critical(total - 1)


@pytest.mark.parametrize("fraction", [0.0, 0.25, 0.5, 0.8, 1.0])
@pytest.mark.parametrize("seed", range(4))
def test_braiding_removes_the_requested_fraction(fraction, seed):
    """Braiding removes round(fraction × dead ends) of them, within one cell."""
    rng = np.random.default_rng(seed)
    maze = wilson_maze(rng, 9, 9)
    before = dead_ends(maze).size
    after = dead_ends(braid(rng, maze, fraction)).size
    assert abs((before - after) - fraction * before) <= 1
    assert nx.is_connected(_graph(braid(rng, maze, fraction)))


def test_braided_maze_has_loops():
    """Opening walls in a tree makes cycles: passages − cells + 1 loops (cyclomatic number)."""
    rng = np.random.default_rng(1)
    g = _graph(braid(rng, wilson_maze(rng, 8, 8), 1.0))
    assert g.number_of_edges() - g.number_of_nodes() + 1 == len(nx.cycle_basis(g)) > 0


def test_rooms_are_open_and_joined_like_a_tree():
    """Rooms are fully open inside; contracting each room leaves a tree of rooms (networkx)."""
    passages = rooms_maze(np.random.default_rng(3), 6, 9, 3)
    g = _graph(passages)
    assert nx.is_connected(g)
    room = {u: (u // 9 // 3, u % 9 // 3) for u in g}
    quotient = nx.quotient_graph(g, lambda a, b: room[a] == room[b])
    assert nx.is_tree(quotient) and quotient.number_of_nodes() == 6
    with pytest.raises(ValueError, match="divisible by the room size 3"):
        rooms_maze(np.random.default_rng(0), 5, 9, 3)


def test_placement_meets_every_rule():
    """Goals are dead ends, far enough from the start and from each other, out of sight."""
    rng = np.random.default_rng(4)
    layout = maze_layout(wilson_maze(rng, 9, 9), 0, [])
    rules = PlacementRules(start="corner", goals=3, goals_in_dead_ends=True, goals_hidden_from_start=True,
                           min_start_distance=5, min_goal_spacing=3, cue_site="random")
    start, goals, site = place(rng, layout.neighbour, (9, 9), rules)
    g = nx.Graph()
    g.add_edges_from((u, int(v)) for u, row in enumerate(layout.neighbour) for v in row if v >= 0)
    assert start in (0, 8, 72, 80)
    seen = visible_from(layout.neighbour, start)
    for goal in goals:
        assert g.degree(goal) == 1 and not seen[goal]
        assert nx.shortest_path_length(g, start, goal) >= 5
    for a in goals:
        for b in goals:
            assert a == b or nx.shortest_path_length(g, a, b) >= 3
    assert site not in goals and site != start


def test_impossible_placement_says_which_rule_failed():
    """Asking for more dead-end goals than a layout has names the rules and the count."""
    layout = maze_layout(wilson_maze(np.random.default_rng(0), 2, 2), 0, [])
    with pytest.raises(PlacementError, match=r"only \d of 5 goal cells can be at least 1 steps from the start, "
                                             r"in a dead end"):
        place(np.random.default_rng(0), layout.neighbour, (2, 2), PlacementRules(goals=5, goals_in_dead_ends=True))
