"""Verdicts: when a trial succeeds, and what its successes let calib claim (below the engine and the analysis).

The layer between the store and its two readers. The engine (:mod:`calib.sweep`) needs it while
it runs (a k search decides with the success rule and the Clopper–Pearson bound, the dry run
advises a design from the class scope) and the analysis (:mod:`calib.analysis`) needs it to
write the tables; neither imports the other, both import this (docs/layers.md).

- :mod:`~calib.verdicts.success`: the success predicates, a pure function of stored metrics
  (one 0/1 outcome per stored row);
- :mod:`~calib.verdicts.stats`: one-sided Clopper–Pearson and Wilson bounds on x successes of n
  trials, and the trials a set of units needs;
- :mod:`~calib.verdicts.scope`: the class scope of a cell (design effect, the intraclass
  correlation's upper limit, instances needed, design advice);
- :mod:`~calib.verdicts.saferule`: the monotone safe-k rule and :class:`Confidence`, the claim
  1 - delta at a confidence level;
- :mod:`~calib.verdicts.target`: a k search's ``[target]`` table (preset, tolerance, delta,
  confidence) read into a :class:`~calib.verdicts.target.SearchTarget`.

Nothing here reads the store or imports pandas at import time; costs are stated per module.
"""
