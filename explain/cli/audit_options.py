"""The audit options ``assess`` and ``report`` share: ``--slice-by``, watchlist slices and ``--label-errors``.

One function turns them into the inputs of
:func:`explain.analysis.assessment.assess` (its ``slices`` and
``label_errors``), so both commands compute the same figures the same way.
"""

from __future__ import annotations

from pathlib import Path
from typing import Sequence

from explain.cli.common import fail, parse_size

SLICE_BY_HELP = (
    "Error rates per value of COLUMN, or per month/week of a date column (COLUMN:month); for raw e-mail: "
    "folder, sender-domain, date:month, date:week, list."
)
LABEL_ERRORS_HELP = "List messages whose label may be wrong (refits the model's pipeline on folds of DATA)."
FOLDS_HELP = "Folds for --label-errors."


def check_folds(folds: int) -> None:
    if folds < 2:
        fail(f"--folds must be at least 2, got {folds}")


def audit_inputs(loaded, messages, X, data: Path, *, slice_by: Sequence[str] | None, terms: Sequence[str] | None,
                 label_errors: bool, folds: int, max_data_bytes: str):
    """``(slice groups, suspected label errors or None)`` for the assessment of ``messages``.

    ``X`` is the messages' feature matrix (n_messages, n_tokens); ``data`` the
    file the messages came from (its other columns feed ``--slice-by``);
    ``terms`` the watchlist terms to slice by, or None. With any slicing the
    messages are also sliced by length. ``label_errors`` refits copies of the
    model's pipeline on ``folds`` folds of the messages (confident learning,
    Northcutt, Jiang & Chuang 2021).
    """
    from explain.analysis import slices as slicing

    groups = [slicing.by_length(messages.texts)] if (slice_by or terms) else []
    for spec in slice_by or ():
        from explain.analysis.mail_slices import MAIL_KEYS, is_mail_key, mail_slices
        from explain.model.data_io import read_column

        if is_mail_key(spec):
            groups.append(mail_slices(spec, messages, Path(data).name))
            continue
        from explain.model.mail_data import is_mbox

        if Path(data).is_dir() or is_mbox(data):
            fail(f"{Path(data).name} holds raw e-mail, which has no column {spec!r}; slice it by {', '.join(MAIL_KEYS)}")
        column, period = slicing.parse_slice_spec(spec)
        values = read_column(data, column, parse_size(max_data_bytes, "--max-data-bytes"))
        groups.append(slicing.by_values(values, column) if period is None else slicing.by_period(values, column, period))
    if terms:
        groups.append(slicing.by_terms(messages.texts, terms))
    suspected = None
    if label_errors:
        from explain.analysis.assessment import class_indices
        from explain.analysis.label_errors import label_errors as find_label_errors
        from explain.analysis.label_errors import out_of_sample_probabilities

        truth = class_indices(loaded.view, messages.labels)
        probabilities = out_of_sample_probabilities(loaded.unfitted_copy(), messages.texts, truth, loaded.classes, folds)
        suspected = find_label_errors(loaded.view, X, truth, messages.ids, probabilities, folds=folds)
    return groups, suspected
