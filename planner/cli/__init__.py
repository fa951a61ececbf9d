"""The ``planner`` command line: thin Typer commands over the library, one module per group.

=====================  ==============================================
:mod:`.common`          the app, consoles, shared options, exit codes, failures
:mod:`.data`            ``init``, ``currency``, ``load``, ``periods``
:mod:`.solving`         ``solve``, ``resolve``, ``runs``, ``certificate``
:mod:`.analysis`        ``report``, ``explain``, ``prices``, ``rate-ranges``
:mod:`.history`         ``prune``, ``pin``, ``unpin``
:mod:`.shell`           ``sql``, ``server start|status|stop``
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
from planner.cli import data  # noqa: F401  (registers init, currency, load, periods)
from planner.cli import solving  # noqa: F401  (registers solve, resolve, runs, certificate)
from planner.cli import analysis  # noqa: F401  (registers report, explain, prices, rate-ranges)
from planner.cli import history  # noqa: F401  (registers prune, pin, unpin)
from planner.cli import shell  # noqa: F401  (registers sql, server)
from planner.cli import scenarios  # noqa: F401  (registers scenario, compare, sweep)
from planner.cli import demo  # noqa: F401  (registers demo)
# isort: on

__all__ = ["app"]
