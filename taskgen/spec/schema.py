"""The spec language, version 1, as pydantic models: the one place a spec is validated.

A spec is a :data:`Spec`: a :class:`CueTaskSpec` (corridor or maze, with a cue) or a
:class:`FieldSpec` (a field traversed along a hidden path, no cue), told apart by the layout family.
Every later stage trusts a validated spec. Field descriptions double as the
spec reference, so keep them true when behaviour changes.
"""

from __future__ import annotations

import hashlib
import json
from typing import Annotated, Any, Literal, Union

from pydantic import (BaseModel, BeforeValidator, ConfigDict, Field, PrivateAttr, ValidationError, WithJsonSchema,
                      field_validator,
                      model_validator)
from pydantic_core import PydanticCustomError

from .params import IntParam, expected_error, int_param

FORMAT_VERSION = 1
MAX_CUE_VALUES = 8
MAX_REWARD = 1e6   # larger magnitudes only lose precision in the analyses' sums


def _refuse(at: str, expected: str, found: str) -> None:
    """Raise a rule's error in taskgen's template; ``at`` (dotted, relative to the model that
    checks the rule) names the field at fault for the loader to locate, "" the model itself."""
    raise PydanticCustomError("taskgen_expected", "expected {expected}, got {found}",
                              {"expected": expected, "found": found, "at": at})


class Strict(BaseModel):
    """Base of every spec block: unknown keys are refused, types are not coerced."""

    model_config = ConfigDict(extra="forbid", strict=True, frozen=True, allow_inf_nan=False)


class Corridor(Strict):
    """A straight corridor from the start to a junction, then one dead-end arm per cue value."""

    length: int_param(0) = Field(  # type: ignore[valid-type]
        description="Steps from the start cell to the junction (0 puts the start on the junction). "
        "An integer, {range: [low, high]} or {choice: [...]}, drawn per variant.",
        examples=[8, {"range": [6, 12]}, {"choice": [4, 8, 16]}],
    )
    arm_length: int_param(1) = Field(  # type: ignore[valid-type]
        default=IntParam(1, 1), json_schema_extra={"default": 1},
        description="Cells in each arm beyond the junction's spine; the last cell is the arm's end.",
        examples=[1, {"range": [1, 3]}],
    )
    width: int = Field(
        default=1, ge=1, le=16,
        description="Lanes of the hall. Wider than 1 lets an agent without memory carry the cue in "
        "the lane it walks; `taskgen check` reports that as a carried cue.",
        examples=[1, 2],
    )


MAX_MAZE_SIDE = 101
Cell = Annotated[list[Annotated[int, Field(ge=0, le=MAX_MAZE_SIDE)]], Field(min_length=2, max_length=2)]


