"""Design answers built on the solver: gate-bias sweeps (n_s(V), C-V, threshold),
target-seeking (which spacer gives 3e11 cm^-2?) and growth-tolerance summaries.

    from selfcon.design import sweep_bias, tune, summarize_study

(``selfcon.design`` is not imported by ``import selfcon``; matplotlib and h5py load
only when a plot or a file is written.)

Stage 6 (beside ``selfcon.batch``). May import: every lower stage, through the front
functions of :mod:`selfcon.api` for solving; never ``selfcon.batch`` or the command line.
"""
from __future__ import annotations

from selfcon.design.sweep import BiasSweep, sweep_bias          # noqa: E402
from selfcon.design.tune import TuneResult, tune                # noqa: E402  (the function shadows the module name)
from selfcon.design.tolerance import ToleranceSummary, summarize_study, summarize_table   # noqa: E402

__all__ = ["sweep_bias", "BiasSweep", "tune", "TuneResult", "summarize_study", "summarize_table",
           "ToleranceSummary"]
