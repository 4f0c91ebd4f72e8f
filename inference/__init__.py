"""Bendline's engine: a Bayesian piecewise-exponential trend model with unknown
change dates, a multi-chain sampler, convergence diagnostics and summaries.

Pure numpy, scipy and pandas: no web, cache or queue imports, so that the CLI,
the local worker processes and the team's Celery workers all share it.
"""

SCHEMA_VERSION = 1
