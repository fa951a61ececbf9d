"""Reporting commands of the ``planner`` CLI (registered by :mod:`planner.cli`)."""

from __future__ import annotations


def register(app, *, console, err_console, engine, fail) -> None:
    """Add the reporting commands to ``app``."""
