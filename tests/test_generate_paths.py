"""Hidden paths: connected from start to end, with the requested turns and width, on every side."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest

from taskgen.generate.paths import GOAL, OFF, FieldFrame, PathShape, count_turns, draw_paths, path_signature

SHAPES = [PathShape(5, 3, 0, 1, "middle"), PathShape(6, 5, 1), PathShape(6, 5, 2), PathShape(7, 6, 3),
          PathShape(9, 7, 6), PathShape(8, 7, 4, 2), PathShape(6, 8, 3, 3), PathShape(2, 2, 1)]


def _draw(shape: PathShape, n: int = 300, seed: int = 0):
    return draw_paths(shape, np.random.default_rng(seed).random((n, shape.draws)))


@pytest.mark.parametrize("shape", SHAPES, ids=str)
def test_every_path_joins_start_to_end_on_its_own_cells(shape):
    """The path's cells, as a subgraph of the 4-connected grid, hold a path from the start cell
    to every end cell (networkx grid_2d_graph and has_path); the start is on the first row and
    the end on the last."""
    drawn = _draw(shape)
    grid = nx.grid_2d_graph(shape.depth, shape.across)
    for i in range(drawn.kind.shape[0]):
        on = nx.subgraph(grid, [tuple(c) for c in np.argwhere(drawn.kind[i] != OFF)])
        ends = [tuple(c) for c in np.argwhere(drawn.kind[i] == GOAL)]
        start = tuple(int(v) for v in drawn.start[i])
        assert start[0] == 0 and drawn.kind[i][start] != OFF
        assert len(ends) == shape.width and all(e[0] == shape.depth - 1 for e in ends)
        assert all(nx.has_path(on, start, e) for e in ends), i


@pytest.mark.parametrize("shape", SHAPES, ids=str)
def test_centre_lines_have_the_requested_turns_and_never_cross(shape):
    """Every centre line changes direction exactly ``turns`` times, moves one cell at a time,
    visits no cell twice and never moves back toward the start side (common practice)."""
    drawn = _draw(shape)
    for i in range(drawn.kind.shape[0]):
        line = drawn.centre[i, :drawn.length[i]]
        steps = np.diff(line, axis=0)
        assert (np.abs(steps).sum(axis=1) == 1).all()
        assert (steps[:, 0] >= 0).all()
        assert len({tuple(c) for c in line}) == len(line)
        assert count_turns(drawn.centre[i], int(drawn.length[i])) == shape.turns
        assert tuple(line[0]) == tuple(drawn.start[i])


def test_width_covers_the_cells_beside_the_centre_line():
    """A path w wide covers, on every row it crosses, w cells side by side (common practice)."""
    shape = PathShape(7, 8, 0, 3, "random")
    drawn = _draw(shape)
    assert ((drawn.kind != OFF).sum(axis=2) == 3).all()


def test_middle_start_and_uniform_random_start():
    """'middle' always starts in the middle column; 'random' starts in every column about equally
    often: Pearson's chi-squared against the uniform law stays below 18.47, the 0.999 quantile
    of chi-squared with 4 degrees of freedom (from memory)."""
    assert (_draw(PathShape(5, 5, 0, 1, "middle")).start[:, 1] == 2).all()
    counts = np.bincount(_draw(PathShape(5, 5, 0), n=5000).start[:, 1], minlength=5)
    chi2 = ((counts - 1000) ** 2 / 1000).sum()
    assert chi2 < 18.47


def test_impossible_shapes_say_why():
    """A shape that cannot fit its field is refused with the reason (common practice)."""
    assert "forward runs" in PathShape(3, 5, 4).problem()
    assert "2 rows" in PathShape(1, 5, 0).problem()
    assert "more than 1 columns" in PathShape(5, 1, 1).problem()
    with pytest.raises(ValueError, match="does not fit"):
        draw_paths(PathShape(5, 2, 0, 3), np.zeros((1, 5)))


@pytest.mark.parametrize("side", ["north", "east", "south", "west"])
def test_frames_put_the_start_on_the_start_side_and_the_end_opposite(side):
    """Mapped onto a 4×6 field, starts lie on the named side and ends on the opposite one (common practice)."""
    frame = FieldFrame(4, 6, side)
    shape = PathShape(frame.depth, frame.across, 2)
    kind, start = frame.to_field(_draw(shape, n=50))
    rows, cols = np.divmod(start, 6)
    ends = np.argwhere(kind == GOAL)[:, 1]
    end_rows, end_cols = np.divmod(ends, 6)
    expect = {"north": (rows == 0, end_rows == 3), "south": (rows == 3, end_rows == 0),
              "west": (cols == 0, end_cols == 5), "east": (cols == 5, end_cols == 0)}[side]
    assert expect[0].all() and expect[1].all()
    assert sorted(frame.cell_index().ravel()) == list(range(24))


@pytest.mark.parametrize("generator", ["uniform", "backtracker", "rooms"])
def test_paths_through_walls_are_shortest_ways_along_the_passages(generator):
    """In a walled field every banked path runs along passages from its start (start side) to
    its end (far side) and is a shortest way there: its cells − 1 equal networkx's shortest path
    length in the passage graph (networkx shortest_path_length)."""
    import yaml
    import taskgen
    spec = taskgen.load_spec_text(yaml.safe_dump({"format_version": 1, "name": "walls", "layout": {"field": {
        "width": 6, "height": 6, "maze": {"generator": generator, "braid": 0.3}}}}))
    model = taskgen.build_model(spec, variant=2).paths
    passages = nx.Graph((c, int(n)) for c, row in enumerate(model.layout.neighbour) for n in row if n >= 0)
    index = model.frame.cell_index()
    assert model.bank_kind.shape == (36, 36)
    for kind, start in zip(model.bank_kind, model.bank_start):
        end = int(np.flatnonzero(kind == GOAL)[0])
        cells = np.flatnonzero(kind != OFF)
        assert start in index[0] and end in index[-1]
        on = passages.subgraph(cells.tolist() + [int(start)])
        assert nx.has_path(on, int(start), end)
        assert cells.size - 1 == nx.shortest_path_length(passages, int(start), end)


@pytest.mark.parametrize("shape", SHAPES, ids=str)
def test_the_cells_are_the_centre_line_with_its_width(shape):
    """The path's cells are exactly the centre line's cells widened by the brush (w − 1 columns
    beside, w − 1 rows behind), so the line the turn counts come from and the cells the agent
    walks on cannot disagree (common practice)."""
    drawn = _draw(shape, n=100)
    w = shape.width
    for i in range(100):
        brushed = np.zeros((shape.depth, shape.across), dtype=bool)
        for r, c in drawn.centre[i, :drawn.length[i]]:
            brushed[max(0, r - w + 1):r + 1, c:c + w] = True
        assert np.array_equal(brushed, drawn.kind[i] != OFF), i


@pytest.mark.parametrize("shape", [PathShape(depth=7, across=5, turns=3), PathShape(depth=9, across=6, turns=4, width=2),
                                   PathShape(depth=6, across=5, turns=3, start="middle")],
                         ids=["odd turns", "wide", "middle start"])
def test_a_path_signature_decides_the_path(shape):
    """Uniform rows with the same signature draw the same path and rows whose paths differ have
    different signatures, over 3,000 draws (common practice: a memo key is sound and complete)."""
    u = np.random.default_rng(12).random((3000, shape.draws))
    drawn = draw_paths(shape, u, centre=False)
    by_signature: dict = {}
    for row, kind in zip(u, drawn.kind):
        key = path_signature(shape, row.tolist())
        if key in by_signature:
            assert np.array_equal(by_signature[key], kind), key
        by_signature[key] = kind
    paths = {kind.tobytes() for kind in drawn.kind}
    assert len(paths) == len(by_signature) > 10


@pytest.mark.parametrize("shape", [PathShape(depth=7, across=5, turns=3), PathShape(depth=9, across=6, turns=4, width=2),
                                   PathShape(depth=6, across=5, turns=3, start="middle"),
                                   PathShape(depth=5, across=4, turns=0), PathShape(depth=2, across=3, turns=1)],
                         ids=["odd turns", "wide", "middle start", "straight", "two rows"])
def test_a_bank_row_is_the_path_draw_paths_draws(shape):
    """For 2,000 rows of uniforms (and rows at the edges of [0, 1)), the open-field bank's row holds
    the kind and start draw_paths gives, and the bank holds as many distinct paths as it has rows
    (common practice: a lookup table checked against the function it tabulates)."""
    from taskgen.generate.paths import open_bank
    bank = open_bank(shape)
    assert bank is not None
    u = np.random.default_rng(6).random((2000, shape.draws))
    u[0], u[1] = 0.0, np.nextafter(1.0, 0.0)
    drawn = draw_paths(shape, u, centre=False)
    row = bank.index(shape, u)
    assert np.array_equal(bank.drawn.kind[row], drawn.kind) and np.array_equal(bank.drawn.start[row], drawn.start)
    assert len({kind.tobytes() for kind in bank.drawn.kind}) == bank.drawn.kind.shape[0]


def test_a_shape_with_too_many_paths_has_no_bank():
    """A 31-row field with 10 turns has far more than BANK_PATHS paths: no bank, draw_paths draws."""
    from taskgen.generate.paths import open_bank
    assert open_bank(PathShape(depth=31, across=31, turns=10)) is None
