"""Pure analyses over tidy DataFrames; each returns a small frozen result.

One subpackage per question:

- ``measures``  what is measured (periods, per-period metrics, intervals, data quality)
- ``change``    did it change (trends, change points, interrupted time series,
  two-sample comparisons, the before/after policy analysis)
- ``lifetimes`` how long do defects live (defect table, estimators, comparisons, Cox)
- ``growth``    is the fix rate falling (trend tests, NHPP fits and their checks)

Shared by all of them: ``result`` (Estimate, Diagnostic, Caveat), ``glmfit``
(GLM fitting with its diagnostics) and ``diagnostics`` (residual checks).
Nothing here imports ``mine``, ``store``, ``claims``, ``plot``, ``report`` or ``cli``.
"""
