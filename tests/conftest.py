"""Test-wide settings: the cache of loaded models lives in a temporary folder, never the user's."""

import pytest


@pytest.fixture(autouse=True, scope="session")
def _private_model_cache(tmp_path_factory):
    with pytest.MonkeyPatch.context() as patch:
        patch.setenv("XDG_CACHE_HOME", str(tmp_path_factory.mktemp("xdg-cache")))
        yield


@pytest.fixture()
def picture_inputs(monkeypatch):
    """Every word handed to the word-cloud layout and every text drawn in a figure of any picture module."""
    import matplotlib.text
    import wordcloud

    from explain.present import assess_pictures, probe_pictures, vocab_pictures

    seen = []
    layout = wordcloud.WordCloud.generate_from_frequencies

    def recording_layout(self, frequencies, *args, **kwargs):
        seen.extend(frequencies)
        return layout(self, frequencies, *args, **kwargs)

    monkeypatch.setattr(wordcloud.WordCloud, "generate_from_frequencies", recording_layout)
    for module in (vocab_pictures, assess_pictures, probe_pictures):
        png = module.png_bytes

        def recording_png(fig, png=png):
            seen.extend(t.get_text() for t in fig.findobj(matplotlib.text.Text))
            return png(fig)

        monkeypatch.setattr(module, "png_bytes", recording_png)
    return seen
