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
    """Compile a variant into tables over states (cell, timer, cue), keeping the reachable ones.

    With display ``start`` the timer counts steps and saturates at the display window ``n``:
    the cue is part of the observation while timer < n. With display ``site`` the cue is shown
    whenever the agent stands on the cue site, and the timer is a flag: 1 once the agent has
    stood there (so it knows the cue), 0 before. Walking into a wall
    leaves the agent where it is. Goal ``g`` pays ``correct`` under cue ``v`` when the rule
    says so (match: g = v; non-match: g ≠ v), else ``wrong``; a paying goal ends the episode,
    a wrong one ends it unless ``decision.wrong`` is 'continue'.
    """
    spec, layout = variant.spec, variant.layout
    k = variant.params["cue_values"]
    by_site = spec.cue.display == "site"
    n = 0 if by_site else variant.params["visible_steps"]
    C, T, A = layout.num_cells, (2 if by_site else n + 1), len(MOVE_NAMES)
    site = layout.sites["cue_site"][0] if by_site else -1
    goals = layout.sites["goal"]
    rewards, decision = spec.rewards, spec.decision

    c, t, v = (a.ravel() for a in np.meshgrid(np.arange(C), np.arange(T), np.arange(k), indexing="ij"))
    full = (c * T + t) * k + v
    goal_of = -np.ones(C, dtype=np.int64)
    goal_of[goals] = np.arange(goals.size)

    def pays(cell_goal: np.ndarray, cue: np.ndarray) -> np.ndarray:
        if decision.rule == "match":
            return cell_goal == cue
        return (cell_goal >= 0) & (cell_goal != cue)

    pays_here = pays(goal_of[c], v)
    ends_here = pays_here | ((goal_of[c] >= 0) & (decision.wrong == "end"))

    moved = layout.neighbour[c]                                   # [N, A]
    c2 = np.where(moved >= 0, moved, c[:, None])
    t2 = (np.maximum(t[:, None], c2 == site) if by_site else np.minimum(t + 1, n)[:, None])
    nxt = (c2 * T + t2) * k + v[:, None]
    g2 = goal_of[c2]
    entered = (g2 >= 0) & (c2 != c[:, None])       # stepping onto a goal, not staying on it
    reward = np.full(nxt.shape, rewards.step, dtype=np.float64)
    reward += np.where(entered & pays(g2, v[:, None]), rewards.correct,
                       np.where(entered, rewards.wrong, 0.0))
    nxt = np.where(ends_here[:, None], full[:, None], nxt)        # ends absorb, for free
    reward = np.where(ends_here[:, None], 0.0, reward)

    start_timer = int(by_site and layout.start == site)
    start_states = (layout.start * T + start_timer) * k + np.arange(k)
    keep = reachable(nxt, start_states)
    new_index = -np.ones(full.size, dtype=np.int64)
    new_index[keep] = np.arange(int(keep.sum()))
    next_state = new_index[nxt[keep]]
    c, t, v = c[keep], t[keep], v[keep]
    terminal = ends_here[keep]
    success = pays_here[keep] & terminal

    shown = (c == site) if by_site else (t < n)
    known = (t == 1) if by_site else np.ones(c.size, dtype=bool)   # the agent has seen the cue
    visible_cue = np.where(shown, v, -1)
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
        hidden_values=k, hidden_prior=prior, cue_visible_steps=n, cue_window=shown, cue_known=known,
        horizon=int(horizon),
        discount=spec.episode.discount, timeout_reward=rewards.timeout, layout=layout,
        action_names=MOVE_NAMES, variant_id=variant.variant_id,
        params={**variant.params, "max_steps": int(horizon)},
    )
