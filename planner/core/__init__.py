"""The functional core: planning periods as integer arrays, solved and proved optimal, no I/O.

=====================  ==========================================================
:mod:`.week`            ``WeekData``: one period's input as scaled integers
:mod:`.network`         ``Instance``: the min-cost-flow network of one or more periods
:mod:`.solve`           the OR-Tools min-cost-flow solve
:mod:`.residual`        residual graphs, the label-correcting pass, feasible potentials
:mod:`.paths`           exact shortest paths on merged arcs, capacity along tree paths
:mod:`.prices`          site prices with their exact ranges, the marginal route
:mod:`.limits`          exact values of every limit at its bound (one more unit, one less)
:mod:`.rates`           rate ranges of lanes, with the route behind each end
:mod:`.search`          many bounded searches at once (compiled kernel, scipy reference)
:mod:`._search`         the compiled kernel (C, built at install, loaded with ctypes)
:mod:`.certificate`     the exact optimality certificate
:mod:`.diagnose`        why a week has no plan: min cut of an infeasible week, unbounded cycles
:mod:`.explain`         the marginal route behind a price, in words
:mod:`.edits`           what-if edits of a week's arrays (close a site, demand, rates, limits, lanes)
:mod:`.sweep`           exact breakpoints of the optimal cost as one lane's rate varies
:mod:`.engines`         warm re-solves from a similar week's optimum; OR-Tools cold otherwise
:mod:`._warm`           the warm engine's routing loop (C, built at install, loaded with ctypes)
:mod:`.optimize`        the entry point: instance -> ``Outcome`` (flow, prices, certificate)
=====================  ==========================================================

The core works on numpy arrays and may import numpy, scipy, OR-Tools, ctypes,
:mod:`planner.errors` and its own modules, nothing else: never SQLAlchemy,
psycopg, Alembic, pandas or matplotlib (``tests/test_layout.py`` checks this in
a fresh interpreter). It is tested without a database.
"""
