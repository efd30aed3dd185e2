"""Engines that run a whole job: they may use the model, analysis and present layers.

The batch ledger (local and on Dask), the report build, the records of
``why --out``, and the review desk's application (``desk``). Presenters only
format results; commands (:mod:`explain.cli`) parse options and call these.
"""
