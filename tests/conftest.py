"""Fixtures shared by the test files: the invented stars, solved once per session.

The demo (configs/demo.toml, the packaged ``windsolve.demo_model_path()``) and
the bump wind (configs/bump_wind.toml) are solved here once, not once per
file; their results are read-only (a test that needs a changed model makes
its own with ``model.replace``).  ``demo_h5`` is the demo result as written by
``WindResult.to_hdf5``; tests that damage a file copy it first.
"""

from pathlib import Path

import pytest

import windsolve

CONFIGS = Path(__file__).resolve().parent.parent / "configs"
BUMP_PATH = CONFIGS / "bump_wind.toml"


@pytest.fixture(scope="session")
def demo_text():
    """The demo model file's text (an invented star)."""
    return Path(str(windsolve.demo_model_path())).read_text(encoding="utf-8")


@pytest.fixture(scope="session")
def demo_model():
    return windsolve.load_model(windsolve.demo_model_path())


@pytest.fixture(scope="session")
def demo_result(demo_model):
    """The demo solved once (Model A, porous, converged)."""
    result = windsolve.solve(demo_model)
    assert result.converged, result.message
    return result


@pytest.fixture(scope="session")
def demo_h5(demo_result, tmp_path_factory):
    """The demo result written to HDF5 (do not change it in place: copy it)."""
    return demo_result.to_hdf5(tmp_path_factory.mktemp("demo") / "demo.h5")


@pytest.fixture(scope="session")
def bump_model():
    return windsolve.load_model(BUMP_PATH)


@pytest.fixture(scope="session")
def bump_result(bump_model):
    """configs/bump_wind.toml solved once (Model B, converged)."""
    result = windsolve.solve(bump_model)
    assert result.converged, result.message
    return result


@pytest.fixture(scope="session")
def bump_h5(bump_result, tmp_path_factory):
    """The bump-wind result written to HDF5 (do not change it in place: copy it)."""
    return bump_result.to_hdf5(tmp_path_factory.mktemp("bump") / "bump.h5")


@pytest.fixture
def write_model(tmp_path):
    """``write_model(text, name="model.toml")``: a model file in the test's tmp_path."""
    def write(text, name="model.toml"):
        path = tmp_path / name
        path.write_text(text, encoding="utf-8")
        return path
    return write
