"""River-stage fragility with lognormal conductivities.

Each material listed gets ``k = median * exp(sigma * z)`` with ``sigma = sqrt(ln(1 + cov^2))`` (the
lognormal with that median and coefficient of variation), ``z`` standard normal: Monte Carlo or a Latin
hypercube (``scipy.stats.qmc.LatinHypercube``), optionally correlated through the Cholesky factor of
the correlation matrix of ln k (correlating LHS columns this way keeps the marginals only
approximately stratified).  Anisotropic materials scale kx and ky by the same factor.

For each stage, every realisation is solved and the probability that the factor of safety falls below
1 and below the criterion is the fraction of realisations that do, with a binomial confidence band:
Wilson's score interval (Wilson, E.B. (1927), Probable inference, the law of succession, and
statistical inference, JASA 22:209-212) or the Clopper-Pearson exact interval (Clopper, C.J. and
Pearson, E.S. (1934), Biometrika 26:404-413).
"""

from __future__ import annotations

import math

import numpy as np
from scipy import stats
from scipy.stats import qmc

from ..errors import SectionError
from .spec import FragilitySpec
from .values import get_value

__all__ = ["sample_conductivities", "binomial_interval", "probabilities", "material_overrides"]


def _num(data, key):
    try:
        v = get_value(data, key)
    except SectionError:
        return None
    return float(v) if isinstance(v, (int, float)) and not isinstance(v, bool) else None


def sample_conductivities(spec: FragilitySpec, data: dict, label: str = "<sweep>",
                          median_factor: float = 1.0) -> tuple[list[str], np.ndarray]:
    """Sampled conductivities: (material names, (S, M) array of k in the section file's unit (m/s by
    default); kx for anisotropic materials). ``median_factor`` turns a given ``median`` (the sweep's
    unit) into the section file's unit."""
    mats = list(spec.conductivity)
    S, M = spec.samples, len(mats)
    medians = np.empty(M)
    for j, m in enumerate(mats):
        if m not in (data.get("materials") or {}):
            raise SectionError(f"{label}: fragility.conductivity: no material named '{m}' in the section")
        med = spec.conductivity[m].median
        if med is not None:
            med = med * median_factor
        else:
            med = _num(data, f"materials.{m}.k")
            if med is None:
                med = _num(data, f"materials.{m}.kx")
        if med is None:
            raise SectionError(f"{label}: fragility.conductivity.{m}: give 'median' (m/s)")
        medians[j] = med
    sig = np.sqrt(np.log1p(np.array([spec.conductivity[m].cov for m in mats]) ** 2))
    if spec.sampling == "latin_hypercube":
        u = qmc.LatinHypercube(d=M, seed=spec.seed).random(S)
        z = stats.norm.ppf(u)
    else:
        z = np.random.default_rng(spec.seed).standard_normal((S, M))
    if spec.correlation is not None and M > 1:
        C = np.asarray(spec.correlation, float)
        w, V = np.linalg.eigh(C)
        L = V * np.sqrt(np.clip(w, 0, None))        # C = L L^T also when only semi-definite
        z = z @ L.T
    return mats, medians * np.exp(sig * z)


def material_overrides(data: dict, material: str, k: float) -> dict:
    """Dotted-path overrides that set a material's conductivity (kx and ky keep their ratio)."""
    kk = _num(data, f"materials.{material}.k")
    if kk is not None:
        return {f"materials.{material}.k": float(k)}
    kx, ky = _num(data, f"materials.{material}.kx"), _num(data, f"materials.{material}.ky")
    return {f"materials.{material}.kx": float(k), f"materials.{material}.ky": float(k * ky / kx)}


def binomial_interval(k: int, n: int, confidence: float = 0.95, method: str = "wilson") -> tuple[float, float]:
    """Two-sided confidence interval of a binomial proportion k/n (Wilson score or Clopper-Pearson)."""
    if n <= 0:
        return (math.nan, math.nan)
    a = 1.0 - confidence
    if method == "clopper_pearson":
        lo = 0.0 if k == 0 else float(stats.beta.ppf(a / 2, k, n - k + 1))
        hi = 1.0 if k == n else float(stats.beta.ppf(1 - a / 2, k + 1, n - k))
        return lo, hi
    z = float(stats.norm.ppf(1 - a / 2))
    p = k / n
    den = 1 + z * z / n
    c = (p + z * z / (2 * n)) / den
    h = z / den * math.sqrt(p * (1 - p) / n + z * z / (4 * n * n))
    lo = 0.0 if k == 0 else max(0.0, c - h)       # exact ends (the formula gives them up to rounding)
    hi = 1.0 if k == n else min(1.0, c + h)
    return lo, hi


def probabilities(fs: np.ndarray, criterion: float, confidence: float, method: str) -> list[dict]:
    """Per stage (columns of fs, (S, T)): counts and probabilities of FS < 1 and FS < criterion.

    A realisation whose FS is not known (nan: the case failed, or the verdict was "not checked") is
    not counted in n and is reported as ``n_not_known``, so the probabilities say over how many they are.
    """
    out = []
    for j in range(fs.shape[1]):
        col = fs[:, j]
        unknown = int(np.isnan(col).sum())
        col = col[~np.isnan(col)]
        n = len(col)
        row = {"n": n, "n_not_known": unknown}
        for tag, lim in (("below_1", 1.0), ("below_criterion", criterion)):
            k = int(np.sum(col < lim))
            lo, hi = binomial_interval(k, n, confidence, method)
            row.update({f"n_fs_{tag}": k, f"p_fs_{tag}": k / n if n else math.nan,
                        f"p_fs_{tag}_low": lo, f"p_fs_{tag}_high": hi})
        out.append(row)
    return out
