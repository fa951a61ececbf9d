"""``python -m planner.cli``: the same as the ``planner`` command."""

from planner.cli import app

app()
