"""The record of a hand method applied to a section: what it gives, from which inputs, or why not.

Every hand method the analysis runs (:mod:`seepfe.checks.hand`) returns a :class:`HandMethod`. Its
quantities have fixed ids per method (:data:`QUANTITIES`), so every section gives the same rows:
a method that does not apply still lists them, with no hand value and the reason.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

__all__ = ["HandMethod", "QUANTITIES", "TITLES", "METHODS"]

#: method id -> display title with its source
TITLES = {
    "blanket_theory": "USACE blanket theory (EM 1110-2-1913, App. B)",
    "lane": "Lane's weighted creep (Lane 1935)",
    "khosla": "Khosla's exit gradient (Khosla, Bose and Taylor 1936)",
    "terzaghi_prism": "Terzaghi's heave prism (Terzaghi 1943)",
    "sellmeijer": "Sellmeijer's piping rule (Sellmeijer et al. 2011)",
    "kozeny": "Kozeny's parabola, horizontal drain (Kozeny 1931)",
    "casagrande": "Casagrande's exit point on the downstream slope (Casagrande 1937)",
}
METHODS = list(TITLES)

#: method id -> [(quantity id, unit, label)]
QUANTITIES = {
    "blanket_theory": [("h0_m", "m", "residual head at the landside toe h0"),
                       ("top_stratum_gradient", "m/m", "gradient across the top stratum at the toe h0/zb"),
                       ("fs_uplift", "-", "FS against uplift at the toe"),
                       ("q_m3_s_per_m", "m3/s per m", "seepage under the levee q")],
    "lane": [("weighted_creep_ratio", "-", "weighted creep ratio C_w = L_w / H")],
    "khosla": [("exit_gradient", "m/m", "exit gradient at the downstream cutoff G_E"),
               ("residual_head_e_m", "m", "residual head at the junction of floor and cutoff, phi_E H"),
               ("residual_head_d_m", "m", "residual head at the cutoff's tip, phi_D H")],
    "terzaghi_prism": [("fs_heave", "-", "FS against heave of the prism beside the cutoff")],
    "sellmeijer": [("critical_head_m", "m", "critical head difference H_c"),
                   ("critical_head_ratio", "-", "H_c / (H - 0.3 d)")],
    "kozeny": [("q_m3_s_per_m", "m3/s per m", "seepage through the dam q = k y0"),
               ("phreatic_height_m", "m", "phreatic surface above the drain's upstream end, y0")],
    "casagrande": [("exit_length_m", "m", "wetted length of the downstream slope a"),
                   ("q_m3_s_per_m", "m3/s per m", "seepage through the dam q = k a sin(beta) tan(beta)")],
}


@dataclass
class HandMethod:
    """One hand method on one section.

    method : id (a key of :data:`TITLES`).
    applies : whether the section meets the method's assumptions.
    why : the reason it does not apply (or, where it applies, what it was applied to).
    values : quantity id -> (hand value, FE value beside it); None where there is none.
    inputs : name -> {"value", "unit", "meaning"}: what a checker needs to redo it by hand.
    assumptions : the idealisation, in words.
    details : other figures of the method (plain data), e.g. Terzaghi's prisms.
    notes : remarks an engineer should read with the numbers.
    """

    method: str
    applies: bool
    why: str = ""
    values: dict = field(default_factory=dict)
    inputs: dict = field(default_factory=dict)
    assumptions: str = ""
    details: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)

    @property
    def title(self) -> str:
        return TITLES[self.method]

    def add_input(self, name: str, value, unit: str, meaning: str) -> None:
        self.inputs[name] = {"value": value, "unit": unit, "meaning": meaning}

    def records(self) -> list[dict]:
        """The pinned rows: {method, quantity, unit, hand, fe, applies, why}, one per quantity."""
        out = []
        for q, unit, _ in QUANTITIES[self.method]:
            hand, fe = self.values.get(q, (None, None)) if self.applies else (None, self.values.get(q, (None, None))[1])
            out.append({"method": self.method, "quantity": q, "unit": unit, "hand": _num(hand), "fe": _num(fe),
                        "applies": bool(self.applies), "why": self.why})
        return out

    def to_dict(self) -> dict:
        """Everything about the method on this section, plain data (nan and inf as None)."""
        return _clean({"method": self.method, "title": self.title, "applies": self.applies, "why": self.why,
                       "inputs": self.inputs, "assumptions": self.assumptions, "details": self.details,
                       "notes": list(self.notes)})


def not_applicable(method: str, why: str, **fe) -> HandMethod:
    """A method whose assumptions the section does not meet; ``fe`` gives FE values to keep beside it."""
    return HandMethod(method, False, why, values={k: (None, v) for k, v in fe.items()})


def _num(v):
    if v is None or isinstance(v, bool):
        return v
    v = float(v)
    return v if math.isfinite(v) else None


def _clean(d):
    if isinstance(d, dict):
        return {str(k): _clean(v) for k, v in d.items()}
    if isinstance(d, (list, tuple)):
        return [_clean(v) for v in d]
    if isinstance(d, float) and not math.isfinite(d):
        return None
    if hasattr(d, "item") and not isinstance(d, (str, bytes)):
        try:
            return _clean(d.item())
        except (TypeError, ValueError):
            return d
    return d
