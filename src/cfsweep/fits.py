"""Least-squares fits shared by the analyses (ordinary and weighted), with standard errors.

The model is y ≈ X @ beta for a design matrix X (n rows, p columns, n >= p). With weights w_i > 0 the
fit minimises sum w_i (y_i - x_i beta)^2. Standard errors are the classical ones,
sqrt(diag(s^2 (X^T W X)^-1)) with s^2 = RSS_w / (n - p); they are undefined (None) when n == p.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np


@dataclass(frozen=True)
class LinearFit:
    """Result of :func:`least_squares`: coefficients, their standard errors (None if n == p), RSS, dof."""

    coefficients: tuple[float, ...]
    std_errors: tuple[float, ...] | None
    residual_sum_of_squares: float
    residual_dof: int


def least_squares(design: Sequence[Sequence[float]], values: Sequence[float],
                  weights: Sequence[float] | None = None) -> LinearFit:
    """Fit values ≈ design @ beta by (weighted) least squares; raises ValueError on bad shapes."""
    x = np.asarray(design, dtype=np.float64)
    y = np.asarray(values, dtype=np.float64)
    if x.ndim != 2 or y.ndim != 1 or x.shape[0] != y.shape[0]:
        raise ValueError(f"design {x.shape} and values {y.shape} do not match")
    n, p = x.shape
    if n < p:
        raise ValueError(f"{n} points cannot fit {p} parameters")
    if weights is None:
        w = np.ones(n)
    else:
        w = np.asarray(weights, dtype=np.float64)
        if w.shape != (n,) or np.any(w <= 0):
            raise ValueError("weights must be positive, one per point")
    sw = np.sqrt(w)
    xw = x * sw[:, None]
    yw = y * sw
    # QR keeps the 1/ln Q columns (nearly collinear over a short Q range) well conditioned.
    qmat, rmat = np.linalg.qr(xw)
    beta = np.linalg.solve(rmat, qmat.T @ yw)
    resid = yw - xw @ beta
    rss = float(resid @ resid)
    dof = n - p
    if dof == 0:
        return LinearFit(tuple(float(b) for b in beta), None, rss, 0)
    rinv = np.linalg.inv(rmat)
    cov = (rss / dof) * (rinv @ rinv.T)
    se = tuple(math.sqrt(max(float(c), 0.0)) for c in np.diag(cov))
    return LinearFit(tuple(float(b) for b in beta), se, rss, dof)


def inverse_log_design(q_values: Sequence[float], order: int = 2) -> np.ndarray:
    """Rows (1, 1/ln Q, ..., 1/ln^order Q) for the model f(Q) = f_inf + a/ln Q + b/ln^2 Q + ..."""
    lq = np.log(np.asarray(q_values, dtype=np.float64))
    return np.stack([lq ** (-j) for j in range(order + 1)], axis=1)


def fit_inverse_log(q_values: Sequence[float], values: Sequence[float], order: int = 2,
                    weights: Sequence[float] | None = None) -> LinearFit:
    """Fit f(Q) = f_inf + a/ln Q + b/ln^2 Q (order 2); coefficients[0] is the limit f_inf."""
    return least_squares(inverse_log_design(q_values, order), values, weights)
