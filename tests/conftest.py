import numpy as np
import pytest


@pytest.fixture
def rng():
    """Seeded generator so that every random test is repeatable."""
    return np.random.default_rng(12345)
