"""Variants: per-variant parameter draws are seeded, cover their range and keep to their choices."""

from __future__ import annotations

import numpy as np
import pytest

from taskgen import load_spec_text, make_variant

from conftest import corridor_spec_text


def test_same_seed_same_variant_and_ids_name_the_seed():
    """The same spec and seed always give the same parameters; the id is <name>-s<seed>."""
    spec = load_spec_text(corridor_spec_text(length={"range": [1, 50]}, arm_length={"choice": [1, 4]}))
    a, b = make_variant(spec, 9), make_variant(spec, 9)
    assert a.params == b.params and a.variant_id == "test-corridor-s9"
    assert np.array_equal(a.layout.cells, b.layout.cells)


def test_range_draws_are_uniform():
    """Each value of {range: [2, 5]} appears with frequency 1/4 within 4 standard errors
    (binomial proportion; common practice)."""
    spec = load_spec_text(corridor_spec_text(length={"range": [2, 5]}))
    n = 2000
    draws = np.array([make_variant(spec, s).params.length for s in range(n)])
    assert set(draws) == {2, 3, 4, 5}
    for v in range(2, 6):
        assert abs((draws == v).mean() - 0.25) <= 4 * np.sqrt(0.25 * 0.75 / n)


def test_choice_draws_only_listed_values():
    """{choice: [...]} never produces an unlisted value and reaches every listed one."""
    spec = load_spec_text(corridor_spec_text(length={"choice": [3, 7, 11]}))
    draws = {make_variant(spec, s).params.length for s in range(200)}
    assert draws == {3, 7, 11}


@pytest.mark.parametrize("bad", [-1, 1.5, True, "3"])
def test_variant_seed_must_be_a_natural_number(bad):
    """A negative, fractional, boolean or text seed is refused."""
    spec = load_spec_text(corridor_spec_text())
    with pytest.raises(ValueError, match="variant seed must be an integer ≥ 0"):
        make_variant(spec, bad)
