"""Model-diagnostic panels: residuals vs fitted, normal QQ plot, residual ACF."""
from __future__ import annotations

from typing import Any

import numpy as np
from matplotlib.figure import Figure
from scipy import stats


def _fit_of(result: Any) -> Any:
    return getattr(result, "fit", result)


def plot_diagnostics(result: Any, *, fig: Figure | None = None, max_lag: int | None = None
                     ) -> Figure:
    """Three panels for a fitted model.

    ``result`` is a :class:`~procmetrics.analyse.glmfit.ModelFit` or a result
    holding one in ``.fit`` (TrendResult, ITSResult). Residuals are Pearson
    residuals in time order. The ACF bands are +-1.96/sqrt(n) (white-noise
    reference).
    """
    fit = _fit_of(result)
    r = fit.residuals
    e = r["resid_pearson"].to_numpy(float)
    mu = r["fitted"].to_numpy(float)
    ok = np.isfinite(e) & np.isfinite(mu)
    e, mu = e[ok], mu[ok]
    n = len(e)
    fig = fig if fig is not None else Figure(figsize=(10.5, 3.3))
    a1, a2, a3 = fig.subplots(1, 3)
    a1.scatter(mu, e, s=10, color="black")
    a1.axhline(0, color="gray", lw=0.8)
    a1.set_xlabel("fitted value")
    a1.set_ylabel("Pearson residual")
    a1.set_title(f"residuals vs fitted (n={n})", fontsize="small")
    if n >= 3:
        (osm, osr), (slope, icpt, _) = stats.probplot(e, dist="norm")
        a2.scatter(osm, osr, s=10, color="black")
        a2.plot(osm, slope * np.asarray(osm) + icpt, color="tab:red", lw=0.8)
    a2.set_xlabel("normal quantile")
    a2.set_ylabel("ordered residual")
    a2.set_title(f"normal QQ plot (n={n})", fontsize="small")
    lags = max_lag or max(1, min(20, n // 3))
    if n > 2:
        ec = e - e.mean()
        denom = float(ec @ ec) or 1.0
        acf = [float(ec[k:] @ ec[:n - k]) / denom for k in range(1, lags + 1)]
        a3.bar(np.arange(1, lags + 1), acf, width=0.6, color="tab:blue")
        band = 1.96 / np.sqrt(n)
        a3.axhspan(-band, band, color="gray", alpha=0.2, lw=0)
    a3.axhline(0, color="gray", lw=0.8)
    a3.set_xlabel("lag (periods)")
    a3.set_ylabel("autocorrelation")
    a3.set_title("residual ACF (band: +-1.96/sqrt(n))", fontsize="small")
    fig.suptitle(f"{fit.model} — {fit.cov_type}; n={fit.n_obs} periods", fontsize="small")
    fig.tight_layout()
    return fig
