"""Pictures for people (``render()``, ``ground_truth()``, galleries), never observations.

The ground truth shows what the agent may not see: the true cue and the goals it names, or a
field's hidden path and its end. Only these pictures draw the path.
"""

from __future__ import annotations

import numpy as np
from PIL import Image, ImageDraw

from ..generate.paths import GOAL, OFF
from ..model import PathRule, TaskModel
from .palette import AGENT, PATH, PATH_END
from .topdown import TopDownRenderer


def truth_picture(renderer: TopDownRenderer, model: TaskModel, state: int) -> np.ndarray:
    """uint8[H, W, 3]: the whole map with the agent at ``state`` of the model and, in a cue task, the
    lamp lit in the colour of the true cue's value being shown (its first value while none is) and
    the goals the true cue (a sequence of values) names outlined."""
    frame = renderer.frame(int(model.obs_key[state]))
    sequence = cue_sequence(model, state)
    if not sequence:
        return frame
    shown = int(model.shown_cue()[model.obs_key[state]])
    renderer.light(frame, shown if shown >= 0 else sequence[0])
    picture = Image.fromarray(frame)
    draw = ImageDraw.Draw(picture)
    goals = model.layout.sites.get("goal", np.zeros(0, dtype=np.int64))
    for value in sequence:
        if value < len(goals):
            r, c = model.layout.cells[goals[value]]
            left, top, right, bottom = renderer.box(int(r), int(c))
            draw.rectangle((left - 1, top - 1, right + 1, bottom + 1), outline=AGENT, width=2)
    return np.asarray(picture, dtype=np.uint8)


def cue_sequence(model: TaskModel, state: int) -> list[int]:
    """The true cue at ``state``: its values in the order they are shown."""
    if model.cue is None:
        return []
    h, k = int(model.value[state]), model.cue.values
    return [(h // k ** j) % k for j in range(model.cue.sequence_length)]


class PathPictures:
    """Larger top-down pictures of a field for people (render(), galleries): the agent's view
    (agent and marks) or the ground truth (the path and its end drawn as well)."""

    def __init__(self, model: TaskModel, cell_px: int = 12) -> None:
        if model.paths is None:
            raise ValueError(f"{model.variant_id} is not a model of hidden paths")
        self.model: TaskModel = model
        self.rule: PathRule = model.paths
        self.renderer = TopDownRenderer(model, cell_px)
        self.px = cell_px

    def _cell_box(self, cell: int, inset: int) -> tuple[int, int, int, int]:
        r, c = self.model.layout.cells[cell]
        left, top, right, bottom = self.renderer.box(int(r), int(c))
        return left + inset, top + inset, right - inset, bottom - inset

    def agent(self, agent_cell: int, marked: np.ndarray) -> np.ndarray:
        """uint8[H, W, 3]: what the agent's view shows, drawn larger: no path."""
        return self._draw(None, agent_cell, marked)

    def truth(self, kind: np.ndarray, agent_cell: int, marked: np.ndarray) -> np.ndarray:
        """uint8[H, W, 3]: the ground truth, path and its end included (never an observation)."""
        return self._draw(kind, agent_cell, marked)

    def _draw(self, kind: np.ndarray | None, agent_cell: int, marked: np.ndarray) -> np.ndarray:
        image = Image.fromarray(self.renderer.background.copy())
        draw = ImageDraw.Draw(image)
        inset = max(1, self.px // 6)
        if kind is not None:
            for cell in np.flatnonzero(kind != OFF):
                draw.rectangle(self._cell_box(int(cell), inset), fill=PATH_END if kind[cell] == GOAL else PATH)
        for cell in np.flatnonzero(marked):   # a ring, as in the agent's pixels (the path stays visible inside)
            draw.ellipse(self._cell_box(int(cell), inset), outline=self.rule.mark_colour, width=max(1, self.px // 5))
        draw.ellipse(self._cell_box(agent_cell, max(1, self.px // 4)), fill=AGENT)
        return np.asarray(image, dtype=np.uint8)
