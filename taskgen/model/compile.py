"""Stage 4 of the pipeline: a variant → its finite task model (tables)."""

from __future__ import annotations

import math

import numpy as np

from ..generate import MOVE_NAMES
from ..generate.grid import GridLayout

TURN_NAMES = ("turn_left", "turn_right", "forward")
HEADING_NAMES = ("north", "east", "south", "west")


def poses(layout: GridLayout, turns: bool) -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
    """The agent's poses and how actions move between them.

    Returns (cell of each pose, heading of each pose (−1 without headings), next pose per
    action [P, A], start pose). With moves a pose is a cell and the actions are the four moves;
    with turns a pose is (cell, heading), and the actions turn left, turn right or step forward.
    The start heading is the first open direction of east, south, west, north.
    """
    C = layout.num_cells
    stay = np.arange(C)[:, None]
    moved = np.where(layout.neighbour >= 0, layout.neighbour, stay)          # [C, 4]
    if not turns:
        return np.arange(C), -np.ones(C, dtype=np.int64), moved, layout.start
    cell, heading = np.divmod(np.arange(4 * C), 4)
    next_pose = np.stack([cell * 4 + (heading + 3) % 4, cell * 4 + (heading + 1) % 4,
                          moved[cell, heading] * 4 + heading], axis=1)
    facing = next((d for d in (1, 2, 3, 0) if layout.neighbour[layout.start, d] >= 0), 1)
    return cell, heading, next_pose, layout.start * 4 + facing
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
    """Compile a variant into tables over states (cell, timer, progress, cue), keeping the
    reachable ones.

    The hidden variable is the cue: one value, or a sequence of m values (numbered h = Σ v_j·k^j).
    With display ``start`` the timer counts steps and saturates at m·n: element j of the cue is
    part of the observation while j·n ≤ timer < (j+1)·n. With display ``site`` the cue is shown
    whenever the agent stands on the cue site, and the timer is a flag: 1 once the agent has
    stood there (so it knows the cue), 0 before. Walking into a wall leaves the agent where it is.

    Progress p counts the goals visited in order (p = m: done, a success; p = m+1: failed).
    Entering goal g at progress p pays ``correct`` when the rule says so (match: g is element p;
    non-match, one element: g is not the cue's) and advances p, else pays ``wrong`` and fails
    (or, with ``decision.wrong: continue``, leaves p as it is).
    """
    spec, layout = variant.spec, variant.layout
    if spec.layout.family == "field":
        raise ValueError(f"{variant.variant_id} is a field variant: compile it with compile_field")
    k = variant.params["cue_values"]
    m = spec.cue.sequence_length
    by_site = spec.cue.display == "site"
    n = 0 if by_site else variant.params["visible_steps"]
    turns = spec.agent.actions == "turns"
    cell_of, heading_of, pose_next, start_pose = poses(layout, turns)
    C = cell_of.size
    T = 2 if by_site else m * n + 1
    P, K = m + 2, k ** m
    done, failed = m, m + 1
    site = layout.sites["cue_site"][0] if by_site else -1
    goals = layout.sites["goal"]
    rewards, decision = spec.rewards, spec.decision
    digits = (np.arange(K)[:, None] // k ** np.arange(m)[None, :]) % k      # [K, m] sequence of each h

    q, t, p, h = (a.ravel() for a in np.meshgrid(np.arange(C), np.arange(T), np.arange(P), np.arange(K),
                                                 indexing="ij"))
    index = lambda q_, t_, p_, h_: ((q_ * T + t_) * P + p_) * K + h_  # noqa: E731
    full = index(q, t, p, h)
    c = cell_of[q]
    ends_here = p >= done
    goal_of = -np.ones(C, dtype=np.int64)
    goal_of[goals] = np.arange(goals.size)

    q2 = pose_next[q]                                             # [N, A]
    c2 = cell_of[q2]
    t2 = (np.maximum(t[:, None], c2 == site) if by_site else np.minimum(t + 1, T - 1)[:, None])
    g2 = goal_of[c2]
    entered = (g2 >= 0) & (c2 != c[:, None])       # stepping onto a goal, not staying on it
    target = digits[h, np.minimum(p, m - 1)][:, None]
    right = (g2 == target) if decision.rule == "match" else (g2 != target)
    good, bad = entered & right, entered & ~right
    p2 = np.where(good, p[:, None] + 1, np.where(bad & (decision.wrong == "end"), failed, p[:, None]))
    nxt = index(q2, t2, p2, h[:, None])
    reward = np.full(nxt.shape, rewards.step, dtype=np.float64)
    paid = np.full(goals.size, rewards.correct) if rewards.per_goal is None else np.asarray(rewards.per_goal)
    reward += np.where(good, paid[np.maximum(g2, 0)], np.where(bad, rewards.wrong, 0.0))
    nxt = np.where(ends_here[:, None], full[:, None], nxt)        # ends absorb, for free
    reward = np.where(ends_here[:, None], 0.0, reward)

    start_timer = int(by_site and layout.start == site)
    start_states = index(start_pose, start_timer, 0, np.arange(K))
    keep = reachable(nxt, start_states)
    new_index = -np.ones(full.size, dtype=np.int64)
    new_index[keep] = np.arange(int(keep.sum()))
    next_state = new_index[nxt[keep]]
    q, c, t, p, h = q[keep], c[keep], t[keep], p[keep], h[keep]
    heading = heading_of[q]
    terminal = p >= done
    success = p == done

    if by_site:
        shown = c == site
        element = np.zeros_like(t)
    else:
        shown = t < m * n
        element = np.minimum(t // max(n, 1), m - 1)
    visible_cue = np.where(shown, digits[h, element], -1)
    # what an agent with perfect memory knows of the cue: all of it after the site, the elements
    # shown so far with display 'start' (a code equal for states it cannot tell apart)
    if by_site:
        known = t == 1
        knowledge = np.where(known, h, -1)
    else:
        revealed = np.minimum(t // max(n, 1) + 1, m)
        known = revealed == m
        knowledge = h % k ** revealed
    keys, obs_key = np.unique(np.stack([c, heading, visible_cue], axis=1), axis=0, return_inverse=True)
    # cue twins share a blind state; every end state of a cell counts as one, so that the cue-blind
    # analysis sees whether the cue changes where the agent goes, not how an episode ended
    _, blind_state = np.unique(np.stack([q, t, np.where(terminal, done, p)], axis=1), axis=0,
                               return_inverse=True)

    prior = np.full(K, 1.0 / K)
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
        initial=initial, hidden=h, blind_state=blind_state.ravel(), cell=c, heading=heading, timer=t,
        obs_key=obs_key.ravel(), key_cell=keys[:, 0].copy(), key_heading=keys[:, 1].copy(),
        key_cue=keys[:, 2].copy(),
        hidden_values=K, cue_values=k, hidden_prior=prior, cue_visible_steps=n, cue_window=shown, cue_known=known,
        knowledge=knowledge,
        horizon=int(horizon), discount=spec.episode.discount, timeout_reward=rewards.timeout,
        layout=layout, action_names=TURN_NAMES if turns else MOVE_NAMES, variant_id=variant.variant_id,
        params={**variant.params, "max_steps": int(horizon)},
    )
