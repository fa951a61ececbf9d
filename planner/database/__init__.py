"""The database side: connecting, the schema, loading input, reading snapshots, storing results.

=====================  ==========================================================
:mod:`.connect`         URLs, the embedded server, engines
:mod:`.migrate`         keeping the schema current (Alembic glue)
:mod:`.locks`           locks only the planner can take (rows of ``planner_lock``), bounded waits
:mod:`.models`          SQLAlchemy 2 typed models of the tables
:mod:`.ingest`          CSV folders validated and loaded as one batch by COPY
:mod:`.snapshot`        a period's snapshot -> ``WeekData``, scaled exactly in PostgreSQL
:mod:`.results`         a run's row, flows, prices, stock and limit values, stored in one transaction
:mod:`.linked`          a linked horizon's snapshots on one site and lane list
:mod:`.reopen`          a stored run (week or horizon) read back as arrays (input, instance, flow)
:mod:`.history`         result partitions per week, retention of old runs, pinned runs
:mod:`.pgbinary`        PostgreSQL binary COPY rows built by numpy
:mod:`.settings`        settings kept once per database: the currency (ISO 4217)
=====================  ==========================================================

May import the core, :mod:`planner.errors`, :mod:`planner.periods`,
:mod:`planner.contract`, SQLAlchemy, psycopg, Alembic and pandas; never the
runs, reports or command line.
"""
