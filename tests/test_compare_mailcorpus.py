"""``compare`` on real mail: the public corpus described in ../shared/README.md (issue 9).

A filter trained on the earlier groups (easy-ham-1, spam-1) is compared with one
trained on every group; on hard-ham-1 (legitimate mail that is harder to tell
from spam) the decisions that change are listed with both explanations. The
figures are printed with the test results (``pytest -s``).
"""

from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from sklearn.feature_extraction.text import CountVectorizer
from sklearn.naive_bayes import MultinomialNB
from sklearn.pipeline import make_pipeline

from benchmarks import mailcorpus
from explain.analysis.compare import compare_models
from explain.model.data_io import Messages
from explain.present.compare import text_lines
from tests.corpora import loaded

pytestmark = pytest.mark.mailcorpus

EARLIER = ("easy-ham-1", "spam-1")


@pytest.fixture(scope="module")
def setting():
    try:
        earlier, every, hard = mailcorpus.load(EARLIER), mailcorpus.load(), mailcorpus.load(["hard-ham-1"])
    except mailcorpus.CorpusUnavailable as exc:
        pytest.skip(f"public mail corpus unavailable: {exc}")
    old = make_pipeline(CountVectorizer(), MultinomialNB()).fit(earlier.texts, earlier.labels)
    new = make_pipeline(CountVectorizer(), MultinomialNB()).fit(every.texts, every.labels)
    messages = Messages(texts=list(hard.texts), labels=np.asarray(hard.labels, dtype=object), ids=hard.ids,
                        replaced_chars=0, source=Path("hard-ham-1"), sha256="")
    return old, new, messages


def test_changed_decisions_on_hard_ham_with_both_explanations(setting):
    old, new, messages = setting
    a, b = loaded(old, "ham"), loaded(new, "ham")
    result = compare_models(a, replace(b, sha256="new"), messages, show=1000)
    before, after = old.predict(messages.texts), new.predict(messages.texts)
    changed = np.flatnonzero(before != after)
    d = result.decisions
    assert d.changed == len(changed) > 0
    assert [m.row for m in d.shown] == changed.tolist()
    for m in d.shown:
        # Each explanation's closing balance is scikit-learn's own log-odds of the decided class against the
        # other (spam against ham when flagged, ham against spam when let through), as why tells it.
        for pipeline, ledger in ((old, m.old), (new, m.new)):
            text = messages.texts[m.row]
            jll = pipeline[-1].predict_joint_log_proba(pipeline[:-1].transform([text]))[0]
            sign = 1.0 if pipeline.predict([text])[0] == "spam" else -1.0
            assert ledger.closing == pytest.approx(sign * (jll[1] - jll[0]), abs=1e-8)
    # hard-ham-1 is all ham: a change toward ham is a fixed false alarm, and McNemar counts exactly those.
    fixed = int(np.sum((before == "spam") & (after == "ham")))
    broken = int(np.sum((before == "ham") & (after == "spam")))
    assert (d.mcnemar.b, d.mcnemar.c) == (broken, fixed)
    print()
    print("\n".join(text_lines(result, top=8)[-(8 + 4 * min(5, d.changed)):]))
    print(f"hard-ham-1: {len(messages.texts)} messages, {d.changed} decisions change "
          f"({fixed} false alarms fixed, {broken} new); McNemar exact p = {d.mcnemar.exact_p:.3g}")
