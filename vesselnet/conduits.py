"""Graft conduit presets: wall modulus and thickness of the common kinds of conduit.

A plan's candidate may name a ``conduit`` instead of giving its wall; the
preset then supplies the wall thickness and an effective Young's modulus.
The names are our own; the numbers come from the diametric compliances in
REFERENCES 8.6, converted with the thin-wall relation below.

Examples
--------
>>> preset = CONDUITS["vein-autologous"]
>>> preset.kind, round(preset.modulus_pa / 1e6, 2)
('vein', 2.5)
>>> wall = conduit_wall("ptfe-tube", radius_m=3e-3)
>>> round(wall["wall_thickness_m"] * 1e3, 2), round(wall["wall_modulus_pa"] / 1e6, 1)
(0.6, 5.6)
"""

from __future__ import annotations

from dataclasses import dataclass

from .units import MMHG_PA

RADIUS_OVER_THICKNESS = 5.0
"""R/h at which REFERENCES 8.6 turns diametric compliance into an effective modulus ([C])."""


@dataclass(frozen=True)
class Conduit:
    """A kind of graft conduit.

    Attributes
    ----------
    name : str
        Our preset name (used as ``conduit:`` in plan files).
    kind : str
        ``vein``, ``artery`` or ``synthetic``; the vein-diameter flag applies
        to ``vein`` conduits only.
    description : str
    diametric_compliance_per_mmhg : float
        Fractional change of diameter per mmHg (REFERENCES 8.6 gives it in
        % per mmHg x 10^-2: 2.67 there is 2.67e-4 here).
    source : str
        Where the compliance comes from, with its provenance tag.
    """

    name: str
    kind: str
    description: str
    diametric_compliance_per_mmhg: float
    source: str

    @property
    def compliance_per_pa(self) -> float:
        """Diametric compliance C_d in 1/Pa."""
        return self.diametric_compliance_per_mmhg / MMHG_PA

    @property
    def modulus_pa(self) -> float:
        """Effective Young's modulus E = (R/h) / C_d at R/h = 5 (Pa).

        Notes
        -----
        Thin-walled tube, Laplace: dD/D = dP R / (E h), so C_d = R / (E h)
        and E = R / (h C_d) (REFERENCES 8.6, [C]).  Wall thickness and
        modulus are given together (h = R/5), so E h / R, which is what sets
        the tube's distensibility, reproduces the measured compliance.
        """
        return RADIUS_OVER_THICKNESS / self.compliance_per_pa


_TAI_2000 = ("Tai, Salacinski, Edwards, Hamilton & Seifalian 2000, Br J Surg 87:1516-1524, "
             "in vitro, mean over 30-100 mmHg [V values; REFERENCES 8.6]")
_CANINE_1978 = ("canine femoral bypass model, Circulation 1978 [V values; authors from memory: "
                "Kidson & Abbott, M; REFERENCES 8.6]")

CONDUITS: dict[str, Conduit] = {c.name: c for c in (
    Conduit("vein-autologous", "vein", "the patient's own vein (for example the great saphenous vein)",
            2.67e-4, "vein graft, " + _CANINE_1978),
    Conduit("artery-autologous", "artery", "the patient's own muscular artery",
            8.0e-4, "human muscular artery, " + _TAI_2000),
    Conduit("ptfe-tube", "synthetic", "expanded polytetrafluoroethylene (ePTFE) tube",
            1.2e-4, "ePTFE, " + _TAI_2000),
    Conduit("polyester-tube", "synthetic", "polyester (polyethylene terephthalate) fabric tube",
            1.8e-4, "polyester, " + _TAI_2000),
    Conduit("polyurethane-tube", "synthetic", "compliant polyurethane tube",
            8.1e-4, "compliant polyurethane, " + _TAI_2000),
)}
"""The presets, by name.  Their walls matter for distensible and pulsatile work; a rigid
steady solve uses only the lumen."""


def conduit_wall(name: str, *, radius_m: float) -> dict[str, float]:
    """Wall columns of a conduit of lumen radius ``radius_m`` (m): thickness R/5 and modulus.

    Parameters
    ----------
    name : str
        A key of :data:`CONDUITS`.
    radius_m : float
        Lumen radius (m).

    Returns
    -------
    dict
        ``wall_thickness_m`` and ``wall_modulus_pa``.

    Raises
    ------
    KeyError
        Unknown preset (plan reading checks names first).
    """
    preset = CONDUITS[name]
    return {"wall_thickness_m": radius_m / RADIUS_OVER_THICKNESS, "wall_modulus_pa": preset.modulus_pa}
