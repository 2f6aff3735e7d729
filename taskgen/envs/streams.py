"""Counter-based randomness shared by the single and the batched runtime.

An env's ``np_random`` is used once per seeded reset, to draw a 63-bit stream number. Every
random draw of an episode is then a hash of (stream, episode number, step, purpose, index), so
N environments draw in one numpy call, and the batched runtime reproduces N single envs exactly
without a Python loop over environments. The hash is the splitmix64 finaliser (Steele, Lea &
Flood, "Fast splittable pseudorandom number generators", OOPSLA 2014).
"""

from __future__ import annotations

import numpy as np

_GOLDEN = np.uint64(0x9E3779B97F4A7C15)
_M1 = np.uint64(0xBF58476D1CE4E5B9)
_M2 = np.uint64(0x94D049BB133111EB)
_PURPOSE = {"episode": 1, "cue": 2, "noise_init": 3, "noise_flip": 4}


def _mix(x: np.ndarray) -> np.ndarray:
    """splitmix64's finaliser on a uint64 array (wrapping arithmetic)."""
    x = x ^ (x >> np.uint64(30))
    x = x * _M1
    x = x ^ (x >> np.uint64(27))
    x = x * _M2
    return x ^ (x >> np.uint64(31))


def _combine(*parts: np.ndarray) -> np.ndarray:
    """Hash several broadcastable integer arrays into one uint64 array."""
    with np.errstate(over="ignore"):
        h = np.zeros(np.broadcast_shapes(*(np.shape(p) for p in parts)), dtype=np.uint64)
        for p in parts:
            h = _mix(h + _GOLDEN + np.asarray(p).astype(np.uint64))
        return h


def stream_from(np_random: np.random.Generator) -> int:
    """The stream number of an env, drawn from its seeded ``np_random``."""
    return int(np_random.integers(0, 2**63 - 1))


def episode_keys(streams: np.ndarray, episodes: np.ndarray) -> np.ndarray:
    """uint64 key of each (stream, episode number)."""
    return _combine(streams, episodes, _PURPOSE["episode"])


def uniform(keys: np.ndarray, purpose: str, step: np.ndarray | int = 0, width: int | None = None) -> np.ndarray:
    """Uniform [0, 1) draws: shape ``keys.shape`` or, with ``width``, ``keys.shape + (width,)``."""
    keys = np.asarray(keys, dtype=np.uint64)
    step = np.asarray(step)
    if width is not None:
        keys, step = keys[..., None], (step[..., None] if step.ndim else step)
        index = np.arange(width)
    else:
        index = 0
    with np.errstate(over="ignore"):
        h = _combine(keys, _PURPOSE[purpose], step, index)
    return (h >> np.uint64(11)).astype(np.float64) * (1.0 / (1 << 53))


def categorical(u: np.ndarray, cumulative: np.ndarray) -> np.ndarray:
    """Index drawn by uniform ``u`` [N] from rows of cumulative probabilities [N, K]."""
    return np.minimum((u[:, None] >= cumulative).sum(axis=1), cumulative.shape[1] - 1)
