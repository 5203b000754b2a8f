import numpy as np
import pytest


@pytest.fixture
def rng():
    """Seeded generator so that every random test is repeatable."""
    return np.random.default_rng(12345)


@pytest.fixture(scope="session")
def demo_archive_path(tmp_path_factory):
    """The demo archive, built once per test session (about 45 s): analysed, with the
    demo plans set and every run evaluated.  Tests must not change it: copy it first
    (``shutil.copytree``) when a test writes."""
    import warnings

    from engine.demo_archive import build_demo_archive
    from engine.errors import EngineWarning

    path = tmp_path_factory.mktemp("demo") / "demo-works.shaftwatch"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", EngineWarning)
        build_demo_archive(path)
    return path


@pytest.fixture
def demo_archive_copy(demo_archive_path, tmp_path):
    """A copy of the demo archive that the test may change."""
    import shutil

    dst = tmp_path / "demo-copy.shaftwatch"
    shutil.copytree(demo_archive_path, dst)
    return dst
