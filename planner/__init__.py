"""Multi-period network flow planner: weekly snapshots in PostgreSQL, min-cost flow, site prices.

The package follows the flow of the data, one folder per stage::

    files -> database.ingest -> snapshot tables -> database.snapshot (WeekData)
          -> core (network, solve, prices, certificate) -> database.results
          -> SQL views -> reports -> cli

=====================  ==========================================================
:mod:`planner.core`     the functional core on numpy arrays (no I/O)
:mod:`planner.database`  connecting, schema, loading, snapshots, storing results
:mod:`planner.runs`     solving stored periods, scheduling, cron re-solves
:mod:`planner.reports`  queries on the views, explanations, charts, HTML
:mod:`planner.cli`      the ``planner`` command line
:mod:`planner.synthetic`  demo and benchmark networks
=====================  ==========================================================

Shared by all: :mod:`planner.errors` (errors a user can act on),
:mod:`planner.periods` (ISO 8601 weeks) and :mod:`planner.contract` (the CSV
files of a load folder).
"""

__version__ = "0.2.0"