class Maze(Strict):
    """A procedural maze of width × height cells with thin walls; one goal cell per cue value."""

    width: int_param(1, MAX_MAZE_SIDE) = Field(  # type: ignore[valid-type]
        description="Cells across; an integer, {range: [low, high]} or {choice: [...]}, drawn per variant.",
        examples=[7, {"range": [5, 9]}])
    height: int_param(1, MAX_MAZE_SIDE) = Field(  # type: ignore[valid-type]
        description="Cells down; like width.", examples=[7])
    generator: Literal["uniform", "backtracker", "rooms"] = Field(
        default="uniform",
        description="uniform: every perfect maze equally likely (Wilson's algorithm); backtracker: "
        "long winding corridors (randomised depth-first search); rooms: open square rooms joined by doors.",
        examples=["uniform"])
    room_size: int = Field(default=3, ge=1, le=MAX_MAZE_SIDE,
                           description="Side of each room for the rooms generator (width and height "
                           "must be multiples of it).", examples=[3])
    braid: float = Field(default=0.0, ge=0.0, le=1.0,
                         description="Fraction of dead ends removed by opening a wall, creating loops.",
                         examples=[0.0, 0.5])
    start: Literal["random", "corner", "dead_end"] = Field(
        default="random", description="Where the start cell is drawn.", examples=["corner"])
    start_cell: Cell | None = Field(
        default=None, description="A fixed start cell [row, column] (0-based), instead of drawing one.",
        examples=[[0, 0]])
    goal_cells: list[Cell] | None = Field(
        default=None, description="Fixed goal cells [[row, column], ...], one per cue value, in cue "
        "order, instead of drawing them.", examples=[[[2, 2], [0, 2]]])
    goals_in_dead_ends: bool = Field(default=False, description="Goal cells must be dead ends.",
                                     examples=[True])
    goals_hidden_from_start: bool = Field(
        default=False, description="No goal may be in a straight unwalled line of sight from the start.",
        examples=[True])
    min_goal_distance: int = Field(default=1, ge=1, description="Fewest steps from the start to any goal.",
                                   examples=[4])
    min_goal_spacing: int = Field(default=1, ge=1, description="Fewest steps between two goals.",
                                  examples=[3])
    cue_site: Literal["random", "start"] = Field(
        default="random", description="With cue display 'site': a random free cell, or the start cell "
        "itself (a lookout the agent starts on and may come back to).", examples=["start"])
    min_branch_distance: int = Field(
        default=0, ge=0, description="The shortest paths from the start to every goal share at least "
        "this many first steps, so the choice comes that far from the start (and the cue must be "
        "held at least that long).", examples=[0, 4])


MAX_FIELD_SIDE = 31


class HiddenPath(Strict):
    """The safe path across a field, drawn afresh at every reset from the episode's seed and never
    shown to the agent. It runs from a cell on ``start_side`` to the opposite side; in an open
    field it always moves away from the start side or along it (so it never crosses itself),
    with walls it is the shortest way along the passages."""

    start_side: Literal["north", "east", "south", "west"] = Field(
        default="south", description="The side the path starts on; it ends on the opposite side.",
        examples=["south"])
    start: Literal["random", "middle"] = Field(
        default="random", description="random: the start cell is drawn along the start side each "
        "episode; middle: it is the middle cell of that side in every episode.", examples=["random"])
    turns: int_param(0, 2 * MAX_FIELD_SIDE) = Field(  # type: ignore[valid-type]
        default=IntParam(0, 0), json_schema_extra={"default": 0},
        description="Direction changes along the path: 0 is a straight path; an odd number ends "
        "with a run along the far side. An integer, {range: [low, high]} or {choice: [...]}, drawn "
        "per variant (the path itself is drawn per episode).", examples=[0, 2, {"range": [2, 4]}])
    width: int = Field(default=1, ge=1, le=4, description="Cells across the path.", examples=[1, 2])


class Misstep(Strict):
    """What stepping off the hidden path does (it pays rewards.misstep)."""

    to: Literal["start", "stay"] = Field(
        default="start", description="start: the agent is sent back to the path's start cell; stay: "
        "it stays on the path cell it stepped from.", examples=["start"])
    limit: int | None = Field(
        default=None, ge=1, le=64, description="The misstep that reaches this count ends the episode "
        "(a failure); null: missteps never end it.", examples=[None, 5])


MAX_MARK_STEPS = 1_000_000   # longer than any step limit taskgen can analyse: the same as 'episode'


def _mark_steps(value: Any) -> Any:
    if value == "episode" or (isinstance(value, int) and not isinstance(value, bool) and 1 <= value <= MAX_MARK_STEPS):
        return value
    raise expected_error(f"an integer in [1, {MAX_MARK_STEPS}] or 'episode'", value)


