"""How fast the proportion of good rationals approaches one: G(q), Wilson bands, fits, a heuristic.

Input: per denominator q the number of family members and, for each tolerance eps, the number of
(eps, K)-good members (see :mod:`cfsweep.goodness`). Output:

* G(q) per q and in log-spaced bins of q, with 95% Wilson score intervals;
* the fit 1 - G(q) ~ C q^(-alpha) over the upper range of q (weighted least squares of ln(1 - G) on
  ln q; weights from the binomial variance of ln(1 - G), i.e. n (1 - G) / G by the delta method), with
  the standard error of alpha and the reduced chi-square as goodness of fit;
* the alternative 1 - G ~ C' (ln q)^(-beta) fitted the same way against ln ln q;
* a heuristic central-limit prediction for K = 1 (see :func:`heuristic_bad_fraction`), labelled as such.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pyarrow as pa

from .fits import least_squares
from .gauss import HEILBRONN, PORTER, gauss_kuzmin
from .schema import Z95


def wilson_interval(successes, trials, z: float = Z95):
    """95% Wilson score interval for a binomial proportion (arrays allowed; trials > 0).

    The endpoints are the two roots pi of (p_hat - pi)^2 = z^2 pi (1 - pi) / n.
    """
    x = np.asarray(successes, dtype=np.float64)
    n = np.asarray(trials, dtype=np.float64)
    p = x / n
    denom = 1.0 + z * z / n
    centre = (p + z * z / (2 * n)) / denom
    half = z / denom * np.sqrt(p * (1 - p) / n + z * z / (4 * n * n))
    return centre - half, centre + half


def log_bins(q_min: int, q_max: int, per_decade: int = 8) -> np.ndarray:
    """Bin edges (integers, increasing, first = q_min, last = q_max + 1) spaced evenly in log q."""
    if q_max <= q_min:
        return np.array([q_min, q_max + 1])
    count = max(1, int(math.ceil(per_decade * math.log10((q_max + 1) / q_min))))
    edges = np.unique(np.round(np.geomspace(q_min, q_max + 1, count + 1)).astype(np.int64))
    edges[0], edges[-1] = q_min, q_max + 1
    return np.unique(edges)


@dataclass
class PowerFit:
    """Fit of ln(1 - G) = ln C - rate * x, with x = ln q (power law) or ln ln q (log law)."""

    model: str
    rate: float
    rate_se: float | None
    log_c: float
    reduced_chi2: float | None
    points: int
    q_from: int

    def predict(self, q):
        q = np.asarray(q, dtype=np.float64)
        x = np.log(q) if self.model == "power" else np.log(np.log(q))
        return np.exp(self.log_c - self.rate * x)


def fit_bad_fraction(q_centres, members, good, model: str, upper_fraction: float = 0.5) -> PowerFit | None:
    """Weighted least-squares fit of 1 - G over the upper ``upper_fraction`` of the bins (in log q).

    Bins with G in (0, 1) only (ln(1 - G) and its variance are undefined otherwise). Returns None when
    fewer than three usable bins remain.
    """
    q = np.asarray(q_centres, dtype=np.float64)
    n = np.asarray(members, dtype=np.float64)
    g = np.asarray(good, dtype=np.float64)
    cut = math.exp(math.log(q.min()) + (1 - upper_fraction) * (math.log(q.max()) - math.log(q.min())))
    use = (q >= cut) & (g > 0) & (g < n) & (q > math.e)
    if use.sum() < 3:
        return None
    bad = 1.0 - g[use] / n[use]
    y = np.log(bad)
    x = np.log(q[use]) if model == "power" else np.log(np.log(q[use]))
    weights = n[use] * bad / (1.0 - bad)  # 1 / var(ln(1 - G)) by the delta method
    fit = least_squares(np.stack([np.ones_like(x), -x], axis=1), y, weights)
    chi2 = fit.residual_sum_of_squares / fit.residual_dof if fit.residual_dof else None
    se = fit.std_errors[1] if fit.std_errors else None
    return PowerFit(model, fit.coefficients[1], se, fit.coefficients[0], chi2, int(use.sum()), int(cut))


def _normal_sf(x):
    return 0.5 * math.erfc(x / math.sqrt(2.0))


def heuristic_bad_fraction(q, eps: float, sigma2: dict[int, float]) -> float:
    """HEURISTIC (not a theorem) prediction of 1 - G(q) for K = 1.

    A rational of denominator q has about n = (12 ln 2/pi^2) ln q + C - 1 partial quotients
    (Heilbronn–Porter). Treat the count c_a of digit a as normal with mean mu_a n and variance
    sigma_a^2 n, independently over the digits a; then P(good) ~ prod_a (1 - 2 Phi(-eps sqrt(n) / sigma_a)),
    with the extra requirement that every digit with mu_a > eps occurs (absorbed in the same tail).
    ``sigma2[a]`` is the per-place variance constant, estimated from the sweep itself by
    :func:`variance_constants`.
    """
    n = HEILBRONN * math.log(q) + PORTER - 1.0
    log_good = 0.0
    for a, s2 in sigma2.items():
        if s2 <= 0:
            continue
        tail = min(1.0, 2.0 * _normal_sf(eps * math.sqrt(n) / math.sqrt(s2)))
        if tail >= 1.0:
            return 1.0
        log_good += math.log1p(-tail)
    return -math.expm1(log_good)


def variance_constants(words: pa.Table, positions: pa.Table, cap: int, max_digit: int = 12) -> dict[int, float]:
    """sigma_a^2 = sum_r (c_r - mu_a m_r)^2 / sum_r m_r for digits a < min(cap, max_digit + 1).

    Computed from a run's exact per-word sums (sum c, c^2, c m) and per-length place sums (sum m, m^2):
    the observed between-rational variance of the digit count per place.
    """
    w = words.to_pydict()
    p = positions.to_pydict()
    m1 = dict(zip(p["k"], p["sum_m"]))[1]
    m2 = dict(zip(p["k"], p["sum_m2"]))[1]
    out = {}
    for label, k, c, c2, cm in zip(w["word"], w["k"], w["sum_c"], w["sum_c2"], w["sum_cm"]):
        if k != 1 or label.endswith("+"):
            continue
        a = int(label)
        if a > max_digit or a >= cap:
            continue
        mu = gauss_kuzmin(a)
        out[a] = (c2 - 2 * mu * cm + mu * mu * m2) / m1
    return dict(sorted(out.items()))


@dataclass
class GoodResult:
    """Output of :func:`good_proportion`.

    ``curve``: per range (q for sweeps, a bin for sampled runs) and eps: q_lo, q_hi, eps, members, good,
    proportion, wilson_low, wilson_high. ``bins``: the same over log-spaced bins of q. ``fits``:
    eps -> {"power": PowerFit | None, "log": PowerFit | None}. ``heuristic``: eps -> list of predicted
    1 - G at the bin centres (K = 1 only, else empty). ``lines``: one plain-words summary per eps.
    """

    family: str
    good_k: int
    good_min_len: int
    curve: pa.Table
    bins: pa.Table
    fits: dict
    heuristic: dict
    lines: list


def _with_intervals(q_lo, q_hi, eps, members, good) -> pa.Table:
    members = np.asarray(members, np.int64)
    good = np.asarray(good, np.int64)
    ok = members > 0
    prop = np.full(members.shape, np.nan)
    lo = np.full(members.shape, np.nan)
    hi = np.full(members.shape, np.nan)
    prop[ok] = good[ok] / members[ok]
    lo[ok], hi[ok] = wilson_interval(good[ok], members[ok])
    return pa.table({"q_lo": pa.array(np.asarray(q_lo, np.int64)), "q_hi": pa.array(np.asarray(q_hi, np.int64)),
                     "eps": pa.array(np.asarray(eps, np.float64)), "members": pa.array(members),
                     "good": pa.array(good), "proportion": pa.array(prop), "wilson_low": pa.array(lo),
                     "wilson_high": pa.array(hi)})


def good_proportion(run, per_decade: int = 8, fit_upper_fraction: float = 0.5) -> GoodResult:
    """Proportion of (eps, K)-good members per denominator range and in log bins, with fits.

    ``run``: a Run, a run directory or a MergedRun made with goodness options. Raises UsageError if the
    run holds no goodness counts.
    """
    from .errors import UsageError
    from .reduce import MergedRun, merge_run

    merged = run if isinstance(run, MergedRun) else merge_run(getattr(run, "store", run))
    if merged.goodness is None:
        raise UsageError(f"run {str(merged.path)!r} has no goodness counts; sweep it with --good-eps")
    g = merged.goodness
    eps_values = sorted(set(g["eps"].to_pylist()))
    q_lo = np.asarray(g["q_lo"])
    q_hi = np.asarray(g["q_hi"])
    eps_col = np.asarray(g["eps"])
    members = np.asarray(g["members"])
    good = np.asarray(g["good"])
    curve = _with_intervals(q_lo, q_hi, eps_col, members, good)
    sampled = merged.method == "sample"
    # sweeps: log-spaced bins of q; sampled runs: each sampled range is its own bin
    edges = None if sampled else log_bins(int(q_lo.min()), int(q_hi.max()), per_decade)
    bin_tables, fits, heuristic, lines = [], {}, {}, []
    sigma2 = None
    if merged.params.get("good_k") == 1 and merged.words is not None:
        sigma2 = variance_constants(merged.words, merged.positions, merged.params["cap"])
    for eps in eps_values:
        sel = eps_col == eps
        if sampled:
            ranges = sorted(set(zip(q_lo[sel].tolist(), q_hi[sel].tolist())))
            starts = np.array([r[0] for r in ranges], np.int64)
            ends = np.array([r[1] for r in ranges], np.int64)
            idx = np.searchsorted(starts, q_lo[sel])
        else:
            starts, ends = edges[:-1], edges[1:] - 1
            # each denominator row lies in the bin holding it
            idx = np.searchsorted(edges, q_lo[sel], side="right") - 1
        n_bins = len(starts)
        # integer sums (np.add.at keeps int64 exact; bincount would go through float64)
        b_members = np.zeros(n_bins, np.int64)
        b_good = np.zeros(n_bins, np.int64)
        np.add.at(b_members, idx, members[sel])
        np.add.at(b_good, idx, good[sel])
        keep = b_members > 0
        lo_e, hi_e = starts[keep], ends[keep]
        table = _with_intervals(lo_e, hi_e, np.full(keep.sum(), eps), b_members[keep], b_good[keep])
        bin_tables.append(table)
        centres = np.sqrt(lo_e.astype(float) * hi_e.astype(float))
        fits[eps] = {"power": fit_bad_fraction(centres, b_members[keep], b_good[keep], "power", fit_upper_fraction),
                     "log": fit_bad_fraction(centres, b_members[keep], b_good[keep], "log", fit_upper_fraction)}
        heuristic[eps] = [heuristic_bad_fraction(c, eps, sigma2) for c in centres] if sigma2 else []
        lines.append(_summary_line(eps, table, fits[eps]))
    return GoodResult(merged.family.canonical, merged.params.get("good_k"), merged.params.get("good_min_len"),
                      curve, pa.concat_tables(bin_tables), fits, heuristic, lines)


def _summary_line(eps: float, bins: pa.Table, fit: dict) -> str:
    last = bins.slice(bins.num_rows - 1)
    p, lo, hi = last["proportion"][0].as_py(), last["wilson_low"][0].as_py(), last["wilson_high"][0].as_py()
    text = (f"eps={eps:g}: in the top bin q in [{last['q_lo'][0].as_py()}, {last['q_hi'][0].as_py()}] "
            f"{100 * p:.2f}% of {last['members'][0].as_py():,} members are good (95% Wilson {100 * lo:.2f}-{100 * hi:.2f}%)")
    parts = []
    for name, label in (("power", "1-G ~ C q^-alpha"), ("log", "1-G ~ C (ln q)^-beta")):
        f = fit[name]
        if f is None:
            parts.append(f"{label}: too few bins with 0 < G < 1")
            continue
        se = "n/a" if f.rate_se is None else f"{f.rate_se:.3f}"
        chi = "n/a" if f.reduced_chi2 is None else f"{f.reduced_chi2:.2f}"
        rate = "alpha" if name == "power" else "beta"
        parts.append(f"{label}: {rate} = {f.rate:.3f} +/- {se} (reduced chi2 {chi}, {f.points} bins, q >= {f.q_from})")
    if fit["power"] and fit["log"] and fit["power"].reduced_chi2 and fit["log"].reduced_chi2:
        better = "power law" if fit["power"].reduced_chi2 < fit["log"].reduced_chi2 else "log law"
        parts.append(f"the {better} fits better")
    return text + "; " + "; ".join(parts)
