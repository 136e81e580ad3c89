"""The factored generator draws the very same numbers as the plain one."""

import numpy as np

from tracer._kernels.rng import path_key, uniform, uniform_at


def test_path_key_then_dimension_equals_uniform():
    for seed, pixel, sample, dim in [(0, 0, 0, 0), (3, 17, 5, 2**32 + 7), (2**40, 10**6, 123, 5 * 2**32 + 2**20)]:
        assert uniform_at(path_key(seed, pixel, sample), dim) == uniform(seed, pixel, sample, dim)
    draws = [uniform_at(path_key(9, 4, 2), d) for d in range(1000)]
    assert 0.45 < np.mean(draws) < 0.55 and len(set(draws)) == 1000
