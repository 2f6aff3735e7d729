"""Stochastic memoryless policies: action probabilities per observation class, by gradient ascent.

A feed-forward policy-gradient agent learns a stochastic map from the current observation to
action probabilities, and where observations alias states that need different actions such a
map can beat every deterministic one (Singh, Jaakkola & Jordan, "Learning without
state-estimation in partially observable Markovian decision processes", ICML 1994). The return
of a stationary stochastic policy is exact on the compiled model, and so is its gradient: with
softmax parameters θ[o, a], forward occupancies d_t and backward values Q_t, V_t,

    ∂J/∂θ[o, a] = Σ_t γ^t Σ_{s: o(s) = o} d_t(s) · π(a|o) · (Q_t(s, a) − V_t(s))

(the policy-gradient theorem for a finite horizon). Quasi-Newton ascent (scipy's L-BFGS-B) from
several starts at once finds a good policy; the figure is the exact value of the best one found, a
lower bound on the best stochastic memoryless policy (no certificate: the search is local).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import minimize

from .. import limits
from ..model import TaskModel

ITERATIONS = 200         # exact evaluations (return and gradient of every start) at most,
WORK = 300_000_000       # and fewer on a large model: starts × states × actions × steps × evaluations ≤ WORK,
MIN_ITERATIONS = 30      # but never fewer than this


@dataclass(frozen=True)
class StochasticResult:
    """The best stochastic memoryless policy found and its exact value."""

    policy: np.ndarray      # float[O, A]: action probabilities per observation class
    classes: np.ndarray     # int[S]
    mean_return: float
    detail: str

    def state_policy(self) -> np.ndarray:
        """The policy as ``float[S, A]`` (for dp.evaluate)."""
        return self.policy[self.classes]


def value_and_gradient(model: TaskModel, classes: np.ndarray, theta: np.ndarray) -> tuple[float, np.ndarray]:
    """The exact return J of the softmax policy with parameters ``theta`` [O, A], and ∂J/∂θ."""
    values, gradients = values_and_gradients(model, classes, theta[None])
    return float(values[0]), gradients[0]


def values_and_gradients(model: TaskModel, classes: np.ndarray, theta: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """:func:`value_and_gradient` of several policies at once: ``theta`` [R, O, A] → float[R] and [R, O, A]."""
    z = np.exp(theta - theta.max(axis=2, keepdims=True))
    return _exact(model, classes, z / z.sum(axis=2, keepdims=True))


def evaluate_stochastic(model: TaskModel, classes: np.ndarray, pi: np.ndarray) -> float:
    """The exact return of the policy with action probabilities ``pi`` [O, A] per class."""
    return float(_exact(model, classes, pi[None])[0][0])


def _exact(model: TaskModel, classes: np.ndarray, pi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Returns [R] of policies ``pi`` [R, O, A] and their gradients with respect to softmax parameters."""
    S, A, H, g = model.num_states, model.num_actions, model.horizon, model.discount
    R = pi.shape[0]
    ns, live = model.next_state, ~model.terminal
    p = pi[:, classes]                                                     # [R, S, A]
    occupancy = np.empty((H, R, S))
    d = np.broadcast_to(model.initial, (R, S)).copy()
    flat = (ns[None] + (np.arange(R) * S)[:, None, None]).ravel()          # policy r's states at r·S + s
    for t in range(H):
        occupancy[t] = d
        d = np.bincount(flat, weights=((d * live)[:, :, None] * p).ravel(), minlength=R * S).reshape(R, S)
    timeout = np.where(model.terminal[ns], 0.0, model.timeout_reward)
    value = np.zeros((R, S))
    weighted_q = np.zeros((R, S, A))          # Σ_t γ^t d_t(s) Q_t(s, a)
    weighted_v = np.zeros((R, S))             # Σ_t γ^t d_t(s) V_t(s)
    for t in range(H - 1, -1, -1):
        q = model.reward + (np.broadcast_to(timeout, (R, S, A)) if t == H - 1      # [R, S, A]
                            else g * np.take(value, flat).reshape(R, S, A))
        value = np.einsum("rsa,rsa->rs", q, p) * live
        w = g ** t * occupancy[t] * live
        weighted_q += w[:, :, None] * q
        weighted_v += w * value
    gradient = p * (weighted_q - weighted_v[:, :, None])
    O = pi.shape[1]
    index = ((np.arange(R)[:, None] * O + classes[None, :])[:, :, None] * A + np.arange(A)).ravel()
    per_class = np.bincount(index, weights=gradient.ravel(), minlength=R * O * A).reshape(R, O, A)
    return value @ model.initial, per_class


def best_stochastic(model: TaskModel, classes: np.ndarray, starts: list[np.ndarray],
                    iterations: int = ITERATIONS, seed: int = 0) -> StochasticResult:
    """L-BFGS-B ascent on the exact return, all starts as one problem (their returns summed, so one
    batched evaluation serves every start): from the uniform policy, from each deterministic policy in
    ``starts`` (int[O], softened) and from one random start. The best policy any evaluation met, the
    deterministic starts themselves included (each is a stochastic policy too)."""
    O, A = int(classes.max()) + 1, model.num_actions
    rng = np.random.default_rng(seed)
    theta = np.stack([np.zeros((O, A))] + [3.0 * np.eye(A)[np.asarray(s)] for s in starts]
                     + [rng.normal(0, 1, (O, A))])
    R = theta.shape[0]
    best_value, best_policy = -np.inf, np.full((O, A), 1.0 / A)
    for s in starts:                              # the deterministic starts, exactly
        pi = np.eye(A)[np.asarray(s)]
        value = evaluate_stochastic(model, classes, pi)
        if value > best_value:
            best_value, best_policy = value, pi
    iterations = min(iterations, max(MIN_ITERATIONS, WORK // (theta.size * model.num_states * model.horizon // O)))
    # each evaluation is a forward and a backward pass over the horizon: bounded by the analyses' work
    # budget too, counting each step as at least limits.STEP_FLOOR state-actions (a long horizon)
    per_evaluation = 2 * R * model.horizon * max(model.num_states * model.num_actions, limits.STEP_FLOOR)
    iterations = max(1, min(iterations, limits.ascent_work() // per_evaluation))

    def negative(x: np.ndarray) -> tuple[float, np.ndarray]:
        nonlocal best_value, best_policy
        params = x.reshape(R, O, A)
        values, grad = values_and_gradients(model, classes, params)
        top = int(np.argmax(values))
        if values[top] > best_value:
            z = np.exp(params[top] - params[top].max(axis=1, keepdims=True))
            best_value, best_policy = float(values[top]), z / z.sum(axis=1, keepdims=True)
        return -float(values.sum()), -grad.ravel()

    result = minimize(negative, theta.ravel(), jac=True, method="L-BFGS-B",
                      options={"maxfun": iterations, "maxiter": iterations})
    return StochasticResult(best_policy, classes, float(best_value),
                            f"L-BFGS-B ascent on the exact return from {R} starts together (uniform, "
                            f"{len(starts)} deterministic polic{'y' if len(starts) == 1 else 'ies'}, a random "
                            f"policy): {result.nfev} evaluations of at most {iterations}")
