"""The conductivity tensor of a material, normalised in one place.

A material gives either an isotropic ``k`` or principal conductivities ``kx``, ``ky`` (m/s) with the
direction of ``kx`` at ``angle`` degrees counter-clockwise from +x; the tensor is R diag(kx, ky) R^T,
symmetric positive definite.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["conductivity_tensor"]


def conductivity_tensor(m) -> np.ndarray:
    """The 2x2 conductivity tensor (m/s) of a material (a ``MaterialSpec`` or anything with ``k`` or
    ``kx``, ``ky``, ``angle``): ``R diag(kx, ky) R^T``.

    >>> from seepfe.schema import MaterialSpec
    >>> conductivity_tensor(MaterialSpec(kx=4.0, ky=1.0, angle=90.0)).round(12)
    array([[1., 0.],
           [0., 4.]])
    """
    get = m.get if isinstance(m, dict) else (lambda k, d=None: getattr(m, k, d))
    if get("k") is not None:
        k = float(get("k"))
        return np.array([[k, 0.0], [0.0, k]])
    a = math.radians(float(get("angle", 0.0) or 0.0))
    c, s = math.cos(a), math.sin(a)
    R = np.array([[c, -s], [s, c]])
    return R @ np.diag([float(get("kx")), float(get("ky"))]) @ R.T
