"""Loading a trained filter from untrusted files.

A model file is hostile until proven otherwise:

- pickle and joblib files can run code while they load. They are refused
  *before* they are opened unless ``allow_pickle`` is set; the format is
  recognised from the first bytes, so nothing is unpickled to find out.
- skops files (the default, and what ``nbledger train`` writes) are zip
  archives: the sizes their members declare once inflated are checked against
  the memory limit before anything is inflated (Python's ``zipfile`` never
  inflates a member past its declared size).
- The file is then opened in a separate process (started and watched by
  :mod:`explain.model.load_process`, run by :mod:`explain.model.load_child`:
  a fork of this one where that is safe, else a new interpreter)
  under a memory limit and a time limit (:class:`~explain.model.load_process.LoadLimits`),
  with skops' allow-list (:mod:`explain.model.model_files`): types it does not trust are refused, named, and may be accepted
  one by one (``trust``). That process hands back only plain data
  (:mod:`explain.model.plain_form`); this process rebuilds the scikit-learn
  text step from it and checks that it reproduces the original's features.
- The plain form is cached by the file's SHA-256 (:mod:`explain.model.model_cache`),
  so the next load of the same file is fast.
- A text step that runs code of its own (a custom analyzer, preprocessor or
  tokenizer) cannot travel as data: it is loaded in this process, and only
  when the user trusted its types by name (``trust``) or allowed pickles.

The loaded object must be a scikit-learn ``Pipeline`` whose last step is a
naive Bayes classifier and whose earlier steps make text features, or a
classifier file plus a separate vectorizer file.
"""

from __future__ import annotations

import functools
import hashlib
import os
from dataclasses import dataclass, replace
from pathlib import Path
from typing import TYPE_CHECKING, Callable

from explain.errors import NbledgerError
from explain.model.input_files import input_file
from explain.model.load_process import LoadLimits, load_in_child
from explain.model.model_files import (
    check_archive, checked_format, first_line, read_card, read_object, sniff_format, split_pipeline,
)
from explain.model.model_view import ModelView, view_of

if TYPE_CHECKING:
    from explain.model.featurizer import Featurizer


@dataclass(frozen=True, eq=False)
class LoadedModel:
    """A filter ready to explain: its normalised view and its text steps."""

    view: ModelView
    featurizer: Featurizer
    path: Path
    sha256: str
    file_format: str
    card: dict | None = None
    classifier_settings: dict | None = None
    from_cache: bool = False

    @property
    def classes(self):
        return self.view.classes

    @functools.cached_property
    def fingerprint(self) -> str | None:
        """SHA-256 of what decides (:mod:`explain.model.fingerprint`); None for a text step of custom code."""
        from explain.model.fingerprint import fingerprint

        return fingerprint(self.view, self.featurizer, self.card)

    def named_for(self, texts) -> "LoadedModel":
        """Hashed features: the model with columns named by the tokens of ``texts`` (list of str).

        A column's name is every distinct token of ``texts`` hashed into it,
        joined by `` / ``; other columns keep their numbers. Unchanged for a
        model with a vocabulary.
        """
        if not self.featurizer.hashed:
            return self
        return replace(self, view=self.view.with_names(self.featurizer.hashed_names(texts)))

    def unfitted_copy(self):
        """A new, unfitted pipeline with the same steps and settings (:func:`sklearn.base.clone`).

        The classifier is made afresh from its plain settings
        (:func:`explain.model.plain_form.classifier_settings`): no object of the
        model file reaches this process.
        """
        from sklearn.base import clone
        from sklearn.pipeline import make_pipeline

        from explain.model.plain_form import classifier_from_settings

        vectorizer, tfidf = self.featurizer.vectorizer, self.featurizer.tfidf
        classifier = classifier_from_settings(self.classifier_settings)
        steps = [clone(vectorizer)] + ([] if tfidf is None or tfidf is vectorizer else [clone(tfidf)])
        return make_pipeline(*steps, classifier)


def load_model(
    path,
    *,
    vectorizer_path=None,
    allow_pickle: bool = False,
    trust: tuple[str, ...] = (),
    normal_class: str | None = None,
    on_warning: Callable[[str], None] | None = None,
    limits: LoadLimits | None = None,
) -> LoadedModel:
    """Load a filter safely and build its normalised view.

    ``normal_class`` overrides the one recorded in the model card; ``limits``
    bounds the loading process and says whether to use the cache.
    """
    from explain.model import model_cache, plain_form

    limits = limits or LoadLimits()
    path = input_file(path, "model file")
    kind = checked_format(path, allow_pickle, on_warning)
    files = [path]
    if vectorizer_path is not None:
        files.append(input_file(vectorizer_path, "vectorizer file"))
        checked_format(files[1], allow_pickle)
    for file in files:
        if sniff_format(file) == "skops":
            check_archive(file, limits.memory)
    digest = model_cache.file_sha256(path, limits.cache, on_warning)
    if len(files) > 1:
        second = model_cache.file_sha256(files[1], limits.cache, on_warning)
        key = hashlib.sha256(f"{digest}+{second}".encode()).hexdigest()
    else:
        key = digest
    size = sum(os.stat(f).st_size for f in files)
    card = read_card(path, digest, on_warning)
    if normal_class is None and card is not None:
        normal_class = (card.get("settings") or {}).get("normal_class")

    cached = model_cache.read(key, key, size, limits.memory, on_warning) if limits.cache else None
    if cached is not None:
        try:
            featurizer, view = plain_form.rebuild(*cached)
        except (NbledgerError, KeyError, ValueError, TypeError) as exc:
            cached = None  # an entry of another version of nbledger or scikit-learn: load afresh
            if on_warning is not None:
                on_warning(f"the cached copy of this model was not used ({first_line(exc)}); loading the model file afresh")
        else:
            return LoadedModel(
                view.with_normal_class(normal_class), featurizer, path, digest, kind, card,
                cached[1].get("classifier"), from_cache=True,
            )
    outcome = load_in_child(files, allow_pickle=allow_pickle, trust=tuple(trust), limits=limits)
    if outcome.get("accepted") and on_warning is not None:
        on_warning(f"accepted by name (--trust), as the file declares them: {', '.join(outcome['accepted'])}")
    if "needs_code" in outcome:
        if not (trust or allow_pickle):
            raise NbledgerError(
                f"{path.name}: the text step cannot be checked as plain data ({outcome['needs_code']}); "
                "it can only be loaded in this process if you trust its types by name (--trust TYPE)"
            )
        obj, _ = read_object(path, allow_pickle=allow_pickle, trust=trust)
        vec_obj = read_object(files[1], allow_pickle=allow_pickle, trust=trust)[0] if len(files) > 1 else None
        featurizer, classifier = split_pipeline(obj, vec_obj)
        view = view_of(classifier, featurizer.tokens, featurizer.feature_kind)
        classifier_settings = plain_form.classifier_settings(classifier)
    else:
        arrays, settings = outcome["plain"]
        featurizer, view = plain_form.rebuild(arrays, settings)
        classifier_settings = settings.get("classifier")
        if limits.cache:
            model_cache.write(key, arrays, settings, key, size)
    return LoadedModel(
        view.with_normal_class(normal_class), featurizer, path, digest, kind, card, classifier_settings
    )


