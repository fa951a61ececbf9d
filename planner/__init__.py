"""Multi-period network flow planner: weekly snapshots in PostgreSQL, min-cost flow, site prices."""

__version__ = "0.1.0"
