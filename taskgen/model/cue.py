"""Compiling a cue task (corridor or maze): every cue value folded into the tables' states."""

from __future__ import annotations

import numpy as np

from ..spec import CueTaskSpec
from ..variant import Variant, horizon
from .graph import reachable, shortest_success_steps
from .hidden import EnumeratedSet
from .poses import action_names, poses
from .tables import CueStructure, Tables, TaskModel


def compile_cue(variant: Variant) -> TaskModel:
    """Compile a cue variant into tables over states (pose, timer, progress, cue), keeping the
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
    if not isinstance(spec, CueTaskSpec):
        raise ValueError(f"{variant.variant_id} is not a cue task")
    k, m = spec.cue.values, spec.cue.sequence_length
    by_site = spec.cue.display == "site"
    n = 0 if by_site else spec.cue.visible_steps
    turns = spec.agent.actions == "turns"
    cell_of, heading_of, pose_next, start_pose = poses(layout, turns)
    C = cell_of.size
    T = 2 if by_site else m * n + 1
    P, K = m + 2, k ** m
    done, failed = m, m + 1
    site = int(layout.sites["cue_site"][0]) if by_site else -1
    goals = layout.sites["goal"]
    rewards, decision = spec.rewards, spec.decision
    digits = (np.arange(K)[:, None] // k ** np.arange(m)[None, :]) % k      # [K, m] sequence of each h

    q, t, p, h = (a.ravel() for a in np.meshgrid(np.arange(C), np.arange(T), np.arange(P), np.arange(K),
                                                 indexing="ij"))

    def index(q_: np.ndarray, t_: np.ndarray, p_: np.ndarray, h_: np.ndarray) -> np.ndarray:
        return ((q_ * T + t_) * P + p_) * K + h_

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
    start_states = index(np.full(K, start_pose), np.full(K, start_timer), np.zeros(K, dtype=np.int64),
                         np.arange(K))
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
    longest = 0
    if spec.episode.max_steps == "auto":    # the longest shortest solution over the cue values
        shortest = shortest_success_steps(next_state, success, new_index[start_states])
        solvable = shortest[shortest >= 0]   # an unsolvable cue is reported by the analyses
        longest = int(solvable.max()) if solvable.size else 1
    limit = horizon(spec.episode, longest)
    S = next_state.shape[0]
    tables = Tables(next_state=next_state, reward=reward[keep], terminal=terminal, success=success,
                    initial=initial, value=h, local=np.arange(S), cell=c, heading=heading,
                    obs_key=obs_key.ravel())
    cue = CueStructure(values=k, sequence_length=m, visible_steps=n, key_value=keys[:, 2].copy(), window=shown,
                       known=known, knowledge=knowledge, blind_state=blind_state.ravel(), timer=t)
    return TaskModel(
        kind="cue", variant_id=variant.variant_id, params=variant.params, layout=layout,
        action_names=action_names(turns), horizon=limit, discount=spec.episode.discount,
        timeout_reward=rewards.timeout, key_cell=keys[:, 0].copy(), key_heading=keys[:, 1].copy(),
        hidden=EnumeratedSet(prior, "cue"), source=tables, cue=cue)
