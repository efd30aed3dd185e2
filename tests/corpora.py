"""Random corpora, models and messages for property tests (hypothesis strategies)."""

from __future__ import annotations

from dataclasses import dataclass

from hypothesis import strategies as st
from sklearn.feature_extraction.text import CountVectorizer, TfidfTransformer, TfidfVectorizer
from sklearn.naive_bayes import BernoulliNB, ComplementNB, MultinomialNB
from sklearn.pipeline import Pipeline

from explain.model.featurizer import Featurizer
from explain.model.loading import LoadedModel
from explain.model.model_view import view_of

WORDS = [
    "fee", "parcel", "link", "sofa", "drill", "ladder", "raffle", "prize", "club", "courier",
    "workshop", "levy", "window", "solar", "lesson", "tea", "kids", "harbour", "the", "a",
]
VARIANT_TYPES = {"multinomial": MultinomialNB, "complement": ComplementNB, "bernoulli": BernoulliNB}
FEATURE_KINDS = ("counts", "binary", "tfidf", "count+tfidf")

messages = st.lists(st.sampled_from(WORDS + ["unknownword", "zz"]), min_size=0, max_size=12).map(" ".join)


@dataclass
class Case:
    pipeline: Pipeline
    model: LoadedModel
    texts: list
    labels: list


def make_pipeline(kind: str, variant: str, ngrams=(1, 1), alpha=1.0, analyzer="word") -> Pipeline:
    common = dict(ngram_range=ngrams, analyzer=analyzer)
    if kind == "counts":
        steps = [("v", CountVectorizer(**common))]
    elif kind == "binary":
        steps = [("v", CountVectorizer(binary=True, **common))]
    elif kind == "tfidf":
        steps = [("v", TfidfVectorizer(**common))]
    else:
        steps = [("v", CountVectorizer(**common)), ("t", TfidfTransformer())]
    return Pipeline(steps + [("nb", VARIANT_TYPES[variant](alpha=alpha))])


def loaded(pipeline: Pipeline, normal_class=None) -> LoadedModel:
    """What :func:`explain.model.loading.load_model` builds, without a file."""
    *text_steps, clf = [s for _, s in pipeline.steps]
    featurizer = Featurizer(*text_steps)
    view = view_of(clf, featurizer.tokens, featurizer.feature_kind, normal_class)
    return LoadedModel(view, featurizer, path=None, sha256="", file_format="memory")


@st.composite
def cases(draw, n_classes=None, kind=None, variant=None, ngrams=None):
    """A fitted random pipeline over a small random corpus."""
    n_classes = draw(st.sampled_from([2, 3, 5])) if n_classes is None else n_classes
    kind = draw(st.sampled_from(FEATURE_KINDS)) if kind is None else kind
    variant = draw(st.sampled_from(sorted(VARIANT_TYPES))) if variant is None else variant
    ngrams = draw(st.sampled_from([(1, 1), (1, 2)])) if ngrams is None else ngrams
    alpha = draw(st.sampled_from([1.0, 0.5, 0.1]))
    classes = [f"class{i}" for i in range(n_classes)]
    # Single letters are not tokens by default: a document of only "a" would have none.
    docs = st.lists(st.sampled_from([w for w in WORDS if len(w) > 1]), min_size=1, max_size=10).map(" ".join)
    texts, labels = [], []
    for c in classes:  # every class gets some documents
        for text in draw(st.lists(docs, min_size=1, max_size=6)):
            texts.append(text)
            labels.append(c)
    pipeline = make_pipeline(kind, variant, ngrams, alpha).fit(texts, labels)
    return Case(pipeline, loaded(pipeline), texts, labels)