class Mark(Strict):
    """A feedback mark on the cell where the agent stepped off: a bit of the vector's marks block,
    a ring in the mark colour on that cell's tile in top-down pixels and the grid view's mark channel."""

    steps: Annotated[
        Union[int, Literal["episode"]], BeforeValidator(_mark_steps),
        WithJsonSchema({"anyOf": [{"type": "integer", "minimum": 1, "maximum": MAX_MARK_STEPS},
                                  {"const": "episode"}]}),
    ] = Field(default="episode", description="How many observations the mark is part of, the one "
              "right after the misstep included; 'episode': until the episode ends.", examples=[3, "episode"])
    colour: Annotated[list[Annotated[int, Field(ge=0, le=255)]], Field(min_length=3, max_length=3)] = Field(
        default=[204, 121, 167], description="The colour of the mark's ring in top-down pixels, [red, green, "
        "blue] 0–255 (default reddish purple); it may not be the floor, wall or agent colour.",
        examples=[[204, 121, 167]])

    @field_validator("colour")
    @classmethod
    def _visible(cls, colour: list[int]) -> list[int]:
        taken: dict[tuple[int, ...], str] = {(20, 20, 28): "the floor", (150, 150, 160): "the walls",
                                             (255, 255, 255): "the agent"}
        if tuple(colour) in taken:
            raise expected_error(f"a colour other than {taken[tuple(colour)]}'s", str(colour))
        return colour


class FieldMaze(Strict):
    """Walls laid over a field, drawn per variant: the hidden path then follows the passages."""

    generator: Literal["uniform", "backtracker", "rooms"] = Field(
        default="uniform", description="As for maze layouts: uniform (Wilson's algorithm), backtracker "
        "(long winding corridors) or rooms (open square rooms joined by doors).", examples=["uniform"])
    room_size: int = Field(default=3, ge=1, le=MAX_FIELD_SIDE, description="Side of each room for the rooms "
                           "generator (width and height must be multiples of it).", examples=[3])
    braid: float = Field(default=0.0, ge=0.0, le=1.0, description="Fraction of dead ends opened into loops.",
                         examples=[0.0, 0.3])


class FieldLayout(Strict):
    """A field of width × height cells, open or with maze walls, with a hidden safe path across it."""

    width: int_param(1, MAX_FIELD_SIDE) = Field(  # type: ignore[valid-type]
        description="Cells across (west to east); an integer, {range: [low, high]} or {choice: [...]}, "
        "drawn per variant.", examples=[5, {"range": [4, 6]}])
    height: int_param(1, MAX_FIELD_SIDE) = Field(  # type: ignore[valid-type]
        description="Cells down (north to south); like width.", examples=[6])
    path: HiddenPath = Field(default_factory=HiddenPath, description="The hidden safe path.",
                             examples=[{"start_side": "south", "turns": 2}])
    misstep: Misstep = Field(default_factory=Misstep, description="What stepping off the path does.",
                             examples=[{"to": "start", "limit": None}])
    mark: Mark | None = Field(default_factory=Mark, description="The feedback mark, or null for none.",
                              examples=[{"steps": 4}, None])
    maze: FieldMaze | None = Field(
        default=None, description="Walls drawn per variant, or null for an open field. With walls the "
        "path is the shortest way through the passages from a start cell on the start side to an end "
        "cell drawn on the far side each episode (path.turns and path.width then do not apply).",
        examples=[None, {"generator": "rooms", "room_size": 3}])

    @model_validator(mode="after")
    def _maze_decides_the_path(self) -> "FieldLayout":
        if self.maze is not None:
            if self.path.turns != IntParam(0, 0):
                _refuse("path.turns", "no path.turns with field walls (the passages decide the path)",
                        repr(self.path.turns.to_yaml()))
            if self.path.width != 1:
                _refuse("path.width", "path width 1 with field walls", repr(self.path.width))
        return self


FAMILIES = ("corridor", "maze", "field")   # layout families, one per spec


class _OneFamily(Strict):
    """A layout block: exactly one of the layout families is given (the rule that picks the spec type)."""

    @model_validator(mode="before")
    @classmethod
    def _one_family(cls, data: Any) -> Any:
        if isinstance(data, dict) and set(data) <= set(FAMILIES):   # unknown keys: reported as such
            given = [name for name in FAMILIES if data.get(name) is not None]
            if len(given) != 1:
                _refuse("", "exactly one of corridor, maze, field", " and ".join(given) if given else "neither")
        return data


