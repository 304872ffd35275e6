"""Fleet pooling of wear rates: pumps of one model share a prior on their slope.

Random-coefficient degradation model (Lu and Meeker, Technometrics 35(2), 1993): each
pump's wear rate is drawn from its model's distribution N(mu, tau^2). We estimate mu
and tau^2 by the method of moments (DerSimonian-Laird, Controlled Clinical Trials 7,
1986) from the pumps' own least-squares slopes and their sampling variances, then
shrink every pump's slope toward mu (empirical Bayes). A pump with few readings leans
on the prior; one with many readings is dominated by its own data.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass
class GroupPrior:
    """Per-group prior on the slope, indexed by group id (NaN where a group has too few series)."""

    mu: np.ndarray
    tau2: np.ndarray
    var_mu: np.ndarray
    n_series: np.ndarray
    sigma2: np.ndarray  # pooled residual variance of the group
    dof: np.ndarray  # degrees of freedom of sigma2

    def for_rows(self, group: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """(mu, prior variance incl. uncertainty of mu, pooled sigma^2, its dof) per row; NaN for no group."""
        ok = group >= 0
        g = np.where(ok, group, 0)
        mu = np.where(ok, self.mu[g], np.nan)
        var = np.where(ok, self.tau2[g] + self.var_mu[g], np.nan)
        return mu, var, np.where(ok, self.sigma2[g], np.nan), np.where(ok, self.dof[g], 0.0)


def group_prior(
    slope: np.ndarray,
    slope_var: np.ndarray,
    group: np.ndarray,
    eligible: np.ndarray,
    rss: np.ndarray,
    dof: np.ndarray,
    *,
    min_series: int = 3,
    tau_floor_rel: float = 0.1,
) -> GroupPrior:
    """Method-of-moments prior per group from eligible rows' slopes and sampling variances.

    ``tau_floor_rel`` keeps the between-pump sd at least that fraction of |mu|: with a
    zero estimate every pump would be pulled fully onto the mean, however many readings
    it has (a guard of ours, common practice in shrinkage estimators, no single source).
    """
    ok = eligible & np.isfinite(slope) & (slope_var > 0) & (group >= 0)
    ng = int(group.max()) + 1 if group.size and group.max() >= 0 else 1
    g = group[ok]
    w = 1.0 / slope_var[ok]
    bs = slope[ok]

    def gsum(values: np.ndarray) -> np.ndarray:
        return np.bincount(g, weights=values, minlength=ng)

    k = np.bincount(g, minlength=ng).astype(float)
    sw, sw2, swb = gsum(w), gsum(w * w), gsum(w * bs)
    with np.errstate(invalid="ignore", divide="ignore"):
        mu_fixed = swb / sw
        q = gsum(w * (bs - mu_fixed[g]) ** 2)
        tau2 = np.maximum(0.0, (q - (k - 1.0)) / (sw - sw2 / sw))
        tau2 = np.maximum(tau2, (tau_floor_rel * mu_fixed) ** 2)
        wr = 1.0 / (slope_var[ok] + tau2[g])
        swr = gsum(wr)
        mu = gsum(wr * bs) / swr
        var_mu = 1.0 / swr
    sigma2, dof_g = _pooled_noise(group, eligible, rss, dof, ng)
    few = k < min_series
    for arr in (mu, tau2, var_mu):
        arr[few] = np.nan
    return GroupPrior(mu=mu, tau2=tau2, var_mu=var_mu, n_series=k, sigma2=sigma2, dof=dof_g)


def _pooled_noise(group, eligible, rss, dof, groups: int) -> tuple[np.ndarray, np.ndarray]:
    """Per group: residual variance pooled over its eligible rows (sum of RSS over sum of dof), and that dof."""
    has_dof = (dof > 0) & (group >= 0) & eligible
    rss_g = np.bincount(group[has_dof], weights=rss[has_dof], minlength=groups)
    dof_g = np.bincount(group[has_dof], weights=dof[has_dof], minlength=groups)
    with np.errstate(invalid="ignore", divide="ignore"):
        return rss_g / dof_g, dof_g


def shrink_slope(
    slope: np.ndarray, slope_var: np.ndarray, prior_mu: np.ndarray, prior_var: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Posterior slope, its variance and the weight on the prior (normal-normal); rows without a prior unchanged."""
    has = np.isfinite(prior_mu) & (prior_var > 0) & (slope_var > 0)
    with np.errstate(invalid="ignore", divide="ignore"):
        prec = 1.0 / slope_var + 1.0 / prior_var
        post_var = np.where(has, 1.0 / prec, slope_var)
        post = np.where(has, (slope / slope_var + prior_mu / prior_var) * post_var, slope)
        weight = np.where(has, slope_var / (slope_var + prior_var), 0.0)
    return post, post_var, weight
