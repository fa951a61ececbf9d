"""The ``planner`` command line: thin Typer commands over the library, one module per group.

=====================  ==============================================
:mod:`.common`          the app, consoles, shared options, errors
:mod:`.data`            ``init``, ``load``, ``periods``
:mod:`.solving`         ``solve``, ``resolve``, ``certificate``
:mod:`.analysis`        ``prices``, ``report``, ``explain``
:mod:`.scenarios`       ``scenario create|solve|list|show``, ``compare``, ``sweep``
:mod:`.demo`            ``demo``
=====================  ==============================================

Each command parses its options, calls one library function and prints the
result. The command modules may import anything in the planner, but import
the heavy parts (pandas, matplotlib, the solver) inside the command, so that
every command starts fast. Importing this package registers every command on
:data:`app`, in the order of the workflow (the order of the imports below).
"""

# isort: off
from planner.cli.common import app
from planner.cli import data  # noqa: F401  (registers init, load, periods)
from planner.cli import solving  # noqa: F401  (registers solve, resolve, certificate)
from planner.cli import analysis  # noqa: F401  (registers prices, report, explain)
from planner.cli import scenarios  # noqa: F401  (registers scenario, compare)
from planner.cli import demo  # noqa: F401  (registers demo)
# isort: on

__all__ = ["app"]