class CueLayout(_OneFamily):
    """Where the agent walks in a cue task: a corridor or a maze."""

    corridor: Corridor | None = Field(default=None, description="A cue-recall corridor with one arm per "
                                      "cue value.", examples=[{"length": 8, "arm_length": 2}])
    maze: Maze | None = Field(default=None, description="A procedural maze with one goal per cue value.",
                              examples=[{"width": 7, "height": 7, "goals_in_dead_ends": True}])

    @property
    def family(self) -> str:
        """The layout family's name."""
        return "corridor" if self.corridor is not None else "maze"


class FieldTaskLayout(_OneFamily):
    """Where the agent walks in a hidden-path task: a field."""

    field: FieldLayout = Field(
        description="A field, open or walled, traversed along a hidden path (no cue: the path is what the agent "
        "must learn and remember within an episode).", examples=[{"width": 5, "height": 6, "path": {"turns": 2}}])

    @property
    def family(self) -> str:
        """The layout family's name."""
        return "field"


class Decision(Strict):
    """Which goal the cue names, and what a wrong goal does."""

    rule: Literal["match", "non_match"] = Field(
        default="match", description="match: the goal (arm) of the cue's value pays; non_match: every "
        "other goal pays and the cue's own does not.", examples=["match"])
    wrong: Literal["end", "continue"] = Field(
        default="end", description="end: entering a wrong goal ends the episode; continue: it pays "
        "rewards.wrong and the episode goes on.", examples=["end"])


class Cue(Strict):
    """The signal the agent must remember: which arm is rewarded this episode."""

    values: int = Field(
        ge=2, le=MAX_CUE_VALUES,
        description="How many cue values (and arms) there are; drawn uniformly at every reset.",
        examples=[2, 3],
    )
    visible_steps: int = Field(
        default=1, ge=1,
        description="With display 'start': the cue is part of the first N observations of an episode "
        "(the reset one is the first).",
        examples=[1, 3],
    )
    sequence_length: int = Field(
        default=1, ge=1, le=4,
        description="How many cue values are shown in turn (each for visible_steps observations); "
        "the goals must then be visited in that order (decision rule 'match' only).",
        examples=[1, 3])
    display: Literal["start", "site"] = Field(
        default="start", description="start: shown for the first visible_steps observations; site: "
        "shown whenever the agent stands on the cue site (a drawn cell in a maze, the start cell in a "
        "corridor).", examples=["start", "site"])


class Rewards(Strict):
    """What each outcome pays. Rewards are added, so a step into the right arm end pays step + correct."""

    correct: float = Field(default=1.0, ge=-MAX_REWARD, le=MAX_REWARD, description="Entering a goal (arm end) that pays.", examples=[1.0])
    per_goal: list[Annotated[float, Field(ge=-MAX_REWARD, le=MAX_REWARD)]] | None = Field(
        default=None, description="Optional reward of each goal (arm) in goal order, one per cue value, "
        "replacing 'correct' when that goal pays.", examples=[[1.0, 0.5]])
    wrong: float = Field(default=0.0, ge=-MAX_REWARD, le=MAX_REWARD, description="Entering a goal (arm end) that does not pay.", examples=[-1.0])
    step: float = Field(default=0.0, ge=-MAX_REWARD, le=MAX_REWARD, description="Paid on every step, the last one included.", examples=[-0.01])
    timeout: float = Field(
        default=0.0, ge=-MAX_REWARD, le=MAX_REWARD, description="Added on the step that reaches the step limit without ending.",
        examples=[-0.5],
    )
    misstep: float = Field(default=0.0, ge=-MAX_REWARD, le=MAX_REWARD,
                           description="Stepping off a field's hidden path (field layouts only; there "
                           "'correct' pays for reaching the path's end).", examples=[-0.1])


