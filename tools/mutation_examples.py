"""pytest plugin of the mutation run: fewer Hypothesis examples, quick tests first.

Each property test states its own ``max_examples`` (150 for most), which a
Hypothesis profile cannot lower. A mutation run executes the tests once per
mutant, so :func:`pytest_collection_modifyitems` lowers ``max_examples`` to
``MUTATION_MAX_EXAMPLES`` (default 10) on every collected property test,
keeping the test's other settings. It sets the attribute that ``@settings``
itself sets on the test, which ``@given`` reads when the test runs.

It also runs the tests of ``tests/core`` and the doctests (quick, hand-computed
examples) before the others: mutmut stops at the first failure, so a mutant
those tests kill costs a fraction of a second. Which tests run, and so which
mutants are killed, does not change.

Loaded only by ``tools/mutation.py`` (``-p mutation_examples``), never by CI.
"""

from __future__ import annotations

import os

import pytest
from hypothesis import settings

#: Examples per property test during a mutation run.
MAX_EXAMPLES = int(os.environ.get("MUTATION_MAX_EXAMPLES", "10"))

_ATTRIBUTE = "_hypothesis_internal_use_settings"


def _quick_first(item) -> int:
    """Sort key: the tests of ``tests/core`` first, then doctests, then the rest."""
    if item.nodeid.startswith("tests/core/"):
        return 0
    return 1 if not item.nodeid.startswith("tests/") else 2


@pytest.hookimpl(tryfirst=True)
def pytest_collection_modifyitems(items) -> None:
    """Lower ``max_examples`` of every Hypothesis test among ``items``; put quick tests first."""
    for item in items:
        test = getattr(item, "obj", None)
        current = getattr(test, _ATTRIBUTE, None)
        if current is None or not hasattr(test, "hypothesis"):
            continue
        setattr(test, _ATTRIBUTE, settings(current, max_examples=min(current.max_examples, MAX_EXAMPLES)))
    items.sort(key=_quick_first)
