"""Reports on stored runs: queries on the views, explanations, charts, the HTML report.

=====================  ==========================================================
:mod:`.catalog`         the stored runs: list them, find the one asked about, say what to do next
:mod:`.queries`         the reporting views as pandas frames; the weekly report
:mod:`.explain`         the marginal route of a stored run's price
:mod:`.rates`           rate ranges of a stored run's lanes, with their routes
:mod:`.compare`         what moved between two week runs (cost, prices, flows, binding limits)
:mod:`.charts`          PNG charts (matplotlib Agg)
:mod:`.html`            the self-contained weekly HTML report, and a comparison of two runs
:mod:`.sections`        the weekly report's sections and columns, for every output
:mod:`.formats`         how figures are written: exact decimals, true/false, ISO dates
=====================  ==========================================================

May import the core, the database side, pandas and matplotlib; never the
runs or the command line.
"""