def _max_steps(value: Any) -> Any:
    if value == "auto" or (isinstance(value, int) and not isinstance(value, bool) and value >= 1):
        return value
    raise expected_error("an integer ≥ 1 or 'auto'", value)


class Episode(Strict):
    """How long an episode may last and how the analyses weigh time."""

    max_steps: Annotated[
        Union[int, Literal["auto"]], BeforeValidator(_max_steps),
        WithJsonSchema({"anyOf": [{"type": "integer", "minimum": 1}, {"const": "auto"}]}),
    ] = Field(
        default="auto",
        description="Step limit (truncation). 'auto' sets it to ceil(max_steps_factor × the longest "
        "shortest solution over cue values) for each variant.",
        examples=["auto", 40],
    )
    max_steps_factor: float = Field(
        default=2.0, ge=1.0, le=100.0, description="Multiplier used when max_steps is 'auto'.", examples=[2.0]
    )
    discount: float = Field(
        default=1.0, gt=0.0, le=1.0,
        description="Discount factor γ of the returns the analyses report (the environment never discounts).",
        examples=[1.0, 0.99],
    )


class Noise(Strict):
    """Distractor bits appended to the vector: each flips with the given probability every step."""

    bits: int = Field(ge=1, le=1024, description="How many noise bits.", examples=[8])
    flip_probability: float = Field(
        ge=0.0, le=1.0, description="Chance that a bit flips on a step (initial bits are uniform).",
        examples=[0.1],
    )


class VectorObservation(Strict):
    """A flat float32 vector made of named blocks, in this order: cue, position, walls, goals,
    heading (with turns), marks (fields), noise."""

    cue: bool = Field(default=True, description="One bit per cue value, set while the cue is visible.",
                      examples=[True])
    position: Literal["one_hot", "coordinates", "none"] = Field(
        default="one_hot",
        description="one_hot: a bit per cell; coordinates: row and column scaled to [0, 1]; none: no position.",
        examples=["one_hot"],
    )
    walls: bool = Field(default=True, description="Four bits: a wall to the north, east, south, west.",
                        examples=[True])
    goals: bool = Field(default=False, description="One bit per goal (arm end), set while the agent "
                        "stands on it.", examples=[False])
    marks: bool = Field(default=True, description="Field layouts with a mark: one bit per cell, set "
                        "while a feedback mark shows there.", examples=[True])
    noise: Noise | None = Field(default=None, description="Distractor noise bits, or null for none.",
                                examples=[{"bits": 8, "flip_probability": 0.1}])


def _odd(value: Any) -> Any:
    if isinstance(value, int) and not isinstance(value, bool) and value % 2 == 0:
        raise expected_error("an odd number (the agent sits in the middle)", value)
    return value


class GridObservation(Strict):
    """A window of cells centred on the agent: uint8 channels open, wall north / east / south /
    west, goal (cue value + 1), cue (shown value + 1, at the agent), agent (1, or heading + 1);
    a field adds a ninth channel, mark (1 where a feedback mark shows), and has no goal or cue."""

    size: Annotated[int, BeforeValidator(_odd)] = Field(
        default=5, ge=1, le=31, description="Cells across the (square, odd-sided) window.", examples=[5])
    frame: Literal["north_up", "egocentric"] = Field(
        default="north_up", description="north_up: north at the top; egocentric: the agent's heading at "
        "the top (needs agent.actions: turns).", examples=["north_up"])


class PixelNoise(Strict):
    """Noise added to every pixel frame, drawn afresh each step."""

    kind: Literal["gaussian", "salt_pepper"] = Field(
        description="gaussian: add N(0, (amplitude·255)²) per channel, clipped; salt_pepper: each pixel "
        "turns black or white with probability amplitude.", examples=["gaussian"])
    amplitude: float = Field(ge=0.0, le=1.0, description="Noise strength (see kind).", examples=[0.05])


