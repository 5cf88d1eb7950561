"""Re-exports of the assessment side of ``geosample.stats``, so older imports keep working.

The code lives by concern:

- :mod:`geosample.stats.intervals`: fixed-n half-widths (Chebyshev, Cantelli,
  Hoeffding, t, empirical Bernstein), the ``Interval`` record, declared ranges;
- :mod:`geosample.stats.betting`: capital processes, bets, betting sequences and intervals;
- :mod:`geosample.stats.decisions`: p-values and their adjustment, decisions, wording;
- :mod:`geosample.stats.reallocation`: the next round's allocation;
- :mod:`geosample.stats.assessment`: ``assess`` and its records.
"""
from __future__ import annotations

from .assessment import Assessment, Sequential, StratumEstimate, assess
from .betting import (
    BettingSequence,
    CapitalPath,
    betting_bounds,
    betting_interval,
    betting_log_capital,
    betting_pvalue,
    betting_sequence,
    capital_process,
    prpl_bets,
)
from .decisions import (
    ADJUST_METHODS,
    BOUND_ASSUMPTIONS,
    NO_DECISION,
    adjust_pvalues,
    decide,
    decision_statement,
    format_estimate,
    statement,
    stratum_pvalue,
)
from .intervals import (
    RANGE_BOUNDS,
    SUPPORT_BOUNDS,
    Interval,
    bernstein_half_width,
    cantelli_half_width,
    chebyshev_half_width,
    declared_support,
    hoeffding_half_width,
    stratified_mean,
    t_half_width,
    to_analysis_scale,
    welch_df,
)
from .reallocation import Reallocation, reallocate

__all__ = [
    "ADJUST_METHODS", "NO_DECISION", "RANGE_BOUNDS", "SUPPORT_BOUNDS", "BOUND_ASSUMPTIONS", "Interval", "CapitalPath",
    "BettingSequence", "StratumEstimate", "Reallocation", "Sequential", "Assessment", "declared_support",
    "to_analysis_scale", "stratified_mean", "chebyshev_half_width", "cantelli_half_width",
    "hoeffding_half_width", "welch_df", "t_half_width", "bernstein_half_width", "capital_process", "prpl_bets",
    "betting_log_capital", "betting_bounds", "betting_sequence", "betting_interval", "betting_pvalue",
    "stratum_pvalue", "adjust_pvalues", "decide", "format_estimate", "statement", "decision_statement",
    "reallocate", "assess",
]
