"""nbledger: exact explanations, vocabulary review and assessment of naive Bayes filters.

The public Python API lives here, so the inside can move without breaking users::

    from explain import load_model, explain_message, read_messages, assess

Data flows one way, and the folders show the layers:

- :mod:`explain.model` loads: model files, text steps, decision rules, data files, training;
- :mod:`explain.analysis` computes: pure functions returning frozen result objects;
- :mod:`explain.present` presents those objects: terminal, JSON, pictures, the report;
- :mod:`explain.cli` is the thin command line on top.

Every import points down that list. Names are imported on first use, so that
``nbledger --help`` does not pay for scikit-learn.
"""

from __future__ import annotations

import importlib

__version__ = "0.1.0"

_PUBLIC = {
    "NbledgerError": "explain.errors",
    "load_model": "explain.model.loading",
    "LoadedModel": "explain.model.loading",
    "LoadLimits": "explain.model.load_process",
    "OutputSet": "explain.output_files",
    "read_messages": "explain.model.data_io",
    "Messages": "explain.model.data_io",
    "ledger_rows": "explain.analysis.ledger_rows",
    "LedgerRows": "explain.analysis.ledger_rows",
    "FlagDrivers": "explain.analysis.drivers",
    "stream_texts": "explain.model.data_stream",
    "write_ledger": "explain.runs.ledger_local",
    "write_ledger_dask": "explain.runs.ledger_dask",
    "DecisionRule": "explain.model.decision",
    "ModelView": "explain.model.model_view",
    "TrainSettings": "explain.model.training",
    "train_filter": "explain.model.training",
    "rows_trained_on": "explain.model.training",
    "explain_message": "explain.analysis.evidence",
    "Explanation": "explain.analysis.evidence",
    "ledger_of": "explain.analysis.ledger",
    "masked_text": "explain.analysis.redaction",
    "find_personal": "explain.analysis.personal_data",
    "IdPseudonyms": "explain.analysis.redaction",
    "Ledger": "explain.analysis.ledger",
    "score_texts": "explain.analysis.batch",
    "batch_evidence": "explain.analysis.batch",
    "BatchEvidence": "explain.analysis.batch",
    "review_vocabulary": "explain.analysis.vocab",
    "VocabReview": "explain.analysis.vocab",
    "document_counts": "explain.analysis.vocab",
    "read_watchlist": "explain.analysis.risk",
    "assess": "explain.analysis.assessment",
    "Assessment": "explain.analysis.assessment",
    "project_to_base_rate": "explain.analysis.rates",
    "slice_report": "explain.analysis.slices",
    "label_errors": "explain.analysis.label_errors",
    "out_of_sample_probabilities": "explain.analysis.label_errors",
    "build_report": "explain.analysis.report_contents",
    "compare_models": "explain.analysis.compare",
    "Comparison": "explain.analysis.compare",
    "mcnemar": "explain.analysis.stats",
    "probe": "explain.analysis.probe",
    "ProbeResult": "explain.analysis.probe",
    "Report": "explain.analysis.report_contents",
    "ReportSettings": "explain.analysis.report_contents",
    "wilson_interval": "explain.analysis.stats",
    "delong_auc": "explain.analysis.stats",
    "read_email": "explain.model.email_reader",
    "EmailText": "explain.model.email_reader",
    "resolve_text_view": "explain.model.email_reader",
    "read_data": "explain.model.mail_data",
    "MailInput": "explain.model.mail_data",
    "explain_email": "explain.analysis.evidence",
}

__all__ = sorted(_PUBLIC) + ["__version__"]


def __getattr__(name: str):
    module = _PUBLIC.get(name)
    if module is None:
        raise AttributeError(f"module 'explain' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__():
    return __all__
