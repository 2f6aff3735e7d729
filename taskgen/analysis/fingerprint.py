"""A layout fingerprint: a hash of the compiled model that ignores how its states are numbered.

The layout enters in reading order (cells by row and column, their passages and named sites),
and the states are relabelled canonically by a breadth-first walk from the reset states (taken
in cue-value order), visiting successors in action order. So two equal layouts with equal task
settings hash alike however they were generated or numbered, and any difference in the layout
(even behind a goal the agent never passes), dynamics, rewards, observations, cue or step limit
changes the hash.
"""

from __future__ import annotations

import hashlib

import numpy as np

from ..errors import AnalysisError
from ..model import TaskModel


def canonical_labels(model: TaskModel) -> np.ndarray:
    """int[S]: each state's canonical number (unreachable states, if any, get −1)."""
    label = -np.ones(model.num_states, dtype=np.int64)
    roots = model.initial_states()
    roots = roots[np.lexsort((roots, model.value[roots]))]
    label[roots] = np.arange(roots.size)
    count, frontier = roots.size, roots
    while frontier.size:
        successors = model.next_state[frontier].ravel()          # frontier order, then action order
        fresh = successors[label[successors] < 0]
        _, first = np.unique(fresh, return_index=True)
        fresh = fresh[np.sort(first)]
        label[fresh] = np.arange(count, count + fresh.size)
        count += fresh.size
        frontier = fresh
    return label


def fingerprint(model: TaskModel) -> str:
    """sha256 (hex) of a cue task's model in canonical state order (a field's variant is its path
    rule's :meth:`~taskgen.model.PathRule.digest`: its paths are drawn per episode)."""
    if model.cue is None:
        raise AnalysisError(f"{model.variant_id}: only a model with every hidden value in its tables has a "
                            "canonical fingerprint")
    cue = model.cue
    label = canonical_labels(model)
    order = np.argsort(label)[np.sort(label) >= 0]
    cells = model.layout.cells[model.key_cell[model.obs_key[order]]]
    layout = model.layout
    by_place = np.lexsort((layout.cells[:, 1], layout.cells[:, 0]))     # cells in reading order
    place = np.empty_like(by_place)
    place[by_place] = np.arange(by_place.size)
    moves = np.where(layout.neighbour[by_place] >= 0, place[np.maximum(layout.neighbour[by_place], 0)], -1)
    sites = [np.asarray([place[layout.start]], dtype="<i8")]
    sites += [place[np.asarray(layout.sites[name])].astype("<i8") for name in sorted(layout.sites)]
    parts = [
        np.asarray(model.layout.shape, dtype="<i8"),
        layout.cells[by_place].astype("<i8"), moves.astype("<i8"), *sites,
        np.asarray([model.horizon, model.num_actions, model.hidden.count], dtype="<i8"),
        np.asarray([model.discount, model.timeout_reward], dtype="<f8"),
        label[model.next_state[order]].astype("<i8"),
        model.reward[order].astype("<f8"),
        model.terminal[order].astype("u1"),
        model.success[order].astype("u1"),
        model.initial[order].astype("<f8"),
        model.value[order].astype("<i8"),
        cells.astype("<i8"),
        cue.key_value[model.obs_key[order]].astype("<i8"),
        cue.window[order].astype("u1"),
    ]
    h = hashlib.sha256()
    for part in parts:
        h.update(np.ascontiguousarray(part).tobytes())
        h.update(b"|")
    return h.hexdigest()
