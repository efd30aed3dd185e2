"""nbledger: exact explanations, vocabulary review and assessment of naive Bayes filters.

Data flows one way: load (:mod:`explain.loading`, :mod:`explain.data_io`) ->
compute (:mod:`explain.evidence`, :mod:`explain.batch`, ...) -> present
(the command line in :mod:`explain.cli`, pictures, files).
"""

__version__ = "0.1.0"
