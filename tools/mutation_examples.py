"""pytest plugin of the mutation run: fewer Hypothesis examples per property test.

Each property test states its own ``max_examples`` (150 for most), which a
Hypothesis profile cannot lower. A mutation run executes the tests once per
mutant, so :func:`pytest_collection_modifyitems` lowers ``max_examples`` to
``MUTATION_MAX_EXAMPLES`` (default 25) on every collected property test,
keeping the test's other settings. It sets the attribute that ``@settings``
itself sets on the test, which ``@given`` reads when the test runs.

Loaded only by ``tools/mutation.py`` (``-p mutation_examples``), never by CI.
"""

from __future__ import annotations

import os

from hypothesis import settings

#: Examples per property test during a mutation run.
MAX_EXAMPLES = int(os.environ.get("MUTATION_MAX_EXAMPLES", "25"))

_ATTRIBUTE = "_hypothesis_internal_use_settings"


def pytest_collection_modifyitems(items) -> None:
    """Lower ``max_examples`` of every Hypothesis test among ``items``."""
    for item in items:
        test = getattr(item, "obj", None)
        current = getattr(test, _ATTRIBUTE, None)
        if current is None or not hasattr(test, "hypothesis"):
            continue
        setattr(test, _ATTRIBUTE, settings(current, max_examples=min(current.max_examples, MAX_EXAMPLES)))
