"""Counter-based randomness shared by the single and the batched runtime.

An env's ``np_random`` is used once per seeded reset, to draw a 63-bit stream number. Every
random draw of an episode is then a hash of (stream, episode number, purpose, step, index), so
N environments draw in one numpy call, and the batched runtime reproduces N single envs exactly
without a Python loop over environments. The hash is the splitmix64 finaliser (Steele, Lea &
Flood, "Fast splittable pseudorandom number generators", OOPSLA 2014) applied to a counter.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from gymnasium.utils import seeding

_GOLDEN = np.uint64(0x9E3779B97F4A7C15)
_STEP = np.uint64(0xD1B54A32D192ED03)
_M1 = np.uint64(0xBF58476D1CE4E5B9)
_M2 = np.uint64(0x94D049BB133111EB)
_PURPOSE = {"cue": 1, "noise_init": 2, "noise_flip": 3, "variant": 4, "pixel_noise": 5, "distractor": 6,
            "path": 7}
_TO_UNIT = 1.0 / (1 << 53)
_S11 = np.uint64(11)
_COLUMNS = np.multiply(np.arange(1, 65, dtype=np.uint64), _GOLDEN)   # the column offsets of uniform(..., width)


# Wrapping uint64 arithmetic goes through the ufuncs (np.add, np.multiply), never Python operators:
# numpy's scalar math (a 0-d operand) warns on overflow, its ufunc loops do not, and an
# np.errstate around every call would cost more than the hash itself on a single env's path.
_S30, _S27, _S31 = np.uint64(30), np.uint64(27), np.uint64(31)


def _mix(x: np.ndarray) -> np.ndarray:
    """splitmix64's finaliser on a uint64 array (wrapping arithmetic); one new array, worked in place."""
    x = np.asarray(x ^ (x >> _S30))      # a new array (a 0-d one for a scalar), then worked in place
    np.multiply(x, _M1, out=x)
    x ^= x >> _S27
    np.multiply(x, _M2, out=x)
    x ^= x >> _S31
    return x


def _at(keys: Any, step: Any) -> np.ndarray:
    """keys + step · _STEP (uint64, wrapping), the counter of a draw."""
    return np.add(np.asarray(keys, dtype=np.uint64), np.multiply(np.asarray(step).astype(np.uint64), _STEP))


def stream_from(np_random: np.random.Generator) -> int:
    """The stream number of an env, drawn from its seeded ``np_random``."""
    return int(np_random.integers(0, 2**63 - 1))


def next_episode(stream: int | None, episode: int, seeded: bool,
                 np_random: np.random.Generator) -> tuple[int, int, np.ndarray]:
    """(stream, episode, key) after a reset: a seeded or first reset draws a new stream from
    ``np_random`` and starts its episode 0, any other reset starts the stream's next episode."""
    if seeded or stream is None:
        stream, episode = stream_from(np_random), 0
    else:
        episode += 1
    return stream, episode, np.array([episode_key(stream, episode)], dtype=np.uint64)


def vector_reset_streams(seed: Any, seeded: np.ndarray, generators: list[np.random.Generator | None],
                         streams: np.ndarray, rows: np.ndarray) -> np.ndarray:
    """bool[rows]: which environments of a batched reset of ``rows`` start a new stream (at its episode
    0); the others go on to their stream's next episode. ``seed`` is None, an int (env i gets seed + i)
    or a list with one entry per environment. A seeded env (or one never seeded) draws its new stream
    from its generator; ``seeded``, ``generators`` and ``streams`` are updated in place, as the single
    envs' resets would."""
    n = seeded.shape[0]
    if seed is None:          # only the environments never seeded draw a stream (a Python step each, once)
        seeds: list[int | None] = [None] * n
        drawing = rows[~seeded[rows]]
    else:
        if isinstance(seed, (int, np.integer)):
            seeds = [int(seed) + i for i in range(n)]
        else:
            seeds = list(seed)
            if len(seeds) != n:
                raise ValueError(f"reset needs {n} seeds, got {len(seeds)}")
        drawing = rows[[seeds[i] is not None or not seeded[i] for i in rows.tolist()]]
    for i in drawing.tolist():   # a generator per seeded environment: once per seeded reset, not per step
        s = seeds[i]
        generator = generators[i]
        if s is not None or generator is None:
            generator, _ = seeding.np_random(s)
            generators[i] = generator
        streams[i] = stream_from(generator)
    seeded[drawing] = True
    return np.isin(rows, drawing)


