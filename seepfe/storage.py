"""Water stored in the soil, for transient solves: specific storage below the phreatic surface, the retention
curve above it, and the lumped nodal volumes they act on.

Per unit volume of soil the stored water, relative to the saturated state at pressure head psi = 0, is

    W(psi) = Ss psi                                   psi >= 0   (specific storage Ss, 1/m)
    W(psi) = (theta_s - theta_r) (Se(psi) - 1)        psi <  0   (van Genuchten 1980 retention)
    Se = [1 + (alpha |psi|)^n]^(-m),  m = 1 - 1/n

so that the moisture capacity is C = dW/dpsi = Ss below the phreatic surface and dtheta/dpsi above it: the
embankment wets up and drains down by its retention curve, the confined layers respond by their elastic
storage. A confined solve (``"solver": {"phreatic": "off"}``) uses Ss psi at every pressure head.

Parameters come from the material: ``specific_storage``; ``unsaturated`` (alpha, n, and theta_s, theta_r where
given). What a material leaves out is taken by soil type (:func:`soil_type`: Lane's soil class, else the soil named
in its description, else its conductivity) from :data:`DEFAULTS`, and the run's notes say so.

The nodal storage is lumped (a diagonal mass matrix), as Celia, Bouloutas and Zarba (1990) recommend for the
mixed form: P1 gives each vertex a third of the element's area; P2 uses the diagonal scaling of Hinton, Rock and
Zienkiewicz (1976, Earthquake Eng. Struct. Dyn. 4, 245-249): vertices 3/57 and midpoints 16/57 of the area,
all positive. A node on an interface between materials carries the storage of each material over its own part.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

import numpy as np

from . import fem

__all__ = ["StorageModel", "DEFAULTS", "soil_type", "material_storage"]

#: default storage parameters by soil type. ``ss``: specific storage, 1/m, from the ranges of Domenico (1972),
#: Concepts and Models in Groundwater Hydrology (table of Ss for plastic, stiff and medium-hard clay, loose and
#: dense sand, dense sandy gravel), a value inside each range (silt between clay and loose sand); from memory.
#: ``theta_r``, ``theta_s``, ``alpha`` (1/m), ``n``: van Genuchten parameters of the texture classes of Carsel
#: and Parrish (1988), Water Resour. Res. 24(5), 755-769, Table 3 (means); from memory. Gravel is not in that
#: table: sand's curve is used (it drains at small suction, as gravel does, only less completely).
DEFAULTS = {
    "clay":   {"ss": 1.3e-3, "theta_r": 0.068, "theta_s": 0.38, "alpha": 0.8, "n": 1.09},
    "silt":   {"ss": 5.0e-4, "theta_r": 0.034, "theta_s": 0.46, "alpha": 1.6, "n": 1.37},
    "sand":   {"ss": 2.0e-4, "theta_r": 0.045, "theta_s": 0.43, "alpha": 14.5, "n": 2.68},
    "gravel": {"ss": 5.0e-5, "theta_r": 0.045, "theta_s": 0.43, "alpha": 14.5, "n": 2.68},
}
SOURCE_SS = "Domenico (1972), from memory"
SOURCE_VG = "Carsel and Parrish (1988) Table 3, from memory"

#: Lane's soil classes (schema) -> soil type
_CLASS = {"very fine sand or silt": "silt", "fine sand": "sand", "medium sand": "sand", "coarse sand": "sand",
          "fine gravel": "gravel", "medium gravel": "gravel", "coarse gravel including cobbles": "gravel",
          "boulders with some cobbles and gravel": "gravel", "soft clay": "clay", "medium clay": "clay",
          "hard clay": "clay", "very hard clay or hardpan": "clay"}
_WORDS = {"gravel": "gravel", "sand": "sand", "silt": "silt", "loess": "silt", "loam": "silt", "clay": "clay"}
#: conductivity bounds of the soil types when nothing else tells (m/s; rough, common practice)
_K_BOUNDS = ((1e-3, "gravel"), (1e-5, "sand"), (1e-8, "silt"), (0.0, "clay"))


def soil_type(material) -> tuple[str, str]:
    """(soil type, how it was told) of a MaterialSpec: Lane's ``soil_class``, else the last soil word of its
    ``description`` ('silty sand' is a sand), else its conductivity (geometric mean of kx and ky)."""
    if material.soil_class is not None:
        return _CLASS[material.soil_class], f"soil_class '{material.soil_class}'"
    if material.description:
        text = material.description.lower()
        best = None
        for w, t in _WORDS.items():
            for m in re.finditer(rf"\b{w}\w*\b", text):
                if best is None or m.start() > best[0]:
                    best = (m.start(), t, w)
        if best is not None:
            return best[1], f"description ('{best[2]}')"
    k = material.k if material.k is not None else float(np.sqrt(material.kx * material.ky))
    for lo, t in _K_BOUNDS:
        if k >= lo:
            return t, f"conductivity {k:.3g} m/s"
    return "clay", f"conductivity {k:.3g} m/s"


def material_storage(name: str, material) -> tuple[dict, list[str]]:
    """Storage parameters of one material and notes on the defaults it took."""
    soil, how = soil_type(material)
    d = DEFAULTS[soil]
    notes = []
    p = {"soil": soil}
    if material.specific_storage is not None:
        p["ss"] = float(material.specific_storage)
    else:
        p["ss"] = d["ss"]
        notes.append(f"material '{name}': specific storage {d['ss']:g} 1/m, the default for {soil} (by its {how}; "
                     f"{SOURCE_SS}): give 'specific_storage' to set it")
    u = material.unsaturated
    if u is not None:
        p["alpha"], p["n"] = float(u.alpha), float(u.n)
    else:
        p["alpha"], p["n"] = d["alpha"], d["n"]
    ts = u.theta_s if u is not None and u.theta_s is not None else None
    tr = u.theta_r if u is not None and u.theta_r is not None else None
    p["theta_s"] = ts if ts is not None else d["theta_s"]
    p["theta_r"] = tr if tr is not None else min(d["theta_r"], 0.5 * p["theta_s"])
    missing = [k for k, v in (("alpha, n", u is None), ("theta_s", ts is None), ("theta_r", tr is None)) if v]
    if missing:
        notes.append(f"material '{name}': retention curve ({', '.join(missing)}) the default for {soil} (by its "
                     f"{how}; {SOURCE_VG}): theta_s {p['theta_s']:g}, theta_r {p['theta_r']:g}, alpha "
                     f"{p['alpha']:g} 1/m, n {p['n']:g}" + ("" if u is not None else
                                                             "; its relative conductivity stays the steep default "
                                                             "of the steady solve"))
    return p, notes


def nodal_weights(order: int) -> np.ndarray:
    """Fraction of an element's area lumped at each local node: P1 thirds; P2 Hinton-Rock-Zienkiewicz."""
    if order == 1:
        return np.full(3, 1.0 / 3.0)
    return np.array([3, 3, 3, 16, 16, 16], float) / 57.0