class PixelObservation(Strict):
    """A top-down RGB picture (uint8): a wall-coloured strip whose lamp at its right end is lit in the
    cue colour while the cue is shown, above the map (full) or a window of cells centred on the agent."""

    height: int = Field(default=64, ge=8, le=512, description="Frame height in pixels.", examples=[64])
    width: int = Field(default=64, ge=8, le=512, description="Frame width in pixels.", examples=[64])
    view: Literal["full", "window"] = Field(default="full", description="The whole map, or a window "
                                            "around the agent.", examples=["full", "window"])
    window: Annotated[int, BeforeValidator(_odd)] = Field(
        default=5, ge=1, le=31, description="Cells across the window view (odd; as the grid view's size).",
        examples=[5])
    noise: PixelNoise | None = Field(default=None, description="Pixel noise, or null for none.",
                                     examples=[{"kind": "salt_pepper", "amplitude": 0.02}])


class FirstPersonObservation(Strict):
    """A first-person RGB view (uint8) by raycasting: walls shaded by distance, goal walls in their
    cue colour, a strip along the top whose lamp is lit in the cue colour while the cue is shown.
    Needs agent.actions: turns."""

    height: int = Field(default=64, ge=8, le=512, description="Frame height in pixels.", examples=[64])
    width: int = Field(default=64, ge=8, le=512, description="Frame width in pixels (one ray per column).",
                       examples=[64])
    fov: float = Field(default=66.0, gt=0.0, lt=180.0, description="Horizontal field of view in degrees.",
                       examples=[66.0])


class Distractors(Strict):
    """Signals that look like the cue (or, in a field, a mark) but are not it, drawn afresh each
    step from the episode's stream."""

    decoy_probability: float = Field(
        default=0.0, ge=0.0, le=1.0, description="Chance per step that, while the real cue is not shown, a "
        "decoy cue value (uniform over the values, so it carries nothing about the real one) appears "
        "wherever the cue would: vector cue bits, grid cue channel, the lamp of pixel frames. In a field: that a "
        "decoy mark shows on a cell drawn uniformly among those the agent is not on, for that "
        "observation only (it says nothing about the path).", examples=[0.1])
    lure_probability: float = Field(
        default=0.0, ge=0.0, le=1.0, description="Chance per step that a random floor tile flashes a cue "
        "colour (top-down pixels) or cue value (grid view).", examples=[0.2])


class Observation(Strict):
    """What the agent receives: one modality (then a Box) or several (then a Dict keyed by name)."""

    vector: VectorObservation | None = Field(
        default_factory=VectorObservation, description="The vector observation (null to leave it out). "
        "When left unsaid it is on only if no other modality is asked for: a spec with pixels, a grid "
        "view or first-person frames gets just those unless it gives vector itself.",
        examples=[{"cue": True, "position": "one_hot", "walls": True}],
    )
    grid: GridObservation | None = Field(default=None, description="A local grid view, or null.",
                                         examples=[{"size": 5}])
    pixels: PixelObservation | None = Field(default=None, description="Top-down pixels, or null.",
                                            examples=[{"height": 64, "width": 64, "view": "full"}])
    first_person: FirstPersonObservation | None = Field(
        default=None, description="First-person pixels, or null.", examples=[{"height": 48, "width": 64}])
    distractors: Distractors = Field(default_factory=Distractors, description="Decoy cues and lure tiles.",
                                     examples=[{"decoy_probability": 0.05, "lure_probability": 0.1}])

    @model_validator(mode="before")
    @classmethod
    def _vector_when_alone(cls, data: Any) -> Any:
        """No default vector beside another modality (an image policy would get a Dict it did not ask for)."""
        if isinstance(data, dict) and "vector" not in data and \
                any(data.get(name) is not None for name in ("grid", "pixels", "first_person")):
            return {**data, "vector": None}
        return data

    @model_validator(mode="after")
    def _something(self) -> "Observation":
        if not self.modalities():
            _refuse("", "at least one of vector, grid, pixels, first_person", "none")
        return self

    def modalities(self) -> list[str]:
        """Names of the requested modalities, in a fixed order."""
        return [name for name in ("vector", "grid", "pixels", "first_person") if getattr(self, name) is not None]


