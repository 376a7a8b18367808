"""Stability theorem as a property test.

Source: D. Cohen-Steiner, H. Edelsbrunner, J. Harer, "Stability of persistence diagrams",
Discrete Comput. Geom. 37 (2007) 103-120: for two functions f, g on the same complex,
the bottleneck distance between their diagrams is at most ||f - g||∞, in every dimension.
"""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from cavitas.cubical import bottleneck, persistence


def _shapes(ndim):
    side = st.integers(2, 7 if ndim == 2 else 4)
    return st.tuples(*[side] * ndim)


def _case(ndim):
    """f with many ties (small integers), a noise level ε, and a noise pattern."""
    return st.tuples(
        _shapes(ndim).flatmap(lambda s: arrays(np.float64, s, elements=st.integers(0, 6))),
        st.sampled_from([0.25, 0.5, 1.0, 2.5]),
        st.sampled_from(["uniform", "extreme", "sparse"]),
        st.integers(0, 2**31 - 1),
    )


def _noise(shape, eps, kind, seed):
    rng = np.random.default_rng(seed)
    if kind == "uniform":
        return rng.uniform(-eps, eps, shape)
    if kind == "extreme":  # every voxel moved by exactly ±ε
        return eps * rng.choice([-1.0, 1.0], shape)
    noise = np.zeros(shape)  # a few voxels moved by ±ε (opens or closes walls)
    noise.flat[rng.integers(0, noise.size, 3)] = eps * rng.choice([-1.0, 1.0], 3)
    return noise


@pytest.mark.parametrize("walls", ["bright", "dark"])
@pytest.mark.parametrize("full", [False, True], ids=["faces", "full"])
@pytest.mark.parametrize("ndim", [2, 3])
def test_bottleneck_is_at_most_the_sup_norm_of_the_noise(ndim, full, walls):
    connectivity = ndim if full else 1

    @settings(max_examples=25)
    @given(_case(ndim))
    def check(case):
        f, eps, kind, seed = case
        g = f + _noise(f.shape, eps, kind, seed)
        sup = float(np.max(np.abs(g - f)))  # the actual ||f - g||∞ in float64
        dgm_f = persistence(f, walls=walls, connectivity=connectivity)
        dgm_g = persistence(g, walls=walls, connectivity=connectivity)
        for dim in (0, ndim - 1):
            assert bottleneck(dgm_f, dgm_g, dim) <= sup + 1e-12

    check()
