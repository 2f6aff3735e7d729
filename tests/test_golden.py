"""Golden determinism: committed hashes of 1,000 steps per example, recomputed in a fresh process."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import taskgen

GOLDEN = Path(__file__).resolve().parent / "golden"


def test_episode_hashes_match_the_committed_ones_in_a_fresh_process():
    """Same spec and seed, same episodes: a new interpreter reproduces every committed hash
    (common practice: golden-file regression tests)."""
    committed = json.loads((GOLDEN / "episodes.json").read_text())
    assert set(taskgen.bundled_specs()) <= set(committed), "run tests/golden/episodes.py --write"
    out = subprocess.run([sys.executable, str(GOLDEN / "episodes.py")], capture_output=True, text=True,
                         check=True)
    assert json.loads(out.stdout) == committed