class Agent(Strict):
    """How the agent moves."""

    actions: Literal["moves", "turns"] = Field(
        default="moves", description="moves: Discrete(4) north, east, south, west; turns: Discrete(3) "
        "forward, turn right, turn left, with a heading (needed by first_person and the egocentric grid).",
        examples=["moves", "turns"])


class _Header(Strict):
    """The keys every spec starts with."""

    format_version: Literal[1] = Field(
        description="Version of the spec language this file is written in.", examples=[1]
    )
    name: str = Field(
        pattern=r"^[a-z0-9][a-z0-9-]{0,62}$",
        description="Lower-case name with dashes; bundled specs register as taskgen/<name>-v<format_version>.",
        examples=["orchard-gate"],
    )
    # the overrides applied when the spec was loaded, as (dotted key, JSON value), sorted: they tag its variants' ids
    _overrides: tuple[tuple[str, str], ...] = PrivateAttr(default=())

    @property
    def overrides(self) -> dict[str, Any]:
        """The overrides this spec was loaded with (dotted keys, plain values); empty for a spec as written."""
        return {key: json.loads(value) for key, value in self._overrides}

    @property
    def override_tag(self) -> str:
        """'' for a spec as written, else '+' and 8 hex digits of its overrides' digest (part of variant ids)."""
        if not self._overrides:
            return ""
        return "+" + hashlib.sha256(json.dumps(self._overrides).encode()).hexdigest()[:8]
    description: str = Field(default="", description="What the task tests, in a sentence or two.",
                             examples=["Two-arm recall after a hall of 6 to 12 steps."])


class _Settings(Strict):
    """The keys every spec ends with: how the agent acts, what it is paid, how long it plays, what it sees."""

    agent: Agent = Field(default_factory=Agent, description="The agent's actions (moves or turns).",
                         examples=[{"actions": "turns"}])
    rewards: Rewards = Field(default_factory=Rewards, description="Rewards of outcomes and steps.",
                             examples=[{"correct": 1.0, "wrong": -1.0, "step": -0.01}])
    episode: Episode = Field(default_factory=Episode, description="Step limit and discount.",
                             examples=[{"max_steps": "auto", "discount": 0.99}])
    observation: Observation = Field(default_factory=Observation, description="What the agent sees.",
                                     examples=[{"vector": {"position": "coordinates"}}])


class _CueParts(Strict):
    """The keys of a cue task between the header and the settings."""

    layout: CueLayout = Field(description="The layout family and its parameters.",
                              examples=[{"corridor": {"length": 8}}])
    cue: Cue = Field(description="The cue to remember (required by corridor and maze layouts; a field has "
                     "none).", examples=[{"values": 2, "visible_steps": 1}])
    decision: Decision = Field(default_factory=Decision, description="How the cue decides which goal pays.",
                               examples=[{"rule": "non_match", "wrong": "end"}])


class _FieldParts(Strict):
    """The keys of a hidden-path task between the header and the settings."""

    layout: FieldTaskLayout = Field(description="The layout family and its parameters.",
                                    examples=[{"field": {"width": 5, "height": 6}}])


# Each spec type lists its keys header first, then its own, then the settings: pydantic collects
# the fields of the bases from the last one to the first.
class CueTaskSpec(_Settings, _CueParts, _Header):
    """A memory-task spec with a cue (a corridor or a maze layout): one YAML document."""

    @model_validator(mode="after")
    def _parts_agree(self) -> "CueTaskSpec":
        obs = self.observation
        needs_heading = obs.first_person is not None or (obs.grid is not None and obs.grid.frame == "egocentric")
        if needs_heading and self.agent.actions != "turns":
            _refuse("agent.actions", "agent.actions 'turns' for a first-person or egocentric view",
                    repr(self.agent.actions))
        goals = self.rewards.per_goal
        if goals is not None and len(goals) != self.cue.values:
            _refuse("rewards.per_goal", f"rewards.per_goal with one reward per cue value ({self.cue.values})",
                    str(len(goals)))
        if self.cue.sequence_length > 1 and self.decision.rule != "match":
            _refuse("decision.rule", "decision.rule 'match' with a cue sequence", repr(self.decision.rule))
        if self.cue.sequence_length > 1 and self.cue.display != "start":
            _refuse("cue.display", "cue.display 'start' with a cue sequence", repr(self.cue.display))
        return self