def episode_keys(streams: np.ndarray, episodes: np.ndarray) -> np.ndarray:
    """uint64 key of each (stream, episode number)."""
    return episode_keys_of(stream_bases(streams), episodes)


def stream_bases(streams: np.ndarray) -> np.ndarray:
    """The part of :func:`episode_keys` that depends on the stream alone (kept per environment, so a
    restart hashes once, not twice)."""
    return _mix(np.add(np.asarray(streams, dtype=np.uint64), _GOLDEN))


def episode_keys_of(bases: np.ndarray, episodes: np.ndarray) -> np.ndarray:
    """:func:`episode_keys` from the streams' :func:`stream_bases`."""
    return _mix(np.add(bases, np.multiply(np.asarray(episodes).astype(np.uint64), _GOLDEN)))


#: each purpose's offset of :func:`subkeys` (purpose · _STEP, wrapping), made once
_OFFSET = {name: np.multiply(np.uint64(number), _STEP, dtype=np.uint64) for name, number in _PURPOSE.items()}


def subkeys(keys: np.ndarray, purpose: str) -> np.ndarray:
    """Per-episode key of one purpose (computed once per episode)."""
    return _mix(np.add(np.asarray(keys, dtype=np.uint64), _OFFSET[purpose]))


def subkeys_of(keys: np.ndarray, purposes: tuple[str, ...]) -> np.ndarray:
    """uint64[N, P]: :func:`subkeys` of several purposes in one hash (column j is ``purposes[j]``'s)."""
    offsets = np.array([_OFFSET[purpose] for purpose in purposes], dtype=np.uint64)
    return _mix(np.add(np.asarray(keys, dtype=np.uint64)[:, None], offsets))


def uniform(sub: np.ndarray, step: np.ndarray | int = 0, width: int | None = None) -> np.ndarray:
    """Uniform [0, 1) draws of per-purpose keys ``sub`` [N] at ``step`` (scalar or [N]):
    shape [N], or [N, width] with one draw per index."""
    base = np.asarray(sub, dtype=np.uint64) if isinstance(step, int) and step == 0 else _at(sub, step)
    if width is not None:
        base = np.add(base[:, None], _COLUMNS[:width] if width <= _COLUMNS.size else
                      np.multiply(np.arange(1, width + 1, dtype=np.uint64), _GOLDEN))
    return (_mix(base) >> _S11).astype(np.float64) * _TO_UNIT


def _column_counter(sub: np.ndarray, step: np.ndarray | int, index: int) -> np.ndarray:
    """sub + step · _STEP + (index + 1) · _GOLDEN (uint64, wrapping): the counter of column ``index`` of
    ``uniform(sub, step, width)``, in three ufunc calls (this runs on every step of a batch)."""
    counter = np.asarray(np.add(np.multiply(step, _STEP, dtype=np.uint64, casting="unsafe"),   # int64 step
                                np.asarray(sub, dtype=np.uint64)))
    np.add(counter, _COLUMNS[index] if index < _COLUMNS.size else
           np.multiply(np.uint64(index + 1), _GOLDEN, dtype=np.uint64), out=counter)
    return counter


def uniform_column(sub: np.ndarray, step: np.ndarray | int, index: int) -> np.ndarray:
    """Column ``index`` of ``uniform(sub, step, width)`` alone, for any width > index: [N]. A consumer
    that needs a later draw only for some rows computes it for those rows, with the same values."""
    return (_mix(_column_counter(sub, step, index)) >> _S11).astype(np.float64) * _TO_UNIT


