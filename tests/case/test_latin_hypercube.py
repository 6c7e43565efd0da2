"""The numpy Latin hypercube: scipy's draws, exact stratification, and the samples of a case."""

from __future__ import annotations

import numpy as np
import pytest
from case_texts import MINIMAL
from scipy.stats import qmc

from robustff.case import parse_case
from robustff.case.sampling import sample, uniform_scores


@pytest.mark.parametrize(("n", "d", "seed"), [(1, 1, 0), (2, 3, 5), (37, 4, 20240611),
                                               (1000, 6, 77), (513, 1, 2**40)])
def test_same_points_as_scipy_latin_hypercube(n: int, d: int, seed: int) -> None:
    # Reference: scipy.stats.qmc.LatinHypercube (scipy's own implementation, default strength 1,
    # scrambled, no optimisation) from a generator seeded alike.
    expected = qmc.LatinHypercube(d, rng=np.random.default_rng(seed)).random(n)
    got = uniform_scores("lhs", n, d, seed)
    np.testing.assert_array_equal(got, np.clip(expected, 2.0**-53, 1 - 2.0**-53))


def test_same_points_as_scipy_from_a_seed_sequence() -> None:
    sequence = np.random.SeedSequence(123, spawn_key=(4,))
    reference = np.random.SeedSequence(123, spawn_key=(4,))  # scipy spawns from (changes) it
    expected = qmc.LatinHypercube(3, rng=np.random.default_rng(reference)).random(200)
    np.testing.assert_array_equal(uniform_scores("lhs", 200, 3, sequence), expected)
    # the caller's seed sequence is not consumed: the same call gives the same points
    np.testing.assert_array_equal(uniform_scores("lhs", 200, 3, sequence), expected)


def test_every_stratum_holds_exactly_one_point_per_column() -> None:
    # Definition of a Latin hypercube (McKay, Beckman and Conover, Technometrics 21 (1979)
    # 239-245; from memory): each of the n equal intervals of every axis holds one point.
    n, d = 250, 5
    points = uniform_scores("lhs", n, d, 9)
    for column in range(d):
        strata = np.floor(points[:, column] * n).astype(int)
        assert sorted(strata) == list(range(n))


def test_skip_returns_the_tail_of_the_whole_plan() -> None:
    whole = uniform_scores("lhs", 120, 2, 4)
    np.testing.assert_array_equal(uniform_scores("lhs", 20, 2, 4, skip=100), whole[100:])
    assert uniform_scores("lhs", 0, 2, 4).shape == (0, 2)


def test_case_samples_follow_the_hypercube() -> None:
    case = parse_case(MINIMAL + '\n[uncertainty]\n"process.gain" = { uniform = [1.0, 3.0] }\n'
                      '\n[study]\nsampling = "lhs"\n')
    values, names = sample(case, 40, 8)
    assert names == ["process.gain"]
    strata = np.floor((values[:, 0] - 1.0) / 2.0 * 40).astype(int)
    assert sorted(strata) == list(range(40))
