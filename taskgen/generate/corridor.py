"""The cue-recall corridor: a straight hall to a junction spine with one dead-end arm per cue value."""

from __future__ import annotations

from .grid import GridLayout, grid_from_cells


def corridor_layout(length: int, arm_length: int, num_arms: int, width: int = 1) -> GridLayout:
    """Lay out a corridor (pure function of its numbers).

    The hall runs east along the middle row from the start to the junction, ``length`` steps,
    and is ``width`` lanes wide (extra lanes lie south of the middle row; the start stays in it).
    A north-south spine through the junction spans rows 0 … 2(k−1); arm i leaves the spine
    eastwards at row 2i and runs ``arm_length`` cells to its end. With two arms this is a
    T-maze whose arms turn east; every arm end is a dead end, so arms are told apart only by
    where they are.
    """
    if length < 0 or arm_length < 1 or num_arms < 1 or width < 1:
        raise ValueError("corridor needs length ≥ 0, arm_length ≥ 1, arms ≥ 1, width ≥ 1; "
                         f"got {length}, {arm_length}, {num_arms}, {width}")
    middle = num_arms - 1
    rows, cols = max(2 * num_arms - 1, middle + width), length + arm_length + 1
    hall = [(middle + lane, c) for lane in range(width) for c in range(length)]
    spine = [(r, length) for r in range(2 * num_arms - 1)]
    arms = [[(2 * i, length + j) for j in range(1, arm_length + 1)] for i in range(num_arms)]
    cells = hall + spine + [cell for arm in arms for cell in arm]
    return grid_from_cells(
        (rows, cols), cells, start=(middle, 0),
        sites={"junction": [(middle, length)], "goal": [arm[-1] for arm in arms], "cue_site": [(middle, 0)]},
    )