def below(sub: np.ndarray, step: np.ndarray | int, index: int, probability: float) -> np.ndarray:
    """``uniform_column(sub, step, index) < probability``, compared as integers: a draw is m · 2⁻⁵³
    for a 53-bit integer m, and m · 2⁻⁵³ < p exactly when m < ceil(p · 2⁵³) (p · 2⁵³ is exact),
    that is when the hash h (m = h >> 11) is below ceil(p · 2⁵³) · 2¹¹."""
    h = _mix(_column_counter(sub, step, index))
    threshold = math.ceil(probability * (1 << 53)) << 11
    if threshold >= 1 << 64:          # p = 1: every draw is below
        return np.ones(h.shape, dtype=bool)
    return h < np.uint64(threshold)


_MASK = (1 << 64) - 1
_STEP_INT, _GOLDEN_INT, _M1_INT, _M2_INT = int(_STEP), int(_GOLDEN), int(_M1), int(_M2)


# A single env's draws in Python integers: bit for bit the numpy functions above on one key, where
# numpy's per-call overhead would cost more than the arithmetic (a test compares every pair).
def mix_one(x: int) -> int:
    """:func:`_mix` of one uint64 as a Python int."""
    x = ((x ^ (x >> 30)) * _M1_INT) & _MASK
    x = ((x ^ (x >> 27)) * _M2_INT) & _MASK
    return x ^ (x >> 31)


def episode_key(stream: int, episode: int) -> int:
    """:func:`episode_keys` of one (stream, episode)."""
    return mix_one((mix_one((stream + _GOLDEN_INT) & _MASK) + episode * _GOLDEN_INT) & _MASK)


def subkey(key: int, purpose: str) -> int:
    """:func:`subkeys` of one key."""
    return mix_one((key + _PURPOSE[purpose] * _STEP_INT) & _MASK)


def uniform_one(sub: int, step: int = 0) -> float:
    """:func:`uniform` of one key without a width."""
    return (mix_one((sub + step * _STEP_INT) & _MASK) >> 11) * _TO_UNIT


def draw(key: int, step: int, index: int) -> float:
    """``uniform(key, step, width)[index]`` for one key (a single env draws one or two numbers a step)."""
    return (mix_one((key + step * _STEP_INT + (index + 1) * _GOLDEN_INT) & _MASK) >> 11) * _TO_UNIT


def categorical_one(u: float, cumulative: list[float]) -> int:
    """:func:`categorical` of one uniform and one row of cumulative probabilities."""
    return min(sum(u >= c for c in cumulative), len(cumulative) - 1)


def uniform_bits(sub: np.ndarray) -> np.ndarray:
    """uint64 m [N] of ``uniform(sub)`` = m · 2⁻⁵³, the 53-bit integers themselves (compared with
    :func:`unit_thresholds` they pick as :func:`categorical` does, without converting to floats)."""
    return _mix(np.asarray(sub, dtype=np.uint64)) >> _S11


def unit_thresholds(cumulative: np.ndarray) -> np.ndarray:
    """uint64 ceil(c · 2⁵³) of cumulative probabilities c: m · 2⁻⁵³ ≥ c exactly when m ≥ ceil(c · 2⁵³)
    (scaling by a power of two is exact)."""
    return np.ceil(np.asarray(cumulative, dtype=np.float64) * float(1 << 53)).astype(np.uint64)


def categorical_bits(m: np.ndarray, thresholds: np.ndarray) -> np.ndarray:
    """:func:`categorical` of ``uniform(sub)`` from its :func:`uniform_bits` ``m`` [N] and the
    :func:`unit_thresholds` of the cumulative probabilities: rows [N, K], or one row [K] for all."""
    if thresholds.ndim == 1:       # one row for every draw: a sorted search
        return np.minimum(np.searchsorted(thresholds, m, side="right"), thresholds.size - 1)
    return np.minimum((m[:, None] >= thresholds).sum(axis=1), thresholds.shape[1] - 1)


def categorical(u: np.ndarray, cumulative: np.ndarray) -> np.ndarray:
    """Index drawn by uniform ``u`` [N] from rows of cumulative probabilities [N, K]."""
    return np.minimum((u[:, None] >= cumulative).sum(axis=1), cumulative.shape[1] - 1)


def flip_threshold(flip_probability: float) -> int:
    """The 16-bit threshold a draw must lie below to flip a bit: the flip probability is
    applied with a resolution of 1/65536 (an error of at most 7.7e-6)."""
    return int(round(flip_probability * 65536))


