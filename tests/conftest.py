"""Test-wide settings: the cache of loaded models lives in a temporary folder, never the user's."""

import pytest


@pytest.fixture(autouse=True, scope="session")
def _private_model_cache(tmp_path_factory):
    with pytest.MonkeyPatch.context() as patch:
        patch.setenv("XDG_CACHE_HOME", str(tmp_path_factory.mktemp("xdg-cache")))
        yield