class FieldSpec(_Settings, _FieldParts, _Header):
    """A hidden-path memory-task spec (a field layout): one YAML document. A field has no cue: the hidden
    path is what the agent must remember."""

    @model_validator(mode="before")
    @classmethod
    def _no_cue_parts(cls, data: Any) -> Any:
        """A cue or a decision rule means nothing here and is refused; null and the default decision, which
        specs written out by earlier versions list, are accepted and dropped."""
        if not isinstance(data, dict) or ("cue" not in data and "decision" not in data):
            return data
        data = dict(data)
        if data.pop("cue", None) is not None:
            _refuse("cue", "no cue block with a field layout (the hidden path is what the agent must "
                    "remember)", "a cue block")
        decision = data.pop("decision", None)
        if decision is not None and not _is_default_decision(decision):
            _refuse("decision", "no decision rule with a field layout (reaching the path's end pays "
                    "rewards.correct)", "a decision block")
        return data

    @model_validator(mode="after")
    def _field_rules(self) -> "FieldSpec":
        for name, default in (("wrong", 0.0), ("per_goal", None)):
            if getattr(self.rewards, name) != default:
                _refuse(f"rewards.{name}", "no rewards.wrong or rewards.per_goal with a field layout (a misstep "
                        "pays rewards.misstep)", f"rewards.{name}")
        obs = self.observation
        if obs.first_person is not None:
            _refuse("observation.first_person", "observation.vector, grid and/or pixels with a field layout "
                    "(a first-person view needs turns)", "observation.first_person")
        if self.agent.actions != "moves":
            _refuse("agent.actions", "agent.actions 'moves' with a field layout", repr(self.agent.actions))
        if obs.distractors.lure_probability > 0:
            _refuse("observation.distractors.lure_probability", "no lures with a field layout (there is no "
                    "cue colour to flash; decoy_probability gives decoy marks)",
                    repr(obs.distractors.lure_probability))
        if obs.distractors.decoy_probability > 0 and self.layout.field.mark is None:
            _refuse("observation.distractors.decoy_probability", "a mark block (layout.field.mark) for decoy "
                    "marks to imitate", "mark: null")
        return self


#: Keys earlier versions of the spec language used, per block: (block, old key) → the key that replaced it.
#: A spec that still uses one is refused with an error naming the new key (no silent alias).
RENAMED: dict[tuple[type[BaseModel], str], str] = {
    (FieldLayout, "fall"): "misstep",
    (Misstep, "max_falls"): "limit",
    (Rewards, "fall"): "misstep",
}


def _is_default_decision(data: Any) -> bool:
    try:
        return Decision.model_validate(data) == Decision()
    except ValidationError:
        return False


#: A validated spec: its type says which parts it has (a cue task has a cue, a field has none).
Spec = Union[CueTaskSpec, FieldSpec]
SPEC_TYPES: tuple[type[CueTaskSpec], type[FieldSpec]] = (CueTaskSpec, FieldSpec)


def spec_type(data: Any) -> type[CueTaskSpec] | type[FieldSpec]:
    """The spec type raw spec data asks for: a field spec when its layout names a field, else a cue task
    (whose layout rule then reports a layout that names none, or more than one family)."""
    layout = data.get("layout") if isinstance(data, dict) else None
    return FieldSpec if isinstance(layout, dict) and layout.get("field") is not None else CueTaskSpec
