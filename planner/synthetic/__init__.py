"""Synthetic networks for the demo and the benchmarks (not product code).

=====================  ==========================================================
:mod:`.frames`          ``NetworkFrames`` (the four CSV tables), ``write_folder``, ``frames_to_weeks``, invented names
:mod:`.demo_network`    the invented demo scenario
:mod:`.benchmark_network`  large random networks, feasible by construction
=====================  ==========================================================

May import :mod:`planner.contract`, :mod:`planner.periods`, the core, numpy and pandas;
nothing of the planner imports these modules except the demo.
"""
