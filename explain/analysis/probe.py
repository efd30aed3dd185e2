"""Robustness and fairness probes of a filter: evasion costs and term swaps, in one result.

See :mod:`explain.analysis.evasion` (how many added tokens let a flagged
message through; Lowd & Meek 2005) and :mod:`explain.analysis.term_swap`
(whether swapping one group's term for another changes the decision;
Garg et al. 2019).
"""

from __future__ import annotations

from dataclasses import dataclass

from explain.analysis.evasion import Evasion, evasion_costs
from explain.analysis.term_swap import SwapTerms, TermEvidence, TermSwaps, read_swap_terms, term_evidence, term_swaps
from explain.errors import NbledgerError
from explain.model.decision import DecisionRule

DEFAULT_MAX_ADDED = 50


@dataclass(frozen=True, eq=False)
class ProbeResult:
    """What ``nbledger probe`` reports; presenters only read it.

    ``evasion`` is None unless asked; ``swaps`` is None without data or a
    swap-terms file; ``term_evidence`` needs only the model and the file.
    ``evasion_ids`` holds the id of each message of ``evasion.rows`` (as the
    caller gave them; data row numbers from 1 when it gave none), so that an
    attack can be traced to its message.
    """

    classes: tuple[str, ...]
    normal_class: str
    threshold: float | None
    threshold_log_odds: float | None
    messages: int
    evasion: Evasion | None
    swaps: TermSwaps | None
    term_evidence: tuple[TermEvidence, ...]
    swap_notes: tuple[str, ...]
    evasion_ids: tuple[str, ...] = ()


def probe(
    model,
    texts=None,
    *,
    evasion: bool = True,
    swap_terms=None,
    max_added: int = DEFAULT_MAX_ADDED,
    threshold: float | None = None,
    threshold_log_odds: float | None = None,
    counts=None,
    ids=None,
) -> ProbeResult:
    """Probe a loaded model with messages ``texts`` (a sequence of str, or None).

    ``ids`` are the messages' ids, one per text, as they are to be shown
    (default: row numbers from 1, as :class:`~explain.model.data_io.Messages` counts them);
    ``swap_terms`` is a path to a swap-terms file or a parsed :class:`SwapTerms`;
    ``counts`` the texts' occurrence counts (``featurizer.counts_and_features``)
    when the caller has them, so that the texts are not featurized again.
    """
    view = model.view
    if model.featurizer.hashed:
        # Added words and swaps are chosen from the vocabulary, which a hashed model does not store.
        raise NbledgerError("probing needs the model's vocabulary; a HashingVectorizer model stores none")
    rule = DecisionRule.for_view(view, threshold, threshold_log_odds)
    if rule.normal_index is None:
        raise NbledgerError("probing needs a normal class: name it with --normal-class")
    if max_added < 1:
        raise NbledgerError(f"--max-added must be at least 1, got {max_added}")
    if texts is None and evasion:
        raise NbledgerError("evasion costs need messages: give data")
    terms = None
    if swap_terms is not None:
        terms = swap_terms if isinstance(swap_terms, SwapTerms) else read_swap_terms(swap_terms, model.featurizer)
    if not evasion and terms is None:
        raise NbledgerError("nothing to probe: ask for --evasion, --swap-terms FILE or both")
    texts = None if texts is None else list(texts)
    if ids is not None and texts is not None and len(ids) != len(texts):
        raise NbledgerError(f"{len(ids)} ids for {len(texts)} messages")
    costs = evasion_costs(model, texts, rule, max_added, counts=counts) if evasion else None
    return ProbeResult(
        classes=tuple(str(c) for c in view.classes),
        normal_class=str(view.classes[rule.normal_index]),
        threshold=rule.threshold,
        threshold_log_odds=rule.threshold_log_odds,
        messages=0 if texts is None else len(texts),
        evasion=costs,
        swaps=term_swaps(model, texts, rule, terms) if terms is not None and texts is not None else None,
        term_evidence=term_evidence(view, rule, terms) if terms is not None else (),
        swap_notes=() if terms is None else terms.notes,
        evasion_ids=() if costs is None else tuple(str(ids[r]) if ids is not None else str(r + 1) for r in costs.rows),
    )