@dataclass
class StorageModel:
    """Nodal stored water S_i(psi_i) = sum over (node, zone) pairs of V_p W_z(psi_i), m3 per m of section.

    pair_node, pair_zone, pair_vol : the (node, zone) pairs and their lumped areas (m2 per m).
    ss, dth, alpha, n : per zone (1/m, -, 1/m, -); confined: W = Ss psi at every pressure head.
    """

    pair_node: np.ndarray
    pair_zone: np.ndarray
    pair_vol: np.ndarray
    ss: np.ndarray
    dth: np.ndarray
    alpha: np.ndarray
    n: np.ndarray
    n_nodes: int
    confined: bool = False
    params: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)

    @classmethod
    def build(cls, section, mesh, confined: bool = False) -> "StorageModel":
        Z = len(section.spec.zones)
        ss, dth, alpha, n = np.zeros(Z), np.zeros(Z), np.ones(Z), np.full(Z, 2.0)
        params, notes, seen = {}, [], {}
        for zi, z in enumerate(section.spec.zones):
            if z.material not in seen:
                p, nt = material_storage(z.material, section.spec.materials[z.material])
                seen[z.material] = p
                params[z.material] = p
                notes += nt if not confined else [s for s in nt if "specific storage" in s]
            p = seen[z.material]
            ss[zi], dth[zi], alpha[zi], n[zi] = p["ss"], p["theta_s"] - p["theta_r"], p["alpha"], p["n"]
        _, det = fem.jacobians(mesh.points, mesh.cells)
        area = 0.5 * np.abs(det)
        w = nodal_weights(mesh.order)
        nodes = mesh.cells.ravel()
        zones = np.repeat(mesh.zone, mesh.cells.shape[1])
        vols = (area[:, None] * w[None, :]).ravel()
        key = nodes.astype(np.int64) * Z + zones
        uk, inv = np.unique(key, return_inverse=True)
        vol = np.bincount(inv.ravel(), weights=vols, minlength=len(uk))
        return cls(pair_node=(uk // Z).astype(np.int64), pair_zone=(uk % Z).astype(np.int64), pair_vol=vol,
                   ss=ss, dth=dth, alpha=alpha, n=n, n_nodes=mesh.n_nodes, confined=confined, params=params,
                   notes=notes)

    @property
    def volume(self) -> np.ndarray:
        """(N,) lumped area of each node, m2 per m."""
        return np.bincount(self.pair_node, weights=self.pair_vol, minlength=self.n_nodes)

    def water(self, psi: np.ndarray, capacity: bool = True):
        """Stored water S (N,), m3 per m, and its derivative dS/dh (N,), m2 per m, at nodal pressure heads psi (m)."""
        p = psi[self.pair_node]
        z = self.pair_zone
        ss = self.ss[z]
        W = ss * p
        dW = ss.copy() if capacity else None
        if not self.confined:
            neg = np.flatnonzero(p < 0.0)
            if len(neg):
                zn = z[neg]
                a, n, d = self.alpha[zn], self.n[zn], self.dth[zn]
                m = 1.0 - 1.0 / n
                u = -p[neg]
                x = (a * u) ** n
                base = 1.0 + x
                se = base ** (-m)
                W[neg] = d * (se - 1.0)
                if capacity:
                    # dSe/dpsi = m n a^n u^(n-1) (1 + (a u)^n)^(-m-1), written without u^(n-1) at u = 0
                    dW[neg] = d * m * n * np.where(u > 0, x / np.where(u > 0, u, 1.0), 0.0) * base ** (-m - 1.0)
        S = np.bincount(self.pair_node, weights=self.pair_vol * W, minlength=self.n_nodes)
        if not capacity:
            return S, None
        C = np.bincount(self.pair_node, weights=self.pair_vol * dW, minlength=self.n_nodes)
        return S, C

    def describe(self) -> dict:
        """Plain data: the storage parameters of each material (for the summary)."""
        return {m: {"soil_type": p["soil"], "specific_storage_per_m": p["ss"], "theta_s": p["theta_s"],
                    "theta_r": p["theta_r"], "alpha_per_m": p["alpha"], "n": p["n"]} for m, p in self.params.items()}
