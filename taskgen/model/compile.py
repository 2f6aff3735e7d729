"""Stage 4 of the pipeline: a variant → its finite task model (tables)."""

from __future__ import annotations

import math

import numpy as np

from ..generate import MOVE_NAMES
from ..variant import Variant
from .graph import distances_from, reachable
from .tables import TaskModel


def shortest_success_steps(next_state: np.ndarray, success: np.ndarray, starts: np.ndarray) -> np.ndarray:
    """Fewest steps from each start state to a success state (−1 where none is reachable)."""
    out = []
    for s in starts:
        dist = distances_from(next_state, int(s))
        hits = dist[success & (dist >= 0)]
        out.append(int(hits.min()) if hits.size else -1)
    return np.asarray(out, dtype=np.int64)


def compile_variant(variant: Variant) -> TaskModel:
    """Compile a corridor variant into tables over states (cell, timer, cue), keeping reachable ones.

    The timer counts steps and saturates at the cue's display window ``n``: the cue is part of
    the observation while timer < n. Walking into a wall leaves the agent where it is.
    """
    spec, layout = variant.spec, variant.layout
    k = variant.params["cue_values"]
    n = variant.params["visible_steps"]
    C, T, A = layout.num_cells, n + 1, len(MOVE_NAMES)
    arm_end = layout.sites["arm_end"]
    rewards = spec.rewards

    c, t, v = (a.ravel() for a in np.meshgrid(np.arange(C), np.arange(T), np.arange(k), indexing="ij"))
    full = (c * T + t) * k + v
    is_end = np.isin(c, arm_end)

    moved = layout.neighbour[c]                                   # [N, A]
    c2 = np.where(moved >= 0, moved, c[:, None])
    t2 = np.minimum(t + 1, n)[:, None]
    nxt = (c2 * T + t2) * k + v[:, None]
    reward = np.full(nxt.shape, rewards.step, dtype=np.float64)
    enters_end = np.isin(c2, arm_end)
    correct = c2 == arm_end[v][:, None]
    reward += np.where(correct, rewards.correct, np.where(enters_end, rewards.wrong, 0.0))
    nxt = np.where(is_end[:, None], full[:, None], nxt)          # arm ends absorb, for free
    reward = np.where(is_end[:, None], 0.0, reward)

    start_states = (layout.start * T + 0) * k + np.arange(k)
    keep = reachable(nxt, start_states)
    new_index = -np.ones(full.size, dtype=np.int64)
    new_index[keep] = np.arange(int(keep.sum()))
    next_state = new_index[nxt[keep]]
    c, t, v, is_end = c[keep], t[keep], v[keep], is_end[keep]
    terminal = is_end
    success = is_end & (c == arm_end[v])

    visible_cue = np.where(t < n, v, -1)
    keys, obs_key = np.unique(np.stack([c, visible_cue], axis=1), axis=0, return_inverse=True)
    _, blind_state = np.unique(np.stack([c, t], axis=1), axis=0, return_inverse=True)

    prior = np.full(k, 1.0 / k)
    initial = np.zeros(next_state.shape[0])
    initial[new_index[start_states]] = prior

    horizon = spec.episode.max_steps
    if horizon == "auto":
        shortest = shortest_success_steps(next_state, success, new_index[start_states])
        solvable = shortest[shortest >= 0]   # an unsolvable cue is reported by the analyses
        longest = int(solvable.max()) if solvable.size else 1
        horizon = max(1, math.ceil(spec.episode.max_steps_factor * longest))

    return TaskModel(
        next_state=next_state, reward=reward[keep], terminal=terminal, success=success,
        initial=initial, hidden=v, blind_state=blind_state.ravel(), cell=c, timer=t,
        obs_key=obs_key.ravel(), key_cell=keys[:, 0].copy(), key_cue=keys[:, 1].copy(),
        hidden_values=k, hidden_prior=prior, cue_visible_steps=n, horizon=int(horizon),
        discount=spec.episode.discount, timeout_reward=rewards.timeout, layout=layout,
        action_names=MOVE_NAMES, variant_id=variant.variant_id,
        params={**variant.params, "max_steps": int(horizon)},
    )
