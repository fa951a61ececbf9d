"""Runs: solving stored periods and keeping them solved.

=====================  ==========================================================
:mod:`.weekly`          one week: read, optimise, store; period selection, certificates
:mod:`.horizon`         consecutive weeks as one linked horizon with stock
:mod:`.schedule`        many weeks in parallel workers; ``resolve`` for cron, under week locks
:mod:`.scenarios`       what-if scenarios: edits checked and stored, solved warm into runs of their own
:mod:`.demo`            the demo: a fictional network loaded, solved, summarised
=====================  ==========================================================

May import the core and the database side; never the reports or the command line.
"""
