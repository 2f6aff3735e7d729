"""The batched core of every runtime: what a task kind implements, under one single-env and one vector shell.

A core holds N environments of one kind as arrays and steps them together: :meth:`Core.draws`
makes what episodes draw from their keys and :meth:`Core.begin_drawn` starts them from it, :meth:`Core.advance` takes one step, :meth:`Core.observe` and
:meth:`Core.infos` read out what the agents see and what the infos report. The
shells (``TaskEnv``, ``TaskVectorEnv``) own everything else once: render modes, action
validation, seeding and episode keys, and next-step autoreset.

A single env is a core of one. The one-environment methods (``start_one``, ``step_one``) have
correct defaults built on the batched ones; a kind may override them with a faster scalar path,
and the tests that compare a batch with gymnasium's SyncVectorEnv of single envs hold the two
paths equal.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from typing import Any

import numpy as np
from gymnasium import spaces

from ..model import TaskModel
from ..render.observations import ObservationSet, assemble

ROW = np.zeros(1, dtype=np.int64)   # the rows of a core of one


class Core(ABC):
    """N environments of one task kind as arrays, and the one step rule they follow."""

    num_envs: int
    num_actions: int
    analysis_info: bool = False     # infos carry "analysis_only" (the hidden value, the state) when set
    observations: ObservationSet    # every variant's modalities, blocks and noise (those of the first)
    blocks: dict[str, slice]        # the vector's named blocks, as wide as the widest variant's

    @property
    @abstractmethod
    def models(self) -> list[TaskModel]:
        """The distinct variants the environments hold (or draw from)."""

    @abstractmethod
    def single_observation_space(self) -> spaces.Space[Any]:
        """The observation space of one environment."""

    @abstractmethod
    def draws(self, rows: np.ndarray, keys: np.ndarray) -> dict[str, np.ndarray]:
        """Everything an episode draws at its start, for the episodes whose keys are ``keys`` [n] in
        environments ``rows`` [n] (an environment may appear once per episode): arrays with one row per
        key. A function of the key (and the environment's variant) alone, so a batch may draw the
        next episodes of its environments ahead of time (see ahead.py)."""

    @abstractmethod
    def begin_drawn(self, rows: np.ndarray, drawn: dict[str, np.ndarray]) -> None:
        """Start new episodes in environments ``rows`` from their :meth:`draws` (one row per row)."""

    def begin(self, rows: np.ndarray, keys: np.ndarray) -> None:
        """Start new episodes in environments ``rows`` from their episode keys (uint64, one per row)."""
        if rows.size:
            self.begin_drawn(rows, self.draws(rows, keys))

    @abstractmethod
    def advance(self, actions: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """One step of every environment: reward, terminated, truncated (fresh arrays). The shell restarts
        the environments whose episode ended on the step before this one (next-step autoreset) after
        it, so what this step did to them is overwritten."""

    @abstractmethod
    def observe(self) -> dict[str, np.ndarray]:
        """What every agent sees now, by modality (a batch axis first)."""

    @abstractmethod
    def infos(self) -> dict[str, Any]:
        """Every environment's info as arrays, without masks: ``variant_id`` (object[N]), ``step``
        (int64[N], a copy) and, when :attr:`analysis_info` is set, ``analysis_only``, a dict of arrays
        with the hidden value and the state, for analyses only (an agent that reads them is no longer
        tested on memory)."""

    @abstractmethod
    def success(self) -> np.ndarray:
        """bool[N]: whether each environment's state counts as solving the task (read at an episode's end)."""

    @abstractmethod
    def model_of(self, i: int) -> TaskModel:
        """The variant environment ``i`` plays now."""

    @abstractmethod
    def picture(self, i: int) -> np.ndarray:
        """uint8[H, W, 3]: a top-down picture of what environment i's agent could see, for people."""

    @abstractmethod
    def ground_truth(self, i: int) -> np.ndarray:
        """uint8[H, W, 3]: the ground truth of environment i (the hidden value drawn), for people."""

    @abstractmethod
    def vector_mask(self) -> np.ndarray:
        """bool[N, D]: the vector elements each environment's variant fills; the rest pad its blocks to the
        spec family's widths and are always 0 (ValueError without a vector)."""

    @abstractmethod
    def memory_bytes(self) -> dict[str, int]:
        """Bytes held per environment (state arrays) and shared (tables), for the benchmark."""

    # -- one environment: correct defaults on the batched methods; kinds may override for speed --------
    def start_one(self, key: np.ndarray, origin: tuple[int, int] | None = None) -> tuple[Any, dict[str, Any]]:
        """Start the episode of a core of one whose key is ``key``: its first observation and info.
        ``origin`` is the episode's (stream, number), for a core that draws ahead for the stream's next
        episodes."""
        self.begin(ROW, key)
        return self.observe_one(), self.info_one()

    def step_one(self, action: int) -> tuple[Any, float, bool, bool, dict[str, Any]]:
        """One step of a core of one, as ``gymnasium.Env.step`` returns it."""
        reward, terminated, truncated = self.advance(np.asarray([action], dtype=np.int64))
        return self.observe_one(), float(reward[0]), bool(terminated[0]), bool(truncated[0]), self.info_one()

    def observe_one(self) -> Any:
        """The observation of a core of one (an array, or a dict of several modalities)."""
        return assemble(self.observations, {name: part[0] for name, part in self.observe().items()})

    def info_one(self) -> dict[str, Any]:
        """The info of a core of one."""
        info = self.infos()
        out: dict[str, Any] = {"variant_id": str(info["variant_id"][0]), "step": int(info["step"][0])}
        if self.analysis_info:
            out["analysis_only"] = {name: value[0] for name, value in info["analysis_only"].items()}
        return out

    def success_one(self) -> bool:
        """Whether a core of one's state counts as solving the task."""
        return bool(self.success()[0])
