"""A fit whose residuals are autocorrelated but whose HAC covariance cannot be computed
(statsmodels inverts a singular weighted cross-product) is refused as too little data,
never a crash and never the narrower plain standard errors.

The series is the one that stopped ``compare --all-subsystems`` on the synthetic
20,000-commit bench history: a subsystem with one commit in each of nine periods
(invented data)."""
from __future__ import annotations

import numpy as np
import pytest

from procmetrics.analyse.glmfit import fit_model
from procmetrics.errors import InsufficientData

TIME = np.array([-13.66735113, -3.66872005, -3.42094456, -2.41889117, -2.16837782,
                 -1.91649555, 3.08281999, 3.5797399, 5.33196441])
POST = (TIME > 0).astype(float)
Y = np.array([0, 0, 0, 1, 0, 1, 1, 0, 0], dtype=float)


def _design() -> np.ndarray:
    return np.column_stack([np.ones(len(TIME)), TIME, POST, POST * TIME])


def test_singular_hac_covariance_is_refused_with_the_reason() -> None:
    with pytest.raises(InsufficientData, match="HAC"):
        fit_model(Y, _design(), kind="proportion", trials=np.ones(len(Y)),
                  names=["const", "time_years", "post", "post_time"], hac="always")


def test_the_same_series_with_plain_errors_still_fits() -> None:
    """Only the HAC path is refused: without autocorrelation handling the fit exists."""
    fit = fit_model(Y, _design(), kind="proportion", trials=np.ones(len(Y)),
                    names=["const", "time_years", "post", "post_time"], hac="never")
    assert fit.cov_type == "nonrobust"