def flips(flip_keys: np.ndarray, step: np.ndarray | int, bits: int, threshold: np.ndarray | int) -> np.ndarray:
    """bool[N, bits]: which noise bits flip at ``step``. One 64-bit hash yields four 16-bit
    draws, so flipping B bits costs ceil(B / 4) hashes per environment and step."""
    words = -(-bits // 4)
    base = np.add(np.multiply(step, _STEP, dtype=np.uint64, casting="unsafe"), np.asarray(flip_keys, dtype=np.uint64))
    h = _mix(np.add(np.asarray(base)[..., None], _COLUMNS[:words] if words <= _COLUMNS.size else
                    np.multiply(np.arange(1, words + 1, dtype=np.uint64), _GOLDEN)))
    # the four 16-bit parts of each hash, low to high, read through a little-endian view
    draws = h.astype("<u8", copy=False).view("<u2")[..., :bits]
    if np.ndim(threshold) == 0:        # one threshold for all: compared as 16-bit numbers, no casts
        limit = int(threshold)
        if limit <= 0 or limit >= 1 << 16:
            return np.full(draws.shape, limit > 0)
        return draws < np.uint16(limit)
    return draws < np.asarray(threshold, dtype=np.uint32)[..., None]


def noise_init(keys: np.ndarray, bits: int) -> np.ndarray:
    """bool[N, bits]: the uniform noise bits an episode starts with."""
    return uniform(subkeys(keys, "noise_init"), 0, bits) < 0.5


def noise_track(keys: np.ndarray, bits: int, flip_probability: float | np.ndarray, horizon: int) -> np.ndarray:
    """bool[N, horizon+1, bits]: each episode's noise bits at every step (uniform at step 0, then
    ``flips`` at steps 1 … horizon), as applying each step's flips in turn gives them. The flip
    probability may differ per episode (an array of N). (A strided view: the bits of a step are laid
    out in whole 8-byte words, so that the running XOR over steps is one pass over words.)"""
    keys = np.asarray(keys, dtype=np.uint64)
    # the same rounding as flip_threshold (half to even), for one probability or one per episode
    threshold = np.rint(np.asarray(flip_probability, dtype=np.float64) * 65536).astype(np.int64)
    if threshold.ndim == 0 or (threshold == threshold.flat[0]).all():
        limit: np.ndarray | int = int(threshold.flat[0]) if threshold.size else 0
    else:
        limit = threshold[:, None]
    track = np.zeros((keys.shape[0], horizon + 1, -(-bits // 8) * 8), dtype=bool)
    track[:, 0, :bits] = noise_init(keys, bits)
    track[:, 1:, :bits] = flips(subkeys(keys, "noise_flip")[:, None], np.arange(1, horizon + 1)[None, :], bits, limit)
    words = track.view(np.uint64)       # eight bools a word: XOR works on each byte alone
    np.bitwise_xor.accumulate(words, axis=1, out=words)
    return track[:, :, :bits]


def add_pixel_noise(frames: np.ndarray, noise_keys: np.ndarray, step: np.ndarray | int, kind: str,
                    amplitude: float) -> np.ndarray:
    """Frames [N, H, W, 3] with this step's pixel noise (a fresh draw per key and step).

    gaussian: each channel gets N(0, (amplitude·255)²) by the Box–Muller transform of two
    uniforms, then is rounded and clipped to 0…255; salt_pepper: each pixel turns black (draw
    below amplitude/2) or white (below amplitude), all channels together."""
    n, h, w, c = frames.shape
    if kind == "salt_pepper":
        u = uniform(noise_keys, step, h * w).reshape(n, h, w)
        out = frames.copy()
        out[u < amplitude / 2] = 0
        out[(u >= amplitude / 2) & (u < amplitude)] = 255
        return out
    u = uniform(noise_keys, step, 2 * h * w * c).reshape(n, 2, h, w, c)
    normal = np.sqrt(-2.0 * np.log1p(-u[:, 0])) * np.cos(2.0 * np.pi * u[:, 1])
    return np.clip(np.rint(frames + normal * (amplitude * 255.0)), 0, 255).astype(np.uint8)
