"""The ledger of one message as JSON (``nbledger why --format json``).

Schema ``nbledger.why/3`` keeps every key of ``nbledger.why/1`` with its
meaning (listed in the README) and adds ``message_id``, ``date``,
``card_date``, ``redacted``, ``text_view``, ``ledger`` (``ledger.versus`` names the
comparison the balance makes) (see :func:`to_json`) and ``email``
(for a raw e-mail, what was read: ``text_view``, redacted ``subject`` and
``sender``, ``attachments``, ``undecodable_parts``, ``problems``; null for
plain text).

The keys of ``nbledger.why/1``:

key                    meaning
=====================  ==========================================================
``schema``             ``"nbledger.why/3"``
``model``              ``{path, sha256, fingerprint, from_cache}``: the model file, its SHA-256, the
                       model's fingerprint and whether its view came from the cache of loaded models
``classes``            class labels in the model's order
``predicted``          most probable class (scikit-learn's ``predict``)
``runner_up``          second most probable class
``probabilities``      class -> posterior probability (``predict_proba``)
``log_odds``           ``jll[predicted] - jll[runner_up]`` (natural log)
``baseline``           ``b[predicted] - b[runner_up]``: prior + absence evidence
``baseline_prior``     the log-prior part of ``baseline``
``baseline_absence``   BernoulliNB's absent-token part of ``baseline`` (else 0)
``threshold``          threshold on P(flag), or null for argmax
``normal_class``       the class that lets a message through, or null
``flag_probability``   P(flag) = P(not normal), or null without a normal class
``decision``           the class decided under the threshold (or argmax)
``tokens``             list of ``{token, occurrences, value, per_unit, evidence,
                       odds_factor, spans}``; ``baseline + sum(evidence) ==
                       log_odds``; ``spans`` are ``[start, end)`` character
                       offsets into the message, ``null`` when unknown
``spans_note``         why spans are unknown, or null
``unknown_tokens``     list of ``{token, count}``: not in the vocabulary, no effect
``flip_set``           list of ``{token, occurrences}`` whose removal changes
                       the decision (empty when none can)
``flip_exact``         true when the flip set is the proven minimum
``flip_method``        ``"exact"`` or ``"greedy"``
``flip_decision``      the decision after the removals, or null
``flip_reason``        why the flip set is empty, or null
``feature_kind``       ``counts``, ``binary``, ``tfidf`` or ``normalised``
``variant``            ``multinomial``, ``complement`` or ``bernoulli``
``collisions``         hashed features: list of ``{column, tokens}`` where two
                       or more of the message's tokens share one column (their
                       evidence is one entry); empty otherwise
``email``              for a raw e-mail, what was read (``text_view``, redacted
                       ``subject`` and ``sender``, ``attachments``,
                       ``undecodable_parts``, ``problems``); null for plain text
=====================  ==========================================================
"""

from __future__ import annotations

import math

from explain.analysis.ledger import Ledger
from explain.present.email_lines import email_json
from explain.present.wording import flip_sentence

SCHEMA = "nbledger.why/3"


def _finite(x: float) -> float | None:
    return x if math.isfinite(x) else None


def to_json(ledger: Ledger, *, date: str | None = None, top: int = 10) -> dict:
    """The documented JSON object: the ``nbledger.why/1`` keys and the ledger's keys beside them."""
    expl = ledger.explanation
    spans_known = expl.spans_note is None
    return {
        "schema": SCHEMA,
        "model": None if ledger.model_path is None else {
            "path": ledger.model_path, "sha256": ledger.model_sha256, "fingerprint": ledger.model_fingerprint,
            "from_cache": ledger.model_from_cache,
        },
        "classes": list(expl.classes),
        "predicted": expl.predicted,
        "runner_up": expl.runner_up,
        "probabilities": {c: float(p) for c, p in zip(expl.classes, expl.probabilities)},
        "log_odds": expl.log_odds,
        "baseline": expl.baseline,
        "baseline_prior": expl.baseline_prior,
        "baseline_absence": expl.baseline_absence,
        "threshold": expl.threshold,
        "normal_class": expl.normal_class,
        "flag_probability": expl.flag_probability,
        "decision": expl.decision,
        "tokens": [
            {
                "token": t.token,
                "occurrences": t.occurrences,
                "value": t.value,
                "per_unit": t.per_unit,
                "evidence": t.evidence,
                "odds_factor": _finite(t.odds_factor),
                "spans": [list(s) for s in t.spans] if spans_known else None,
            }
            for t in sorted(expl.tokens, key=lambda t: -abs(t.evidence))
        ],
        "spans_note": expl.spans_note,
        "unknown_tokens": [{"token": t, "count": n} for t, n in expl.unknown_tokens],
        "flip_set": [{"token": t, "occurrences": n} for t, n in expl.flip.removals],
        "flip_exact": expl.flip.exact,
        "flip_method": expl.flip.method,
        "flip_decision": expl.flip.new_decision,
        "flip_reason": expl.flip.reason,
        "collisions": [{"column": c, "tokens": list(t)} for c, t in expl.collisions],
        "feature_kind": expl.feature_kind,
        "variant": expl.variant,
        "email": email_json(expl.mail),
        # nbledger.why/2 adds (and /3 the text view, and ledger.versus, credit_class and beat):
        "message_id": ledger.message_id,
        "date": date,
        "card_date": ledger.card_date,
        "redacted": ledger.redacted,
        "circulation": "internal",
        # nbledger.why/3 adds:
        "text_view": ledger.text_view,
        "ledger": _ledger_keys(ledger, top),
    }


def _ledger_keys(ledger: Ledger, top: int) -> dict:
    """The ``ledger`` object of ``nbledger.why/3``: sides (``versus``), rule, opening, entries, closing, folding."""
    spans_known = ledger.explanation.spans_note is None
    summary = ledger.summary(top)
    index = {id(e): i for i, e in enumerate(ledger.entries)}
    return {
        "credit_side": ledger.credit_side,
        "credit_classes": list(ledger.credit_classes),
        "debit_class": ledger.debit_class,
        "credit_class": ledger.credit_class,
        "versus": ledger.versus,
        "beat": None if ledger.beat is None else {"flagged_class": ledger.beat[0], "log_odds": ledger.beat[1]},
        "balance_method": ledger.balance_method,
        "exact": ledger.exact,
        "rule": ledger.rule,
        "decision_line": _finite(ledger.decision_line),
        "line_inclusive": ledger.line_inclusive,
        "opening_prior": ledger.opening_prior,
        "opening_absence": ledger.opening_absence,
        "opening": ledger.opening,
        "entries": [
            {
                "token": e.token,
                "occurrences": e.occurrences,
                "value": e.value,
                "amount": e.amount,
                "per_occurrence": e.per_occurrence,
                "direction": e.direction,
                "toward": e.toward,
                "balance_after": e.balance_after,
                "spans": [list(s) for s in e.spans] if spans_known else None,
                "support": dict(zip(ledger.classes, e.support)),
                "flags": list(e.flags),
                "exact": e.exact,
            }
            for e in ledger.entries
        ],
        "closing": ledger.closing,
        "credit_wins": ledger.credit_wins,
        "tipped_at": ledger.tipped_at,
        "largest": [index[id(e)] for e in summary.largest],
        "folded_count": summary.folded_count,
        "folded_total": summary.folded_total,
        "support_kind": ledger.support_kind,
        "support_source": ledger.support_source,
        "disguised": [
            {"token": u.token, "count": u.count, "looks_like": u.looks_like, "avoided": u.avoided}
            for u in ledger.disguised
        ],
        "flip_sentence": flip_sentence(ledger.flip),
    }
