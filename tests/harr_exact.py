"""Exact discharges of two confined-flow problems from conformal mapping, for the verification tests.

Source: Harr, M.E. (1962), Groundwater and Seepage, McGraw-Hill, ch. 4 (conformal mapping with the
Schwarz-Christoffel transformation and complete elliptic integrals of the first kind): a sheet pile
in a pervious layer of finite thickness, and a flat impervious floor on such a layer.  The truncated
(finite-length) versions below use the same method with the Jacobi elliptic function sn, which maps a
rectangle onto a half-plane (Abramowitz, M. and Stegun, I.A. (1964), Handbook of Mathematical
Functions, 16.8 and 16.20, the "imaginary argument" and "quarter-period" formulas used here).

Conventions: ``scipy.special.ellipk(m)`` takes the PARAMETER m = k**2, not the modulus k;
``ellipkm1(p)`` is K at m = 1 - p (accurate when m is close to 1); ``ellipj(u, m)`` returns
sn, cn, dn, am at real u for parameter m.  K(k) is written for ellipk(k**2), K'(k) = K(k') with
k' = sqrt(1 - k**2).

Derivation (both problems).  Layer -T < y < 0 of conductivity k over an impervious base, head H on
the ground surface upstream, 0 downstream.  By symmetry about x = 0 the vertical x = 0 below the pile
(or below the middle of the floor) is the equipotential h = H/2, and all the flow crosses it, so
q = the flow of the half-domain x > 0 with h = H/2 on that line and h = 0 downstream.  The half-domain
is a quadrilateral in the sense of conformal mapping: two equipotential sides and two no-flow sides.
Its image under any conformal map f onto the upper half-plane sends the four corners to real points
w1 < w2 < w3 < w4 (w4 possibly through infinity); the Moebius map that takes them to
-1, 1, 1/mu, -1/mu keeps the cross ratio

    CR = (w1 - w3)(w2 - w4) / ((w1 - w4)(w2 - w3)) = ((1 + mu) / (1 - mu))**2,

and w = sn(zeta, mu**2) maps the rectangle |Re zeta| < K(mu), 0 < Im zeta < K'(mu) onto the half-plane
with [-1, 1] (the bottom side, length 2 K) and the top side (length 2 K) as the two equipotentials,
a distance K' apart.  So the half-domain carries q = k (H/2) (2 K) / K' = k H K(mu) / K'(mu).

Infinite length: f = cosh(pi z / T) maps the semi-infinite strip x > 0 onto the half-plane: the ground
surface y = 0 to [1, inf), the line x = 0 to [-1, 1] (y = -s goes to cos(pi s / T)), the base to
(-inf, -1].
* Sheet pile of penetration s: corners (w1..w4) = (-1, cos(pi s/T), 1, inf): CR = 2 / (1 - cos(pi s/T))
  = 1 / sin(pi s / 2T)**2, so mu = (1 - sin a) / (1 + sin a), a = pi s / (2T).  By Landen's
  transformation K(mu) / K'(mu) = K(lam) / (2 K'(lam)) with lam = cos a, which is Harr's form

      q / (k H) = K(lam) / (2 K(lam')),   lam = cos(pi s / 2T),  lam' = sin(pi s / 2T).

* Flat floor of width b: corners (-1, 1, C, inf) with C = cosh(pi b / 2T): CR = coth(pi b / 4T)**2,
  mu = exp(-pi b / 2T), and by Landen

      q / (k H) = K(lam) / (2 K(lam')),   lam = sech(pi b / 4T),  lam' = tanh(pi b / 4T).

Finite length 2 L (no-flow vertical ends at x = +-L, as in a finite-element model): the half-domain
is the rectangle 0 < x < L, -T < y < 0, mapped onto the half-plane by w = sn(a (z - L/2 + i T), m) with
a = 2 K(m) / L and K'(m) / K(m) = 2 T / L.  Its corners go to (0, -T) -> -1, (0, 0) -> -1/k,
(L, 0) -> 1/k (k = sqrt(m)); a point (0, -y) of the left side goes to -1 / dn(a (T - y), 1 - m) and a
point (x, 0) of the top to 1 / (k sn(a (x - L/2), m)).
"""

from __future__ import annotations

import math

from scipy.optimize import brentq
from scipy.special import ellipj, ellipk, ellipkm1

__all__ = ["sheet_pile", "floor", "sheet_pile_landen", "sheet_pile_truncated", "floor_truncated"]


def _ratio(mu: float) -> float:
    """K(mu) / K'(mu) for the modulus mu."""
    return ellipk(mu * mu) / ellipkm1(mu * mu)


def sheet_pile(s: float, T: float) -> float:
    """q / (k H) under a sheet pile of penetration s in a layer of thickness T, infinite length (Harr 1962)."""
    lam = math.cos(math.pi * s / (2 * T))
    return ellipk(lam * lam) / (2.0 * ellipkm1(lam * lam))


def sheet_pile_landen(s: float, T: float) -> float:
    """The same discharge without Landen's step: K(mu) / K'(mu), mu = (1 - sin a) / (1 + sin a)."""
    sa = math.sin(math.pi * s / (2 * T))
    return _ratio((1 - sa) / (1 + sa))


def floor(b: float, T: float) -> float:
    """q / (k H) under a flat impervious floor of width b on a layer of thickness T, infinite length (Harr 1962)."""
    lam = 1.0 / math.cosh(math.pi * b / (4 * T))
    return ellipk(lam * lam) / (2.0 * ellipkm1(lam * lam))


def _rectangle(L: float, T: float):
    """Parameter m, modulus k and scale a of the sn map of the half-domain rectangle L x T."""
    target = 2.0 * T / L                       # K'(m) / K(m), with p = 1 - m
    f = lambda lp: math.log(ellipk(math.exp(lp)) / ellipkm1(math.exp(lp)) / target)
    p = math.exp(brentq(f, -700.0, -1e-12, xtol=1e-14, rtol=1e-15))
    m = 1.0 - p
    K = ellipkm1(p)
    return m, p, math.sqrt(m), 2.0 * K / L


def _mu_from(w1, w2, w3, w4) -> float:
    cr = (w1 - w3) * (w2 - w4) / ((w1 - w4) * (w2 - w3))
    r = math.sqrt(cr)
    return (r - 1.0) / (r + 1.0)


def sheet_pile_truncated(s: float, T: float, L: float) -> float:
    """q / (k H) under a sheet pile (penetration s, layer T) in a model of length 2 L with no-flow ends."""
    m, p, k, a = _rectangle(L, T)
    wA = -1.0 / ellipj(a * (T - s), p)[2]      # pile tip (0, -s)
    return _ratio(_mu_from(wA, -1.0, 1.0 / k, -1.0 / k))


def floor_truncated(b: float, T: float, L: float) -> float:
    """q / (k H) under a flat floor (width b, layer T) in a model of length 2 L with no-flow ends."""
    m, p, k, a = _rectangle(L, T)
    wF = 1.0 / (k * ellipj(a * (b / 2 - L / 2), m)[0])   # floor edge (b/2, 0)
    return _ratio(_mu_from(-1.0 / k, -1.0, 1.0 / k, wF))
